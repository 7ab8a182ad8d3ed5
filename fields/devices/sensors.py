"""Gap sensors: an optical beam gate and Hall point sensors, with a placement table.

Beam gate
---------
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

Hall sensor
-----------
The reading is ``B . axis`` at the sensor: the floater's magnets at the floater's pose, the fixed
magnets (a constant offset), each coil per ampere (cross-talk) and, with cores, the core response
(iron-free approximation of :mod:`fields.physics.sources`). Subtracting ``c_k I_k`` with ``c_k`` the
coil's share per ampere leaves the floater's signal (exact in the linear model).

Linear range
------------
The gaps around the operating gap, walking outwards on the gap grid, where the slope stays within
``linearity_tolerance`` (default 10 %) of its value at the operating gap.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass

import numpy as np

from fields.errors import GeometryError, SolverError
from fields.model.design import BeamGate, Design, HallSensor, rotation_matrix

#: default linearity tolerance: slope within 10 % of its operating-gap value (a design choice)
LINEARITY_TOLERANCE = 0.1
#: central-difference step for slopes (m)
SLOPE_STEP_M = 1e-6
#: outline points of an obliquely seen cylinder rim
RIM_POINTS = 720


# ------------------------------------------------------------------------------ 2-D geometry


def circle_rectangle_area(cx, cy, radius, x0, x1, y0, y1) -> float:
    """Exact area of a disc ∩ an axis-aligned rectangle.

    Parameters
    ----------
    cx, cy, radius : float
        Disc centre and radius.
    x0, x1, y0, y1 : float
        Rectangle ``[x0, x1] x [y0, y1]``.

    Returns
    -------
    float
        Area, by integrating the chord length ``min(x1, cx + c) - max(x0, cx - c)``,
        ``c(t) = sqrt(R^2 - t^2)``, piecewise exactly with the antiderivative
        ``(t c + R^2 asin(t / R)) / 2`` between the heights where the chord meets a side.

    Examples
    --------
    >>> round(circle_rectangle_area(0, 0, 1, -2, 2, -2, 2), 12) == round(np.pi, 12)
    True
    """
    R = float(radius)
    if R <= 0:
        return 0.0
    X0, X1 = float(x0) - cx, float(x1) - cx
    lo, hi = max(float(y0) - cy, -R), min(float(y1) - cy, R)
    if hi <= lo or X1 <= X0:
        return 0.0
    brk = {lo, hi}
    for X in (X0, X1):
        if abs(X) < R:
            t = np.sqrt(R * R - X * X)
            brk.update((t, -t))
    ts = sorted(t for t in brk if lo <= t <= hi)

    def prim(t):  # int c(t) dt
        t = min(max(t, -R), R)
        return 0.5 * (t * np.sqrt(max(R * R - t * t, 0.0)) + R * R * np.arcsin(t / R))

    area = 0.0
    for ta, tb in zip(ts[:-1], ts[1:]):
        if tb <= ta:
            continue
        tm = 0.5 * (ta + tb)
        cm = np.sqrt(R * R - tm * tm)
        # which ends bind on this piece: right end min(X1, c), left end max(X0, -c)
        right_c = cm < X1
        left_c = -cm > X0
        if (X1 if not right_c else cm) <= (X0 if not left_c else -cm):
            continue
        ncirc = int(right_c) + int(left_c)
        const = (0.0 if right_c else X1) - (0.0 if left_c else X0)
        area += ncirc * (prim(tb) - prim(ta)) + const * (tb - ta)
    return float(area)


def _clip_polygon(poly: np.ndarray, x0, x1, y0, y1) -> np.ndarray:
    """Sutherland-Hodgman clip of a polygon (v, 2) by an axis-aligned rectangle."""
    out = [tuple(p) for p in poly]
    for axis, val, keep_ge in ((0, x0, True), (0, x1, False), (1, y0, True), (1, y1, False)):
        if not out:
            break
        inp, out = out, []
        for i in range(len(inp)):
            P, Q = np.array(inp[i - 1]), np.array(inp[i])
            pin = P[axis] >= val if keep_ge else P[axis] <= val
            qin = Q[axis] >= val if keep_ge else Q[axis] <= val
            if qin:
                if not pin:
                    t = (val - P[axis]) / (Q[axis] - P[axis])
                    out.append(tuple(P + t * (Q - P)))
                out.append(tuple(Q))
            elif pin:
                t = (val - P[axis]) / (Q[axis] - P[axis])
                out.append(tuple(P + t * (Q - P)))
    return np.array(out).reshape(-1, 2)


def polygon_area(poly: np.ndarray) -> float:
    """Shoelace area (absolute) of a polygon (v, 2)."""
    if poly.shape[0] < 3:
        return 0.0
    x, y = poly[:, 0], poly[:, 1]
    return float(0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1))))


def _convex_hull(points: np.ndarray) -> np.ndarray:
    """Counter-clockwise convex hull (monotone chain, Andrew 1979) of points (v, 2)."""
    P = np.unique(np.round(points, 15), axis=0)
    if P.shape[0] < 3:
        return P
    P = P[np.lexsort((P[:, 1], P[:, 0]))]

    def cross(o, a, b):
        return (a[0] - o[0]) * (b[1] - o[1]) - (a[1] - o[1]) * (b[0] - o[0])

    def half(pts):
        h = []
        for p in pts:
            while len(h) >= 2 and cross(h[-2], h[-1], p) <= 0:
                h.pop()
            h.append(p)
        return h

    lower, upper = half(P), half(P[::-1])
    return np.array(lower[:-1] + upper[:-1])


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
        return polygon_area(_clip_polygon(self.data[0], x0, x1, y0, y1))

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
    t, w = np.polynomial.legendre.leggauss(nodes)
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
    up = design.up
    d = np.asarray(sensor.direction, dtype=float)
    nd = np.linalg.norm(d)
    if not np.isfinite(nd) or nd == 0:
        raise GeometryError(f"sensor {sensor.name}", "direction", "a nonzero vector", sensor.direction)
    d = d / nd
    if abs(d @ up) > 1e-9:
        raise GeometryError(f"sensor {sensor.name}", "direction", "horizontal (perpendicular to gravity)", sensor.direction)
    across = np.cross(up, d)
    across /= np.linalg.norm(across)
    if not (sensor.beam_height_m > 0 and sensor.beam_width_m > 0):
        raise GeometryError(f"sensor {sensor.name}", "beam_height_m and beam_width_m", "positive",
                            (sensor.beam_height_m, sensor.beam_width_m))
    xc = float(np.asarray(design.study.gap_origin_m, dtype=float) @ across)
    yc = float(sensor.height_m)
    rect = (xc - sensor.beam_width_m / 2, xc + sensor.beam_width_m / 2,
            yc - sensor.beam_height_m / 2, yc + sensor.beam_height_m / 2)
    return d, across, up, rect


def _silhouettes(design: Design, position_m, rotvec_rad, d, across, up) -> list[_Shape]:
    Rp = rotation_matrix(rotvec_rad)
    P = np.asarray(position_m, dtype=float)
    out = []
    for m in design.floater.magnets:
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
                out.append(_Shape("polygon", (_convex_hull(corners),), True))
            else:
                phi = 2 * np.pi * np.arange(RIM_POINTS) / RIM_POINTS
                rim = np.stack((R * np.cos(phi), R * np.sin(phi), np.zeros_like(phi)), axis=-1)
                pts = np.vstack([rim + [0, 0, h / 2], rim - [0, 0, h / 2]])
                out.append(_Shape("polygon", (_convex_hull(proj(pts)),), False))
        elif m.shape == "cuboid":
            a, b, c = (x / 2 for x in dims)
            corners = np.array([[sx * a, sy * b, sz * c] for sx in (-1, 1) for sy in (-1, 1) for sz in (-1, 1)])
            out.append(_Shape("polygon", (_convex_hull(proj(corners)),), True))
        elif m.shape == "mesh":
            out.append(_Shape("polygon", (_convex_hull(proj(np.asarray(m.mesh_vertices_m, dtype=float))),), False))
        else:
            raise GeometryError(f"magnet {m.name}", "shape", "one of sphere, cylinder, ring, cuboid, mesh", m.shape)
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


def beam_blocked_fraction(design: Design, sensor: BeamGate, gaps_m) -> np.ndarray:
    """Fraction of the beam's cross-section the floater's silhouette blocks, vs gap.

    Parameters
    ----------
    design : Design
    sensor : BeamGate
    gaps_m : array_like, shape (g,)

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
    P = design.study.floater_origin_m(gaps)
    area = (rect[1] - rect[0]) * (rect[3] - rect[2])
    out = np.empty(gaps.size)
    for i in range(gaps.size):
        shapes = _silhouettes(design, P[i], design.study.floater_rotvec_rad, d, across, up)
        out[i] = _blocked_area(shapes, rect) / area
    return np.clip(out, 0.0, 1.0)


