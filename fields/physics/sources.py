"""Fields of the fixed sources: coils, permanent magnets and soft-iron cores.

Everything here is built on magpylib's vectorised core kernels (``magpylib.core``), called once
per source group on stacked observer arrays (see ``/work/shared/METHODS.md`` sections 1, 3, 6).

Coils (Amperian equivalence)
    A thin solenoid sheet carrying ``K = N I / h`` (A/m) has exactly the B field of a cylinder of
    the same radius and height with axial polarization ``J = mu0 K``. A thick winding
    (radii ``a..b``, height ``h``, ``N`` turns) carries ``j = N I / ((b - a) h)``; integrating over
    the radius with Gauss-Legendre nodes ``r_i`` and weights ``w_i`` on ``[a, b]`` gives layer ``i``
    as a cylinder of radius ``r_i`` with polarization ``mu0 N w_i / ((b - a) h)`` per ampere. The
    rule converges exponentially outside the winding; inside the winding it converges slowly.

Soft-iron cores (iron-free approximation)
    A core is replaced by a uniformly magnetized body of its own shape with
    ``M = chi_eff H_mean`` per own axis, ``chi_eff = chi / (1 + N chi)``, ``chi = mu_r - 1`` and
    ``N`` the magnetometric demagnetizing factor (:mod:`fields.physics.demag`). ``H_mean`` is the applied
    field (coils, fixed magnets and the floater at its pose) averaged over the core volume with a
    Gauss rule. Core-core coupling and the core's non-uniform self field are ignored (only the
    demagnetizing factor accounts for self interaction). The polarization is clipped at the
    saturation polarization; a clipped core makes the field nonlinear in the currents, so the
    linear :class:`FieldBasis` is then only an approximation and is flagged. The model is poor
    when a gap is small compared with the core diameter (the real magnetization is then far from
    uniform) and near saturation.
"""

from __future__ import annotations

import functools
import itertools
from dataclasses import dataclass

import numpy as np
from scipy.constants import mu_0

from fields.physics.demag import core_demag_factors
from fields.errors import GeometryError
from fields.model.design import Coil, Core, Design, Magnet, rotation_matrix

#: number of kernel evaluations per magpylib call (bounds temporary memory to ~100 MB)
CHUNK = 200_000
#: elements per block of the vectorised elliptic-integral loop: blocks of 6000 (96 kB arrays) stay
#: in cache and below the allocator's mmap threshold, about 2.5x faster than large blocks
CEL_CHUNK = 6000


@functools.lru_cache(maxsize=64)
def _leggauss(n: int) -> tuple[np.ndarray, np.ndarray]:
    x, w = np.polynomial.legendre.leggauss(n)
    x.setflags(write=False)
    w.setflags(write=False)
    return x, w


