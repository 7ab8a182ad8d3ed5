"""The axial force family of an on-axis floater under solved soft-iron cores, along a range of heights.

Every piece of the axial force (the linear-iron force at zero current and per ampere, and the
saturable correction ``delta = F - F_linear`` at each current of the family) is an analytic
function of the floater height away from contact. The family is therefore evaluated at
Chebyshev-Lobatto heights and interpolated (with exact derivatives for ``k_z``) at every
requested height: Chebyshev interpolation of a function analytic inside the Bernstein ellipse
of parameter ``rho`` converges like ``rho^-n`` (Trefethen, Approximation Theory and
Approximation Practice, SIAM 2013, Theorem 8.2). The nearest singularity is contact with a
fixed body (the cap discs meet a face sheet), which fixes ``rho`` from the smallest clearance;
the node count follows from it. The interpolation error is estimated by the last two Chebyshev
coefficients (ibid., ch. 3).

The saturable correction is smaller than the linear force and is solved (Newton, one
continuation sweep) at a subset of the nodes (``SATURABLE_NODES``). Each level's interpolation
tail is part of the error estimate; the discretisation error is the difference between the
``"fine"`` level (reported) and the ``"coarse"`` level of the cell solve, which also differ in
their face quadrature and coil layers.

When there are fewer requested heights than nodes, the family is evaluated at the heights
themselves and ``k_z`` by central differences (step :data:`DERIVATIVE_STEP_M`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.polynomial import chebyshev as cheb

from fields.model.design import Design
from fields.physics.iron import iron_model
from fields.physics.iron_axis import axial_iron_parts, saturable_axial_forces

#: cell-solve levels: the reported one and its partner for the error estimate
REPORTED_LEVEL = "fine"
CHECK_LEVEL = "coarse"
#: target relative size of the last Chebyshev coefficients of the linear parts
INTERPOLATION_TOL = 1e-10
#: node counts are 2^m + 1 (nested Lobatto sets), at most this many for the linear parts
MAX_NODES = 65
#: Lobatto nodes for the saturable correction (a nested subset of the linear nodes)
SATURABLE_NODES = 17
#: central-difference step of the direct route (m)
DERIVATIVE_STEP_M = 1e-6
#: hover current: secant steps until the force matches the weight to this share, tighter Newton
HOVER_RTOL = 1e-12
HOVER_MAX_STEPS = 12
HOVER_TOL_T = 1e-11


@dataclass(frozen=True)
class IronAxialFamily:
    """Axial force on the on-axis floater at g heights and c current rows, saturable iron.

    Attributes
    ----------
    floater_z_m : ndarray, shape (g,)
    currents_A : ndarray, shape (c, k)
    Fz_N : ndarray, shape (g, c)
        Force along +z with saturable iron, ``"fine"`` level (N).
    dFz_dz_N_per_m : ndarray, shape (g, c)
    Fz_linear_N : ndarray, shape (g, c)
        With linear iron (initial susceptibility): ``F0 + sum_k I_k Fk``.
    F0_N, dF0_dz_N_per_m : ndarray, shape (g,)
    Fk_N_per_A, dFk_dz_N_per_A_m : ndarray, shape (g, k)
    error_Fz_N : ndarray, shape (g, c)
        ``|fine - coarse|`` of the saturable force plus both interpolation tails (N).
    error_linear_N : ndarray, shape (g, c)
        The same for the linear force.
    saturated : ndarray of bool, shape (g, c)
        Some cell above the saturation fraction at a neighbouring saturable node.
    nodes : int
        Heights at which the cell solve ran (0: evaluated at the heights themselves).
    """

    floater_z_m: np.ndarray
    currents_A: np.ndarray
    Fz_N: np.ndarray
    dFz_dz_N_per_m: np.ndarray
    Fz_linear_N: np.ndarray
    F0_N: np.ndarray
    dF0_dz_N_per_m: np.ndarray
    Fk_N_per_A: np.ndarray
    dFk_dz_N_per_A_m: np.ndarray
    error_Fz_N: np.ndarray
    error_linear_N: np.ndarray
    saturated: np.ndarray
    nodes: int

    @property
    def nonlinear_N(self) -> np.ndarray:
        """``F - F_linear`` (g, c) (N)."""
        return self.Fz_N - self.Fz_linear_N


def _node_count(z_lo: float, z_hi: float, clearance_m: float) -> int:
    """Lobatto node count 2^m + 1 for interpolation to INTERPOLATION_TOL on [z_lo, z_hi] when
    the nearest singularity lies ``clearance_m`` beyond the interval's low end."""
    half = 0.5 * (z_hi - z_lo)
    if half <= 0.0:
        return 1
    x = 1.0 + max(clearance_m, 1e-9) / half
    rho = x + np.sqrt(x * x - 1.0)
    need = int(np.ceil(np.log(1.0 / INTERPOLATION_TOL) / np.log(rho))) + 1
    n = 5
    while n < need and n < MAX_NODES:
        n = 2 * n - 1
    return n if need <= MAX_NODES else MAX_NODES + 1


