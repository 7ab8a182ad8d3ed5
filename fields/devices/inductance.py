"""Coil inductance: filament mutual inductances, the thick-coil self term, cores, the matrix.

The air-core self-inductance is the flux linkage of the coil's own field, written as the
fourfold integral of Maxwell's mutual inductance of two coaxial circular filaments over the
cross-section twice (Maxwell, *A Treatise on Electricity and Magnetism*, 1873, art. 701)::

    L = (N / S)^2  int_S int_S  M(r1, r2, z1 - z2) dS1 dS2,     S = (b - a) h.

The integrand has a logarithmic singularity where the two filaments coincide (the self term that
Lyle's method and Rosa's geometric-mean-distance correction approximate). Here it is integrated
exactly instead: the ``z`` integrals are reduced to one over ``u = |z1 - z2|`` with weight
``2 (h - u)``, the radii to ``r`` and ``s = r2 - r1 >= 0``; the only singular point is the corner
``(s, u) = (0, 0)`` of the ``(s, u)`` rectangle, which is covered by two Duffy triangles
(Duffy 1982, SIAM J. Numer. Anal. 19(6)) with a squared radial map, and the rest by
Gauss-Legendre panels that grow geometrically away from the corner. Two rule orders give the error
estimate. The round-wire correction of Rosa (Bull. Bureau of Standards 2, 1906) for discrete
turns is **not** applied: it is small for many-turn coils (of order ``1/N`` relative).

Mutual inductances between coils use the closed-form vector potential of a circular filament
(Smythe, *Static and Dynamic Electricity*, 1950, sec. 7.10) integrated along the other filament
(``M = oint A . dl``, trapezoid rule in angle, spectrally accurate for a periodic integrand) and
Gauss-Legendre over both cross-sections: any relative placement, windings must not overlap.

Soft-iron cores add the incremental inductance of the ring-cell solve
(:func:`fields.physics.iron_linkage.iron_inductance`): the flux the iron links with each coil
by reciprocity, differentiated in the coil currents through the Jacobian of the saturable
solve at the operating currents. ``core_model="uniform"`` keeps the uniformly magnetized core
(for comparison): by reciprocity (the flux a magnetic dipole ``m`` links with coil ``i`` is
``m . b_i``, ``b_i`` the coil's field per ampere)::

    L_core[i, k] = V / mu0 * <b_i>_core . J_k,      J_k = X <b_k>_core per ampere,

which is symmetric because ``X`` is. Index letters: ``k`` coils, ``g`` gaps.
"""

from __future__ import annotations

import numpy as np
from scipy import special
from scipy.constants import mu_0

from fields.devices.winding import winding_dimensions
from fields.errors import InputError
from fields.model.design import Coil, Design
from fields.physics.quadrature import gauss_legendre


def coaxial_loop_mutual_H(a_m, b_m, d_m) -> np.ndarray:
    """Mutual inductance of two coaxial circular filaments (Maxwell's formula).

    Parameters
    ----------
    a_m, b_m : array_like
        Loop radii (m), broadcastable.
    d_m : array_like
        Axial separation (m).

    Returns
    -------
    ndarray
        ``M = mu0 sqrt(a b) [(2/k - k) K(k) - 2 E(k) / k]`` (H), with
        ``k^2 = 4 a b / ((a + b)^2 + d^2)``.

    Notes
    -----
    Maxwell, *A Treatise on Electricity and Magnetism* (1873), art. 701; ``K`` is evaluated from the
    complementary parameter (``scipy.special.ellipkm1``) so that nearly touching filaments keep
    their digits.

    Examples
    --------
    >>> round(float(coaxial_loop_mutual_H(0.1, 0.1, 0.1)) * 1e9, 3)  # nH
    49.408
    """
    a = np.asarray(a_m, dtype=float)
    b = np.asarray(b_m, dtype=float)
    d = np.asarray(d_m, dtype=float)
    den = (a + b) ** 2 + d * d
    m1 = ((a - b) ** 2 + d * d) / den
    m = 1.0 - m1  # = 4 a b / den, kept <= 1 under rounding
    k = np.sqrt(m)
    with np.errstate(divide="ignore", invalid="ignore"):
        M = mu_0 * np.sqrt(a * b) * ((2.0 / k - k) * special.ellipkm1(m1) - 2.0 / k * special.ellipe(m))
    return np.where(m > 0, M, 0.0)


