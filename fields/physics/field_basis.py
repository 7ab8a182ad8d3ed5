"""Field of all fixed sources (coils, fixed magnets, cores) split by linearity in the currents.

Iron-free sources are linear in current: the field is kept as the permanent-magnet part plus one
unit-current part per coil, so that any current is a weighted sum (superposition). Soft-iron
cores are solved for their magnetization by the ring-cell method (:mod:`fields.physics.iron`,
:func:`fields.physics.iron_basis.iron_field_basis`; ``core_model="cells"``, the default): the
iron's linear response (initial susceptibility) to the magnets, the floater at its pose and each
coil is added to the matching part; :func:`fixed_field_T` solves the saturable iron at given
currents. ``core_model="uniform"`` keeps the uniformly magnetized core
(:mod:`fields.physics.cores`, for comparison only).

The per-source fields it combines are re-exported here (:func:`coil_field_per_ampere_T`,
:func:`magnet_field_T`, :func:`floater_field_T`, :func:`core_models`), so that device models can
take every fixed-source field from this one module.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.model.design import Design
from fields.physics.checks import input_error, pose_arrays
from fields.physics.coils import LAYER_GRADE_WITHIN, coil_field_per_ampere_T
from fields.physics.cores import clip_polarization, core_models, rated_current_box
from fields.physics.magnets import floater_field_T, magnet_field_T

#: core models: the ring-cell solve (default) and the uniform-magnetization body (comparison)
CORE_MODELS = ("cells", "uniform")
#: cell-solve level of the field basis (the force routes pick their own levels)
FIELD_IRON_LEVEL = "fine"


def check_core_model(core_model: str, where: str) -> str:
    if core_model not in CORE_MODELS:
        raise input_error(where, "core_model", "one of " + ", ".join(CORE_MODELS), core_model)
    return core_model

__all__ = ["CORE_MODELS", "FieldBasis", "coil_field_per_ampere_T", "core_models", "fixed_field_T", "fixed_field_basis",
           "floater_field_T", "magnet_field_T"]


@dataclass(frozen=True)
class FieldBasis:
    """Field of the fixed sources split by linearity in the coil currents.

    ``B(I) = B0_T + sum_k I_k Bk_T_per_A[:, k]`` (exact without cores and with unclipped cores).

    Attributes
    ----------
    B0_T : ndarray, shape (n, q, 3)
        Fixed magnets plus the core response to fixed magnets and the floater (T).
    Bk_T_per_A : ndarray, shape (n, k, q, 3)
        Coil ``k`` per ampere plus the core response to it (T/A).
    core_J0_T : ndarray, shape (n, c, d)
        Linear core polarizations at zero current: c cores with d = 3 world components
        (``"uniform"``), or c ring cells with d = 2 components ``(J_r, J_z)`` (``"cells"``).
    core_Jk_T_per_A : ndarray, shape (n, k, c, d)
        Linear core polarization per ampere of each coil.
    core_saturation_T : ndarray, shape (c,)
        The polarization above which a core (cell) counts as saturated: the saturation
        polarization (``"uniform"``) or its saturation fraction
        (:data:`fields.physics.iron_newton.SATURATION_FRACTION`, ``"cells"``).
    core_saturated : ndarray of bool, shape (n,)
        True where some core can exceed ``core_saturation_T`` with currents inside the rated
        box ``|I_k| <= max_current_A`` (|J| is convex in I, so the box vertices are checked);
        the linear basis is then not exact for all rated currents.
    core_model : str
        ``"cells"``, ``"uniform"`` or ``"none"`` (no cores).
    """

    B0_T: np.ndarray
    Bk_T_per_A: np.ndarray
    core_J0_T: np.ndarray
    core_Jk_T_per_A: np.ndarray
    core_saturation_T: np.ndarray
    core_saturated: np.ndarray
    core_model: str = "none"

    def field_T(self, currents_A) -> np.ndarray:
        """Linear field (n, q, 3) at currents (k,) (no clipping)."""
        I = np.asarray(currents_A, dtype=float).reshape(-1)
        return self.B0_T + np.einsum("k,nkqi->nqi", I, self.Bk_T_per_A)

    def saturated_at(self, currents_A) -> np.ndarray:
        """(n,) bool: some core exceeds saturation at these currents (k,)."""
        I = np.asarray(currents_A, dtype=float).reshape(-1)
        if self.core_J0_T.shape[1] == 0:
            return np.zeros(self.B0_T.shape[0], dtype=bool)
        J = self.core_J0_T + np.einsum("k,nkci->nci", I, self.core_Jk_T_per_A)
        return np.any(np.linalg.norm(J, axis=-1) > self.core_saturation_T[None, :], axis=1)


def fixed_field_basis(design: Design, points_m, floater_positions_m, floater_rotvecs_rad,
                      layers: int = 8, core_order: int = 8, grade_within: float = LAYER_GRADE_WITHIN,
                      core_model: str = "cells", iron_level: str = FIELD_IRON_LEVEL) -> FieldBasis:
    """Field of the fixed sources at observers of n poses, split by linearity in current.

    Parameters
    ----------
    design : Design
    points_m : ndarray, shape (n, q, 3)
        Observers per pose, world frame (m).
    floater_positions_m, floater_rotvecs_rad : ndarray, shape (n, 3)
        Floater poses (only needed by the core response to the floater).
    layers : int
        Gauss layers per coil.
    core_order : int
        Gauss order of the core volume mean.
    grade_within : float
        Observer grading of the coil layers (:func:`fields.physics.coils.coil_field_per_ampere_T`).
    core_model : str
        ``"cells"`` (the ring-cell solve; observers must keep clear of the cores by about a cell)
        or ``"uniform"`` (uniformly magnetized cores, for comparison). With cells the coils'
        fields use the cell model's own layer count.
    iron_level : str
        Cell level of the ring-cell solve (default ``"fine"``; ``"coarse"`` for overviews).

    Returns
    -------
    FieldBasis
    """
    check_core_model(core_model, "fixed_field_basis")
    pts = np.asarray(points_m, dtype=float)
    if pts.ndim == 2:
        pts = pts[None]
    if design.cores and core_model == "cells":
        return cell_field_basis(design, pts, floater_positions_m, floater_rotvecs_rad, iron_level)
    n, q = pts.shape[:2]
    flat = pts.reshape(-1, 3)
    k = len(design.coils)
    B0 = np.zeros((n * q, 3))
    for m in design.magnets:
        B0 += magnet_field_T(m, flat)
    Bk = np.zeros((k, n * q, 3))
    for i, c in enumerate(design.coils):
        Bk[i] = coil_field_per_ampere_T(c, flat, layers, grade_within)
    B0 = B0.reshape(n, q, 3)
    Bk = Bk.reshape(k, n, q, 3).transpose(1, 0, 2, 3)
    cores = core_models(design, core_order)
    nc = len(cores)
    J0 = np.zeros((n, nc, 3))
    Jk = np.zeros((n, k, nc, 3))
    Js = np.array([float(cm.core.saturation_polarization_T) for cm in cores])
    if nc:
        P, Rv = pose_arrays(floater_positions_m, floater_rotvecs_rad, "fixed_field_basis")
        if P.shape[0] != n:
            raise input_error("fixed_field_basis", "floater_positions_m", f"{n} poses like points_m", P.shape[0])
        for j, cm in enumerate(cores):
            X = cm.susceptibility_world()
            w = cm.mean_w
            # applied mean field from fixed magnets (pose independent) + floater (per pose)
            Bm = sum((magnet_field_T(m, cm.mean_pts_m) for m in design.magnets), np.zeros_like(cm.mean_pts_m))
            Bf = floater_field_T(design, cm.mean_pts_m, P, Rv)  # (n, qc, 3)
            mean0 = w @ Bm + np.einsum("q,nqi->ni", w, Bf)
            J0[:, j] = mean0 @ X.T
            for i, c in enumerate(design.coils):
                Jk[:, i, j] = (w @ coil_field_per_ampere_T(c, cm.mean_pts_m, layers, grade_within)) @ X.T
            G = cm.field_matrix(flat).reshape(n, q, 3, 3)
            B0 += np.einsum("nqij,nj->nqi", G, J0[:, j])
            Bk += np.einsum("nqij,nkj->nkqi", G, Jk[:, :, j])
    sat = np.zeros(n, dtype=bool)
    if nc:
        V = rated_current_box(design)
        for I in V:
            J = J0 + np.einsum("k,nkci->nci", I, Jk)
            sat |= np.any(np.linalg.norm(J, axis=-1) > Js[None, :], axis=1)
    return FieldBasis(B0, Bk, J0, Jk, Js, sat, "uniform" if nc else "none")


def cell_field_basis(design: Design, pts, positions_m, rotvecs_rad, level: str = FIELD_IRON_LEVEL) -> FieldBasis:
    """:func:`fixed_field_basis` with the ring-cell solve of the cores at a cell level
    (:data:`fields.physics.iron.LEVELS`)."""
    from fields.physics.iron import iron_model
    from fields.physics.iron_basis import iron_field_basis
    from fields.physics.iron_newton import SATURATION_FRACTION

    P, Rv = pose_arrays(positions_m, rotvecs_rad, "fixed_field_basis")
    n = pts.shape[0]
    if P.shape[0] != n:
        raise input_error("fixed_field_basis", "floater_positions_m", f"{n} poses like points_m", P.shape[0])
    model = iron_model(design, level)
    ib = iron_field_basis(model, pts, P, Rv)
    k = len(design.coils)
    Jk = np.broadcast_to(ib.Jk_T_per_A[None], (n,) + ib.Jk_T_per_A.shape)
    thr = SATURATION_FRACTION * np.asarray(ib.saturation_T, dtype=float)
    sat = np.zeros(n, dtype=bool)
    for I in rated_current_box(design):
        J = ib.J0_T + np.einsum("k,kci->ci", I, ib.Jk_T_per_A)[None] if k else ib.J0_T
        sat |= np.any(np.linalg.norm(J, axis=-1) > thr[None], axis=1)
    return FieldBasis(np.asarray(ib.B0_T), np.asarray(ib.Bk_T_per_A), np.asarray(ib.J0_T), Jk, thr, sat, "cells")


def fixed_field_T(design: Design, points_m, currents_A, floater_position_m=None, floater_rotvec_rad=None,
                  layers: int = 8, core_order: int = 8, core_model: str = "cells") -> np.ndarray:
    """Field of all fixed sources at given currents, with saturable cores.

    With ``core_model="cells"`` the cores' saturable magnetization is solved by Newton's method
    (:func:`fields.physics.iron_basis.iron_field_at_currents`); ``"uniform"`` clips the uniform
    core's polarization at saturation.

    Parameters
    ----------
    design : Design
    points_m : ndarray, shape (q, 3)
        Observers, world frame (m).
    currents_A : array_like, shape (k,)
        Coil currents (A).
    floater_position_m, floater_rotvec_rad : array_like, shape (3,), optional
        Floater pose; needed when the design has cores (its field magnetizes them).

    Returns
    -------
    ndarray, shape (q, 3)
        B (T). Nonlinear in the currents where a core saturates.
    """
    p = np.asarray(points_m, dtype=float).reshape(-1, 3)
    I = np.asarray(currents_A, dtype=float).reshape(-1)
    if I.size != len(design.coils):
        raise input_error("fixed_field_T", "currents_A", f"{len(design.coils)} values (one per coil)", I.size)
    check_core_model(core_model, "fixed_field_T")
    if design.cores and floater_position_m is None:
        raise input_error("fixed_field_T", "floater_position_m", "given when the design has cores")
    pos = np.zeros(3) if floater_position_m is None else np.asarray(floater_position_m, dtype=float)
    rv = np.zeros(3) if floater_rotvec_rad is None else np.asarray(floater_rotvec_rad, dtype=float)
    if design.cores and core_model == "cells":
        from fields.physics.iron import iron_model
        from fields.physics.iron_basis import iron_field_at_currents

        res = iron_field_at_currents(iron_model(design, FIELD_IRON_LEVEL), p[None], pos[None], rv[None], I)
        return np.asarray(res.B_T[0])
    fb = fixed_field_basis(design, p[None], pos[None], rv[None], layers, core_order, core_model="uniform")
    B = fb.B0_T[0] + np.einsum("k,kqi->qi", I, fb.Bk_T_per_A[0])
    if fb.core_J0_T.shape[1]:
        J = fb.core_J0_T[0] + np.einsum("k,kci->ci", I, fb.core_Jk_T_per_A[0])
        Jc, over = clip_polarization(J, fb.core_saturation_T)
        if np.any(over):
            cores = core_models(design, core_order)
            for j, cm in enumerate(cores):
                if over[j]:
                    B += cm.field_matrix(p) @ (Jc[j] - J[j])
    return B
