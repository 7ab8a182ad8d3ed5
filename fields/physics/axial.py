"""The on-axis route: closed-form flux of coaxial solenoid sheets through the floater's caps.

On the symmetry axis of a core-free axisymmetric design (every source coaxial along one line
parallel to z, axial polarizations, floater untilted), the axial force on the floater is
``F_z = sum over its charged cap discs of sigma * Phi``, ``Phi`` the flux of the sources' solenoid
sheets (coil layers, the side currents of axially polarized cylinders and rings) through the
disc (:func:`sheet_disc_flux_Wb`); transverse force and torque vanish by symmetry. The cap
integral is then exact and only the coil-layer rule is left.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.constants import mu_0

from fields.model.design import Design, Floater, rotation_matrix
from fields.physics.checks import input_error
from fields.physics.quadrature import gauss_legendre

#: elements per block of the vectorised elliptic-integral loop: blocks of 6000 (96 kB arrays) stay
#: in cache and below the allocator's mmap threshold, about 2.5x faster than large blocks
CEL_CHUNK = 6000


def _agm_steps(kc_min: float, tol: float = 1e-8) -> int:
    """Iterations Bulirsch's ``cel`` loop needs for modulus ``kc_min`` (the slowest element)."""
    e = qc = float(kc_min)
    em = 1.0
    for it in range(1, 64):
        g, em = em, em + qc
        if abs(g - qc) <= g * tol:
            return it
        qc = 2.0 * np.sqrt(e)
        e = qc * em
    raise input_error("sheet_disc_flux_Wb", "complementary modulus", "> 0 (disc rim off every sheet edge)", kc_min)


def cel_difference(kc: np.ndarray, P: np.ndarray) -> np.ndarray:
    """``cel(kc, 1, 0, 1) - cel(kc, P^2, 0, P^2)`` (q,) with one shared AGM (kc, P: arrays (q,)).

    Bulirsch's general complete elliptic integral (Bulirsch, Numer. Math. 13 (1969) 305; the same
    algorithm as Press et al., Numerical Recipes 2nd ed. sec. 6.11 ``cel``, and as Derby and
    Olbert, Am. J. Phys. 78 (2010) 229, appendix)::

        cel(kc, p, a, b) = int_0^{pi/2} (a cos^2 t + b sin^2 t)
                           / ((cos^2 t + p sin^2 t) sqrt(cos^2 t + kc^2 sin^2 t)) dt.

    Both integrals share ``kc``, so the AGM part of the loop is shared. ``P = 0`` makes the second
    integral 0 (its limit). The loop converges quadratically; every element runs the iteration
    count of the smallest ``kc`` (extra iterations leave converged values unchanged).
    """
    q = kc.size
    if q > CEL_CHUNK:  # small blocks stay in cache and below the allocator's mmap threshold
        return np.concatenate([cel_difference(kc[i:i + CEL_CHUNK], P[i:i + CEL_CHUNK]) for i in range(0, q, CEL_CHUNK)])
    steps = _agm_steps(kc.min()) if q else 0
    e = kc.copy()
    qc = kc.copy()
    em = np.ones(q)
    pos = P > 0.0
    A = np.zeros((2, q))
    B = np.stack((np.ones(q), np.where(pos, P, 0.0)))
    Pp = np.stack((np.ones(q), np.where(pos, P, 1.0)))
    r, t, g = np.empty((2, q)), np.empty((2, q)), np.empty((2, q))
    for it in range(steps):
        np.reciprocal(Pp, out=r)
        np.multiply(B, r, out=t)  # b / p
        np.multiply(r, e, out=g)  # e / p
        np.multiply(A, g, out=r)  # a g (old a)
        A += t
        B += r
        B *= 2.0
        Pp += g
        em += qc
        if it < steps - 1:
            np.sqrt(e, out=qc)
            qc *= 2.0
            np.multiply(qc, em, out=e)
    A *= em
    A += B
    Pp += em
    A /= Pp
    return (A[0] - A[1]) * ((0.5 * np.pi) / em)