def linear_range(gaps_m, slopes, operating_gap_m: float, slope_at_operating,
                 tolerance: float = LINEARITY_TOLERANCE) -> tuple[float, float]:
    """Gap interval around the operating gap where the slope stays within ``tolerance``.

    Parameters
    ----------
    gaps_m : ndarray, shape (g,)
        Increasing gap grid.
    slopes : ndarray, shape (g,)
        Slope of the reading at each gap.
    operating_gap_m : float
    slope_at_operating : float
    tolerance : float
        Relative band, default 0.1.

    Returns
    -------
    (lo_m, hi_m) : tuple of float
        Outermost grid gaps reached walking outwards while ``|s - s_op| <= tol |s_op|``;
        NaN when the slope at the operating gap is zero or its neighbours already fail.
    """
    g = np.asarray(gaps_m, dtype=float)
    s = np.asarray(slopes, dtype=float)
    s0 = float(slope_at_operating)
    if s0 == 0 or not np.isfinite(s0):
        return float("nan"), float("nan")
    ok = np.abs(s - s0) <= tolerance * abs(s0)
    below = np.nonzero(g <= operating_gap_m)[0]
    above = np.nonzero(g >= operating_gap_m)[0]
    lo = hi = float(operating_gap_m)
    for i in below[::-1]:
        if not ok[i]:
            break
        lo = float(g[i])
    for i in above:
        if not ok[i]:
            break
        hi = float(g[i])
    if lo == hi:
        return float("nan"), float("nan")
    return lo, hi


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
    linear_range_m : tuple of float
        ``(lo, hi)`` where the slope stays within ``linearity_tolerance`` of the operating value.
    linearity_tolerance : float
    exact : bool
        All silhouettes exact (see module docstring).
    warnings : tuple of str
    """

    name: str
    gaps_m: np.ndarray
    blocked_fraction: np.ndarray
    slope_per_m: np.ndarray
    operating_gap_m: float
    fraction_at_operating: float
    gain_per_mm: float
    linear_range_m: tuple[float, float]
    linearity_tolerance: float
    exact: bool
    warnings: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return {k: (v.tolist() if isinstance(v, np.ndarray) else v) for k, v in asdict(self).items()}


def beam_response(design: Design, sensor: BeamGate, gaps_m=None, operating_gap_m: float | None = None,
                  linearity_tolerance: float = LINEARITY_TOLERANCE) -> BeamResponse:
    """Beam-gate output, slope, gain at the operating gap and linear range.

    Parameters
    ----------
    design : Design
    sensor : BeamGate
    gaps_m : array_like, shape (g,), optional
        Default the study's gap grid.
    operating_gap_m : float, optional
        Default ``study.operating_gap_m``.
    linearity_tolerance : float

    Returns
    -------
    BeamResponse
    """
    gaps = design.study.gaps() if gaps_m is None else np.sort(np.atleast_1d(np.asarray(gaps_m, dtype=float)))
    g0 = float(design.study.operating_gap_m if operating_gap_m is None else operating_gap_m)
    f = beam_blocked_fraction(design, sensor, gaps)
    h = SLOPE_STEP_M
    slope = (beam_blocked_fraction(design, sensor, gaps + h) - beam_blocked_fraction(design, sensor, gaps - h)) / (2 * h)
    fo = beam_blocked_fraction(design, sensor, [g0 - h, g0, g0 + h])
    s0 = (fo[2] - fo[0]) / (2 * h)
    lr = linear_range(gaps, slope, g0, s0, linearity_tolerance)
    d, across, up, _ = _beam_frame(design, sensor)
    P = design.study.floater_origin_m([g0])[0]
    exact = all(s.exact for s in _silhouettes(design, P, design.study.floater_rotvec_rad, d, across, up))
    warnings = []
    if s0 == 0:
        warnings.append(f"sensor {sensor.name}: the output does not change at the operating gap "
                        f"({'fully blocked' if fo[1] >= 1 else 'not intercepted' if fo[1] <= 0 else 'flat'}); "
                        "move the beam")
    if not exact:
        warnings.append(f"sensor {sensor.name}: an oblique or mesh silhouette is outlined by a polygon (approximate)")
    return BeamResponse(sensor.name, gaps, f, slope, g0, float(fo[1]), float(s0 * 1e-3), lr,
                        float(linearity_tolerance), exact, tuple(warnings))


# ------------------------------------------------------------------------------------- Hall


def _unit(v, where: str) -> np.ndarray:
    a = np.asarray(v, dtype=float).reshape(3)
    n = np.linalg.norm(a)
    if not np.isfinite(n) or n == 0:
        raise GeometryError(where, "axis", "a nonzero vector", tuple(a))
    return a / n


def _readings(design: Design, points_m: np.ndarray, axis: np.ndarray, gaps: np.ndarray):
    """Per gap and point: floater part, B0 part (fixed magnets + core bias), coil parts per ampere.

    Returns floater (g, p), fixed0 (g, p), coils (g, k, p).
    """
    from fields.physics import field_basis as sources

    st = design.study
    n = gaps.size
    P = st.floater_origin_m(gaps)
    Rv = np.repeat(np.asarray(st.floater_rotvec_rad, dtype=float)[None], n, axis=0)
    pts = np.broadcast_to(points_m, (n,) + points_m.shape)
    Bf = sources.floater_field_T(design, pts, P, Rv) @ axis
    fb = sources.fixed_field_basis(design, np.ascontiguousarray(pts), P, Rv)
    return Bf, fb.B0_T @ axis, fb.Bk_T_per_A @ axis, fb


@dataclass(frozen=True)
class HallResponse:
    """Hall sensor reading vs gap, split by source.

    Attributes
    ----------
    name : str
    gaps_m : ndarray, shape (g,)
    floater_T : ndarray, shape (g,)
        Floater magnets' field along the sensing axis.
    core_bias_T : ndarray, shape (g,)
        Core response to the magnets and floater (0 without cores).
    fixed_magnets_T : float
        Fixed magnets' offset (constant).
    coil_T_per_A : ndarray, shape (g, k)
        Each coil's share per ampere, core response included (cross-talk).
    coil_air_T_per_A : ndarray, shape (k,)
        The coils alone, without cores.
    compensation_T_per_A : ndarray, shape (k,)
        ``c_k`` at the operating gap: subtract ``c_k I_k`` from the reading.
    reading_zero_current_T : ndarray, shape (g,)
    sensitivity_T_per_m : ndarray, shape (g,)
        d(reading)/d(gap) at zero current.
    operating_gap_m, sensitivity_at_operating_T_per_m : float
    linear_range_m : tuple of float
    worst_case_T : float
        Largest ``|reading|`` over the gaps with every coil at ``+-max_current_A`` (worst sign).
    range_T : float
    saturates : bool
    warnings : tuple of str
    """

    name: str
    gaps_m: np.ndarray
    floater_T: np.ndarray
    core_bias_T: np.ndarray
    fixed_magnets_T: float
    coil_T_per_A: np.ndarray
    coil_air_T_per_A: np.ndarray
    compensation_T_per_A: np.ndarray
    reading_zero_current_T: np.ndarray
    sensitivity_T_per_m: np.ndarray
    operating_gap_m: float
    sensitivity_at_operating_T_per_m: float
    linear_range_m: tuple[float, float]
    worst_case_T: float
    range_T: float
    saturates: bool
    warnings: tuple[str, ...] = ()

    def reading_T(self, currents_A) -> np.ndarray:
        """Reading (g,) at coil currents (k,) or (g, k) in the linear model."""
        I = np.asarray(currents_A, dtype=float)
        I = np.broadcast_to(I, (self.gaps_m.size, self.coil_T_per_A.shape[1]))
        return self.reading_zero_current_T + np.sum(self.coil_T_per_A * I, axis=1)

    def compensated_T(self, readings_T, currents_A) -> np.ndarray:
        """Reading minus ``sum_k c_k I_k`` (the floater's signal plus the constant offsets)."""
        I = np.asarray(currents_A, dtype=float)
        return np.asarray(readings_T, dtype=float) - I @ self.compensation_T_per_A

    def to_dict(self) -> dict:
        return {k: (v.tolist() if isinstance(v, np.ndarray) else v) for k, v in asdict(self).items()}


def hall_response(design: Design, sensor: HallSensor, gaps_m=None, operating_gap_m: float | None = None,
                  linearity_tolerance: float = LINEARITY_TOLERANCE) -> HallResponse:
    """Field a Hall sensor reads vs gap, its cross-talk from each coil and the saturation check.

    Parameters
    ----------
    design : Design
    sensor : HallSensor
    gaps_m : array_like, shape (g,), optional
        Default the study's gap grid.
    operating_gap_m : float, optional
        Default ``study.operating_gap_m``.
    linearity_tolerance : float

    Returns
    -------
    HallResponse
    """
    from fields.physics import field_basis as sources

    ax = _unit(sensor.axis, f"sensor {sensor.name}")
    p = np.asarray(sensor.position_m, dtype=float).reshape(1, 3)
    gaps = design.study.gaps() if gaps_m is None else np.sort(np.atleast_1d(np.asarray(gaps_m, dtype=float)))
    g0 = float(design.study.operating_gap_m if operating_gap_m is None else operating_gap_m)
    h = SLOPE_STEP_M
    allg = np.concatenate([gaps, gaps - h, gaps + h, [g0 - h, g0, g0 + h]])
    Bf, B0, Bk, _ = _readings(design, p, ax, allg)
    Bf, B0, Bk = Bf[:, 0], B0[:, 0], Bk[:, :, 0]
    fixed = float(sum((sources.magnet_field_T(m, p)[0] @ ax for m in design.magnets), 0.0))
    ng = gaps.size
    zero = Bf + B0
    read = zero[:ng]
    sens = (zero[2 * ng:3 * ng] - zero[ng:2 * ng]) / (2 * h)
    s0 = float((zero[-1] - zero[-3]) / (2 * h))
    lr = linear_range(gaps, sens, g0, s0, linearity_tolerance)
    ck = Bk[-2]
    air = np.array([sources.coil_field_per_ampere_T(c, p)[0] @ ax for c in design.coils]).reshape(-1)
    imax = np.array([abs(float(c.max_current_A)) for c in design.coils])
    worst = float(np.max(np.abs(read) + np.abs(Bk[:ng]) @ imax)) if design.coils else float(np.max(np.abs(read)))
    warnings = []
    sat = worst > float(sensor.range_T)
    if sat:
        warnings.append(f"sensor {sensor.name}: the reading reaches {worst * 1e3:.3g} mT with all coils at max current, "
                        f"beyond the {sensor.range_T * 1e3:.3g} mT range")
    if s0 == 0:
        warnings.append(f"sensor {sensor.name}: no sensitivity to the gap at the operating gap")
    else:
        ratio = np.abs(ck) / abs(s0)
        for c, r in zip(design.coils, ratio):
            if r * float(abs(c.max_current_A)) > 1e-3:
                warnings.append(f"sensor {sensor.name}: coil {c.name} at max current reads like {r * abs(c.max_current_A) * 1e3:.3g} mm "
                                "of gap; compensate it (subtract c_k I_k)")
    if design.cores:
        warnings.append(f"sensor {sensor.name}: core response from the iron-free approximation (approximate)")
    return HallResponse(sensor.name, gaps, Bf[:ng], B0[:ng] - fixed, fixed, Bk[:ng], air, ck, read, sens, g0, s0, lr,
                        worst, float(sensor.range_T), bool(sat), tuple(warnings))


# ------------------------------------------------------------------------------- placement


@dataclass(frozen=True)
class PlacementTable:
    """Candidate Hall positions ranked for gap sensing.

    Attributes
    ----------
    positions_m : ndarray, shape (p, 3)
    axis : ndarray, shape (3,)
    operating_gap_m : float
    reading_T : ndarray, shape (p,)
        Zero-current reading at the operating gap.
    sensitivity_T_per_m : ndarray, shape (p,)
        d(reading)/d(gap) at the operating gap.
    crosstalk_T_per_A : ndarray, shape (p, k)
    crosstalk_gap_m_per_A : ndarray, shape (p, k)
        ``crosstalk / |sensitivity|``: metres of apparent gap per ampere (smaller is better).
    worst_crosstalk_gap_m_per_A : ndarray, shape (p,)
    linear_lo_m, linear_hi_m, linear_half_width_m : ndarray, shape (p,)
        Linear range and its distance from the operating gap (the smaller side).
    worst_case_T : ndarray, shape (p,)
        Largest |reading| over the gaps with coils at +-max current.
    best_index : int
        The candidate with the widest linear half-width among those with nonzero sensitivity,
        ties (within 1 %) broken by the smaller worst cross-talk (a stated rule, not an optimum).
    """

    positions_m: np.ndarray
    axis: np.ndarray
    operating_gap_m: float
    reading_T: np.ndarray
    sensitivity_T_per_m: np.ndarray
    crosstalk_T_per_A: np.ndarray
    crosstalk_gap_m_per_A: np.ndarray
    worst_crosstalk_gap_m_per_A: np.ndarray
    linear_lo_m: np.ndarray
    linear_hi_m: np.ndarray
    linear_half_width_m: np.ndarray
    worst_case_T: np.ndarray
    best_index: int

    def rows(self) -> list[dict]:
        """One dict per candidate with units in the keys (for CSV export)."""
        out = []
        for i in range(self.positions_m.shape[0]):
            out.append({
                "x_m": float(self.positions_m[i, 0]), "y_m": float(self.positions_m[i, 1]),
                "z_m": float(self.positions_m[i, 2]), "reading_T": float(self.reading_T[i]),
                "sensitivity_T_per_m": float(self.sensitivity_T_per_m[i]),
                "worst_crosstalk_gap_m_per_A": float(self.worst_crosstalk_gap_m_per_A[i]),
                "linear_lo_m": float(self.linear_lo_m[i]), "linear_hi_m": float(self.linear_hi_m[i]),
                "linear_half_width_m": float(self.linear_half_width_m[i]), "worst_case_T": float(self.worst_case_T[i]),
            })
        return out

    def to_dict(self) -> dict:
        return {k: (v.tolist() if isinstance(v, np.ndarray) else v) for k, v in asdict(self).items()}


def placement_table(design: Design, candidates_m, axis, operating_gap_m: float | None = None, gaps_m=None,
                    linearity_tolerance: float = LINEARITY_TOLERANCE) -> PlacementTable:
    """Compare candidate Hall positions: sensitivity, coil cross-talk and linear range.

    Parameters
    ----------
    design : Design
    candidates_m : array_like, shape (p, 3)
        Candidate positions, world frame (m).
    axis : array_like, shape (3,)
        Sensing axis.
    operating_gap_m : float, optional
    gaps_m : array_like, shape (g,), optional
        Gap grid for the linear range; default the study's.
    linearity_tolerance : float

    Returns
    -------
    PlacementTable
    """
    ax = _unit(axis, "placement_table")
    C = np.asarray(candidates_m, dtype=float).reshape(-1, 3)
    if C.shape[0] == 0:
        raise GeometryError("placement_table", "candidates_m", "at least one position", C.shape)
    gaps = design.study.gaps() if gaps_m is None else np.sort(np.atleast_1d(np.asarray(gaps_m, dtype=float)))
    g0 = float(design.study.operating_gap_m if operating_gap_m is None else operating_gap_m)
    h = SLOPE_STEP_M
    ng = gaps.size
    allg = np.concatenate([gaps - h, gaps + h, gaps, [g0 - h, g0, g0 + h]])
    Bf, B0, Bk, _ = _readings(design, C, ax, allg)
    zero = Bf + B0  # (n, p)
    sens_grid = (zero[ng:2 * ng] - zero[:ng]) / (2 * h)
    s0 = (zero[-1] - zero[-3]) / (2 * h)
    ck = Bk[-2].T  # (p, k)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(s0[:, None] != 0, np.abs(ck) / np.abs(s0)[:, None], np.inf)
    worst_ratio = ratio.max(axis=1) if ratio.shape[1] else np.zeros(C.shape[0])
    lo = np.empty(C.shape[0])
    hi = np.empty(C.shape[0])
    for i in range(C.shape[0]):
        lo[i], hi[i] = linear_range(gaps, sens_grid[:, i], g0, s0[i], linearity_tolerance)
    half = np.fmin(g0 - lo, hi - g0)
    imax = np.array([abs(float(c.max_current_A)) for c in design.coils])
    rd = zero[2 * ng:3 * ng]  # (g, p)
    worst = np.max(np.abs(rd) + (np.abs(Bk[2 * ng:3 * ng]).transpose(0, 2, 1) @ imax if imax.size else 0.0), axis=0)
    score = np.where(np.isfinite(half) & (s0 != 0), half, -1.0)
    top = score.max()
    cand = np.nonzero(score >= top - 0.01 * abs(top))[0]
    best = int(cand[np.argmin(worst_ratio[cand])])
    return PlacementTable(C, ax, g0, zero[-2], s0, ck, ratio, worst_ratio, lo, hi, half, worst, best)


# ---------------------------------------------------------------------------- inverse table


@dataclass(frozen=True)
class InverseTable:
    """Gap as a function of a sensor reading (monotone cubic interpolation).

    Attributes
    ----------
    reading : ndarray, shape (g,)
        Readings in increasing order (T for Hall sensors, fraction for beam gates).
    gap_m : ndarray, shape (g,)
        The gaps at those readings.
    """

    reading: np.ndarray
    gap_m: np.ndarray

    def __call__(self, readings) -> np.ndarray:
        """Gap (m) at readings; outside the tabulated range is an error."""
        from scipy.interpolate import PchipInterpolator

        r = np.asarray(readings, dtype=float)
        if np.any(r < self.reading[0]) or np.any(r > self.reading[-1]):
            bad = r[(r < self.reading[0]) | (r > self.reading[-1])].reshape(-1)[0]
            raise GeometryError("InverseTable", "reading", f"within [{self.reading[0]:.6g}, {self.reading[-1]:.6g}]",
                                float(bad))
        return PchipInterpolator(self.reading, self.gap_m)(r)


def inverse_table(gaps_m, readings) -> InverseTable:
    """Build gap(reading) from a reading vs gap curve; the reading must be strictly monotone.

    Parameters
    ----------
    gaps_m : array_like, shape (g,)
    readings : array_like, shape (g,)

    Returns
    -------
    InverseTable
        Monotone piecewise-cubic (PCHIP, Fritsch and Carlson 1980, SIAM J. Numer. Anal. 17(2))
        interpolation of the gap in the reading, which preserves the monotonicity.

    Raises
    ------
    SolverError
        When the reading is not strictly monotone over the range.

    Examples
    --------
    >>> t = inverse_table([1e-3, 2e-3, 3e-3], [0.3, 0.2, 0.1])
    >>> round(float(t(0.2)) * 1e3, 9)
    2.0
    """
    g = np.asarray(gaps_m, dtype=float).reshape(-1)
    r = np.asarray(readings, dtype=float).reshape(-1)
    if g.size != r.size or g.size < 2:
        raise GeometryError("inverse_table", "gaps_m and readings", "the same length, at least 2", (g.size, r.size))
    o = np.argsort(g)
    g, r = g[o], r[o]
    dr = np.diff(r)
    if not (np.all(dr > 0) or np.all(dr < 0)):
        i = int(np.nonzero(np.sign(dr[1:]) != np.sign(dr[0]))[0][0] + 1) if np.any(dr != 0) else 0
        raise SolverError(f"inverse_table: the reading must be strictly monotone in the gap over "
                          f"[{g[0] * 1e3:.4g}, {g[-1] * 1e3:.4g}] mm; got a turning or flat point near gap "
                          f"{g[i + 1] * 1e3:.4g} mm.")
    if dr[0] < 0:
        g, r = g[::-1], r[::-1]
    return InverseTable(r, g)


def hall_inverse_table(design: Design, sensor: HallSensor, gaps_m=None) -> InverseTable:
    """gap(reading) of a Hall sensor at zero coil current (readings compensated for the coils)."""
    resp = hall_response(design, sensor, gaps_m)
    return inverse_table(resp.gaps_m, resp.reading_zero_current_T)


def beam_inverse_table(design: Design, sensor: BeamGate, gaps_m=None) -> InverseTable:
    """gap(blocked fraction) of a beam gate."""
    gaps = design.study.gaps() if gaps_m is None else np.asarray(gaps_m, dtype=float)
    return inverse_table(gaps, beam_blocked_fraction(design, sensor, gaps))
