"""Optical beam gate: the fraction of the beam the floater's silhouette blocks, vs gap.

The beam runs along ``sensor.direction`` (horizontal). Its cross-section is the rectangle
``beam_width_m`` (across: ``up x direction``) by ``beam_height_m`` (along ``up``), centred at the
height ``sensor.height_m`` (the ``up`` coordinate of a world point) and, across, on the study's gap
axis (the vertical line through ``study.gap_origin_m``). The floater's silhouette is the union of
its magnets projected along the beam; the payload has no shape in the model and is ignored.
Exact silhouettes: spheres and cylinders/rings seen along their axis (circles, annuli, by the
closed-form circular-segment integral), cylinders/rings seen side-on (rectangles), cuboids and
other convex polytopes (convex hull of the projected vertices, clipped exactly). A cylinder at an
oblique angle is outlined by a 720-point polygon (area error about ``(pi / 720)^2`` relative) and a
mesh by the convex hull of its projected vertices (exact for convex meshes). Overlapping silhouettes
are merged numerically (chord lengths integrated with a sigmoidal Gauss rule, about 1e-9).
Plane-polygon tools come from :mod:`fields.model.polygon`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.devices.linearity import (LINEARITY_TOLERANCE, SLOPE_STEP_M, InverseTable, inverse_table, linear_range,
                                      sensor_gaps)
from fields.devices.notices import Notice
from fields.errors import InputError
from fields.model.design import BeamGate, Design, rotation_matrix
from fields.model.polygon import circle_rectangle_area, clip_to_rectangle, convex_hull, polygon_area
from fields.physics.quadrature import gauss_legendre

#: outline points of an obliquely seen cylinder rim
RIM_POINTS = 720


@dataclass(frozen=True)
class _Shape:
    kind: str  # "circle", "annulus", "polygon"
    data: tuple
    exact: bool

    def bbox(self):
        if self.kind in ("circle", "annulus"):
            cx, cy, R = self.data[:3]
            return cx - R, cx + R, cy - R, cy + R
        p = self.data[0]
        return p[:, 0].min(), p[:, 0].max(), p[:, 1].min(), p[:, 1].max()

    def area_in(self, x0, x1, y0, y1) -> float:
        if self.kind == "circle":
            return circle_rectangle_area(*self.data, x0, x1, y0, y1)
        if self.kind == "annulus":
            cx, cy, R, r = self.data
            return circle_rectangle_area(cx, cy, R, x0, x1, y0, y1) - circle_rectangle_area(cx, cy, r, x0, x1, y0, y1)
        return polygon_area(clip_to_rectangle(self.data[0], x0, x1, y0, y1))

    def chords(self, y: np.ndarray) -> list[tuple[np.ndarray, np.ndarray]]:
        """Intervals (lo, hi) of the shape on horizontal lines y (NaN where empty)."""
        if self.kind in ("circle", "annulus"):
            cx, cy, R = self.data[:3]
            c = np.sqrt(np.clip(R * R - (y - cy) ** 2, 0, None))
            ok = np.abs(y - cy) < R
            if self.kind == "circle":
                return [(np.where(ok, cx - c, np.nan), np.where(ok, cx + c, np.nan))]
            r = self.data[3]
            ci = np.sqrt(np.clip(r * r - (y - cy) ** 2, 0, None))
            inner = np.abs(y - cy) < r
            return [(np.where(ok, cx - c, np.nan), np.where(ok, np.where(inner, cx - ci, cx + c), np.nan)),
                    (np.where(ok & inner, cx + ci, np.nan), np.where(ok & inner, cx + c, np.nan))]
        p = self.data[0]
        q = np.roll(p, -1, axis=0)
        lo = np.full(y.shape, np.inf)
        hi = np.full(y.shape, -np.inf)
        for (xa, ya), (xb, yb) in zip(p, q):
            if ya == yb:
                continue
            t = (y - ya) / (yb - ya)
            inside = (t >= 0) & (t <= 1)
            x = xa + t * (xb - xa)
            lo = np.where(inside, np.minimum(lo, x), lo)
            hi = np.where(inside, np.maximum(hi, x), hi)
        ok = hi > lo
        return [(np.where(ok, lo, np.nan), np.where(ok, hi, np.nan))]

    def breakpoints(self) -> list[float]:
        if self.kind == "circle":
            cx, cy, R = self.data
            return [cy - R, cy + R]
        if self.kind == "annulus":
            cx, cy, R, r = self.data
            return [cy - R, cy - r, cy + r, cy + R]
        return list(self.data[0][:, 1])


def _union_length(shapes: list[_Shape], y: np.ndarray, x0, x1) -> tuple[np.ndarray, np.ndarray]:
    """Union length of the shapes' chords on lines y (clipped to [x0, x1]) and its component count."""
    ivs = []
    for s in shapes:
        for lo, hi in s.chords(y):
            ivs.append((np.clip(lo, x0, x1), np.clip(hi, x0, x1)))
    lo = np.stack([i[0] for i in ivs])  # (s, y)
    hi = np.stack([i[1] for i in ivs])
    length = np.zeros(y.size)
    count = np.zeros(y.size, dtype=int)
    for j in range(y.size):
        ok = np.isfinite(lo[:, j]) & (hi[:, j] > lo[:, j])
        if not np.any(ok):
            continue
        iv = sorted(zip(lo[ok, j], hi[ok, j]))
        cur_lo, cur_hi = iv[0]
        count[j] = 1
        for l_, h_ in iv[1:]:
            if l_ > cur_hi:
                length[j] += cur_hi - cur_lo
                cur_lo, cur_hi = l_, h_
                count[j] += 1
            else:
                cur_hi = max(cur_hi, h_)
        length[j] += cur_hi - cur_lo
    return length, count