def _sheet_psi_m2(S2: np.ndarray, D2: np.ndarray, P: np.ndarray, two_a_rho: np.ndarray, xi: np.ndarray) -> np.ndarray:
    """The antiderivative ``Psi(xi)`` of the sheet flux (see :func:`sheet_disc_flux_Wb`).

    ``S2 = (a + rho)^2``, ``D2 = (a - rho)^2``, ``P = |a - rho| / (a + rho)``, ``two_a_rho = 2 a rho``
    broadcast against ``xi``; returns the broadcast shape.
    """
    shape = np.broadcast_shapes(S2.shape, D2.shape, P.shape, two_a_rho.shape, xi.shape)
    x2 = xi * xi
    den = np.sqrt(S2 + x2)
    kc = np.sqrt(D2 + x2) / den
    zero = xi == 0.0  # Psi is odd in xi; also keeps kc > 0 on a sheet end plane
    if np.any(zero):
        kc = np.where(zero, 1.0, kc)
    kc = np.broadcast_to(kc, shape).reshape(-1)
    out = cel_difference(kc, np.broadcast_to(P, shape).reshape(-1)).reshape(shape)
    out *= two_a_rho * xi / den
    return out


def _pair_terms(a: np.ndarray, rho: np.ndarray):
    s = a + rho
    d = a - rho
    return s * s, d * d, np.abs(d) / s, 2.0 * a * rho


def sheet_disc_flux_Wb(sheet_radius_m, half_height_m, J_T, disc_radius_m, dz_m) -> np.ndarray:
    r"""Magnetic flux of an ideal solenoid sheet through a coaxial disc (closed form).

    The sheet (radius ``a``, height ``2 b``, azimuthal surface current ``K = J / mu0``) has the B
    field of a cylinder with uniform axial polarization ``J`` (Amperian equivalence). The disc
    (radius ``rho``, normal +z) lies at axial distance ``dz`` from the sheet's centre. All
    arguments broadcast against each other.

    Parameters
    ----------
    sheet_radius_m, half_height_m : array_like
        ``a`` and ``b`` (m), positive.
    J_T : array_like
        Polarization ``mu0 K`` (T) of the sheet, positive for a counter-clockwise current seen
        from +z.
    disc_radius_m : array_like
        ``rho`` (m), >= 0.
    dz_m : array_like
        Disc plane minus sheet centre (m).

    Returns
    -------
    ndarray
        Flux (Wb), broadcast shape.

    Notes
    -----
    ``Phi = 2 pi rho A_phi = J [Psi(dz + b) - Psi(dz - b)]`` with

    .. math::

        \Psi(\xi) = \frac{2 a \rho \xi}{\sqrt{(a+\rho)^2 + \xi^2}}
                    \left[\frac{K(m) - E(m)}{m} + \frac{1-n}{n}\bigl(K(m) - \Pi(n, m)\bigr)\right]
                  = \frac{2 a \rho \xi}{\sqrt{(a+\rho)^2 + \xi^2}}
                    \left[\mathrm{cel}(k_c, 1, 0, 1) - \mathrm{cel}(k_c, 1-n, 0, 1-n)\right],

    ``m = 4 a rho / ((a+rho)^2 + xi^2) = 1 - kc^2``, ``n = 4 a rho / (a+rho)^2`` (parameter
    convention, ``Pi(n, m) = int dt / ((1 - n sin^2 t) sqrt(1 - m sin^2 t))``). It is the
    finite solenoid's vector potential (Derby and Olbert, Am. J. Phys. 78 (2010) 229; Callaghan
    and Maslen, NASA TN D-465, 1960) written as a flux. Derivation (checked numerically, see
    below): the loop potential integrated over the sheet height gives
    ``A_phi = (mu0 K a / 4 pi) [int_0^{2 pi} cos(phi) asinh(xi / R) dphi]`` between
    ``xi = dz - b`` and ``dz + b``, ``R^2 = a^2 + rho^2 - 2 a rho cos(phi)``; integration by
    parts in ``phi`` and ``phi = pi - 2 t`` reduce it to the bracket above. ``1 - n`` and ``kc``
    are formed without cancellation; at ``rho = a`` the second term vanishes (its limit);
    ``Psi(0) = 0``. As ``xi -> +inf``, ``Psi -> pi min(a, rho)^2 / 2`` (half the flux of an
    infinite solenoid). The flux is finite everywhere, also for a disc rim on the sheet.
    Checked against magpylib's cylinder field integrated over the disc and against Maxwell's
    loop-loop mutual inductance integrated over the sheet height (``tests/test_sources.py``).
    """
    a, b, J, rho, dz = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in
                                            (sheet_radius_m, half_height_m, J_T, disc_radius_m, dz_m)))
    if np.any(a <= 0.0) or np.any(b <= 0.0) or np.any(rho < 0.0):
        raise input_error("sheet_disc_flux_Wb", "radii and half height", "a > 0, b > 0, rho >= 0",
                            (float(a.min()), float(b.min()), float(rho.min())))
    terms = [t[None] for t in _pair_terms(a, rho)]
    psi = _sheet_psi_m2(*terms, np.stack((dz + b, dz - b)))
    return J * (psi[0] - psi[1])


