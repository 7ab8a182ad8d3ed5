"""Newton's method for saturable cell polarizations (the nonlinear part of the iron solve).

The Galerkin equations of the cells, ``h_i = V_i^-1 (b - D J)_i`` with ``h = mu0 H`` the cell
mean, are solved in their inverse form

    ``R(J) = V h(J) + D J - b = 0``,

``h(J)`` the inverse B-H law of each cell (:func:`fields.physics.bh.field_and_inverse_tensor`).
Its Jacobian ``V dh/dJ + D`` is symmetric and equals the linear matrix ``A = V / chi + D`` plus
the block-diagonal ``U = V (dh/dJ - I / chi)``, which is small where a cell is far from
saturation (``dh/dJ ~ 1/chi``) and large where it saturates. Each step applies the exact
inverse of ``A + U_S`` by the Sherman-Morrison-Woodbury identity (Hager, SIAM Rev. 31 (1989)
221), ``(A + P U P^T)^-1 = A^-1 - A^-1 P U (I + P^T A^-1 P U)^-1 P^T A^-1``, with ``S`` the cells
whose ``U`` exceeds ``STRONG_FRACTION`` of their volume; the neglected rest makes the
iteration converge linearly with a small rate there instead of quadratically. The start is the
linear solution; steps that would carry a cell beyond saturation are cut to half the remaining
distance (the inverse law is singular at ``Js``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import linalg

from fields.errors import SolverError
from fields.physics.bh import field_and_inverse_tensor

#: Newton stops when the largest polarization update is below this (T)
NEWTON_TOL_T = 1e-10
NEWTON_MAX_STEPS = 60
#: cells whose Jacobian correction |U| exceeds this fraction of their volume are updated exactly
STRONG_FRACTION = 1e-4
#: above this share of strong cells the full Jacobian is factored instead of the Woodbury update
DIRECT_SHARE = 0.5
#: cells above this fraction of their saturation polarization are reported as saturated
SATURATION_FRACTION = 0.8
#: stopping tolerance of the family sweeps (T): polarization changes of 1e-8 T move the force
#: by about 1e-8 of itself
SWEEP_TOL_T = 1e-8
#: a chord step that shrinks the update by less than this factor triggers a new Jacobian factor
CHORD_RATE = 0.25


@dataclass(frozen=True)
class IronSolution:
    """Result of a saturable cell solve.

    Attributes
    ----------
    J_T : ndarray, shape (c, 2)
        Cell polarizations ``(J_r, J_z)`` (T).
    h_T : ndarray, shape (c, 2)
        Cell-mean ``mu0 H`` (T).
    saturated : ndarray of bool, shape (c,)
        ``|J| > SATURATION_FRACTION Js``: there the force is no longer affine in current.
    steps : int
        Newton steps taken.
    update_T : float
        Largest polarization change of the last step (T), below the tolerance on return.
    residual_T : float
        Largest ``|h_curve(J) - V^-1 (b - D J)|`` per cell at return (T).
    """

    J_T: np.ndarray
    h_T: np.ndarray
    saturated: np.ndarray
    steps: int
    update_T: float
    residual_T: float

    @property
    def any_saturated(self) -> bool:
        return bool(np.any(self.saturated))


def newton_solve(model, b: np.ndarray, J_start=None, tol_T: float = NEWTON_TOL_T) -> IronSolution:
    """Saturable cell polarizations of :class:`fields.physics.iron.IronModel` for one right-hand side.

    Parameters
    ----------
    model : IronModel
    b : ndarray, shape (2c,)
        Right-hand side (T m^3).
    J_start : ndarray, shape (c, 2) or (2c,), optional
        Start (default: the linear solution).
    tol_T : float
        Stop when no cell's polarization changes by more than this (T).

    Returns
    -------
    IronSolution
    """
    c = model.cells
    n = 2 * c
    vol = model.mesh.volume_m3
    V = np.repeat(vol, 2)
    D = model.D
    Ainv = model.A_inv
    chi0 = model.chi_cells[::2]
    Js = model.saturation_cells_T
    groups = [(np.nonzero(model.cell_curve == i)[0], cv) for i, cv in enumerate(model.curves)]
    eye2 = np.eye(2)

    def inverse_law(J):
        Jc = J.reshape(c, 2)
        h = np.empty((c, 2))
        Ti = np.empty((c, 2, 2))
        for idx, cv in groups:
            h[idx], Ti[idx] = field_and_inverse_tensor(cv, Jc[idx])
        return h, Ti

    J = model.solve_linear(b) if J_start is None else np.asarray(J_start, dtype=float).reshape(-1).copy()
    J = _inside(J, Js, np.zeros(c))
    upd = np.inf
    for step in range(1, NEWTON_MAX_STEPS + 1):
        h, Ti = inverse_law(J)
        R = V * h.reshape(-1) + D @ J - b
        U = vol[:, None, None] * (Ti - eye2[None] / chi0[:, None, None])  # (c, 2, 2)
        strong = np.nonzero(np.abs(U).max(axis=(1, 2)) > STRONG_FRACTION * vol)[0]
        if strong.size > DIRECT_SHARE * c:
            Jac = _full_jacobian(model, U)
            step_vec = linalg.cho_solve(linalg.cho_factor(Jac), R)
        else:
            step_vec = Ainv @ R
            if strong.size:
                idx = np.stack((2 * strong, 2 * strong + 1), axis=1).reshape(-1)
                Us = _block_diagonal(U[strong])
                Z = Ainv[np.ix_(idx, idx)]
                corr = np.linalg.solve(np.eye(idx.size) + Z @ Us, step_vec[idx])
                step_vec = step_vec - Ainv[:, idx] @ (Us @ corr)
        J_new = _inside(J - step_vec, Js, np.linalg.norm(J.reshape(c, 2), axis=1))
        upd = float(np.max(np.abs(J_new - J))) if n else 0.0
        J = J_new
        if upd <= tol_T:
            break
    else:
        raise SolverError(f"iron solve: Newton did not reach {tol_T:g} T in {NEWTON_MAX_STEPS} steps; "
                          f"last update {upd:g} T")
    h_mean = ((b - D @ J) / V).reshape(c, 2)
    h_law, _ = inverse_law(J)
    Jc = J.reshape(c, 2)
    sat = np.linalg.norm(Jc, axis=1) > SATURATION_FRACTION * Js
    return IronSolution(Jc, h_mean, sat, step, upd, float(np.max(np.abs(h_law - h_mean))) if c else 0.0)


def _block_diagonal(U: np.ndarray) -> np.ndarray:
    """Dense block-diagonal matrix (2s, 2s) of 2x2 blocks U (s, 2, 2)."""
    s = U.shape[0]
    out = np.zeros((s, 2, s, 2))
    i = np.arange(s)
    out[i, :, i, :] = U
    return out.reshape(2 * s, 2 * s)


def _full_jacobian(model, U: np.ndarray) -> np.ndarray:
    """``A + U`` with the block-diagonal U (c, 2, 2) added in place of a copy of A's diagonal blocks."""
    c = U.shape[0]
    A = model.D + np.diag(np.repeat(model.mesh.volume_m3, 2) / model.chi_cells)
    Ab = A.reshape(c, 2, c, 2)
    idx = np.arange(c)
    Ab[idx, :, idx, :] += U
    return Ab.reshape(2 * c, 2 * c)


