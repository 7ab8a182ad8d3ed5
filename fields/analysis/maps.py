"""Force and torque maps over gap x lateral offset and gap x tilt, and where they centre the floater."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.analysis.curves import axial_curves
from fields.analysis.poses import displace, pose_at_gap
from fields.model.design import Design
from fields.physics.checks import input_error
from fields.physics.parallel import map_chunks
from fields.physics.wrench import wrench_basis

#: the kinds of map: the second coordinate is a lateral offset along world x (m) or a tilt about
#: world y through the centre of mass (rad)
MAP_KINDS = ("lateral", "tilt")


@dataclass(frozen=True)
class PoseMap:
    """Force and torque over a grid of gap (g) x second coordinate (s): a lateral offset along
    world x (m) or a tilt about world y through the centre of mass (rad).

    ``force_N``/``torque_Nm`` (g, s, 3) at the given currents; ``restoring`` (g, s) bool is True
    where the sideways force (offset map) or the tilt torque (tilt map) pushes back towards the
    centre; ``passively_centred`` additionally requires the vertical force to be within the coil's
    authority (the floater can be held at that gap); ``contact`` (g, s) bool.
    """

    kind: str
    gaps_m: np.ndarray
    coordinate: np.ndarray
    coordinate_unit: str
    force_N: np.ndarray
    torque_Nm: np.ndarray
    restoring: np.ndarray
    passively_centred: np.ndarray
    contact: np.ndarray
    currents_A: np.ndarray


#: map grid (gaps, coordinate values) for designs with soft-iron cores
CORE_MAP_GRID = (17, 13)


def map_gaps(design: Design) -> np.ndarray:
    """The default gap grid of :func:`pose_map` (m)."""
    st = design.study
    return np.linspace(st.gap_min_m, st.gap_max_m, CORE_MAP_GRID[0] if design.cores else 50)


def holding_curves(design: Design, gaps_m):
    """The axial curves :func:`pose_map` judges vertical authority by (the coils' current range
    holds the weight), at the map's gaps: pass them to several maps of one gap grid."""
    return axial_curves(design, gaps_m=np.asarray(gaps_m, float), currents_A=[0.0], near_field=False)


def pose_map(design: Design, kind: str = "lateral", gaps_m=None, coordinate=None, currents_A=None,
             chunk: int = 4096, hold_curves=None) -> PoseMap:
    """Force/torque maps versus gap and lateral offset (``kind="lateral"``) or tilt (``"tilt"``).

    ``hold_curves``: :func:`holding_curves` at these gaps when the caller has them (several maps).

    Maps use the plain cap rule (no near-field grading): fast, accurate to about 1e-3 within a
    few mm of a source edge. With soft-iron cores (cell solve) the default grid is
    :data:`CORE_MAP_GRID` (gaps x coordinate values) and the ``"fast"`` rule with the coarse cell
    level, without an error estimate: every pose needs its own iron response to the floater
    (about 0.5 % from the fine level; the curves and the stiffness carry the error bars).
    """
    if kind not in MAP_KINDS:
        raise input_error("pose_map", "kind", "'lateral' or 'tilt'", kind)
    st = design.study
    cells = bool(design.cores)
    ns = CORE_MAP_GRID[1] if cells else None
    gaps = map_gaps(design) if gaps_m is None else np.asarray(gaps_m, float)
    if coordinate is None:
        if kind == "lateral":
            coordinate = np.linspace(-st.lateral_span_m, st.lateral_span_m, ns or st.lateral_points)
        else:
            coordinate = np.linspace(-st.tilt_span_rad, st.tilt_span_rad, ns or st.tilt_points)
    s = np.asarray(coordinate, float)
    I = np.array([c.nominal_current_A for c in design.coils]) if currents_A is None else np.asarray(currents_A, float)
    pos0, rot0 = pose_at_gap(design, gaps)
    G, S = len(gaps), len(s)
    P = np.empty((G, S, 3))
    Rv = np.empty((G, S, 3))
    for i in range(G):
        dq = np.zeros((S, 6))
        if kind == "lateral":
            dq[:, 0] = s
        else:
            dq[:, 4] = s
        P[i], Rv[i] = displace(design, pos0[i], rot0[i], dq)
    P = P.reshape(-1, 3)
    Rv = Rv.reshape(-1, 3)
    def part(sl: slice):
        Pp, Rp = P[sl], Rv[sl]
        F = np.empty_like(Pp)
        T = np.empty_like(Pp)
        contact = np.empty(len(Pp), bool)
        for a in range(0, len(Pp), chunk):
            # maps use the plain cap rule: fast, accurate to ~1e-3 within a few mm of a source edge
            b = (wrench_basis(design, Pp[a:a + chunk], Rp[a:a + chunk], order="fast", estimate_error=False,
                              near_field=False)
                 if cells else wrench_basis(design, Pp[a:a + chunk], Rp[a:a + chunk], estimate_error=False,
                                            near_field=False))
            F[a:a + chunk] = b.force(I) if len(I) else b.F0_N
            T[a:a + chunk] = b.torque(I) if len(I) else b.T0_Nm
            contact[a:a + chunk] = b.contact
        return F, T, contact

    # the poses are independent: with cores (a cell solve per pose) split over the cores
    parts = map_chunks(part, len(P), warm_first=True) if cells else [part(slice(0, len(P)))]
    F = np.concatenate([p[0] for p in parts])
    T = np.concatenate([p[1] for p in parts])
    contact = np.concatenate([p[2] for p in parts])
    F = F.reshape(G, S, 3)
    T = T.reshape(G, S, 3)
    contact = contact.reshape(G, S)
    if kind == "lateral":
        restoring = F[..., 0] * s[None, :] < 0
    else:
        restoring = T[..., 1] * s[None, :] < 0
    zero = np.abs(s) < 1e-15
    # at the centre itself use the neighbouring columns' verdict
    if np.any(zero):
        j0 = int(np.flatnonzero(zero)[0])
        nb = [j for j in (j0 - 1, j0 + 1) if 0 <= j < S]
        restoring[:, j0] = np.all(restoring[:, nb], axis=1)
    ax = design.axial
    W = design.axial_load_N
    # axial authority: can the coils' current range balance the axial load (the weight, or zero
    # where gravity acts across an offset study's gap direction) at this gap?
    holdable = np.ones(G, bool)
    if design.coils:
        curves = holding_curves(design, gaps) if hold_curves is None else hold_curves
        if len(curves.gaps_m) != G or not np.allclose(curves.gaps_m, gaps, rtol=0, atol=1e-12):
            raise input_error("pose_map", "hold_curves", "curves at the map's gaps", f"{len(curves.gaps_m)} gaps")
        if design.gravity_across_axial:
            reach = np.abs(curves.ki_N_per_A) * curves.max_current_A
            holdable = (curves.F0_N + reach >= W) & (curves.F0_N - reach <= W)
        else:
            g = design.gravity_magnitude
            holdable = (curves.max_total_mass_kg * g >= design.weight_N) & (curves.min_total_mass_kg * g <= design.weight_N)
    else:
        Fa = F @ ax
        holdable = np.any(np.isclose(Fa, W, rtol=0.05, atol=0.05 * design.weight_N * (W == 0.0)), axis=1)
    passive = restoring & holdable[:, None] & ~contact
    return PoseMap(kind=kind, gaps_m=gaps, coordinate=s, coordinate_unit="m" if kind == "lateral" else "rad",
                   force_N=F, torque_Nm=T, restoring=restoring & ~contact, passively_centred=passive,
                   contact=contact, currents_A=I)