def _loop_vector_potential_per_A(radius_m, rho_m, z_m) -> np.ndarray:
    """Azimuthal vector potential A_phi (T m per A) of a circular filament at (rho, z).

    ``A_phi = mu0 / (pi k) sqrt(a / rho) [(1 - k^2 / 2) K(k) - E(k)]`` (Smythe 1950, sec. 7.10).
    """
    a = np.asarray(radius_m, dtype=float)
    rho = np.asarray(rho_m, dtype=float)
    z = np.asarray(z_m, dtype=float)
    den = (a + rho) ** 2 + z * z
    m1 = ((a - rho) ** 2 + z * z) / den
    m = 1.0 - m1  # = 4 a rho / den
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.sqrt(m)
        A = mu_0 / (np.pi * k) * np.sqrt(a / rho) * ((1.0 - 0.5 * m) * special.ellipkm1(m1) - special.ellipe(m))
    return np.where(rho > 0, A, 0.0)


def axis_frame(axis) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Unit axis ``n`` and two unit vectors ``u, v`` completing a right-handed frame."""
    n = np.asarray(axis, dtype=float)
    n = n / np.linalg.norm(n)
    t = np.array([1.0, 0.0, 0.0]) if abs(n[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    u = np.cross(n, t)
    u /= np.linalg.norm(u)
    return n, u, np.cross(n, u)


def filament_mutual_H(c1_m, n1, a1_m, c2_m, n2, a2_m, angles: int = 64) -> np.ndarray:
    """Mutual inductance of circular filaments in arbitrary relative placement.

    Parameters
    ----------
    c1_m, c2_m : ndarray, shape (p, 3)
        Loop centres (m).
    n1, n2 : array_like, shape (3,)
        Unit normals (axes) of all loops of set 1 and of set 2.
    a1_m, a2_m : ndarray, shape (p,)
        Radii (m).
    angles : int
        Trapezoid nodes along loop 2.

    Returns
    -------
    ndarray, shape (p,)
        ``M = oint_2 A_1 . dl_2`` (H) with the closed-form filament potential (Smythe 1950).
    """
    c1 = np.asarray(c1_m, dtype=float).reshape(-1, 3)
    c2 = np.asarray(c2_m, dtype=float).reshape(-1, 3)
    a1 = np.asarray(a1_m, dtype=float).reshape(-1)
    a2 = np.asarray(a2_m, dtype=float).reshape(-1)
    e1, _, _ = axis_frame(n1)
    e2, u2, v2 = axis_frame(n2)
    phi = 2.0 * np.pi * np.arange(angles) / angles
    cp, sp = np.cos(phi), np.sin(phi)
    radial = cp[:, None] * u2[None, :] + sp[:, None] * v2[None, :]  # (m, 3)
    tang = -sp[:, None] * u2[None, :] + cp[:, None] * v2[None, :]
    out = np.empty(c1.shape[0])
    step = max(1, 200_000 // angles)
    for s in range(0, c1.shape[0], step):
        sl = slice(s, s + step)
        pts = c2[sl, None, :] + a2[sl, None, None] * radial[None]  # (p, m, 3)
        rel = pts - c1[sl, None, :]
        z = rel @ e1
        rvec = rel - z[..., None] * e1
        rho = np.linalg.norm(rvec, axis=-1)
        with np.errstate(invalid="ignore", divide="ignore"):
            phihat = np.cross(e1[None, None, :], rvec) / rho[..., None]
        phihat = np.where(rho[..., None] > 0, phihat, 0.0)
        A = _loop_vector_potential_per_A(a1[sl, None], rho, z)
        out[sl] = (A * np.einsum("pmi,mi->pm", phihat, tang)).sum(axis=1) * a2[sl] * 2.0 * np.pi / angles
    return out


def _geometric_panels(start: float, end: float) -> list[tuple[float, float]]:
    out, lo = [], start
    while lo < end * (1 - 1e-12):
        hi = min(2.0 * lo, end)
        if end - hi < 0.25 * (hi - lo):
            hi = end
        out.append((lo, hi))
        lo = hi
    return out


def _self_inductance_per_turn2(a: float, b: float, h: float, n: int) -> float:
    """L / N^2 (H) of a uniform-current-density winding, Duffy-corner rule of order n."""
    W = b - a
    xr, wr = gauss_legendre(n)

    def G(s, u):
        # 4 (h - u) int_a^{b-s} M(r, r + s, u) dr, for arrays s, u of one shape
        hi = b - s
        r = a + 0.5 * (hi - a)[..., None] * (xr + 1.0)
        M = coaxial_loop_mutual_H(r, r + s[..., None], u[..., None])
        F = 0.5 * (hi - a) * (M * wr).sum(axis=-1)
        return 4.0 * (h - u) * F

    c = min(W, h)
    total = 0.0
    # corner square [0, c]^2: two Duffy triangles, x = t^2 radially
    t, wt = gauss_legendre(n, 0.0, 1.0)
    y, wy = gauss_legendre(n, 0.0, 1.0)
    T, Y = np.meshgrid(t, y, indexing="ij")
    Wt = np.outer(wt, wy)
    X = T * T
    jac = c * c * X * 2.0 * T  # ds du = c^2 x dx dy, dx = 2 t dt
    total += np.sum(Wt * jac * G(c * X, c * X * Y))  # u <= s
    total += np.sum(Wt * jac * G(c * X * Y, c * X))  # s <= u
    # strips, geometric panels away from the corner
    if W > c * (1 + 1e-12):
        uu, wu = gauss_legendre(n, 0.0, h)
        for lo, hi in _geometric_panels(c, W):
            ss, ws = gauss_legendre(n, lo, hi)
            S_, U_ = np.meshgrid(ss, uu, indexing="ij")
            total += np.sum(np.outer(ws, wu) * G(S_, U_))
    elif h > c * (1 + 1e-12):
        ss, ws = gauss_legendre(n, 0.0, W)
        for lo, hi in _geometric_panels(c, h):
            uu, wu = gauss_legendre(n, lo, hi)
            S_, U_ = np.meshgrid(ss, uu, indexing="ij")
            total += np.sum(np.outer(ws, wu) * G(S_, U_))
    return total / (W * h) ** 2


def air_self_inductance_H(coil: Coil, order: int = 20) -> tuple[float, float]:
    """Air-core self-inductance of a thick coil with uniform current density.

    Parameters
    ----------
    coil : Coil
    order : int
        Gauss order of each panel; the estimate compares ``order`` with ``order + 8``.

    Returns
    -------
    L_H : float
        Self-inductance (H), from the higher order.
    error_H : float
        Difference between the two orders (H), an error estimate.

    Notes
    -----
    Flux linkage of the coil's own field as Maxwell's filament mutual inductance integrated over the
    cross-section twice, the logarithmic self term integrated exactly (module docstring).

    Examples
    --------
    >>> from fields.model.design import Coil
    >>> c = Coil("c", 0.01, 0.02, 0.01, 100, (0, 0, 0), (0, 0, 1), 1.0, 1.0)
    >>> L, err = air_self_inductance_H(c)
    >>> round(float(L) * 1e6, 2), bool(err < 1e-6 * L)
    (254.91, True)
    """
    a, b, h, N = winding_dimensions(coil)
    lo = _self_inductance_per_turn2(a, b, h, order)
    hi = _self_inductance_per_turn2(a, b, h, order + 8)
    return N * N * hi, N * N * abs(hi - lo)


def _filaments(coil: Coil, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Gauss filaments of a coil: centres (f,3), radii (f,), turns weight (f,) summing to N."""
    a, b, h, N = winding_dimensions(coil)
    r, wr = gauss_legendre(n, a, b)
    z, wz = gauss_legendre(n, -h / 2, h / 2)
    e, _, _ = axis_frame(coil.axis)
    R, Z = np.meshgrid(r, z, indexing="ij")
    w = np.outer(wr, wz).reshape(-1) * N / ((b - a) * h)
    centres = np.asarray(coil.position_m, dtype=float)[None, :] + Z.reshape(-1)[:, None] * e[None, :]
    return centres, R.reshape(-1), w