def _union_area(shapes: list[_Shape], x0, x1, y0, y1, nodes: int = 48, scan: int = 256) -> float:
    """Area of the union of shapes inside the rectangle, by chord integration.

    Breakpoints: the shapes' extreme and vertex heights, plus the heights where the union changes
    its number of components (chords of two shapes start or stop overlapping), located by a scan
    and bisection; between breakpoints the union length is smooth and a Gauss rule with a
    sigmoidal map (zero slope at the ends, which removes square-root end behaviour) integrates it.
    """
    ys = {y0, y1}
    for s in shapes:
        ys.update(b for b in s.breakpoints() if y0 < b < y1)
    ys = sorted(ys)
    extra = []
    for a, b in zip(ys[:-1], ys[1:]):
        if b <= a:
            continue
        yy = np.linspace(a, b, scan + 2)[1:-1]
        _, cnt = _union_length(shapes, yy, x0, x1)
        for i in np.nonzero(np.diff(cnt))[0]:
            lo, hi = yy[i], yy[i + 1]
            c_lo = cnt[i]
            for _ in range(60):
                mid = 0.5 * (lo + hi)
                if _union_length(shapes, np.array([mid]), x0, x1)[1][0] == c_lo:
                    lo = mid
                else:
                    hi = mid
            extra.append(0.5 * (lo + hi))
    ys = sorted(set(ys) | set(extra))
    t, w = gauss_legendre(nodes)
    g = 0.5 * (3 * t - t**3)
    dg = 1.5 * (1 - t * t)
    total = 0.0
    for a, b in zip(ys[:-1], ys[1:]):
        if b <= a:
            continue
        m, h = 0.5 * (a + b), 0.5 * (b - a)
        length, _ = _union_length(shapes, m + h * g, x0, x1)
        total += h * np.sum(w * dg * length)
    return float(total)


# ------------------------------------------------------------------------------- beam gate


def _beam_frame(design: Design, sensor: BeamGate):
    up = design.axial  # the beam height runs along the axial direction (up, or an offset study's gap direction)
    d = np.asarray(sensor.direction, dtype=float)
    nd = np.linalg.norm(d)
    if not np.isfinite(nd) or nd == 0:
        raise InputError(f"sensor {sensor.name}: direction must be a nonzero vector; got {sensor.direction!r}.")
    d = d / nd
    if abs(d @ up) > 1e-9:
        raise InputError(f"sensor {sensor.name}: direction must be horizontal (perpendicular to gravity); "
                         f"got {sensor.direction!r}.")
    across = np.cross(up, d)
    across /= np.linalg.norm(across)
    if not (sensor.beam_height_m > 0 and sensor.beam_width_m > 0):
        raise InputError(f"sensor {sensor.name}: beam_height_m and beam_width_m must be positive; "
                         f"got {(sensor.beam_height_m, sensor.beam_width_m)}.")
    xc = float(np.asarray(design.study.gap_origin_m, dtype=float) @ across)
    yc = float(sensor.height_m)
    rect = (xc - sensor.beam_width_m / 2, xc + sensor.beam_width_m / 2,
            yc - sensor.beam_height_m / 2, yc + sensor.beam_height_m / 2)
    return d, across, up, rect


