"""The field of the fixed sources with solved iron, split by linearity in the coil currents.

``B(I) = B0 + sum_k I_k Bk`` at observers of n floater poses, with the same meaning as
:class:`fields.physics.field_basis.FieldBasis` (``B0_T`` fixed magnets plus the iron magnetized by
them and by the floater at its pose; ``Bk_T_per_A`` coil ``k`` per ampere plus the iron's response
to it), for linear iron at the initial susceptibility. :func:`iron_field_at_currents` gives the
saturable field at one set of currents (Newton per pose) and which cells saturate.

The ring cells carry the azimuthally symmetric (``m = 0``) magnetization, exact when the floater
is on the cores' axis and untilted (its right-hand side is then the closed-form sheet flux). For
other poses (``axisymmetric`` False) the harmonics ``m = 1..M`` of the iron's polarization are
solved too (:mod:`fields.physics.iron_fourier`, ``harmonics`` keyword, default
:data:`fields.physics.iron_fourier.DEFAULT_HARMONICS`; 0 keeps the azimuthal mean only), and the
largest field of each harmonic at the observers is reported (``harmonic_size_T``): the last
one kept estimates the truncation error. With saturation the harmonics are linearized about
the axisymmetric saturated state (approximate).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.errors import InputError
from fields.physics.checks import input_error
from fields.physics.coils import coil_field_per_ampere_T
from fields.physics.iron import IronModel
from fields.physics.iron_axis import floater_rhs_axis
from fields.physics.iron_fourier import DEFAULT_HARMONICS, HarmonicIron, harmonic_iron
from fields.physics.magnets import floater_field_T, magnet_field_T


@dataclass(frozen=True)
class IronFieldBasis:
    """Field of coils, fixed magnets and solved (linear) iron at observers of n poses.

    Attributes
    ----------
    B0_T : ndarray, shape (n, q, 3)
    Bk_T_per_A : ndarray, shape (n, k, q, 3)
    J0_T : ndarray, shape (n, c, 2)
        Cell polarizations at zero current (fixed magnets and floater).
    Jk_T_per_A : ndarray, shape (k, c, 2)
        Cell polarizations per ampere of each coil (pose independent).
    axisymmetric : ndarray of bool, shape (n,)
        The pose is on the axis and untilted: the iron response is exact (no ``m >= 1`` part).
    saturation_T : ndarray, shape (c,)
        Saturation polarization of each cell.
    J0_harmonics_T : ndarray, shape (n, M, 2, 3c) or None
        Harmonics ``m = 1..M`` (cos and sin families, ``(a, b, c)`` per cell, see
        :mod:`fields.physics.iron_fourier`) of the polarization at zero current; None without
        harmonics.
    Jk_harmonics_T_per_A : ndarray, shape (k, M, 2, 3c) or None
        The same per ampere of each coil (zero for coils coaxial with the cores).
    harmonic_size_T : ndarray, shape (n, M + 1) or None
        Largest ``|B|`` at the observers of the iron's field of each harmonic ``m = 0..M`` (zero
        current and every coil at 1 A, the larger): the last column estimates the truncation error.
    harmonic_iron : HarmonicIron or None
    """

    B0_T: np.ndarray
    Bk_T_per_A: np.ndarray
    J0_T: np.ndarray
    Jk_T_per_A: np.ndarray
    axisymmetric: np.ndarray
    saturation_T: np.ndarray
    J0_harmonics_T: np.ndarray | None = None
    Jk_harmonics_T_per_A: np.ndarray | None = None
    harmonic_size_T: np.ndarray | None = None
    harmonic_iron: HarmonicIron | None = None

    @property
    def truncation_T(self) -> np.ndarray:
        """Field size of the last harmonic kept (n,) (T); zero on the axis, the whole ``m >= 1``
        response bound (unknown, NaN) without harmonics off the axis."""
        if self.harmonic_size_T is None:
            return np.where(self.axisymmetric, 0.0, np.nan)
        return self.harmonic_size_T[:, -1]

    def field_T(self, currents_A) -> np.ndarray:
        """Linear field (n, q, 3) at currents (k,)."""
        I = np.asarray(currents_A, dtype=float).reshape(-1)
        return self.B0_T + np.einsum("k,nkqi->nqi", I, self.Bk_T_per_A)

    def saturation_ratio(self, currents_A) -> np.ndarray:
        """Largest ``|J| / Js`` over the cells (n,) of the linear solution at currents (k,)."""
        I = np.asarray(currents_A, dtype=float).reshape(-1)
        J = self.J0_T + np.einsum("k,kci->ci", I, self.Jk_T_per_A)[None]
        if self.J0_harmonics_T is None:
            return np.max(np.linalg.norm(J, axis=-1) / self.saturation_T[None], axis=1)
        Jh = self.J0_harmonics_T + np.einsum("k,kmfx->mfx", I, self.Jk_harmonics_T_per_A)[None]
        Jp = self.harmonic_iron.cell_polarization_T(J, Jh)  # (n, c, a, 3)
        return np.max(np.linalg.norm(Jp, axis=-1) / self.saturation_T[None, :, None], axis=(1, 2))


def _poses(positions_m, rotvecs_rad):
    P = np.atleast_2d(np.asarray(positions_m, dtype=float))
    Rv = np.atleast_2d(np.asarray(rotvecs_rad, dtype=float))
    if Rv.shape[0] == 1 and P.shape[0] > 1:
        Rv = np.repeat(Rv, P.shape[0], axis=0)
    if P.shape != Rv.shape or P.shape[1] != 3:
        raise input_error("iron_field_basis", "positions_m and rotvecs_rad", "arrays of shape (n, 3)",
                          (P.shape, Rv.shape))
    return P, Rv


def _axial_rhs(model: IronModel, P, Rv) -> tuple[np.ndarray, np.ndarray]:
    """Floater right-hand sides (n, 2c) filled at the on-axis poses by the exact axial route, and
    the mask of those poses (all False when the floater's magnets are off its axis)."""
    axial = (np.all(np.abs(P[:, :2] - model.axis_xy_m) <= 1e-12, axis=1) & np.all(Rv == 0.0, axis=1))
    b = np.zeros((P.shape[0], 2 * model.cells))
    if np.any(axial):
        try:
            b[axial] = floater_rhs_axis(model, P[axial, 2])
        except InputError:  # magnets off the floater axis: not axisymmetric after all
            axial[:] = False
    return b, axial


def floater_rhs(model: IronModel, positions_m, rotvecs_rad) -> tuple[np.ndarray, np.ndarray]:
    """Right-hand sides (n, 2c) of the floater at n poses and the mask (n,) of exact (on-axis) poses."""
    d = model.design
    P, Rv = _poses(positions_m, rotvecs_rad)
    b, axial = _axial_rhs(model, P, Rv)
    other = np.flatnonzero(~axial)
    for blk in _pose_blocks(other, VOLUME_POINTS_PER_CELL * model.cells):
        b[blk] = model.rhs_field(lambda q, blk=blk: floater_field_T(d, q, P[blk], Rv[blk]))
    return b, axial


#: field evaluations (poses x sample points) per block of the floater's right-hand sides: bounds
#: the temporary memory of the magnet kernels to some 100 MB whatever the number of poses
RHS_BLOCK_POINTS = 400_000


#: sample points per cell of IronModel.rhs_field's default volume rule (order 3 x 3, 16 angles)
VOLUME_POINTS_PER_CELL = 144


def _pose_blocks(idx: np.ndarray, points_per_pose: int):
    """``idx`` split into blocks of poses whose sample points stay under RHS_BLOCK_POINTS."""
    per = max(1, RHS_BLOCK_POINTS // max(1, int(points_per_pose)))
    return [idx[i:i + per] for i in range(0, idx.size, per)]


def _harmonics_of(model: IronModel, harmonics) -> HarmonicIron | None:
    M = DEFAULT_HARMONICS if harmonics is None else harmonics
    if not isinstance(M, (int, np.integer)) or M < 0:
        raise InputError(f"iron_field_basis: harmonics must be an integer >= 0; got {harmonics!r}.")
    return harmonic_iron(model, int(M)) if M > 0 else None


def _floater_rhs_harmonics(model: IronModel, H: HarmonicIron | None, P, Rv):
    """Floater right-hand sides: ``m = 0`` (n, 2c), harmonics (n, M, 2, 3c) or None, on-axis mask (n,)."""
    if H is None:
        b, axial = floater_rhs(model, P, Rv)
        return b, None, axial
    d = model.design
    b, axial = _axial_rhs(model, P, Rv)
    bh = np.zeros((P.shape[0], H.harmonics, 2, 3 * model.cells))
    n_h = int(np.prod(H.sample_points()[0].shape[:-1]))
    for blk in _pose_blocks(np.flatnonzero(~axial), n_h):
        b[blk], bh[blk] = H.rhs_field(lambda q, blk=blk: floater_field_T(d, q, P[blk], Rv[blk]))
    return b, bh, axial


def iron_field_basis(model: IronModel, points_m, positions_m, rotvecs_rad, harmonics: int | None = None) -> IronFieldBasis:
    """Linear field basis with solved iron at observers (n, q, 3) of n floater poses.

    Parameters
    ----------
    model : IronModel
        From :func:`fields.physics.iron.iron_model`.
    points_m : ndarray, shape (n, q, 3) or (q, 3)
        Observers, world frame (m); they must keep clear of the cores by about a cell size.
    positions_m, rotvecs_rad : ndarray, shape (n, 3)
        Floater poses (frame origin and rotation vector).
    harmonics : int, optional
        Highest azimuthal harmonic of the iron's response (default
        :data:`fields.physics.iron_fourier.DEFAULT_HARMONICS`; 0: the azimuthal mean only, as
        the ring cells alone give it).

    Returns
    -------
    IronFieldBasis
    """
    d = model.design
    P, Rv = _poses(positions_m, rotvecs_rad)
    H = _harmonics_of(model, harmonics)
    pts = np.asarray(points_m, dtype=float)
    if pts.ndim == 2:
        pts = np.broadcast_to(pts, (P.shape[0],) + pts.shape)
    n, q = pts.shape[:2]
    if n != P.shape[0]:
        raise input_error("iron_field_basis", "points_m", f"{P.shape[0]} poses like positions_m", n)
    flat = pts.reshape(-1, 3)
    k = len(d.coils)
    layers = model.settings["layers"]
    B0 = np.zeros((n * q, 3))
    for m in d.magnets:
        B0 += magnet_field_T(m, flat)
    Bk = np.stack([coil_field_per_ampere_T(c, flat, layers) for c in d.coils]) if k else np.zeros((0, n * q, 3))
    b_f, bh_f, axial = _floater_rhs_harmonics(model, H, P, Rv)
    J0 = model.J_magnets_T[None] + model.solve_linear(b_f)  # (n, 2c)
    # the iron's field is linear in the face currents: evaluate per pose (observers move with it)
    B0 = B0.reshape(n, q, 3)
    Bk = Bk.reshape(k, n, q, 3).transpose(1, 0, 2, 3).copy()
    J0h = Jkh = size = None
    if H is not None:
        J0h = H.J_magnets_T[None] + H.solve_linear(bh_f)  # (n, M, 2, 3c)
        Jkh = H.J_coils_T_per_A
        coil_h = bool(k) and bool(np.any(Jkh != 0.0))
        size = np.zeros((n, H.harmonics + 1))
    for i in range(n):
        Js = np.vstack((J0[i][None], model.J_coils_T_per_A)) if k else J0[i][None]
        B = _cells_field_many(model, Js, pts[i])
        B0[i] += B[0]
        Bk[i] += B[1:]
        if H is None:
            continue
        size[i, 0] = np.max(np.linalg.norm(B, axis=-1))
        if np.any(J0h[i] != 0.0) or coil_h:
            sets = np.concatenate((J0h[i][None], Jkh)) if coil_h else J0h[i][None]
            Bh = H.field_T(sets, pts[i])  # (s, M, q, 3)
            B0[i] += Bh[0].sum(axis=0)
            if coil_h:
                Bk[i] += Bh[1:].sum(axis=1)
            size[i, 1:] = np.max(np.linalg.norm(Bh, axis=-1), axis=(0, 2))
    return IronFieldBasis(B0, Bk, J0.reshape(n, -1, 2), model.J_coils_T_per_A.reshape(k, model.cells, 2), axial,
                          model.saturation_cells_T, J0h, Jkh, size, H)


def _cells_field_many(model: IronModel, Js: np.ndarray, points_m: np.ndarray) -> np.ndarray:
    """B (s, q, 3) of s polarization sets (s, 2c) at points (q, 3): one kernel pass per face group."""
    return np.stack([model.field_T(J, points_m) for J in Js])


@dataclass(frozen=True)
class IronFieldAtCurrents:
    """Saturable field at one set of currents.

    Attributes
    ----------
    B_T : ndarray, shape (n, q, 3)
    J_T : ndarray, shape (n, c, 2)
        The axisymmetric (``m = 0``) part of the cell polarizations.
    saturated_cells : tuple of ndarray of int
        Per pose, the cells above the saturation fraction (where the force stops being affine in
        current), judged on the axisymmetric part.
    axisymmetric : ndarray of bool, shape (n,)
    newton_steps : ndarray of int, shape (n,)
    J_harmonics_T : ndarray, shape (n, M, 2, 3c) or None
        Harmonics ``m = 1..M``, linearized about the saturated axisymmetric state (approximate
        where the harmonics themselves saturate cells).
    harmonic_size_T : ndarray, shape (n, M + 1) or None
        Largest ``|B|`` at the observers of the iron's field per harmonic; the last column
        estimates the truncation error.
    """

    B_T: np.ndarray
    J_T: np.ndarray
    saturated_cells: tuple
    axisymmetric: np.ndarray
    newton_steps: np.ndarray
    J_harmonics_T: np.ndarray | None = None
    harmonic_size_T: np.ndarray | None = None

    @property
    def truncation_T(self) -> np.ndarray:
        """Field size of the last harmonic kept (n,) (T); NaN off the axis without harmonics."""
        if self.harmonic_size_T is None:
            return np.where(self.axisymmetric, 0.0, np.nan)
        return self.harmonic_size_T[:, -1]


def iron_field_at_currents(model: IronModel, points_m, positions_m, rotvecs_rad, currents_A,
                           harmonics: int | None = None) -> IronFieldAtCurrents:
    """Field with saturable iron (Newton per pose) at observers (n, q, 3) and currents (k,).

    The axisymmetric part is solved by Newton's method; the harmonics ``m = 1..harmonics``
    (default :data:`fields.physics.iron_fourier.DEFAULT_HARMONICS`) are solved linearized about
    it with the local inverse differential tensor (an approximation, exact for linear iron).
    """
    d = model.design
    P, Rv = _poses(positions_m, rotvecs_rad)
    H = _harmonics_of(model, harmonics)
    I = np.asarray(currents_A, dtype=float).reshape(-1)
    if I.size != len(d.coils):
        raise input_error("iron_field_at_currents", "currents_A", f"{len(d.coils)} values (one per coil)", I.size)
    pts = np.asarray(points_m, dtype=float)
    if pts.ndim == 2:
        pts = np.broadcast_to(pts, (P.shape[0],) + pts.shape)
    n, q = pts.shape[:2]
    flat = pts.reshape(-1, 3)
    B = np.zeros((n * q, 3))
    for m in d.magnets:
        B += magnet_field_T(m, flat)
    for Ik, c in zip(I, d.coils):
        B += Ik * coil_field_per_ampere_T(c, flat, model.settings["layers"])
    B = B.reshape(n, q, 3)
    b_f, bh_f, axial = _floater_rhs_harmonics(model, H, P, Rv)
    Js = np.zeros((n, model.cells, 2))
    sat, steps = [], np.zeros(n, dtype=int)
    Jh = size = None
    if H is not None:
        bh = bh_f + H.b_magnets[None] + np.einsum("k,kmfx->mfx", I, H.b_coils)[None]
        Jh = np.zeros_like(bh)
        size = np.zeros((n, H.harmonics + 1))
    B0s = []
    for i in range(n):
        sol = model.solve(model.b_magnets + I @ model.b_coils + b_f[i])
        Js[i] = sol.J_T
        B0 = model.field_T(sol.J_T, pts[i])
        B[i] += B0
        B0s.append(B0)
        sat.append(np.nonzero(sol.saturated)[0])
        steps[i] = sol.steps
    if H is not None:
        live = np.flatnonzero(np.any(bh.reshape(n, -1) != 0.0, axis=1))
        Jh[live] = H.solve_linearized_many(bh[live], Js[live])
    for i in range(n):
        B0 = B0s[i]
        if H is not None and np.any(bh[i] != 0.0):
            Bh = H.field_T(Jh[i][None], pts[i])[0]
            B[i] += Bh.sum(axis=0)
            size[i, 0] = np.max(np.linalg.norm(B0, axis=-1))
            size[i, 1:] = np.max(np.linalg.norm(Bh, axis=-1), axis=1)
        elif H is not None:
            size[i, 0] = np.max(np.linalg.norm(B0, axis=-1))
    return IronFieldAtCurrents(B, Js, tuple(sat), axial, steps, Jh, size)