def _windings_overlap(c1: Coil, c2: Coil) -> bool:
    """Conservative test: bounding spheres of the two windings intersect and they are coaxial-overlapping."""
    e1, _, _ = axis_frame(c1.axis)
    e2, _, _ = axis_frame(c2.axis)
    d = np.asarray(c2.position_m, float) - np.asarray(c1.position_m, float)
    if abs(abs(e1 @ e2) - 1.0) < 1e-12 and np.linalg.norm(d - (d @ e1) * e1) < 1e-12:
        rad = max(c1.inner_radius_m, c2.inner_radius_m) < min(c1.outer_radius_m, c2.outer_radius_m)
        ax = abs(d @ e1) < 0.5 * (c1.height_m + c2.height_m)
        return bool(rad and ax)
    return False


def air_mutual_inductance_H(coil1: Coil, coil2: Coil, order: int = 8, angles: int = 64) -> tuple[float, float]:
    """Air-core mutual inductance between two coils in any placement.

    Parameters
    ----------
    coil1, coil2 : Coil
    order : int
        Gauss order per cross-section direction; the estimate compares ``order`` with ``order + 4``.
    angles : int
        Trapezoid nodes along each filament of ``coil2``.

    Returns
    -------
    M_H, error_H : float
        Mutual inductance (H) for positive currents in both coils, and the two-order difference (H).
    """
    if _windings_overlap(coil1, coil2):
        raise InputError(f"air_mutual_inductance_H: the windings of coils {coil1.name} and {coil2.name} must be "
                         "disjoint; got overlapping windings.")
    vals = []
    for n in (order, order + 4):
        c1, r1, w1 = _filaments(coil1, n)
        c2, r2, w2 = _filaments(coil2, n)
        i, j = np.meshgrid(np.arange(r1.size), np.arange(r2.size), indexing="ij")
        i, j = i.reshape(-1), j.reshape(-1)
        M = filament_mutual_H(c1[i], coil1.axis, r1[i], c2[j], coil2.axis, r2[j], angles)
        vals.append(float(np.sum(w1[i] * w2[j] * M)))
    return vals[1], abs(vals[1] - vals[0])