def lobatto_points(n: int) -> np.ndarray:
    """Chebyshev-Lobatto points (n,) on [-1, 1], increasing."""
    return np.cos(np.pi * np.arange(n) / (n - 1))[::-1]


class ChebyshevInterpolant:
    """Chebyshev interpolant on [lo, hi] of values (n, ...) at the n Lobatto points of
    :func:`lobatto_points` mapped there; ``tail`` is the sum of the last two coefficients'
    magnitudes (the interpolation error estimate)."""

    def __init__(self, lo, hi, values):
        v = np.asarray(values, dtype=float)
        n = v.shape[0]
        self.mid, self.half = 0.5 * (lo + hi), 0.5 * (hi - lo)
        flat = v.reshape(n, -1)
        self.c = cheb.chebfit(lobatto_points(n), flat, n - 1)  # (n, m)
        self.shape = v.shape[1:]
        scale = np.max(np.abs(flat), axis=0)
        tail = np.abs(self.c[-1]) + (np.abs(self.c[-2]) if n > 1 else 0.0)
        self.tail = np.maximum(tail, 4 * np.finfo(float).eps * scale).reshape(self.shape)

    def __call__(self, z):
        t = (np.asarray(z, dtype=float) - self.mid) / self.half
        return cheb.chebval(t, self.c).T.reshape((-1,) + self.shape)

    def derivative(self, z):
        t = (np.asarray(z, dtype=float) - self.mid) / self.half
        return (cheb.chebval(t, cheb.chebder(self.c)) / self.half).T.reshape((-1,) + self.shape)


def _pieces(model, z, I):
    """Linear pieces and the saturable forces at heights z (n,) for currents I (c, k)."""
    parts = axial_iron_parts(model, z)
    lin = parts.F0_N[:, None] + parts.Fk_N_per_A @ I.T
    return parts, lin