@dataclass(frozen=True)
class AxialSheets:
    """The fixed sources of an axisymmetric, core-free design as coaxial ideal solenoid sheets.

    Attributes
    ----------
    radius_m, half_height_m, centre_z_m : ndarray, shape (s,)
        Sheet radius, half height and centre on the common axis (world z) (m).
    J_T : ndarray, shape (s,)
        Polarization ``mu0 K`` along world +z: tesla for magnet sheets, tesla per ampere for coil
        layers (Gauss-Legendre weight included).
    coil_index : ndarray of int, shape (s,)
        The coil a sheet belongs to, or -1 for a fixed permanent magnet.
    """

    radius_m: np.ndarray
    half_height_m: np.ndarray
    centre_z_m: np.ndarray
    J_T: np.ndarray
    coil_index: np.ndarray


def axial_sheets(design: Design, layers: int = 8, coils: bool = True, magnets: bool = True) -> AxialSheets:
    """Sheets of the coils (``layers`` Gauss-Legendre layers each) and of the fixed magnets.

    Valid for sources whose axes are parallel to world z: a coil layer is the sheet of
    :func:`fields.physics.coils.coil_field_per_ampere_T`; an axially polarized cylinder magnet is its side current
    (one sheet), a ring the outer sheet minus the inner one. Cores are not sheets until their
    polarization is known: designs with cores are rejected.

    Returns
    -------
    AxialSheets
    """
    if design.cores:
        raise input_error("axial_sheets", "design.cores", "empty (a core's polarization depends on the pose)",
                            len(design.cores))
    rad, half, zc, J, idx = [], [], [], [], []
    for k, c in enumerate(design.coils if coils else ()):
        R = rotation_matrix(c.rotvec_rad)
        a, b, h = float(c.inner_radius_m), float(c.outer_radius_m), float(c.height_m)
        if abs(abs(R[2, 2]) - 1.0) > 1e-12 or not (0.0 < a < b) or h <= 0.0:
            raise input_error(f"coil {c.name}", "axis and radii", "along z with 0 < inner < outer radius",
                                (tuple(c.axis), a, b))
        r_i, w_i = gauss_legendre(layers, a, b)
        rad += list(r_i)
        half += [h / 2] * layers
        zc += [float(c.position_m[2])] * layers
        J += list(np.sign(R[2, 2]) * mu_0 * float(c.turns) / ((b - a) * h) * w_i)
        idx += [k] * layers
    for m in design.magnets if magnets else ():
        R = rotation_matrix(m.rotvec_rad)
        Jw = R @ np.asarray(m.polarization_T, dtype=float)
        if (m.shape not in ("cylinder", "ring") or abs(abs(R[2, 2]) - 1.0) > 1e-12
                or np.hypot(Jw[0], Jw[1]) > 1e-12 * abs(Jw[2])):
            raise input_error(f"magnet {m.name}", "shape and polarization",
                                "a cylinder or ring with axis and polarization along z", m.shape)
        d = m.dimensions_m
        for r, sgn in (((d[0] / 2, 1.0),) if m.shape == "cylinder" else ((d[1] / 2, 1.0), (d[0] / 2, -1.0))):
            if r > 0.0:
                rad.append(r)
                half.append(d[-1] / 2)
                zc.append(float(m.position_m[2]))
                J.append(sgn * Jw[2])
                idx.append(-1)
    return AxialSheets(np.array(rad, dtype=float), np.array(half, dtype=float), np.array(zc, dtype=float),
                       np.array(J, dtype=float), np.array(idx, dtype=int))


