"""Where the floater sits at a gap: the gap axis, placed by the solid model's clearance.

The gap ``g`` puts the floater frame origin at ``origin_m + g * direction`` with its nominal
orientation. The reference body is a fixed solid above (or below) the floater; ``direction`` points
away from it along gravity. ``origin_m`` is chosen so that the floater's clearance to the reference
body (:func:`fields.model.clearance.solids_clearance_detail`, the same function as
:func:`fields.model.clearance.floater_clearance_m`) equals the operating gap at the operating gap.
For flat faces facing each other (the usual stack, tilted or not) the clearance then equals the gap
at every gap; where an edge is nearest (e.g. a tilted floater under a coil's bore) it equals the
gap at the operating gap and differs from it slowly elsewhere.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from scipy.optimize import brentq

from fields.errors import InputError, SolverError
from fields.model.clearance import POLISH_STEPS, solids_clearance_detail
from fields.model.design import rotation_matrix
from fields.model.sampling import CLEARANCE_SEGMENTS
from fields.model.solids import Solid

GAP_TOLERANCE_M = 1e-12
"""Clearance at the operating gap is matched to this (m): far below any physical dimension."""

GAP_RESOLUTION_M = 1e-9
"""Where the clearance itself is only resolved to about 1e-11 m (a tilted floater's nearest point
is found by sampling and polishing, :func:`fields.model.clearance.solids_clearance_detail`), a
match within this (a nanometre) is accepted when the steps stall."""

GAP_SIDES = ("above", "below")
"""Where the reference body is, seen from the floater."""

GAP_MODES = ("clearance", "offset")
"""What a gap is: the clearance to the reference body along gravity, or a signed displacement along
a given direction (:class:`fields.model.design.Study`)."""


@dataclass(frozen=True)
class GapAxis:
    """The line the floater moves along as the gap changes.

    Attributes
    ----------
    reference : str
        Name of the fixed solid the gap is measured from.
    side : str
        ``"above"`` or ``"below"``: where the reference body is, seen from the floater.
    origin_m : ndarray, shape (3,)
        Floater frame origin at zero gap (m).
    direction : ndarray, shape (3,)
        Unit vector; the origin at gap ``g`` is ``origin_m + g * direction``.
    clearance_at_operating_m : float
        The floater's clearance to the reference body at the operating gap (m), equal to the
        operating gap within :data:`GAP_TOLERANCE_M`.
    """

    reference: str
    side: str
    origin_m: np.ndarray
    direction: np.ndarray
    clearance_at_operating_m: float


def _across(up: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    t = np.array([1.0, 0.0, 0.0]) if abs(up[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    e1 = np.cross(up, t)
    e1 /= np.linalg.norm(e1)
    return e1, np.cross(up, e1)


def nearest_reference(fixed: Sequence[Solid], floater: Sequence[Solid], up, side: str, lateral_m=(0.0, 0.0, 0.0),
                      rotvec_rad=(0.0, 0.0, 0.0)) -> str:
    """The fixed solid the floater faces: the ceiling (``side="above"``) or the floor (``"below"``).

    Among the fixed solids whose extents across ``up`` overlap the floater's (at ``lateral_m``,
    orientation ``rotvec_rad``), the one whose underside is lowest (``"above"``) or whose top is
    highest (``"below"``); when none overlaps, among all fixed solids. Extents are exact
    (:meth:`fields.model.solids.Solid.extent_along`).
    """
    if side not in GAP_SIDES:
        raise InputError(f"nearest_reference: side must be \"above\" or \"below\"; got {side!r}.")
    if not fixed:
        raise InputError("nearest_reference: fixed must hold at least one solid; got none.")
    u = np.asarray(up, dtype=float)
    u = u / np.linalg.norm(u)
    Rp = rotation_matrix(rotvec_rad)
    lat = np.asarray(lateral_m, dtype=float)
    lat = lat - (lat @ u) * u

    def footprint(s: Solid, R, t) -> list[tuple[float, float]]:
        return [s.extent_along(R, t, e) for e in _across(u)]

    fl = [footprint(s, Rp @ s.rotation, Rp @ s.position_m + lat) for s in floater]
    f_box = [(min(b[i][0] for b in fl), max(b[i][1] for b in fl)) for i in range(2)] if fl else None

    def overlaps(s: Solid) -> bool:
        if f_box is None:
            return True
        return all(lo < f_box[i][1] and f_box[i][0] < hi
                   for i, (lo, hi) in enumerate(footprint(s, s.rotation, s.position_m)))

    pool = [s for s in fixed if overlaps(s)] or list(fixed)
    ext = {s.name: s.extent_along(s.rotation, s.position_m, u) for s in pool}
    if side == "above":
        return min(ext, key=lambda n: ext[n][0])
    return max(ext, key=lambda n: ext[n][1])


def gap_axis(fixed: Sequence[Solid], floater: Sequence[Solid], reference: str, side: str, up, lateral_m,
             rotvec_rad, operating_gap_m: float, segments: int = CLEARANCE_SEGMENTS,
             polish: int = POLISH_STEPS) -> GapAxis:
    """Place the gap axis so that the clearance to the reference body equals the operating gap there.

    Parameters
    ----------
    fixed : sequence of Solid
        The fixed solids (world frame).
    floater : sequence of Solid
        The floater's solids (floater frame).
    reference : str
        Name of one of ``fixed``.
    side : {"above", "below"}
        Where the reference body is, seen from the floater.
    up : array_like, shape (3,)
        Unit vector against gravity.
    lateral_m : array_like, shape (3,)
        Floater position across ``up`` (its component along ``up`` is ignored) (m).
    rotvec_rad : array_like, shape (3,)
        Nominal floater orientation (rad).
    operating_gap_m : float
        Positive (m).
    segments, polish : int
        Clearance sampling, as :func:`fields.model.clearance.floater_clearance_m`.

    Returns
    -------
    GapAxis

    Raises
    ------
    SolverError
        When moving the floater along ``up`` never brings it to the operating gap from the
        reference body (e.g. the body is off to the side of the floater's line).

    Notes
    -----
    Start: the exact extents along ``up`` (support functions) give the origin at which the facing
    extremes are ``operating_gap_m`` apart. The clearance ``c(u)`` as the floater moves by ``u``
    along ``direction`` is 1-Lipschitz (each term is a signed distance at a rigidly moving
    sample), so the step ``u <- u - (c(u) - g)`` never overshoots; for facing flat faces it is
    exact in one step. Otherwise the root is bracketed and found by Brent's method (Brent,
    *Algorithms for Minimization without Derivatives*, 1973, ch. 4).
    """
    if side not in GAP_SIDES:
        raise InputError(f"gap_axis: side must be \"above\" or \"below\"; got {side!r}.")
    g = float(operating_gap_m)
    if not (np.isfinite(g) and g > 0):
        raise InputError(f"gap_axis: operating_gap_m must be positive and finite; got {operating_gap_m!r}.")
    ref = [s for s in fixed if s.name == reference]
    if not ref:
        raise InputError(f"gap_axis: reference must name one of the fixed solids; got {reference!r}.")
    u_up = np.asarray(up, dtype=float)
    u_up = u_up / np.linalg.norm(u_up)
    Rp = rotation_matrix(rotvec_rad)
    f_lo = min(s.extent_along(Rp @ s.rotation, Rp @ s.position_m, u_up)[0] for s in floater)
    f_hi = max(s.extent_along(Rp @ s.rotation, Rp @ s.position_m, u_up)[1] for s in floater)
    lo, hi = ref[0].extent_along(ref[0].rotation, ref[0].position_m, u_up)
    lat = np.asarray(lateral_m, dtype=float)
    lat = lat - (lat @ u_up) * u_up
    if side == "above":
        origin0, direction = lat + (lo - f_hi) * u_up, -u_up
    else:
        origin0, direction = lat + (hi - f_lo) * u_up, u_up
    rv = np.asarray(rotvec_rad, dtype=float)[None]

    def excess(u: float) -> float:
        P = (origin0 + u * direction)[None]
        return float(solids_clearance_detail(floater, ref, P, rv, segments, polish).clearance_m[0]) - g

    u, f = g, excess(g)
    slope = 0.0
    for _ in range(4):  # non-overshooting steps (exact at once for facing flat faces)
        if abs(f) <= GAP_TOLERANCE_M:
            break
        u_new = u - f
        f_new = excess(u_new)
        if f_new == 0.0 or np.sign(f_new) != np.sign(f):
            u = brentq(excess, min(u, u_new), max(u, u_new), xtol=GAP_TOLERANCE_M / 4)
            f = excess(u)
            break
        slope = (f_new - f) / (u_new - u)
        u, f = u_new, f_new
    if GAP_TOLERANCE_M < abs(f) and not abs(f) <= GAP_RESOLUTION_M:
        if not slope > 1e-6:
            raise SolverError(f"gap_axis: moving the floater along the vertical does not bring it to "
                              f"{g * 1e3:.4g} mm from {reference!r} (it passes beside it).")
        step = -2.0 * f / slope
        for _ in range(60):
            f_b = excess(u + step)
            if np.sign(f_b) != np.sign(f):
                break
            step *= 2.0
        else:
            raise SolverError(f"gap_axis: no floater height puts it {g * 1e3:.4g} mm from {reference!r}.")
        a, b = sorted((u, u + step))
        u = brentq(excess, a, b, xtol=GAP_TOLERANCE_M / 4)
        f = excess(u)
    return GapAxis(reference=reference, side=side, origin_m=origin0 + (u - g) * direction,
                   direction=direction, clearance_at_operating_m=f + g)
