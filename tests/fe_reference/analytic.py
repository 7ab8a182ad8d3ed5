"""Independent references for validating the finite-element solver.

- :func:`image_force_N`: force between an axially magnetized cylinder magnet and a permeable
  half space by the image method. For a magnetic charge ``q`` above a half space of relative
  permeability ``mu_r`` the field outside is that of ``q`` and an image ``-q (mu_r - 1)/(mu_r + 1)``
  at the mirror point (the magnetostatic analogue of the dielectric half space, J. D. Jackson,
  Classical Electrodynamics, 3rd ed., 1999, sec. 4.4 with ``epsilon -> mu``; E. P. Furlani,
  Permanent Magnet and Electromechanical Devices, 2001, sec. 3.6 images in permeable media). The
  image of an axial magnet is therefore the mirrored magnet with polarization scaled by
  ``(mu_r - 1)/(mu_r + 1)`` and the same direction. The force on the real magnet is the charge
  integral ``sum over caps of sigma * B_image,z dA`` (Furlani sec. 3.3), with the image's field
  from magpylib and Gauss-Legendre in radius.
- :func:`sphere_coil_force_N`: force on a linear permeable sphere on the axis of a coaxial thick
  coil by the Legendre expansion of the scalar potential (Jackson sec. 3.3 for azimuthal
  symmetry; the sphere's response to each multipole follows from the continuity of ``H_t`` and
  ``B_n``, as for the ``n = 1`` term in Jackson sec. 5.11): an applied potential
  ``a_n r^n P_n(cos t)`` induces ``b_n r^-(n+1) P_n(cos t)`` outside with
  ``b_n = -a_n a^(2n+1) n (mu_r - 1) / (n mu_r + n + 1)``. The ``a_n`` come from the Taylor
  coefficients of the coil's on-axis field (circular-loop field, Jackson eq. 5.40 on the axis),
  taken by FFT on a circle in the complex plane; the force on the sphere is minus the Lorentz force
  of the induced field on the winding, ``F_z = int J 2 pi rho B_rho dA``.
- :func:`coil_magnet_flux_linkage_Wb`: the magnet's flux linkage with a coil by reciprocity,
  ``psi = int_magnet M . B_coil(1 A) dV`` (the coil's field per ampere from magpylib loops on a
  Gauss-Legendre grid of the winding).
"""

from __future__ import annotations

import magpylib as magpy
import numpy as np
from numpy.polynomial import legendre as npleg
from scipy.constants import mu_0


def _gl(n: int, lo: float, hi: float):
    x, w = np.polynomial.legendre.leggauss(n)
    return 0.5 * (hi - lo) * x + 0.5 * (hi + lo), 0.5 * (hi - lo) * w


def image_force_N(diameter_m: float, height_m: float, Jz_T: float, lift_m: float, mu_r: float,
                  nr: int = 48) -> float:
    """Axial force (N, +z) on a magnet whose bottom face is ``lift_m`` above a permeable half space z < 0."""
    k = (mu_r - 1.0) / (mu_r + 1.0)
    image = magpy.magnet.Cylinder(polarization=(0, 0, k * Jz_T), dimension=(diameter_m, height_m),
                                  position=(0, 0, -lift_m - height_m / 2))
    r, w = _gl(nr, 0.0, diameter_m / 2)
    F = 0.0
    for z, sign in ((lift_m + height_m, 1.0), (lift_m, -1.0)):
        pts = np.column_stack([r, np.zeros_like(r), np.full_like(r, z)])
        Bz = image.getB(pts)[:, 2]
        F += sign * (Jz_T / mu_0) * np.sum(w * 2 * np.pi * r * Bz)
    return float(F)


def _coil_rule(rect, n: int):
    r, wr = _gl(n, rect[0], rect[1])
    z, wz = _gl(n, rect[2], rect[3])
    R, Z = np.meshgrid(r, z, indexing="ij")
    W = np.outer(wr, wz)
    return R.ravel(), Z.ravel(), W.ravel()


def sphere_coil_force_N(coil_rect, turns: float, current_A: float, sphere_z_m: float, radius_m: float,
                        mu_r: float, n_terms: int = 80, n_fft: int = 512, n_coil: int = 24) -> float:
    """Axial force (N, +z) on a linear sphere (centre on the axis at ``sphere_z_m``) from a coil.

    ``coil_rect = (r0, r1, z0, z1)`` is the winding section (m); the sphere must not reach the
    winding.
    """
    R, Z, W = _coil_rule(coil_rect, n_coil)
    Z = Z - sphere_z_m
    J = turns * current_A / ((coil_rect[1] - coil_rect[0]) * (coil_rect[3] - coil_rect[2]))
    d_min = float(np.sqrt(R**2 + Z**2).min())
    if radius_m >= d_min:
        raise ValueError("sphere_coil_force_N: the sphere reaches the winding")
    # Taylor coefficients of H_z(z) on the axis: FFT on |z| = rho0
    rho0 = np.sqrt(radius_m * d_min)
    zc = rho0 * np.exp(2j * np.pi * np.arange(n_fft) / n_fft)
    Hz = np.zeros(n_fft, dtype=complex)
    for Rq, Zq, Wq in zip(R, Z, W):
        Hz += J * Wq * Rq**2 / (2.0 * (Rq**2 + (zc - Zq) ** 2) ** 1.5)
    c = (np.fft.fft(Hz)[: n_terms + 1] / n_fft).real / rho0 ** np.arange(n_terms + 1)
    n = np.arange(1, n_terms + 1)
    a_n = -c[n - 1] / n
    b_n = -a_n * radius_m ** (2 * n + 1) * n * (mu_r - 1.0) / (n * mu_r + n + 1.0)
    # induced field at the winding's quadrature points
    rr = np.sqrt(R**2 + Z**2)
    ct, st = Z / rr, R / rr
    coef = np.zeros(n_terms + 1)
    Hr = np.zeros_like(rr)
    Ht = np.zeros_like(rr)
    for k, bk in zip(n, b_n):
        coef[:] = 0.0
        coef[k] = 1.0
        P = npleg.legval(ct, coef)
        dP = npleg.legval(ct, npleg.legder(coef))
        Hr += (k + 1) * bk * rr ** (-(k + 2)) * P
        Ht += bk * rr ** (-(k + 2)) * st * dP
    Hrho = Hr * st + Ht * ct
    return float(mu_0 * np.sum(J * W * 2 * np.pi * R * Hrho))


def coil_magnet_flux_linkage_Wb(coil_rect, turns: float, magnet_rect, Jz_T: float, n_coil: int = 16,
                                n_mag: int = 16) -> float:
    """Flux linkage (Wb-turns) of a coil from a coaxial axially magnetized cylinder/ring, by reciprocity."""
    R, Z, W = _coil_rule(coil_rect, n_coil)
    area = (coil_rect[1] - coil_rect[0]) * (coil_rect[3] - coil_rect[2])
    loops = [magpy.current.Circle(current=turns * w / area, diameter=2 * r, position=(0, 0, z))
             for r, z, w in zip(R, Z, W)]
    mr, mz, mw = _coil_rule(magnet_rect, n_mag)
    pts = np.column_stack([mr, np.zeros_like(mr), mz])
    Bz = magpy.getB(loops, pts, sumup=True)[:, 2]
    return float(np.sum(mw * 2 * np.pi * mr * (Jz_T / mu_0) * Bz))