def axial_disc_flux_Wb(sheets: AxialSheets, disc_radius_m, disc_z_m) -> np.ndarray:
    """Flux of every sheet through coaxial discs.

    Parameters
    ----------
    sheets : AxialSheets
        s sheets.
    disc_radius_m : ndarray, shape (d,)
        Disc radii (m), >= 0.
    disc_z_m : ndarray, shape (n, d)
        Disc planes on the common axis (world z) (m).

    Returns
    -------
    ndarray, shape (n, d, s)
        Flux (Wb; Wb per ampere for coil layers) through each disc, normal +z
        (:func:`sheet_disc_flux_Wb`).
    """
    rho = np.asarray(disc_radius_m, dtype=float).reshape(-1)
    z = np.asarray(disc_z_m, dtype=float).reshape(-1, rho.size)
    if np.any(rho < 0.0):
        raise input_error("axial_disc_flux_Wb", "disc_radius_m", ">= 0", float(rho.min()))
    terms = [t[None, None] for t in _pair_terms(sheets.radius_m[None, :], rho[:, None])]  # (1, 1, d, s)
    dz = z[:, :, None] - sheets.centre_z_m  # (n, d, s)
    b = sheets.half_height_m
    psi = _sheet_psi_m2(*terms, np.stack((dz + b, dz - b)))
    return sheets.J_T * (psi[0] - psi[1])