# --------------------------------------------------------------------------------- core terms


def core_inductance_terms(design: Design, gaps_m, hover_currents_A=None, layers: int = 8,
                          core_model: str = "cells", linkage: bool = False):
    """Core contribution to the inductance matrix per gap (incremental at the given currents).

    Parameters
    ----------
    design : Design
    gaps_m : array_like, shape (g,)
    hover_currents_A : array_like, shape (g, k), optional
        Coil currents at each gap (default zero).
    layers : int
        Gauss layers per coil (uniform model).
    core_model : str
        ``"cells"`` (the ring-cell solve, saturable) or ``"uniform"`` (clip model, comparison).
    linkage : bool
        Also return the flux linkage (g, k) of each coil from the cores and the floater (cells
        only; the coils' own air-core flux excluded).

    Returns
    -------
    Lc_H : ndarray, shape (g, k, k)
        Incremental core inductance matrix at each gap and hover-current set.
    saturated : ndarray of bool, shape (g,)
    linkage_Wb : ndarray, shape (g, k)
        Only with ``linkage=True``.
    """
    from fields.physics import field_basis as sources

    sources.check_core_model(core_model, "core_inductance_terms")
    k = len(design.coils)
    gaps = np.atleast_1d(np.asarray(gaps_m, dtype=float))
    ng = gaps.size
    Lc = np.zeros((ng, k, k))
    sat = np.zeros(ng, dtype=bool)
    if not design.cores and not design.floater.soft_iron:
        return (Lc, sat, np.zeros((ng, k))) if linkage else (Lc, sat)
    st = design.study
    P = st.floater_origin_m(gaps)
    Rv = np.repeat(np.asarray(st.floater_rotvec_rad, dtype=float)[None], ng, axis=0)
    if core_model == "cells":
        from fields.physics.iron_linkage import iron_inductance

        I = np.zeros((ng, k)) if hover_currents_A is None else np.asarray(hover_currents_A, dtype=float).reshape(ng, k)
        res = iron_inductance(design, P, Rv, I)
        return (res.inductance_H, res.saturated, res.linkage_Wb) if linkage else (res.inductance_H, res.saturated)
    far = np.full((ng, 1, 3), 1.0e3)  # a dummy observer far from every body
    fb = sources.fixed_field_basis(design, far, P, Rv, layers=layers, core_model="uniform")
    cms = sources.core_models(design)
    I = np.zeros((ng, k)) if hover_currents_A is None else np.asarray(hover_currents_A, dtype=float).reshape(ng, k)
    for j, cm in enumerate(cms):
        V = float(cm.core.volume_m3)
        bmean = np.stack([cm.mean_w @ sources.coil_field_per_ampere_T(c, cm.mean_pts_m, layers) for c in design.coils])
        Jk = fb.core_Jk_T_per_A[:, :, j, :]  # (g, k, 3)
        J = fb.core_J0_T[:, j, :] + np.einsum("gk,gki->gi", I, Jk)
        Js = float(cm.core.saturation_polarization_T)
        mag = np.linalg.norm(J, axis=-1)
        over = mag > Js
        sat |= over
        dJ = Jk.copy()
        for gi in np.nonzero(over)[0]:
            jh = J[gi] / mag[gi]
            dJ[gi] = (Js / mag[gi]) * (Jk[gi] - np.outer(Jk[gi] @ jh, jh))
        Lc += V / mu_0 * np.einsum("ai,gbi->gab", bmean, dJ)
    return 0.5 * (Lc + Lc.transpose(0, 2, 1)), sat


