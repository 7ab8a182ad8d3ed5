"""Azimuthal harmonics of the Coulomb kernel: toroidal functions and their pair integrals.

The ``m``-th Fourier coefficient of ``1 / |x - x'|`` between two points of a body of revolution
at meridian positions ``(r, z)`` and ``(r', z')`` is

    ``g_m = int_0^{2 pi} cos(m psi) / R(psi) dpsi = 2 Q_{m-1/2}(chi) / sqrt(r r')``,
    ``chi = (r^2 + r'^2 + (z - z')^2) / (2 r r')``,

with ``Q_{m-1/2}`` the Legendre function of the second kind of half-integer degree (toroidal
function; Cohl and Tohline, Astrophys. J. 527 (1999) 86, eq. 8; Abramowitz and Stegun, Handbook of
Mathematical Functions, 1964, 8.13). For ``chi < CHI_SERIES`` it comes from the complete elliptic
integrals, ``Q_{-1/2} = k K(k)``, ``Q_{1/2} = chi k K(k) - (2 / k) E(k)``, ``k^2 = 2 / (chi + 1)``,
and the upward three-term recurrence ``(n + 1/2) Q_{n+1/2} = 2 n chi Q_{n-1/2} - (n - 1/2) Q_{n-3/2}``
(Abramowitz and Stegun 8.5.3); beyond it from the hypergeometric series
``Q_nu(chi) = sqrt(pi) Gamma(nu + 1) / (Gamma(nu + 3/2) (2 chi)^(nu + 1))
2F1((nu + 1)/2, (nu + 2)/2; nu + 3/2; chi^-2)`` (Abramowitz and Stegun 8.1.5), which keeps its
digits where the recurrence would cancel. Near coincidence ``g_m ~ -(2 / r) ln(delta)``
(``delta`` the meridian distance; the same logarithm for every ``m``).

Pair integrals ``int_a int_b g_m dmu dmu'`` over meridian elements (cells with the area measure
``dr dz``, faces with ``r dl``) use tensor Gauss rules for distant pairs and, for near and
identical pairs, an outer Gauss rule with the inner integral taken around the outer point: a
polar (Duffy) fan of triangles from the point over a cell and a split at the point's foot on a
face, both graded toward the point by ``t = u^3`` (Duffy, SIAM J. Numer. Anal. 19 (1982) 1260).
"""

from __future__ import annotations

import functools

import numpy as np
from scipy import special

#: beyond this chi the toroidal functions come from their hypergeometric series
CHI_SERIES = 2.0
#: terms of the hypergeometric series (ratio at most CHI_SERIES^-2 per term)
SERIES_TERMS = 28
#: (chi from, chi to, terms): the series truncated where its next term is below 1e-16
SERIES_BANDS = ((2.0, 4.0, 28), (4.0, 8.0, 15), (8.0, 30.0, 10), (30.0, np.inf, 6))


@functools.lru_cache(maxsize=8)
def _series_coefficients(mmax: int) -> tuple[np.ndarray, np.ndarray]:
    """Prefactors (m+1,) and 2F1 coefficients (m+1, SERIES_TERMS) of Q_{m-1/2} in powers of chi^-2."""
    pre = np.empty(mmax + 1)
    a = np.empty((mmax + 1, SERIES_TERMS))
    for m in range(mmax + 1):
        nu = m - 0.5
        pre[m] = np.sqrt(np.pi) * special.gamma(nu + 1.0) / special.gamma(nu + 1.5) / 2.0 ** (nu + 1.0)
        c = 1.0
        for k in range(SERIES_TERMS):
            a[m, k] = c
            c *= ((nu + 1.0) / 2 + k) * ((nu + 2.0) / 2 + k) / ((nu + 1.5 + k) * (k + 1.0))
    return pre, a


