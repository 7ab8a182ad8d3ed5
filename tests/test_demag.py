"""Demagnetizing factors against independent references (scipy quadrature, exact limits)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate, special

from fields.errors import InputError
from fields.physics.demag import (
    core_demag_factors,
    cuboid_demag_factors,
    cylinder_demag_factors,
    ring_demag_factors,
)

#: the independent Bessel integral below is converged to about 1e-10 (panelled quad)
BESSEL_RTOL = 1e-8
#: the volume-averaged solid-angle reference uses a 40^3 Gauss rule on an integrand with
#: logarithmic edge singularities: about 1e-5 relative
CUBOID_RTOL = 1e-4


def nz_cylinder_bessel(diameter: float, height: float) -> float:
    """Magnetometric axial factor of a cylinder from the energy of its two charged end discs.

    Hankel-transform form N_z = (2R/L) int_0^inf J1(x)^2 (1 - exp(-x L/R)) / x^2 dx
    (derived from the disc potential phi = (sigma R / 2) int J0(kr) J1(kR) e^{-k|z|} / k dk, e.g.
    Jackson, Classical Electrodynamics, 3rd ed., sec. 3.13; same route as Joseph, J. Appl. Phys. 37
    (1966) 4639). Independent of fields.physics.demag's elliptic closed form.
    """
    R, L = diameter / 2, height

    def f(x):
        return special.j1(x) ** 2 * (-np.expm1(-x * L / R)) / x**2

    edges = np.arange(0.0, 2000.0 * np.pi + 1.0, np.pi)
    s = sum(integrate.quad(f, a, b, epsabs=0, epsrel=1e-13)[0] for a, b in zip(edges[:-1], edges[1:]))
    s += 1.0 / (np.pi * 2 * edges[-1] ** 2)  # tail: <J1(x)^2> ~ 1/(pi x)
    return 2 * R / L * s


@pytest.mark.parametrize("tau", [0.05, 0.25, 1.0, 4.0, 20.0])
def test_cylinder_axial_factor_matches_bessel_integral(tau):
    N = cylinder_demag_factors(0.01, 0.01 * tau)
    assert N[2] == pytest.approx(nz_cylinder_bessel(0.01, 0.01 * tau), rel=BESSEL_RTOL)
    # trace rule N_x + N_y + N_z = 1 (exact for any body; e.g. Chen, Brug, Goldfarb 1991, sec. II)
    assert N.sum() == pytest.approx(1.0, abs=1e-14)


def test_cylinder_limits():
    # long cylinder: axial -> 0, transverse -> 1/2; thin disc: axial -> 1 (exact limits, e.g.
    # Chen, Brug, Goldfarb, IEEE Trans. Magn. 27(4) (1991) 3601, fig. 1 and its asymptotics)
    long = cylinder_demag_factors(0.001, 1.0)
    assert long[2] < 1e-3 and long[0] == pytest.approx(0.5, abs=1e-3)
    thin = cylinder_demag_factors(1.0, 1e-4)
    assert thin[2] == pytest.approx(1.0, abs=1e-3)
    # leading long-cylinder asymptote N_z ~ 4/(3 pi tau) (from the Bessel integral: int J1^2/x^2 = 4/(3 pi))
    tau = 200.0
    assert cylinder_demag_factors(1.0, tau)[2] == pytest.approx(4 / (3 * np.pi * tau), rel=2e-2)


def test_ring_reduces_to_cylinder_and_is_consistent():
    for tau in (0.3, 1.0, 3.0):
        assert ring_demag_factors(0.0, 0.01, 0.01 * tau) == pytest.approx(
            cylinder_demag_factors(0.01, 0.01 * tau), rel=1e-8)


def test_ring_against_bessel_integral():
    # annulus version of the Hankel-transform energy (independent panelled quad):
    a, b, L = 0.003, 0.008, 0.006

    def f(k):
        g = b * special.j1(k * b) - a * special.j1(k * a)
        return g * g * (-np.expm1(-k * L)) / k**2

    edges = np.linspace(0.0, 3000 * np.pi / a, 6001)
    s = sum(integrate.quad(f, lo, hi, epsabs=0, epsrel=1e-12)[0] for lo, hi in zip(edges[:-1], edges[1:]))
    s += (a + b) / (2 * np.pi * edges[-1] ** 2)
    nz_ref = 2 * s / ((b * b - a * a) * L)
    N = ring_demag_factors(2 * a, 2 * b, L)
    assert N[2] == pytest.approx(nz_ref, rel=1e-7)
    assert N.sum() == pytest.approx(1.0, abs=1e-14)


def _solid_angle_rectangle(x, y, z, a, b):
    """Solid angle of the rectangle |u|<a, |v|<b in the plane w=0, seen from (x, y, z)."""
    total = 0.0
    for su in (-1, 1):
        for sv in (-1, 1):
            u, v = su * a - x, sv * b - y
            total += su * sv * np.arctan2(u * v, z * np.sqrt(u * u + v * v + z * z))
    return total


def nz_cuboid_volume_average(dx, dy, dz, n=40):
    """N_z = -<H_z>/M: volume average of the field of the two charged z faces.

    A face with charge sigma gives H_z = sigma * Omega / (4 pi) (Coulomb's law; Omega the solid
    angle of the rectangle), averaged with a Gauss-Legendre rule. Independent of Aharoni's form.
    """
    a, b, c = dx / 2, dy / 2, dz / 2
    xg, wg = np.polynomial.legendre.leggauss(n)
    X, Y, Z = np.meshgrid(a * xg, b * xg, c * xg, indexing="ij")
    W = (wg[:, None, None] * wg[None, :, None] * wg[None, None, :]) / 8.0
    om_top = _solid_angle_rectangle(X, Y, c - Z, a, b)  # field below the + face points -z
    om_bot = _solid_angle_rectangle(X, Y, Z + c, a, b)
    Hz = -(om_top + om_bot) / (4 * np.pi)  # per unit M
    return float(-(W * Hz).sum())


@pytest.mark.parametrize("dims", [(1.0, 1.0, 1.0), (1.0, 2.0, 0.5), (3.0, 1.0, 0.7)])
def test_cuboid_against_solid_angle_average(dims):
    N = cuboid_demag_factors(dims)
    assert N[2] == pytest.approx(nz_cuboid_volume_average(*dims), rel=CUBOID_RTOL)
    assert N.sum() == pytest.approx(1.0, abs=1e-12)


def test_cube_is_one_third_and_long_bar_limit():
    # cube: 1/3 exactly by symmetry and the trace rule (Aharoni 1998, J. Appl. Phys. 83, 3432)
    assert cuboid_demag_factors((2.0, 2.0, 2.0)) == pytest.approx([1 / 3] * 3, abs=1e-13)
    bar = cuboid_demag_factors((1.0, 1.0, 1000.0))
    assert bar[2] < 2e-3 and bar[0] == pytest.approx(0.5, abs=2e-3)


def test_errors_name_the_rule():
    with pytest.raises(InputError, match="diameter_m must be a positive"):
        cylinder_demag_factors(-1.0, 1.0)
    with pytest.raises(InputError, match="shape must be one of cylinder, ring, cuboid"):
        core_demag_factors("sphere", (1.0,))


def test_cylinder_gamma_one_against_chen_brug_goldfarb_value():
    # Chen, Brug & Goldfarb (1991), IEEE Trans. Magn. 27(4), 3601, table of magnetometric factors
    # for chi = 0: a cylinder of length = diameter has N_m = 0.3116 (value from memory; the
    # independent Bessel-integral checks above carry the full precision)
    from fields.physics.demag import cylinder_demag_factors

    n = cylinder_demag_factors(1.0, 1.0)
    assert n[2] == pytest.approx(0.3116, abs=1e-4)
    assert n[0] == pytest.approx((1 - 0.3116) / 2, abs=1e-4)