def iron_axial_family(design: Design, floater_z_m, currents_A, clearance_m: float) -> IronAxialFamily:
    """The axial force family of the on-axis floater with saturable iron.

    Parameters
    ----------
    design : Design
        Axisymmetric (coils, cores and magnets coaxial, the floater on that axis, untilted).
    floater_z_m : array_like, shape (g,)
        Heights of the floater frame origin (m), clear of every body.
    currents_A : array_like, shape (c, k)
        Current rows of the family.
    clearance_m : float
        Smallest clearance between the floater and a fixed body over the heights (m): the
        distance to the nearest singularity of the force as a function of height.

    Returns
    -------
    IronAxialFamily
    """
    z = np.asarray(floater_z_m, dtype=float).reshape(-1)
    I = np.atleast_2d(np.asarray(currents_A, dtype=float))
    models = {lv: iron_model(design, lv) for lv in (REPORTED_LEVEL, CHECK_LEVEL)}
    lo, hi = float(z.min()), float(z.max())
    n = _node_count(lo, hi, clearance_m)
    if n >= z.size or n > MAX_NODES or hi - lo <= 0.0:
        return _direct_family(models, z, I)
    k = I.shape[1]
    zn = 0.5 * (lo + hi) + 0.5 * (hi - lo) * lobatto_points(n)
    ns = min(SATURABLE_NODES, n)
    sub = np.arange(0, n, (n - 1) // (ns - 1))
    out = {}
    for lv, m in models.items():
        parts, lin = _pieces(m, zn, I)
        Fs, _, nsat, _ = saturable_axial_forces(m, _subset(parts, sub), I)
        lin_i = ChebyshevInterpolant(lo, hi, np.concatenate((parts.F0_N[:, None], parts.Fk_N_per_A), axis=1))
        dlt_i = ChebyshevInterpolant(lo, hi, Fs - lin[sub])
        out[lv] = (lin_i, dlt_i, nsat)
    lin_i, dlt_i, nsat = out[REPORTED_LEVEL]
    P = lin_i(z)
    dP = lin_i.derivative(z)
    F0, Fk, dF0, dFk = P[:, 0], P[:, 1:], dP[:, 0], dP[:, 1:]
    Flin = F0[:, None] + Fk @ I.T
    F = Flin + dlt_i(z)
    dF = dF0[:, None] + dFk @ I.T + dlt_i.derivative(z)
    lin_c, dlt_c, _ = out[CHECK_LEVEL]
    Pc = lin_c(z)
    Flin_c = Pc[:, 0][:, None] + Pc[:, 1:] @ I.T
    absI = np.abs(np.concatenate((np.ones((I.shape[0], 1)), I), axis=1))  # (c, 1 + k)
    tail_lin = (absI @ (lin_i.tail + lin_c.tail))[None, :]
    err_lin = np.abs(Flin - Flin_c) + tail_lin
    err = np.abs(F - (Flin_c + dlt_c(z))) + tail_lin + (dlt_i.tail + dlt_c.tail)[None, :]
    zs = zn[sub]
    j = np.clip(np.searchsorted(zs, z), 1, zs.size - 1)
    sat = (nsat[j] > 0) | (nsat[j - 1] > 0)
    return IronAxialFamily(z, I, F, dF, Flin, F0, dF0, Fk.reshape(-1, k), dFk.reshape(-1, k), err, err_lin, sat, n)


def _saturable_at(model, parts, rows) -> np.ndarray:
    """Saturable force (n,) at each height of ``parts`` with its own current row (n, k)."""
    from fields.physics.iron_newton import newton_sweep

    bs = model.b_magnets[None] + rows @ model.b_coils + parts.b_floater
    J, _, _ = newton_sweep(model, bs, HOVER_TOL_T)
    return parts.source_F0_N + np.einsum("nk,nk->n", parts.source_Fk_N_per_A, rows) + np.einsum(
        "nx,nx->n", parts.force_per_J, J.reshape(J.shape[0], -1))


def hover_points(model, z, pattern, target_N, guess_A, step_m: float = DERIVATIVE_STEP_M):
    """Hover current along ``pattern`` (the drive current whose saturable force along +z equals
    ``target_N``), dF/dI and -dF/dz there, at heights z (n,), by the secant method from
    ``guess_A`` (n,) (NaN where the guess is NaN or the iteration leaves +-10x the guess scale).

    Returns
    -------
    current_A, dF_dI_N_per_A, kz_N_per_m : ndarray, shape (n,)
    """
    z = np.asarray(z, dtype=float)
    d = np.asarray(pattern, dtype=float)
    ok = np.isfinite(guess_A)
    n = z.size
    out = [np.full(n, np.nan) for _ in range(3)]
    if not np.any(ok):
        return tuple(out)
    zz = z[ok]
    parts = axial_iron_parts(model, zz)
    I0 = np.asarray(guess_A, dtype=float)[ok]
    dI = 1e-3 * max(1.0, float(np.max(np.abs(I0))))
    f0 = _saturable_at(model, parts, I0[:, None] * d) - target_N
    I1 = I0 + dI
    f1 = _saturable_at(model, parts, I1[:, None] * d) - target_N
    for _ in range(HOVER_MAX_STEPS):
        with np.errstate(divide="ignore", invalid="ignore"):
            I2 = np.where(f1 != f0, I1 - f1 * (I1 - I0) / (f1 - f0), I1)
        I0, f0, I1 = I1, f1, I2
        f1 = _saturable_at(model, parts, I1[:, None] * d) - target_N
        if np.all(np.abs(f1) <= HOVER_RTOL * abs(target_N) + 1e-15):
            break
    bad = ~np.isfinite(I1) | (np.abs(f1) > 1e-6 * max(abs(target_N), 1e-12))
    e = 1e-4 * max(1.0, float(np.max(np.abs(I1[np.isfinite(I1)])) if np.any(np.isfinite(I1)) else 1.0))
    ki = (_saturable_at(model, parts, (I1 + e)[:, None] * d) - _saturable_at(model, parts, (I1 - e)[:, None] * d)) / (2 * e)
    up = axial_iron_parts(model, zz + step_m)
    dn = axial_iron_parts(model, zz - step_m)
    kz = -(_saturable_at(model, up, I1[:, None] * d) - _saturable_at(model, dn, I1[:, None] * d)) / (2 * step_m)
    for arr, v in zip(out, (I1, ki, kz)):
        arr[ok] = np.where(bad, np.nan, v)
    return tuple(out)


def _subset(parts, idx):
    from dataclasses import fields, replace

    return replace(parts, **{f.name: getattr(parts, f.name)[idx] for f in fields(parts)})


def _direct_family(models, z, I) -> IronAxialFamily:
    """The family at the heights themselves; derivatives by central differences."""
    h = DERIVATIVE_STEP_M
    g = z.size
    zz = np.concatenate((z, z + h, z - h))
    res = {}
    for lv, m in models.items():
        parts, lin = _pieces(m, zz, I)
        Fs, _, nsat, _ = saturable_axial_forces(m, parts, I)
        res[lv] = (parts, lin, Fs, nsat)
    parts, lin, Fs, nsat = res[REPORTED_LEVEL]
    _, lin_c, Fs_c, _ = res[CHECK_LEVEL]
    d = lambda a: (a[g:2 * g] - a[2 * g:]) / (2 * h)  # noqa: E731
    k = I.shape[1]
    return IronAxialFamily(z, I, Fs[:g], d(Fs), lin[:g], parts.F0_N[:g], d(parts.F0_N),
                           parts.Fk_N_per_A[:g].reshape(g, k), d(parts.Fk_N_per_A).reshape(g, k),
                           np.abs(Fs[:g] - Fs_c[:g]), np.abs(lin[:g] - lin_c[:g]),
                           (nsat[:g] > 0) | (nsat[g:2 * g] > 0) | (nsat[2 * g:] > 0), 0)