def toroidal_q(chi, mmax: int, derivative: bool = False, chi_minus_1=None):
    """``Q_{m-1/2}(chi)`` for m = 0..mmax (shape (m+1,) + chi.shape) and optionally d/dchi.

    ``chi >= 1``; at ``chi = 1`` the values are infinite (logarithmic singularity).
    ``chi_minus_1`` (same shape), when given, is ``chi - 1`` to full relative precision.

    Examples
    --------
    >>> q = toroidal_q(np.array([1.5, 10.0]), 2)
    >>> psi = np.linspace(0, 2 * np.pi, 4001)[:-1]
    >>> ref = np.pi * np.mean(np.cos(2 * psi) / np.sqrt(2 * (1.5 - np.cos(psi))))
    >>> bool(abs(q[2, 0] - ref) < 1e-12 * ref)
    True
    """
    chi0 = np.asarray(chi, dtype=float)
    chi = chi0.reshape(-1)
    cm1 = chi - 1.0 if chi_minus_1 is None else np.asarray(chi_minus_1, dtype=float).reshape(-1)
    Q = np.empty((mmax + 1,) + chi.shape)
    dQ = np.empty_like(Q) if derivative else None
    far = chi >= CHI_SERIES
    near = ~far
    if np.any(far):
        pre, a = _series_coefficients(mmax)
        k = np.arange(SERIES_TERMS)
        xf = chi[far]
        Qf = np.empty((mmax + 1, xf.size))
        dQf = np.empty_like(Qf) if derivative else None
        # fewer terms where chi is large (the series' ratio is about chi^-2)
        for lo, hi, nt in SERIES_BANDS:
            sel = (xf >= lo) & (xf < hi)
            if not np.any(sel):
                continue
            x = xf[sel]
            w = 1.0 / (x * x)
            lx = np.log(x)
            for m in range(mmax + 1):
                nu = m - 0.5
                s = np.full(x.shape, a[m, nt - 1])
                ds = np.full(x.shape, a[m, nt - 1] * (nu + 1.0 + 2.0 * (nt - 1)))
                for j in range(nt - 2, -1, -1):
                    s = s * w + a[m, j]
                    if derivative:
                        ds = ds * w + a[m, j] * (nu + 1.0 + 2.0 * k[j])
                xp = pre[m] * np.exp(-(nu + 1.0) * lx)
                Qf[m, sel] = xp * s
                if derivative:
                    dQf[m, sel] = -xp / x * ds
        Q[:, far] = Qf
        if derivative:
            dQ[:, far] = dQf
    if np.any(near):
        x = chi[near]
        k2 = 2.0 / (x + 1.0)
        k = np.sqrt(k2)
        with np.errstate(divide="ignore", invalid="ignore"):
            K = special.ellipkm1(cm1[near] / (x + 1.0))
        E = special.ellipe(k2)
        q = [k * K, x * k * K - (2.0 / k) * E]
        for n in range(1, mmax):
            q.append((2.0 * n * x * q[n] - (n - 0.5) * q[n - 1]) / (n + 0.5))
        for m in range(mmax + 1):
            Q[m][near] = q[m]
        if derivative:
            with np.errstate(divide="ignore", invalid="ignore"):
                inv = 1.0 / (cm1[near] * (x + 1.0))
                # (chi^2 - 1) Q_nu' = nu (chi Q_nu - Q_{nu-1}); Q_{-3/2} = Q_{1/2} (Whipple's symmetry
                # Q_{-nu-1} = Q_nu holds for half-integer nu, A and S 8.2.2 with cot(nu pi) = 0)
                qm1 = [q[1] if mmax >= 1 else x * k * K - (2.0 / k) * E] + q[:-1]
                for m in range(mmax + 1):
                    nu = m - 0.5
                    dQ[m][near] = nu * (x * q[m] - qm1[m]) * inv
    shape = (mmax + 1,) + chi0.shape
    return (Q.reshape(shape), dQ.reshape(shape)) if derivative else Q.reshape(shape)


def ring_kernel(r, z, rp, zp, mmax: int) -> np.ndarray:
    """``g_m(r, z; r', z')`` (1/m) for m = 0..mmax: shape (m+1,) + broadcast shape. Zero where a radius is 0
    and m >= 1."""
    r, z, rp, zp = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (r, z, rp, zp)))
    out = np.zeros((mmax + 1,) + r.shape)
    pos = (r > 0.0) & (rp > 0.0)
    rr = r[pos] * rp[pos]
    cm1 = ((r[pos] - rp[pos]) ** 2 + (z[pos] - zp[pos]) ** 2) / (2.0 * rr)
    Q = toroidal_q(1.0 + cm1, mmax, chi_minus_1=cm1)
    out[:, pos] = 2.0 * Q / np.sqrt(rr)
    if mmax >= 0 and not np.all(pos):
        zero = ~pos
        out[0, zero] = 2.0 * np.pi / np.hypot(np.hypot(r[zero], rp[zero]), z[zero] - zp[zero])
    return out