def gauss_legendre(n: int, lo: float, hi: float) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre nodes and weights (n,) on ``[lo, hi]`` (new arrays; nodes cached per n)."""
    x, w = _leggauss(int(n))
    half = 0.5 * (hi - lo)
    return lo + half * (x + 1.0), half * w


# --------------------------------------------------------------------------- kernels (own frame)


def _cyl_to_cart(phi: np.ndarray, Br: np.ndarray, Bphi: np.ndarray, Bz: np.ndarray) -> np.ndarray:
    c, s = np.cos(phi), np.sin(phi)
    return np.stack((Br * c - Bphi * s, Br * s + Bphi * c, Bz), axis=-1)


def cylinder_field_own_T(points_own_m, radius_m, height_m, J_own_T) -> np.ndarray:
    """B of uniformly polarized cylinders in their own frame.

    Parameters
    ----------
    points_own_m : ndarray, shape (q, 3)
        Observers in the cylinder frame (axis z, centre at the origin) (m).
    radius_m, height_m : float or ndarray, shape (q,)
        Radius and height per observer (m).
    J_own_T : ndarray, shape (3,) or (q, 3)
        Polarization in the cylinder frame (T).

    Returns
    -------
    ndarray, shape (q, 3)
        B (T) in the cylinder frame. Observers exactly on an edge are not allowed.

    Notes
    -----
    Axial part: Derby and Olbert, Am. J. Phys. 78 (2010) 229 (``magnet_cylinder_axial_Bfield``);
    diametral part: Caciagli et al., JMMM 456 (2018) 423 (``magnet_cylinder_diametral_Hfield``,
    which returns ``mu0 H`` per unit polarization; ``J`` is added inside).
    """
    import magpylib as magpy

    p = np.asarray(points_own_m, dtype=float).reshape(-1, 3)
    q = p.shape[0]
    R = np.broadcast_to(np.asarray(radius_m, dtype=float), (q,))
    h = np.broadcast_to(np.asarray(height_m, dtype=float), (q,))
    J = np.broadcast_to(np.asarray(J_own_T, dtype=float), (q, 3))
    out = np.empty((q, 3))
    for s in range(0, q, CHUNK):
        sl = slice(s, s + CHUNK)
        x, y, z = p[sl].T
        r = np.hypot(x, y)
        phi = np.arctan2(y, x)
        Rs, hs, Js = R[sl], h[sl], J[sl]
        z0 = 0.5 * hs / Rs
        Bc = np.zeros((3, x.size))
        if np.any(Js[:, 2] != 0.0):
            Bc += magpy.core.magnet_cylinder_axial_Bfield(z0, r / Rs, z / Rs) * Js[:, 2]
        Jt = np.hypot(Js[:, 0], Js[:, 1])
        if np.any(Jt != 0.0):
            theta = np.arctan2(Js[:, 1], Js[:, 0])
            Bc += magpy.core.magnet_cylinder_diametral_Hfield(z0, r / Rs, z / Rs, phi - theta) * Jt
        B = _cyl_to_cart(phi, Bc[0], Bc[1], Bc[2])
        inside = (r < Rs) & (np.abs(z) < 0.5 * hs)
        B[inside, 0] += Js[inside, 0]
        B[inside, 1] += Js[inside, 1]
        out[sl] = B
    return out


def shape_field_own_T(shape: str, dimensions_m, J_own_T, points_own_m, mesh_triangles_m=None) -> np.ndarray:
    """B (q, 3) of a uniformly polarized body in its own frame.

    Parameters
    ----------
    shape : str
        ``cylinder``, ``ring``, ``cuboid``, ``sphere`` or ``mesh``.
    dimensions_m : tuple of float
        As in :class:`fields.model.Magnet`.
    J_own_T : ndarray, shape (3,) or (q, 3)
        Polarization (T), own frame.
    points_own_m : ndarray, shape (q, 3)
    mesh_triangles_m : ndarray, shape (t, 3, 3), optional
        Outward-oriented triangles (mesh shape).

    Notes
    -----
    The mesh field is the field of the surface charges (Guptasarma and Singh, Geophysics 64 (1999)
    70, magpylib ``triangle_Bfield``); it equals B outside the body only.
    """
    import magpylib as magpy

    p = np.asarray(points_own_m, dtype=float).reshape(-1, 3)
    q = p.shape[0]
    J = np.broadcast_to(np.asarray(J_own_T, dtype=float), (q, 3))
    d = dimensions_m
    if shape == "cylinder":
        return cylinder_field_own_T(p, d[0] / 2, d[1], J)
    if shape == "ring":
        return cylinder_field_own_T(p, d[1] / 2, d[2], J) - cylinder_field_own_T(p, d[0] / 2, d[2], J)
    out = np.empty((q, 3))
    if shape == "cuboid":
        dims = np.broadcast_to(np.asarray(d, dtype=float), (min(q, CHUNK), 3))
        for s in range(0, q, CHUNK):
            sl = slice(s, s + CHUNK)
            m = p[sl].shape[0]
            out[sl] = magpy.core.magnet_cuboid_Bfield(p[sl], dims[:m], np.ascontiguousarray(J[sl]))
        return out
    if shape == "sphere":
        for s in range(0, q, CHUNK):
            sl = slice(s, s + CHUNK)
            m = p[sl].shape[0]
            out[sl] = magpy.core.magnet_sphere_Bfield(p[sl], np.full(m, float(d[0])), np.ascontiguousarray(J[sl]))
        return out
    if shape == "mesh":
        tri = np.asarray(mesh_triangles_m, dtype=float)
        t = tri.shape[0]
        out[:] = 0.0
        step = max(1, CHUNK // max(t, 1))
        for s in range(0, q, step):
            sl = slice(s, s + step)
            m = p[sl].shape[0]
            obs = np.repeat(p[sl], t, axis=0)
            pol = np.repeat(J[sl], t, axis=0)
            verts = np.tile(tri, (m, 1, 1))
            out[sl] = magpy.core.triangle_Bfield(obs, verts, pol).reshape(m, t, 3).sum(axis=1)
        return out
    raise GeometryError("shape_field_own_T", "shape", "one of cylinder, ring, cuboid, sphere, mesh", shape)


def _mesh_triangles(magnet: Magnet) -> np.ndarray | None:
    if magnet.shape != "mesh":
        return None
    if magnet.mesh_vertices_m is None or magnet.mesh_faces is None:
        raise GeometryError(f"magnet {magnet.name}", "mesh_vertices_m and mesh_faces", "given for a mesh magnet", None)
    return np.asarray(magnet.mesh_vertices_m, dtype=float)[np.asarray(magnet.mesh_faces)]


# --------------------------------------------------------------------------- public source fields


def _to_own(points_m: np.ndarray, position_m, R: np.ndarray) -> np.ndarray:
    return (points_m - np.asarray(position_m, dtype=float)) @ R


#: observers beyond an end face of a winding and closer to it than this fraction of the winding's
#: radial half-thickness get observer-graded layers (:func:`_layer_rule`)
LAYER_GRADE_WITHIN = 0.5


def _sinh_rule(t, w, lo, hi, x0, d):
    """Gauss nodes (L,) moved by the sinh transformation toward the point x0 (q,) at distance d (q,)
    on intervals [lo, hi] (q,): radii and weights (L, q); zero weights on empty intervals."""
    hl = 0.5 * (hi - lo)
    c = 0.5 * (hi + lo)
    safe = np.where(hl > 0.0, hl, 1.0)
    xs = (x0 - c) / safe
    b0 = d / safe
    s1, s2 = np.arcsinh((1.0 + xs) / b0), np.arcsinh((1.0 - xs) / b0)
    mu, eta = 0.5 * (s1 + s2), 0.5 * (s1 - s2)
    arg = mu[None, :] * t[:, None] - eta[None, :]
    R = c + hl * (xs[None, :] + b0[None, :] * np.sinh(arg))
    W = hl * w[:, None] * b0[None, :] * mu[None, :] * np.cosh(arg)
    return np.where(hl > 0.0, R, c), W


def _layer_rule(layers: int, a: float, b: float, h: float, rho: np.ndarray, z: np.ndarray):
    """Layer radii and weights of a thick winding for observers at (rho, z) (own frame).

    Returns ``(R, W, near)``: Gauss-Legendre radii and weights (L, q) on ``[a, b]``, and a mask
    (q,) of observers beyond an end face of the winding (``d = |z| - h/2 > 0``) whose distance to
    that face's radial span, ``hypot(max(a - rho, rho - b, 0), d)``, is below
    ``LAYER_GRADE_WITHIN (b - a)/2``. For those
    the radial integrand is nearly singular at ``r = rho +- i d``; their rule ``(Rn, Wn)`` (2L, m)
    splits ``[a, b]`` at ``rho`` and moves each half's L Gauss nodes by the sinh transformation of
    Johnston and Elliott (Int. J. Numer. Meth. Eng. 62 (2005) 564, eqs. 8-10),
    ``r = rho + d sinh(mu t - eta)``, which clusters them near ``rho`` on the scale ``d`` and
    converges at a rate nearly independent of ``d``.
    """
    t, w = _leggauss(int(layers))
    hl, c = 0.5 * (b - a), 0.5 * (a + b)
    q = rho.size
    R = np.broadcast_to((c + hl * t)[:, None], (t.size, q))
    W = np.broadcast_to((hl * w)[:, None], (t.size, q))
    d = np.abs(z) - 0.5 * h
    near = (d > 0.0) & (np.hypot(np.maximum(np.maximum(a - rho, rho - b), 0.0), d) < LAYER_GRADE_WITHIN * hl)
    if not np.any(near):
        return R, W, near, None, None
    x0, dn = rho[near], d[near]
    cut = np.clip(x0, a, b)
    R1, W1 = _sinh_rule(t, w, np.full(x0.size, a), cut, x0, dn)
    R2, W2 = _sinh_rule(t, w, cut, np.full(x0.size, b), x0, dn)
    return R, W, near, np.concatenate((R1, R2)), np.concatenate((W1, W2))


def coil_field_per_ampere_T(coil: Coil, points_m, layers: int = 8) -> np.ndarray:
    """B per ampere of a thick coil (Gauss-Legendre layers of magnetized cylinders), world frame.

    Parameters
    ----------
    coil : Coil
    points_m : ndarray, shape (q, 3)
        Observers, world frame (m). Must not lie on a layer's edge.
    layers : int
        Number of Gauss-Legendre layers across the winding thickness.

    Returns
    -------
    ndarray, shape (q, 3)
        B per ampere (T/A).

    Notes
    -----
    Layer ``i`` is an axially polarized cylinder of radius ``r_i`` and polarization
    ``mu0 N w_i / ((b - a) h)`` per ampere (Amperian equivalence of a current sheet and a
    magnetized cylinder; METHODS.md section 1). The axial extent is exact; the radial integral
    converges exponentially with ``layers`` outside the winding (8 layers: about 1e-10 relative
    at the end face of a 7..22 mm winding).

    Examples
    --------
    >>> from fields.model.design import Coil
    >>> c = Coil("c", 0.01, 0.02, 0.01, 100, (0, 0, 0), (0, 0, 1), 1.0, 1.0)
    >>> B = coil_field_per_ampere_T(c, np.array([[0.0, 0.0, 0.1]]))
    >>> bool(B[0, 2] > 0)
    True
    """
    import magpylib as magpy

    p = np.asarray(points_m, dtype=float).reshape(-1, 3)
    a, b, h = float(coil.inner_radius_m), float(coil.outer_radius_m), float(coil.height_m)
    if not (0.0 < a < b) or h <= 0.0:
        raise GeometryError(f"coil {coil.name}", "radii and height", "0 < inner_radius < outer_radius, height > 0", (a, b, h))
    R = rotation_matrix(coil.rotvec_rad)
    own = _to_own(p, coil.position_m, R)
    x, y, z = own.T
    rho = np.hypot(x, y)
    q = own.shape[0]
    r_i, w_i, near, r_n, w_n = _layer_rule(layers, a, b, h, rho, z)
    scale = mu_0 * float(coil.turns) / ((b - a) * h)
    Br = np.zeros(q)
    Bz = np.zeros(q)
    groups = [(np.nonzero(~near)[0], r_i[:, ~near], w_i[:, ~near])]
    if r_n is not None:
        groups.append((np.nonzero(near)[0], r_n, w_n))
    for idx, rr, ww in groups:
        m = idx.size
        if m == 0:
            continue
        # one kernel call per chunk over all layers x observers; sum in cylindrical components
        per = max(1, CHUNK // m)
        for s in range(0, rr.shape[0], per):
            ri, Ji = rr[s : s + per], scale * ww[s : s + per]
            L = ri.shape[0]
            Bc = magpy.core.magnet_cylinder_axial_Bfield((0.5 * h / ri).reshape(-1), (rho[idx][None, :] / ri).reshape(-1),
                                                        (z[idx][None, :] / ri).reshape(-1))
            Br[idx] += (Bc[0].reshape(L, m) * Ji).sum(axis=0)
            Bz[idx] += (Bc[2].reshape(L, m) * Ji).sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        c = np.where(rho > 0, x / np.where(rho > 0, rho, 1.0), 0.0)
        sn = np.where(rho > 0, y / np.where(rho > 0, rho, 1.0), 0.0)
    B = np.stack((Br * c, Br * sn, Bz), axis=-1)
    return B @ R.T


# --------------------------------------------------------------------------- axial flux (on-axis path)


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
    raise GeometryError("sheet_disc_flux_Wb", "complementary modulus", "> 0 (disc rim off every sheet edge)", kc_min)


def _cel_pair(kc: np.ndarray, P: np.ndarray) -> np.ndarray:
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
        return np.concatenate([_cel_pair(kc[i:i + CEL_CHUNK], P[i:i + CEL_CHUNK]) for i in range(0, q, CEL_CHUNK)])
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
    out = _cel_pair(kc, np.broadcast_to(P, shape).reshape(-1)).reshape(shape)
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
    loop-loop mutual inductance integrated over the sheet height (tests/test_sources.py).
    """
    a, b, J, rho, dz = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in
                                            (sheet_radius_m, half_height_m, J_T, disc_radius_m, dz_m)))
    if np.any(a <= 0.0) or np.any(b <= 0.0) or np.any(rho < 0.0):
        raise GeometryError("sheet_disc_flux_Wb", "radii and half height", "a > 0, b > 0, rho >= 0",
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
    :func:`coil_field_per_ampere_T`; an axially polarized cylinder magnet is its side current
    (one sheet), a ring the outer sheet minus the inner one. Cores are not sheets until their
    polarization is known: designs with cores are rejected.

    Returns
    -------
    AxialSheets
    """
    if design.cores:
        raise GeometryError("axial_sheets", "design.cores", "empty (a core's polarization depends on the pose)",
                            len(design.cores))
    rad, half, zc, J, idx = [], [], [], [], []
    for k, c in enumerate(design.coils if coils else ()):
        R = rotation_matrix(c.rotvec_rad)
        a, b, h = float(c.inner_radius_m), float(c.outer_radius_m), float(c.height_m)
        if abs(abs(R[2, 2]) - 1.0) > 1e-12 or not (0.0 < a < b) or h <= 0.0:
            raise GeometryError(f"coil {c.name}", "axis and radii", "along z with 0 < inner < outer radius",
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
            raise GeometryError(f"magnet {m.name}", "shape and polarization",
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
        raise GeometryError("axial_disc_flux_Wb", "disc_radius_m", ">= 0", float(rho.min()))
    terms = [t[None, None] for t in _pair_terms(sheets.radius_m[None, :], rho[:, None])]  # (1, 1, d, s)
    dz = z[:, :, None] - sheets.centre_z_m  # (n, d, s)
    b = sheets.half_height_m
    psi = _sheet_psi_m2(*terms, np.stack((dz + b, dz - b)))
    return sheets.J_T * (psi[0] - psi[1])


def _magnet_field_frames(magnet: Magnet, points_m: np.ndarray, Rw: np.ndarray, tw: np.ndarray) -> np.ndarray:
    """B of a magnet at many frames: Rw (n,3,3), tw (n,3) of its own frame; points (n,q,3)."""
    own = np.einsum("nqi,nij->nqj", points_m - tw[:, None, :], Rw)
    n, q = own.shape[:2]
    Bown = shape_field_own_T(magnet.shape, magnet.dimensions_m, np.asarray(magnet.polarization_T, dtype=float),
                             own.reshape(-1, 3), _mesh_triangles(magnet)).reshape(n, q, 3)
    return np.einsum("nij,nqj->nqi", Rw, Bown)


def _floater_frames(magnet: Magnet, positions_m, rotvecs_rad) -> tuple[np.ndarray, np.ndarray]:
    """World rotation (n,3,3) and origin (n,3) of a floater magnet's own frame at n poses."""
    from scipy.spatial.transform import Rotation

    P = np.asarray(positions_m, dtype=float).reshape(-1, 3)
    Rp = Rotation.from_rotvec(np.asarray(rotvecs_rad, dtype=float).reshape(-1, 3)).as_matrix()
    Rm = rotation_matrix(magnet.rotvec_rad)
    return Rp @ Rm, P + Rp @ np.asarray(magnet.position_m, dtype=float)


def magnet_field_T(magnet: Magnet, points_m, position_m=None, rotvec_rad=None) -> np.ndarray:
    """B of one magnet in the world frame.

    Parameters
    ----------
    magnet : Magnet
        Placed by its own ``position_m``/``rotvec_rad`` in its parent frame.
    points_m : ndarray, shape (q, 3)
        Observers, world frame (m).
    position_m, rotvec_rad : array_like, shape (3,), optional
        Pose of the parent (floater) frame in the world; omit for fixed magnets.

    Returns
    -------
    ndarray, shape (q, 3)
        B (T).
    """
    p = np.asarray(points_m, dtype=float).reshape(1, -1, 3)
    pos = np.zeros(3) if position_m is None else position_m
    rv = np.zeros(3) if rotvec_rad is None else rotvec_rad
    Rw, tw = _floater_frames(magnet, pos, rv)
    return _magnet_field_frames(magnet, p, Rw, tw)[0]


def floater_field_T(design: Design, points_m, positions_m, rotvecs_rad) -> np.ndarray:
    """B (n, q, 3) of all floater magnets at n poses, at observers (n, q, 3) or (q, 3)."""
    P = np.asarray(positions_m, dtype=float).reshape(-1, 3)
    pts = np.asarray(points_m, dtype=float)
    if pts.ndim == 2:
        pts = np.broadcast_to(pts, (P.shape[0],) + pts.shape)
    B = np.zeros(pts.shape)
    for m in design.floater.magnets:
        Rw, tw = _floater_frames(m, P, rotvecs_rad)
        B += _magnet_field_frames(m, pts, Rw, tw)
    return B


# --------------------------------------------------------------------------- cores


def _core_rule(core: Core, order: int = 8) -> tuple[np.ndarray, np.ndarray]:
    """Volume Gauss rule of a core in its own frame: points (q,3), weights (q,) summing to 1."""
    d = core.dimensions_m
    if core.shape in ("cylinder", "ring"):
        ri = 0.0 if core.shape == "cylinder" else d[0] / 2
        ro, h = d[-2] / 2, d[-1]
        r, wr = gauss_legendre(order, ri, ro)
        z, wz = gauss_legendre(order, -h / 2, h / 2)
        na = 2 * order
        phi = 2 * np.pi * np.arange(na) / na
        R_, P_, Z_ = np.meshgrid(r, phi, z, indexing="ij")
        W = (wr * r)[:, None, None] * np.full(na, 2 * np.pi / na)[None, :, None] * wz[None, None, :]
        pts = np.stack((R_ * np.cos(P_), R_ * np.sin(P_), Z_), axis=-1).reshape(-1, 3)
    elif core.shape == "cuboid":
        axes = [gauss_legendre(order, -e / 2, e / 2) for e in d]
        X, Y, Z = np.meshgrid(axes[0][0], axes[1][0], axes[2][0], indexing="ij")
        W = axes[0][1][:, None, None] * axes[1][1][None, :, None] * axes[2][1][None, None, :]
        pts = np.stack((X, Y, Z), axis=-1).reshape(-1, 3)
    else:
        raise GeometryError(f"core {core.name}", "shape", "one of cylinder, ring, cuboid", core.shape)
    W = W.reshape(-1)
    return pts, W / W.sum()


@dataclass(frozen=True)
class _CoreModel:
    """Precomputed linear maps of one core (all world frame)."""

    core: Core
    R: np.ndarray  # (3,3) own -> world
    chi_eff: np.ndarray  # (3,) own axes
    mean_pts_m: np.ndarray  # (qc,3) world Gauss points
    mean_w: np.ndarray  # (qc,)

    def susceptibility_world(self) -> np.ndarray:
        """(3,3) map from the mean applied B (T) to the core polarization J (T), world frame."""
        return self.R @ np.diag(self.chi_eff) @ self.R.T

    def field_matrix(self, points_m: np.ndarray) -> np.ndarray:
        """(q,3,3): B at points (world) per unit world polarization of the core."""
        own = _to_own(points_m.reshape(-1, 3), self.core.position_m, self.R)
        q = own.shape[0]
        G = np.empty((q, 3, 3))
        for j in range(3):
            Jown = np.zeros(3)
            Jown[j] = 1.0
            G[:, :, j] = shape_field_own_T(self.core.shape, self.core.dimensions_m, Jown, own) @ self.R.T
        # columns are per unit *own-axis* polarization; convert to per unit world polarization
        return G @ self.R.T


def core_models(design: Design, order: int = 8) -> tuple[_CoreModel, ...]:
    """Linear models of the design's cores (empty tuple when there are none)."""
    out = []
    for c in design.cores:
        mu_r = float(c.relative_permeability)
        if not np.isfinite(mu_r) or mu_r < 1.0:
            raise GeometryError(f"core {c.name}", "relative_permeability", ">= 1", mu_r)
        chi = mu_r - 1.0
        N = core_demag_factors(c.shape, c.dimensions_m)
        R = rotation_matrix(c.rotvec_rad)
        pts, w = _core_rule(c, order)
        out.append(_CoreModel(c, R, chi / (1.0 + N * chi), pts @ R.T + np.asarray(c.position_m, dtype=float), w))
    return tuple(out)


def _clip(J: np.ndarray, Js: float) -> tuple[np.ndarray, np.ndarray]:
    """Clip polarization vectors (..., 3) at magnitude Js; returns (J, clipped mask)."""
    mag = np.linalg.norm(J, axis=-1)
    over = mag > Js
    scale = np.where(over, Js / np.where(mag > 0, mag, 1.0), 1.0)
    return J * scale[..., None], over


# --------------------------------------------------------------------------- field basis


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
    core_J0_T : ndarray, shape (n, c, 3)
        Unclipped core polarizations at zero current (world frame), c cores.
    core_Jk_T_per_A : ndarray, shape (n, k, c, 3)
        Unclipped core polarization per ampere of each coil.
    core_saturation_T : ndarray, shape (c,)
    core_saturated : ndarray of bool, shape (n,)
        True where some core can exceed its saturation polarization with currents inside the
        rated box ``|I_k| <= max_current_A`` (|J| is convex in I, so the box vertices are checked);
        the linear basis is then not exact for all rated currents.
    """

    B0_T: np.ndarray
    Bk_T_per_A: np.ndarray
    core_J0_T: np.ndarray
    core_Jk_T_per_A: np.ndarray
    core_saturation_T: np.ndarray
    core_saturated: np.ndarray

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


def _box_vertices(design: Design) -> np.ndarray:
    imax = np.array([abs(float(c.max_current_A)) for c in design.coils])
    k = imax.size
    if k == 0:
        return np.zeros((1, 0))
    if k > 10:
        # 2^k vertices become too many; check each coil alone at +-max plus all at +-max
        rows = [np.zeros(k), imax, -imax]
        for i in range(k):
            e = np.zeros(k)
            e[i] = imax[i]
            rows += [e, -e]
        return np.array(rows)
    return np.array(list(itertools.product(*[(-v, v) for v in imax]))).reshape(-1, k)


def _pose_arrays(positions_m, rotvecs_rad, n_expected: int | None = None):
    P = np.asarray(positions_m, dtype=float).reshape(-1, 3)
    Rv = np.asarray(rotvecs_rad, dtype=float).reshape(-1, 3)
    if Rv.shape[0] == 1 and P.shape[0] > 1:
        Rv = np.repeat(Rv, P.shape[0], axis=0)
    if Rv.shape != P.shape:
        raise GeometryError("poses", "rotvecs_rad", f"shape {P.shape} like positions_m", Rv.shape)
    if not (np.all(np.isfinite(P)) and np.all(np.isfinite(Rv))):
        raise GeometryError("poses", "positions_m and rotvecs_rad", "finite", "non-finite values")
    return P, Rv


def fixed_field_basis(design: Design, points_m, floater_positions_m, floater_rotvecs_rad,
                      layers: int = 8, core_order: int = 8) -> FieldBasis:
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

    Returns
    -------
    FieldBasis
    """
    pts = np.asarray(points_m, dtype=float)
    if pts.ndim == 2:
        pts = pts[None]
    n, q = pts.shape[:2]
    flat = pts.reshape(-1, 3)
    k = len(design.coils)
    B0 = np.zeros((n * q, 3))
    for m in design.magnets:
        B0 += magnet_field_T(m, flat)
    Bk = np.zeros((k, n * q, 3))
    for i, c in enumerate(design.coils):
        Bk[i] = coil_field_per_ampere_T(c, flat, layers)
    B0 = B0.reshape(n, q, 3)
    Bk = Bk.reshape(k, n, q, 3).transpose(1, 0, 2, 3)
    cores = core_models(design, core_order)
    nc = len(cores)
    J0 = np.zeros((n, nc, 3))
    Jk = np.zeros((n, k, nc, 3))
    Js = np.array([float(cm.core.saturation_polarization_T) for cm in cores])
    if nc:
        P, Rv = _pose_arrays(floater_positions_m, floater_rotvecs_rad)
        if P.shape[0] != n:
            raise GeometryError("fixed_field_basis", "floater_positions_m", f"{n} poses like points_m", P.shape[0])
        for j, cm in enumerate(cores):
            X = cm.susceptibility_world()
            w = cm.mean_w
            # applied mean field from fixed magnets (pose independent) + floater (per pose)
            Bm = sum((magnet_field_T(m, cm.mean_pts_m) for m in design.magnets), np.zeros_like(cm.mean_pts_m))
            Bf = floater_field_T(design, cm.mean_pts_m, P, Rv)  # (n, qc, 3)
            mean0 = w @ Bm + np.einsum("q,nqi->ni", w, Bf)
            J0[:, j] = mean0 @ X.T
            for i, c in enumerate(design.coils):
                Jk[:, i, j] = (w @ coil_field_per_ampere_T(c, cm.mean_pts_m, layers)) @ X.T
            G = cm.field_matrix(flat).reshape(n, q, 3, 3)
            B0 += np.einsum("nqij,nj->nqi", G, J0[:, j])
            Bk += np.einsum("nqij,nkj->nkqi", G, Jk[:, :, j])
    sat = np.zeros(n, dtype=bool)
    if nc:
        V = _box_vertices(design)
        for I in V:
            J = J0 + np.einsum("k,nkci->nci", I, Jk)
            sat |= np.any(np.linalg.norm(J, axis=-1) > Js[None, :], axis=1)
    return FieldBasis(B0, Bk, J0, Jk, Js, sat)


def fixed_field_T(design: Design, points_m, currents_A, floater_position_m=None, floater_rotvec_rad=None,
                  layers: int = 8, core_order: int = 8) -> np.ndarray:
    """Field of all fixed sources at given currents, with core saturation clipping.

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
        raise GeometryError("fixed_field_T", "currents_A", f"{len(design.coils)} values (one per coil)", I.size)
    if design.cores and floater_position_m is None:
        raise GeometryError("fixed_field_T", "floater_position_m", "given when the design has cores", None)
    pos = np.zeros(3) if floater_position_m is None else np.asarray(floater_position_m, dtype=float)
    rv = np.zeros(3) if floater_rotvec_rad is None else np.asarray(floater_rotvec_rad, dtype=float)
    fb = fixed_field_basis(design, p[None], pos[None], rv[None], layers, core_order)
    B = fb.B0_T[0] + np.einsum("k,kqi->qi", I, fb.Bk_T_per_A[0])
    if fb.core_J0_T.shape[1]:
        J = fb.core_J0_T[0] + np.einsum("k,kci->ci", I, fb.core_Jk_T_per_A[0])
        Jc, over = _clip(J, fb.core_saturation_T)
        if np.any(over):
            cores = core_models(design, core_order)
            for j, cm in enumerate(cores):
                if over[j]:
                    B += cm.field_matrix(p) @ (Jc[j] - J[j])
    return B