def floater_cap_discs(floater: Floater) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Charged cap discs of an axisymmetric floater (axially polarized cylinders and rings on its z axis).

    Returns
    -------
    radius_m : ndarray, shape (d,)
        Disc radii (a ring's annulus is its outer disc minus its inner disc).
    z_m : ndarray, shape (d,)
        Disc planes, floater frame z (m).
    charge_A_per_m : ndarray, shape (d,)
        ``sigma = J . n / mu0`` (A/m) times the disc's sign (+1 outer, -1 inner), so that the
        axial force is ``sum charge * Phi`` with ``Phi`` the fixed sources' flux through the disc
        (normal +z).
    """
    rad, zs, q = [], [], []
    for m in floater.magnets:
        R = rotation_matrix(m.rotvec_rad)
        Jz = float((R @ np.asarray(m.polarization_T, dtype=float))[2])
        d = m.dimensions_m
        if m.shape not in ("cylinder", "ring") or abs(abs(R[2, 2]) - 1.0) > 1e-12:
            raise input_error(f"floater magnet {m.name}", "shape", "a cylinder or ring with its axis along z", m.shape)
        discs = ((d[0] / 2, 1.0),) if m.shape == "cylinder" else ((d[1] / 2, 1.0), (d[0] / 2, -1.0))
        for sgn_n in (1.0, -1.0):  # top cap: normal +z; bottom cap: normal -z
            for r, sgn_d in discs:
                if r > 0.0 and Jz != 0.0:
                    rad.append(r)
                    zs.append(float(m.position_m[2]) + sgn_n * d[-1] / 2)
                    q.append(sgn_n * sgn_d * Jz / mu_0)
    return np.array(rad, dtype=float), np.array(zs, dtype=float), np.array(q, dtype=float)


def _is_axial(axis) -> bool:
    a = np.asarray(axis, dtype=float)
    a = a / np.linalg.norm(a)
    return abs(abs(a[2]) - 1.0) < 1e-12


def symmetry_axis_xy(design: Design) -> np.ndarray | None:
    """Common symmetry axis (x, y) (m) of an axisymmetric design about a z-parallel line, else None.

    Every coil and core coaxial with the axis, every fixed and floater magnet a cylinder or ring
    with axis and polarization along z, the floater's magnets and centre of mass on its z axis.
    """
    xy = []
    for c in design.coils:
        if not _is_axial(c.axis):
            return None
        xy.append(c.position_m[:2])
    for c in design.cores:
        if c.shape not in ("cylinder", "ring") or not _is_axial(c.axis):
            return None
        xy.append(c.position_m[:2])
    for m in design.magnets:
        R = rotation_matrix(m.rotvec_rad)
        J = R @ np.asarray(m.polarization_T, dtype=float)
        if m.shape not in ("cylinder", "ring") or abs(abs(R[2, 2]) - 1) > 1e-12 or np.hypot(J[0], J[1]) > 1e-12 * abs(J[2]):
            return None
        xy.append(m.position_m[:2])
    fl = design.floater
    for m in fl.magnets:
        R = rotation_matrix(m.rotvec_rad)
        J = R @ np.asarray(m.polarization_T, dtype=float)
        if m.shape not in ("cylinder", "ring") or abs(abs(R[2, 2]) - 1) > 1e-12 or np.hypot(J[0], J[1]) > 1e-12 * abs(J[2]):
            return None
        if np.hypot(*m.position_m[:2]) != 0.0:
            return None
    if np.hypot(*np.asarray(fl.centre_of_mass_m, dtype=float)[:2]) != 0.0:
        return None
    if not xy:
        return None
    xy = np.asarray(xy, dtype=float)
    if np.ptp(xy[:, 0]) > 0.0 or np.ptp(xy[:, 1]) > 0.0:
        return None
    return xy[0]


def on_axis_mask(design: Design, P: np.ndarray, Rv: np.ndarray) -> np.ndarray:
    """(n,) bool: floater poses (positions P, rotation vectors Rv, (n, 3)) on the design's
    symmetry axis and untilted (exact comparisons: symmetry is a property, not a tolerance)."""
    xy = symmetry_axis_xy(design)
    if xy is None:
        return np.zeros(P.shape[0], dtype=bool)
    return (P[:, 0] == xy[0]) & (P[:, 1] == xy[1]) & np.all(Rv == 0.0, axis=1)


def axial_cap_force(design: Design, positions_m: np.ndarray, layer_counts: tuple[int, ...]):
    """Axial force on the floater at on-axis poses by the closed-form cap flux, per coil-layer count.

    Parameters
    ----------
    design : Design
        Core-free and axisymmetric (:func:`symmetry_axis_xy`); not checked here.
    positions_m : ndarray, shape (n, 3)
        Floater origins on the axis, untilted (m).
    layer_counts : tuple of int
        Gauss layers per coil, one result per entry (the fixed magnets' sheets are shared, so one
        kernel call serves every count).

    Returns
    -------
    F0z_N : ndarray, shape (n,)
        Axial force of the fixed magnets (N).
    Fkz_N_per_A : list of ndarray, shape (n, k)
        Axial force per ampere of each coil, one array per layer count (N/A).
    """
    P = np.asarray(positions_m, dtype=float)
    n = P.shape[0]
    k = len(design.coils)
    rad, zf, q = floater_cap_discs(design.floater)
    parts = [axial_sheets(design, L, magnets=False) for L in layer_counts]
    mags = axial_sheets(design, coils=False)
    allsheets = parts + [mags]
    cat = [np.concatenate([getattr(sh, f) for sh in allsheets]) for f in
           ("radius_m", "half_height_m", "centre_z_m", "J_T", "coil_index")]
    sheets = AxialSheets(*cat)
    bounds = np.cumsum([0] + [sh.radius_m.size for sh in allsheets])
    Fs = np.zeros((n, bounds[-1]))
    per = max(1, CEL_CHUNK // max(1, 2 * rad.size * bounds[-1]))  # cache-sized blocks of poses
    for a in range(0, n, per):
        sl = slice(a, a + per)
        Phi = axial_disc_flux_Wb(sheets, rad, P[sl, 2:3] + zf[None, :])  # (n, d, s)
        Fs[sl] = np.einsum("d,nds->ns", q, Phi)
    F0z = Fs[:, bounds[-2]:].sum(axis=1)
    Fkz = []
    for i in range(len(layer_counts)):
        idx = sheets.coil_index[bounds[i]:bounds[i + 1]]
        Fl = Fs[:, bounds[i]:bounds[i + 1]]
        Fk = np.zeros((n, k))
        for j in range(k):
            Fk[:, j] = Fl[:, idx == j].sum(axis=1)
        Fkz.append(Fk)
    return F0z, Fkz