def mutual_inductance_matrix(design: Design, order: int = 8, currents_A=None, gap_m: float | None = None) -> np.ndarray:
    """Inductance matrix of all coils (H), shape (k, k), at zero current.

    Diagonal: self-inductances; off-diagonal: mutual inductances (positive currents as defined
    by each coil's axis). Cores add their incremental contribution from the cell solve at the
    study's operating gap (or ``gap_m``) and the given coil currents (default zero): the floater's
    magnetization of the iron and the bias current set the iron's operating point.

    Parameters
    ----------
    design : Design
    order : int
        Gauss order of the mutual terms.
    currents_A : array_like, shape (k,), optional
        Operating currents (e.g. the hover currents), for the cores' incremental part.
    gap_m : float, optional
        Gap of the cores' part (default the study's operating gap).

    Returns
    -------
    ndarray, shape (k, k)
    """
    k = len(design.coils)
    L = np.zeros((k, k))
    for i, c in enumerate(design.coils):
        L[i, i] = air_self_inductance_H(c)[0]
        for j in range(i + 1, k):
            L[i, j] = L[j, i] = air_mutual_inductance_H(c, design.coils[j], order)[0]
    if design.cores or design.floater.soft_iron:
        g = design.study.operating_gap_m if gap_m is None else float(gap_m)
        I = None if currents_A is None else np.asarray(currents_A, dtype=float).reshape(1, k)
        Lc, _ = core_inductance_terms(design, [g], I)
        L = L + Lc[0]
    return L