def ring_kernel_gradient(rho, z, rp, zp, mmax: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``g_m``, ``d g_m / d rho`` and ``d g_m / d z`` with respect to the observer at (rho, z), m = 0..mmax.

    ``rho > 0`` and ``rp > 0`` (callers keep the observer off the axis by a tiny clamp).
    """
    rho, z, rp, zp = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (rho, z, rp, zp)))
    rr = rho * rp
    dz = z - zp
    cm1 = ((rho - rp) ** 2 + dz * dz) / (2.0 * rr)
    chi = 1.0 + cm1
    Q, dQ = toroidal_q(chi, mmax, derivative=True, chi_minus_1=cm1)
    s = 2.0 / np.sqrt(rr)
    g = s * Q
    dchi_drho = 1.0 / rp - chi / rho
    dchi_dz = dz / rr
    g_rho = -0.5 * g / rho + s * dQ * dchi_drho
    g_z = s * dQ * dchi_dz
    return g, g_rho, g_z


# --------------------------------------------------------------------------- rules


@functools.lru_cache(maxsize=16)
def gauss01(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights on [0, 1]."""
    x, w = np.polynomial.legendre.leggauss(int(n))
    return 0.5 * (x + 1.0), 0.5 * w


@functools.lru_cache(maxsize=16)
def graded01(n: int, power: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre on [0, 1] after t = u^power (nodes crowd toward 0)."""
    u, w = gauss01(n)
    return u ** power, w * power * u ** (power - 1)


@functools.lru_cache(maxsize=16)
def sidi01(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre on [0, 1] after Sidi's sin^2 map t -> t - sin(2 pi t) / (2 pi) (nodes crowd toward
    both ends; Sidi, Int. Ser. Numer. Math. 112 (1993) 359)."""
    t, w = gauss01(n)
    return t - np.sin(2.0 * np.pi * t) / (2.0 * np.pi), w * (1.0 - np.cos(2.0 * np.pi * t))


def quad_rule(P: np.ndarray, n: int, graded: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Tensor Gauss rule of bilinear quads P (c, 4, 2): points (c, n^2, 2) and area weights (c, n^2) (m^2);
    ``graded``: Sidi's map in both directions."""
    t, w = sidi01(n) if graded else gauss01(n)
    U, V = np.meshgrid(t, t, indexing="ij")
    U, V = U.ravel(), V.ravel()
    W = np.outer(w, w).ravel()
    N = np.stack(((1 - U) * (1 - V), U * (1 - V), U * V, (1 - U) * V), axis=1)
    dNu = np.stack((-(1 - V), 1 - V, V, -V), axis=1)
    dNv = np.stack((-(1 - U), -U, U, 1 - U), axis=1)
    X = np.einsum("gk,ckj->cgj", N, P)
    Xu = np.einsum("gk,ckj->cgj", dNu, P)
    Xv = np.einsum("gk,ckj->cgj", dNv, P)
    jac = np.abs(Xu[..., 0] * Xv[..., 1] - Xu[..., 1] * Xv[..., 0])
    return X, W[None] * jac


def segment_rule(s0: np.ndarray, s1: np.ndarray, n: int, graded: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Gauss rule on segments (e, 2): points (e, n, 2) and weights ``r dl`` (e, n) (m^2)."""
    t, w = sidi01(n) if graded else gauss01(n)
    p = s0[:, None, :] + t[None, :, None] * (s1 - s0)[:, None, :]
    return p, w[None] * np.linalg.norm(s1 - s0, axis=1)[:, None] * p[..., 0]


def fan_rule(x: np.ndarray, P: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Polar-fan rule of polygon P (k, 2) seen from points x (p, 2): points (p, k n^2, 2), area weights.

    Signed triangles (x, v_j, v_j+1) cover the polygon for any x (convex polygon); the radial
    variable is graded toward x, which carries the kernel's logarithm.
    """
    t, wt = graded01(n)
    s, ws = gauss01(n)
    pts, wts = [], []
    k = P.shape[0]
    for j in range(k):
        a, b = P[j], P[(j + 1) % k]
        if np.all(a == b):
            continue
        da = a[None] - x
        db = b[None] - x
        cross = da[:, 0] * db[:, 1] - da[:, 1] * db[:, 0]  # (p,) twice the signed area
        edge = a[None, None, :] + s[None, :, None] * (b - a)[None, None, :] - x[:, None, :]  # (p, n, 2)
        q = x[:, None, None, :] + t[None, None, :, None] * edge[:, :, None, :]  # (p, ns, nt, 2)
        w = cross[:, None, None] * ws[None, :, None] * (wt * t)[None, None, :]
        flat = np.abs(cross) <= 1e-14 * float(np.sum((b - a) ** 2))  # x on this side: no area
        q[flat] = P.mean(axis=0)
        pts.append(q.reshape(x.shape[0], -1, 2))
        wts.append(w.reshape(x.shape[0], -1))
    return np.concatenate(pts, axis=1), np.concatenate(wts, axis=1)


def split_segment_rule(x: np.ndarray, s0: np.ndarray, s1: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Rule on segment s0-s1 (2,) for points x (p, 2): split at each point's foot, graded toward it.

    Returns points (p, 2 n, 2) and weights ``r dl`` (p, 2 n).
    """
    t, wt = graded01(n)
    d = s1 - s0
    L = float(np.linalg.norm(d))
    f = np.clip(((x - s0[None]) @ d) / (L * L), 0.0, 1.0)  # foot fraction (p,)
    # toward s0 from the foot, and toward s1
    pa = f[:, None] - t[None] * f[:, None]
    pb = f[:, None] + t[None] * (1.0 - f[:, None])
    frac = np.concatenate((pa, pb), axis=1)
    w = np.concatenate((wt[None] * f[:, None], wt[None] * (1.0 - f[:, None])), axis=1) * L
    p = s0[None, None, :] + frac[..., None] * d[None, None, :]
    return p, w * p[..., 0]