def _silhouettes(design: Design, position_m, rotvec_rad, d, across, up) -> list[_Shape]:
    Rp = rotation_matrix(rotvec_rad)
    P = np.asarray(position_m, dtype=float)
    out = []
    for m in tuple(design.floater.magnets) + tuple(design.floater.soft_iron):  # soft-iron balls block too
        Rw = Rp @ rotation_matrix(m.rotvec_rad)
        tw = P + Rp @ np.asarray(m.position_m, dtype=float)
        c2 = np.array([tw @ across, tw @ up])
        dims = m.dimensions_m

        def proj(pts_own):
            w = pts_own @ Rw.T + tw
            return np.stack((w @ across, w @ up), axis=-1)

        if m.shape == "sphere":
            out.append(_Shape("circle", (c2[0], c2[1], dims[0] / 2), True))
        elif m.shape in ("cylinder", "ring"):
            R = dims[-2] / 2
            r = dims[0] / 2 if m.shape == "ring" else 0.0
            h = dims[-1]
            ax = Rw[:, 2]
            ab = abs(ax @ d)
            if ab > 1 - 1e-12:  # seen along the axis
                out.append(_Shape("annulus", (c2[0], c2[1], R, r), True) if r > 0 else _Shape("circle", (c2[0], c2[1], R), True))
            elif ab < 1e-12:  # side-on: a rectangle (holes not seen through)
                a2 = np.array([ax @ across, ax @ up])
                a2 /= np.linalg.norm(a2)
                n2 = np.array([-a2[1], a2[0]])
                corners = np.array([c2 + sa * h / 2 * a2 + sb * R * n2 for sa, sb in ((1, 1), (-1, 1), (-1, -1), (1, -1))])
                out.append(_Shape("polygon", (convex_hull(corners),), True))
            else:
                phi = 2 * np.pi * np.arange(RIM_POINTS) / RIM_POINTS
                rim = np.stack((R * np.cos(phi), R * np.sin(phi), np.zeros_like(phi)), axis=-1)
                pts = np.vstack([rim + [0, 0, h / 2], rim - [0, 0, h / 2]])
                out.append(_Shape("polygon", (convex_hull(proj(pts)),), False))
        elif m.shape == "cuboid":
            a, b, c = (x / 2 for x in dims)
            corners = np.array([[sx * a, sy * b, sz * c] for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)])
            out.append(_Shape("polygon", (convex_hull(proj(corners)),), True))
        elif m.shape == "mesh":
            out.append(_Shape("polygon", (convex_hull(proj(np.asarray(m.mesh_vertices_m, dtype=float))),), False))
        else:
            raise InputError(f"magnet {m.name}: shape must be one of sphere, cylinder, ring, cuboid, mesh; got {m.shape!r}.")
    return out


def _blocked_area(shapes: list[_Shape], rect) -> float:
    x0, x1, y0, y1 = rect
    live = []
    for s in shapes:
        bx0, bx1, by0, by1 = s.bbox()
        if bx1 > x0 and bx0 < x1 and by1 > y0 and by0 < y1:
            live.append(s)
    if not live:
        return 0.0
    overlap = False
    for i in range(len(live)):
        a = live[i].bbox()
        for j in range(i + 1, len(live)):
            b = live[j].bbox()
            if a[1] > b[0] and b[1] > a[0] and a[3] > b[2] and b[3] > a[2]:
                overlap = True
    if not overlap:
        return float(sum(s.area_in(*rect) for s in live))
    return _union_area(live, *rect)


def beam_blocked_fraction(design: Design, sensor: BeamGate, gaps_m, offset_m=(0.0, 0.0, 0.0)) -> np.ndarray:
    """Fraction of the beam's cross-section the floater's silhouette blocks, vs gap.

    Parameters
    ----------
    design : Design
    sensor : BeamGate
    gaps_m : array_like, shape (g,)
    offset_m : array_like, shape (3,)
        A rigid shift of the floater from its study pose (world frame, m), e.g. sideways.

    Returns
    -------
    ndarray, shape (g,)
        Blocked area / (beam_height_m x beam_width_m), in [0, 1].

    Notes
    -----
    Floater pose at gap ``g``: ``study.floater_origin_m(g)`` and ``study.floater_rotvec_rad``.
    Circles use the exact circular-segment integral (:func:`circle_rectangle_area`).
    """
    d, across, up, rect = _beam_frame(design, sensor)
    gaps = np.atleast_1d(np.asarray(gaps_m, dtype=float))
    P = design.study.floater_origin_m(gaps) + np.asarray(offset_m, dtype=float).reshape(1, 3)
    area = (rect[1] - rect[0]) * (rect[3] - rect[2])
    out = np.empty(gaps.size)
    for i in range(gaps.size):
        shapes = _silhouettes(design, P[i], design.study.floater_rotvec_rad, d, across, up)
        out[i] = _blocked_area(shapes, rect) / area
    return np.clip(out, 0.0, 1.0)