def _inside(J: np.ndarray, Js: np.ndarray, J_old_mag: np.ndarray) -> np.ndarray:
    """Cut cell polarizations that reach saturation to half the distance from the old magnitude."""
    Jc = J.reshape(-1, 2).copy()
    mag = np.linalg.norm(Jc, axis=1)
    cap = 0.5 * (np.minimum(J_old_mag, Js) + Js)
    over = mag >= cap
    if np.any(over):
        Jc[over] *= (cap[over] / mag[over])[:, None] * (1.0 - 1e-12)
    return Jc.reshape(-1)


def _jacobian_factor(model, J: np.ndarray, groups, chi0, vol):
    """Cholesky factor of the exact Jacobian ``A + U(J)`` at polarizations J (2c,)."""
    c = model.cells
    Ti = np.empty((c, 2, 2))
    Jc = J.reshape(c, 2)
    for idx, cv in groups:
        _, Ti[idx] = field_and_inverse_tensor(cv, Jc[idx])
    U = vol[:, None, None] * (Ti - np.eye(2)[None] / chi0[:, None, None])
    return linalg.cho_factor(_full_jacobian(model, U), check_finite=False)


def newton_sweep(model, bs, tol_T: float = SWEEP_TOL_T) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Saturable polarizations for a sequence of nearby right-hand sides (a family along gap or current).

    The first right-hand side is solved by :func:`newton_solve`. Each next one starts from the
    previous solution plus the Jacobian's response to the change of ``b`` (a first-order
    predictor) and takes chord steps with the last factored Jacobian (modified Newton; Kelley,
    Iterative Methods for Linear and Nonlinear Equations, SIAM 1995, ch. 5); the Jacobian is
    refactored at the current iterate when a step contracts by less than ``CHORD_RATE``.

    Parameters
    ----------
    model : IronModel
    bs : ndarray, shape (m, 2c)
        Right-hand sides, ordered so that neighbours are close.
    tol_T : float
        Stop when no cell's polarization changes by more than this (T).

    Returns
    -------
    J_T : ndarray, shape (m, c, 2)
    saturated : ndarray of bool, shape (m, c)
        ``|J| > SATURATION_FRACTION Js`` per cell.
    steps : ndarray of int, shape (m,)
        Chord or Newton steps per right-hand side.
    """
    bs = np.atleast_2d(np.asarray(bs, dtype=float))
    m = bs.shape[0]
    c = model.cells
    vol = model.mesh.volume_m3
    V = np.repeat(vol, 2)
    D = model.D
    chi0 = model.chi_cells[::2]
    Js = model.saturation_cells_T
    groups = [(np.nonzero(model.cell_curve == i)[0], cv) for i, cv in enumerate(model.curves)]
    out = np.empty((m, 2 * c))
    steps = np.zeros(m, dtype=int)
    fac = None
    cache = getattr(model, "_field_cache", {})
    for i in range(m):
        if fac is None:
            start = _warm_start(model, bs[i], cache.get("last_solution"), groups, V)
            sol = newton_solve(model, bs[i], start, tol_T)
            out[i] = sol.J_T.reshape(-1)
            steps[i] = sol.steps
            fac = _jacobian_factor(model, out[i], groups, chi0, vol)
            continue
        J = _inside(out[i - 1] + linalg.cho_solve(fac, bs[i] - bs[i - 1], check_finite=False), Js,
                    np.linalg.norm(out[i - 1].reshape(c, 2), axis=1))
        prev = np.inf
        for step in range(1, NEWTON_MAX_STEPS + 1):
            h = np.empty((c, 2))
            Jc = J.reshape(c, 2)
            for idx, cv in groups:
                h[idx], _ = field_and_inverse_tensor(cv, Jc[idx])
            R = V * h.reshape(-1) + D @ J - bs[i]
            J_new = _inside(J - linalg.cho_solve(fac, R, check_finite=False), Js, np.linalg.norm(Jc, axis=1))
            upd = float(np.max(np.abs(J_new - J)))
            J = J_new
            if upd <= tol_T:
                break
            if upd > CHORD_RATE * prev:
                fac = _jacobian_factor(model, J, groups, chi0, vol)
            prev = upd
        else:
            raise SolverError(f"iron solve: chord steps did not reach {tol_T:g} T in {NEWTON_MAX_STEPS} steps; "
                              f"last update {upd:g} T")
        out[i] = J
        steps[i] = step
    if m:
        cache["last_solution"] = (bs[-1].copy(), out[-1].copy())
    Jm = out.reshape(m, c, 2)
    return Jm, np.linalg.norm(Jm, axis=2) > SATURATION_FRACTION * Js[None], steps


def _warm_start(model, b, last, groups, V):
    """The previous sweep's last solution moved by the linear response to the change of b, when
    its residual is below the linear solution's (else None: start from the linear solution)."""
    if last is None or last[0].shape != b.shape:
        return None
    J_lin = model.solve_linear(b)
    J_w = _inside(last[1] + model.A_inv @ (b - last[0]), model.saturation_cells_T,
                  np.linalg.norm(last[1].reshape(-1, 2), axis=1))

    def resid(J):
        h = np.empty((model.cells, 2))
        Jc = J.reshape(-1, 2)
        for idx, cv in groups:
            h[idx], _ = field_and_inverse_tensor(cv, Jc[idx])
        return float(np.max(np.abs(V * h.reshape(-1) + model.D @ J - b)))

    try:
        return J_w if resid(J_w) < resid(_inside(J_lin, model.saturation_cells_T, np.zeros(model.cells))) else None
    except FloatingPointError:
        return None


def incremental_response(model, J_T, b) -> np.ndarray:
    """``dJ = (A + U(J))^-1 b``: the saturable cells' response (2c,) or (2c, m) to a small change of
    the right-hand side ``b`` (2c,) or (2c, m) at polarizations J (c, 2) (the Jacobian of the
    Galerkin equations, as in :func:`newton_solve`)."""
    vol = model.mesh.volume_m3
    chi0 = model.chi_cells[::2]
    groups = [(np.nonzero(model.cell_curve == i)[0], cv) for i, cv in enumerate(model.curves)]
    fac = _jacobian_factor(model, np.asarray(J_T, dtype=float).reshape(-1), groups, chi0, vol)
    return linalg.cho_solve(fac, np.asarray(b, dtype=float), check_finite=False)
