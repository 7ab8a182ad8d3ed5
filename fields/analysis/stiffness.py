"""Stiffness of the floater: the 6x6 matrix at a pose and the diagonal versus gap.

``K = -d(F, T)/d(x, y, z, rx, ry, rz)`` about the centre of mass, by central differences of the
exact force (:mod:`fields.analysis.stencil`). Checks that cannot be fooled: for rigid magnets in
iron-free fields the translational block is symmetric (a Hessian of the energy) and its trace
vanishes (Laplace's equation; Earnshaw, Trans. Camb. Phil. Soc. 7 (1842) 97).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.analysis.curves import axial_curves
from fields.analysis.poses import displace, drive_pattern, floater_size_m, pose_at_gap
from fields.analysis.stencil import (
    RICHARDSON_MULTIPLES,
    STEP_ANGLE_RAD,
    STEP_LENGTH_M,
    central_offsets,
    pose_steps,
    richardson,
    stencil_derivatives,
)
from fields.model.design import Design
from fields.physics.levels import coarser_level
from fields.physics.wrench import concat_bases, wrench_basis


@dataclass(frozen=True)
class Stiffness:
    """6x6 stiffness K = -d(F, T)/d(x, y, z, rx, ry, rz) about the centre of mass.

    ``K`` in N/m (translation rows/cols), N/rad, N m/m and N m/rad; ``error`` the error bar per
    entry, ``error_richardson + error_quadrature``: the finite-difference share ``|R - D_h|`` (R the
    extrapolated value) plus the quadrature share (see :func:`stiffness_matrix`);
    ``force_N``/``torque_Nm`` at the pose.
    """

    K: np.ndarray
    error: np.ndarray
    force_N: np.ndarray
    torque_Nm: np.ndarray
    position_m: np.ndarray
    rotvec_rad: np.ndarray
    currents_A: np.ndarray
    step_length_m: float
    step_angle_rad: float
    error_richardson: np.ndarray | None = None
    error_quadrature: np.ndarray | None = None

    @property
    def translational(self) -> np.ndarray:
        return self.K[:3, :3]

    def earnshaw_residual(self) -> tuple[float, float]:
        """(trace of the translational block, trace / largest |diagonal|)."""
        t = float(np.trace(self.translational))
        s = float(np.max(np.abs(np.diag(self.translational))))
        return t, (abs(t) / s if s > 0 else 0.0)


def stiffness_stencil(design: Design, position_m, rotvec_rad, step_length_m: float = STEP_LENGTH_M,
                      step_angle_rad: float = STEP_ANGLE_RAD):
    """The 25 poses of the stiffness stencil (steps +-h and +-2h on each of the six axes, then the
    pose itself) and a function that turns the basis evaluated there into a :class:`Stiffness`.

    Returns
    -------
    positions_m (25, 3), rotvecs_rad (25, 3), finish : callable(basis, currents_A, quadrature=None) -> Stiffness
        ``quadrature`` (6, 6), optional: the quadrature share of the error bar, added to the
        Richardson share (zeros without it); or a second basis on the same poses at a coarser rule
        level, whose extrapolated matrix gives the share as ``|K - K_coarser|``.
    """
    steps = pose_steps(step_length_m, step_angle_rad)
    dq = central_offsets(steps, multiples=RICHARDSON_MULTIPLES, centre=True)
    P, Rv = displace(design, position_m, rotvec_rad, dq)

    def wrench_at(b, I):
        F = b.force(I) if len(I) else b.F0_N
        T = b.torque(I) if len(I) else b.T0_Nm
        return F, T

    def extrapolated(F, T):
        W = np.concatenate([F, T], axis=1)  # (25, 6)
        D = stencil_derivatives(W, steps, multiples=RICHARDSON_MULTIPLES)  # (2, 6 rows, 6 axes)
        return richardson(-D[0], -D[1])

    def finish(b, currents_A, quadrature=None) -> Stiffness:
        I = np.asarray(currents_A, float)
        F, T = wrench_at(b, I)
        R, err = extrapolated(F, T)
        if quadrature is None:
            quad = np.zeros_like(R)
        elif hasattr(quadrature, "F0_N"):  # a basis at the next coarser rule level
            quad = np.abs(R - extrapolated(*wrench_at(quadrature, I))[0])
        else:
            quad = np.asarray(quadrature, float)
        return Stiffness(K=R, error=err + quad, force_N=F[-1], torque_Nm=T[-1],
                         position_m=np.asarray(position_m, float), rotvec_rad=np.asarray(rotvec_rad, float),
                         currents_A=I, step_length_m=step_length_m, step_angle_rad=step_angle_rad,
                         error_richardson=err, error_quadrature=quad)

    return P, Rv, finish


def stiffness_matrix(design: Design, position_m, rotvec_rad, currents_A=None,
                     step_length_m: float = STEP_LENGTH_M, step_angle_rad: float = STEP_ANGLE_RAD) -> Stiffness:
    """The 6x6 stiffness at one pose and coil currents, by central differences of the exact
    force with Richardson extrapolation (steps h and 2h).

    Step rule: h = 1e-6 m for translations and 1e-4 rad for rotations by default (balances the
    O(h^2) truncation of the central difference against rounding of order eps |F| / h).
    All 25 poses go through one batched force evaluation.

    Error bar (``Stiffness.error``) = finite-difference share + quadrature share:

    - finite difference: the Richardson bar ``|R - D_h|`` (:func:`fields.analysis.stencil.richardson`);
    - quadrature, iron-free: the same stencil evaluated again with the next coarser rule level
      (:data:`STIFFNESS_ORDER` and :func:`fields.physics.levels.coarser_level`), share
      ``|K_level - K_coarser|`` per entry (the two-level rule of the force engine, applied to K);
    - quadrature, with cores (the cell solve, at these currents through the saturable
      :func:`fields.physics.wrench.wrench` when there are coils): the engine's two-level force and
      torque estimates ``e_F``, ``e_T`` at the centre pose only (the stencil itself is solved at
      one level, so the iron cost grows by two poses, not twofold), turned into derivative bars
      over the length ``L = min(clearance at the pose, floater size)``
      (:func:`fields.analysis.poses.floater_size_m`): ``e/L`` per metre and ``e a/L`` per radian
      (``a`` the floater size, the lever of a rotation), force rows with ``e_F``, torque rows with
      ``e_T``. This assumes the quadrature error varies on the scale of the gap or the floater.
    """
    I = np.zeros(len(design.coils)) if currents_A is None else np.asarray(currents_A, float)
    if design.floater.soft_iron:
        from fields.analysis.stiffness_iron import soft_iron_stiffness

        return soft_iron_stiffness(design, position_m, rotvec_rad, I)
    P, Rv, finish = stiffness_stencil(design, position_m, rotvec_rad, step_length_m, step_angle_rad)
    if design.cores:
        if len(I):  # the iron's B-H curve: forces at these currents, not the linear basis
            from fields.physics.wrench import wrench

            b = _AtCurrents(wrench(design, P, Rv, I, order=STIFFNESS_ORDER, estimate_error=False))
            c = wrench(design, P[-1:], Rv[-1:], I, order=STIFFNESS_ORDER, estimate_error=True)
        else:
            b = wrench_basis(design, P, Rv, order=STIFFNESS_ORDER, estimate_error=False)
            c = wrench_basis(design, P[-1:], Rv[-1:], order=STIFFNESS_ORDER, estimate_error=True)
        return finish(b, I, _core_quadrature_bar(design, c))
    fine = wrench_basis(design, P, Rv, order=STIFFNESS_ORDER, estimate_error=False)
    coarse = wrench_basis(design, P, Rv, order=coarser_level(STIFFNESS_ORDER, "stiffness_matrix"),
                          estimate_error=False)
    return finish(fine, I, coarse)


#: rule level of the stiffness matrix (the engine's default); its quadrature bar uses the next coarser
STIFFNESS_ORDER = "standard"


def _core_quadrature_bar(design: Design, w) -> np.ndarray:
    """Quadrature share (6, 6) of the stiffness bar with cores, from the centre pose's force and
    torque error estimates over L = min(clearance, floater size) (see :func:`stiffness_matrix`)."""
    a = floater_size_m(design)
    L = min(float(w.clearance_m[0]), a) if np.isfinite(w.clearance_m[0]) and w.clearance_m[0] > 0 else a
    eF, eT = float(w.error_F_N[0]), float(w.error_T_Nm[0])
    per = np.array([1.0 / L] * 3 + [a / L] * 3)  # per metre, per radian
    return np.outer([eF] * 3 + [eT] * 3, per)


class _AtCurrents:
    """A :class:`fields.physics.wrench.Wrench` at fixed currents behind the basis interface."""

    def __init__(self, w):
        self.w = w
        self.F0_N, self.T0_Nm = w.force_N, w.torque_Nm

    def force(self, currents_A):
        return self.w.force_N

    def torque(self, currents_A):
        return self.w.torque_Nm


@dataclass(frozen=True)
class GapStiffness:
    """Lateral and tilt stiffness versus gap at the hover current (or given currents).

    ``currents_A`` (g, k); ``k_lateral_N_per_m`` (g,) the mean of k_xx and k_yy;
    ``k_vertical_N_per_m`` (g,) k_zz; ``k_tilt_Nm_per_rad`` (g,) the mean of k_rxrx and k_ryry;
    ``k_x_N_per_m``, ``k_y_N_per_m``, ``k_rx_Nm_per_rad``, ``k_ry_Nm_per_rad`` (g,) each axis
    alone (they differ for a floater that is not round, e.g. a bar magnet). NaN where a stencil
    pose touches a body.
    """

    gaps_m: np.ndarray
    currents_A: np.ndarray
    k_lateral_N_per_m: np.ndarray
    k_vertical_N_per_m: np.ndarray
    k_tilt_Nm_per_rad: np.ndarray
    k_x_N_per_m: np.ndarray
    k_y_N_per_m: np.ndarray
    k_rx_Nm_per_rad: np.ndarray
    k_ry_Nm_per_rad: np.ndarray

    def same_xy(self, rtol: float = 1e-3) -> tuple[bool, bool]:
        """Whether k_x = k_y and k_rx = k_ry at every gap (within ``rtol`` of the larger), as for a
        round floater under round sources."""
        def same(a, b):
            ok = np.isfinite(a) & np.isfinite(b)
            return bool(np.all(np.abs(a[ok] - b[ok]) <= rtol * np.maximum(np.abs(a[ok]), np.abs(b[ok])) + 1e-300))
        return same(self.k_x_N_per_m, self.k_y_N_per_m), same(self.k_rx_Nm_per_rad, self.k_ry_Nm_per_rad)


#: gaps of the stiffness overview with soft-iron cores (each pose needs its own iron response)
CORE_GAP_POINTS = 16


def stiffness_versus_gap(design: Design, gaps_m=None, currents_A=None, at_hover: bool = True,
                         pattern=None) -> GapStiffness:
    """Diagonal stiffness (lateral, vertical, tilt) versus gap, batched in one force call.

    With ``at_hover`` the current at each gap is the hover current of the drive pattern (so the
    vertical force balances the weight); otherwise ``currents_A`` (k,) or the nominal currents.
    Central differences with the steps of :mod:`fields.analysis.stencil` (no extrapolation).
    With cores: :data:`CORE_GAP_POINTS` gaps, the ``"fast"`` rule and the coarse cell level (an
    overview; the stiffness at the operating point carries the error estimate).
    """
    st = design.study
    n_default = CORE_GAP_POINTS if design.cores else 40
    gaps = np.linspace(st.gap_min_m, st.gap_max_m, n_default) if gaps_m is None else np.asarray(gaps_m, float)
    d = drive_pattern(design, pattern)
    if at_hover and design.coils:
        c = axial_curves(design, gaps_m=gaps, currents_A=[0.0], pattern=pattern, near_field=False)
        ih = np.nan_to_num(c.hover_current_A)
        Ik = ih[:, None] * d[None, :]
    else:
        I = np.array([c.nominal_current_A for c in design.coils]) if currents_A is None else np.asarray(currents_A, float)
        Ik = np.broadcast_to(I, (len(gaps), len(design.coils)))
    pos, rot = pose_at_gap(design, gaps)
    steps = pose_steps()
    axes = [0, 1, 2, 3, 4]
    dq = central_offsets(steps, axes=axes)
    Ps, Rs = [], []
    for i in range(len(gaps)):
        P, Rv = displace(design, pos[i], rot[i], dq)
        Ps.append(P)
        Rs.append(Rv)
    P = np.concatenate(Ps)
    Rv = np.concatenate(Rs)
    # an overview across the gap range: the plain cap rule (see fields.analysis.maps.pose_map)
    m = 2 * len(axes)
    if design.cores:  # every pose needs its own iron response: the fast rule and the coarse cell level;
        # the gaps' stencils are independent, so whole stencils are split over the cores
        from fields.physics.parallel import map_chunks

        parts = map_chunks(lambda sl: wrench_basis(design, P[sl.start * m:sl.stop * m], Rv[sl.start * m:sl.stop * m],
                                                   order="fast", estimate_error=False, near_field=False),
                           len(gaps), min_items_per_worker=4)
        b = concat_bases(parts)
    else:
        b = wrench_basis(design, P, Rv, estimate_error=False, near_field=False)
    F0 = b.F0_N.reshape(len(gaps), m, 3)
    T0 = b.T0_Nm.reshape(len(gaps), m, 3)
    if design.coils:
        Fk = b.Fk_N_per_A.reshape(len(gaps), m, len(design.coils), 3)
        Tk = b.Tk_Nm_per_A.reshape(len(gaps), m, len(design.coils), 3)
        F = F0 + np.einsum("gmkc,gk->gmc", Fk, Ik)
        T = T0 + np.einsum("gmkc,gk->gmc", Tk, Ik)
    else:
        F, T = F0, T0
    W = np.concatenate([F, T], axis=2)  # (g, m, 6)
    D = stencil_derivatives(np.moveaxis(W, 1, 0), steps, axes=axes)[0]  # (g, 6, axes)
    kdiag = -D[:, axes, np.arange(len(axes))]
    # gaps where any stencil pose touches a body have no stiffness
    touching = np.asarray(b.contact).reshape(len(gaps), m).any(axis=1)
    kdiag[touching] = np.nan
    return GapStiffness(gaps_m=gaps, currents_A=Ik, k_lateral_N_per_m=0.5 * (kdiag[:, 0] + kdiag[:, 1]),
                        k_vertical_N_per_m=kdiag[:, 2], k_tilt_Nm_per_rad=0.5 * (kdiag[:, 3] + kdiag[:, 4]),
                        k_x_N_per_m=kdiag[:, 0], k_y_N_per_m=kdiag[:, 1], k_rx_Nm_per_rad=kdiag[:, 3],
                        k_ry_Nm_per_rad=kdiag[:, 4])