@dataclass(frozen=True)
class BeamResponse:
    """Beam-gate output vs gap.

    Attributes
    ----------
    name : str
    gaps_m, blocked_fraction, slope_per_m : ndarray, shape (g,)
    operating_gap_m, fraction_at_operating : float
    gain_per_mm : float
        d(fraction)/d(gap) at the operating gap, per millimetre.
    lateral_slope_per_m : tuple of float
        d(fraction)/d(floater offset) along world x and y at the operating gap (an offset along the
        beam changes nothing: the beam is modelled as unbounded along its direction).
    linear_range_m : tuple of float
        ``(lo, hi)`` where the slope stays within ``linearity_tolerance`` of the operating value,
        edges located between grid points; ``(nan, nan)`` only when the output is flat there.
    linearity_tolerance : float
    exact : bool
        All silhouettes exact (see module docstring).
    notices : tuple of Notice
        ``"flat_output"`` (values ``state``: ``"fully_blocked"``, ``"not_intercepted"`` or
        ``"flat"``) and ``"approximate_silhouette"`` (no values).
    """

    name: str
    gaps_m: np.ndarray
    blocked_fraction: np.ndarray
    slope_per_m: np.ndarray
    operating_gap_m: float
    fraction_at_operating: float
    gain_per_mm: float
    lateral_slope_per_m: tuple[float, float]
    linear_range_m: tuple[float, float]
    linearity_tolerance: float
    exact: bool
    notices: tuple[Notice, ...] = ()


def beam_response(design: Design, sensor: BeamGate, gaps_m=None, operating_gap_m: float | None = None,
                  linearity_tolerance: float = LINEARITY_TOLERANCE) -> BeamResponse:
    """Beam-gate output, slope, gain at the operating gap and linear range.

    The gap grid and the operating gap default to the study's (:func:`fields.devices.linearity.sensor_gaps`);
    returns a :class:`BeamResponse`.
    """
    gaps, g0 = sensor_gaps(design, gaps_m, operating_gap_m)
    f = beam_blocked_fraction(design, sensor, gaps)
    slope_fn = beam_slope_fn(design, sensor)
    slope = slope_fn(gaps)
    h = SLOPE_STEP_M
    fo = beam_blocked_fraction(design, sensor, [g0 - h, g0, g0 + h])
    s0 = (fo[2] - fo[0]) / (2 * h)
    lr = linear_range(gaps, slope, g0, s0, linearity_tolerance, slope_fn=slope_fn)
    lat = [float((beam_blocked_fraction(design, sensor, [g0], h * e)[0]
                  - beam_blocked_fraction(design, sensor, [g0], -h * e)[0]) / (2 * h)) for e in np.eye(3)[:2]]
    # below the central difference's round-off floor (64 eps of a fraction over 2 h) the slope is zero
    lat = tuple(0.0 if abs(v) < 32 * np.finfo(float).eps / h else v for v in lat)
    d, across, up, _ = _beam_frame(design, sensor)
    P = design.study.floater_origin_m([g0])[0]
    exact = all(s.exact for s in _silhouettes(design, P, design.study.floater_rotvec_rad, d, across, up))
    notices = []
    if s0 == 0:
        state = "fully_blocked" if fo[1] >= 1 else "not_intercepted" if fo[1] <= 0 else "flat"
        notices.append(Notice("flat_output", sensor.name, {"state": state}))
    if not exact:
        notices.append(Notice("approximate_silhouette", sensor.name))
    return BeamResponse(sensor.name, gaps, f, slope, g0, float(fo[1]), float(s0 * 1e-3), lat, lr,
                        float(linearity_tolerance), exact, tuple(notices))


def beam_slope_fn(design: Design, sensor: BeamGate):
    """``f(gaps (n,)) -> (n,)``: d(blocked fraction)/d(gap), central differences of step :data:`SLOPE_STEP_M`."""
    h = SLOPE_STEP_M

    def f(gq):
        gq = np.asarray(gq, dtype=float).reshape(-1)
        return (beam_blocked_fraction(design, sensor, gq + h) - beam_blocked_fraction(design, sensor, gq - h)) / (2 * h)
    return f


def beam_inverse_table(design: Design, sensor: BeamGate, gaps_m=None) -> InverseTable:
    """gap(blocked fraction) of a beam gate."""
    gaps = design.study.gaps() if gaps_m is None else np.asarray(gaps_m, dtype=float)
    return inverse_table(gaps, beam_blocked_fraction(design, sensor, gaps))
