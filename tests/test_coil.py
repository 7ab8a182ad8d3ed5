"""Tests of the coil modules (fields.devices.coil, winding, inductance, drive) against published formulas, standards and independent numerical integration.

Every reference value is built here with scipy / magpylib, not with the code under test.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate
from scipy.constants import mu_0
from scipy.special import ellipe, ellipk

from fields.input import tables
from fields.devices.coil import coil_datasheet
from fields.devices.drive import drive_headroom
from fields.devices.inductance import air_mutual_inductance_H, air_self_inductance_H, mutual_inductance_matrix
from fields.devices.winding import resistance_and_cooling, steady_temperature_C
from fields.errors import InputError
from fields.model.design import Coil, Core, Design, Floater, Magnet, Study

INCH = 0.0254


def make_design(coils=(), cores=(), hconv=10.0, ambient=25.0, op=0.01):
    """A tiny invented design: coils above a disc floater, gap measured downwards from z = 0."""
    fl = Floater("floater", (Magnet("disc", "cylinder", (0.02, 0.005), (0.0, 0.0, 1.3)),), 0.0, (0, 0, 0), 0.02,
                 (0, 0, 0), ((1e-6, 0, 0), (0, 1e-6, 0), (0, 0, 1e-6)))
    st = Study(0.005, 0.02, 16, "coil", (0.0, 0.0, 0.0), (0.0, 0.0, -1.0), op, (0.0,), 0.0, 1, 0.0, 1,
               (0.0, 0.0, -tables.G_STANDARD), 12.0, convection_W_per_m2K=hconv, ambient_temperature_C=ambient)
    return Design("test", "invented test design", "tests", tuple(coils), tuple(cores), (), fl, (), st)


def coil(a, b, h, n, pos=(0.0, 0.0, 0.0), axis=(0.0, 0.0, 1.0), **kw):
    return Coil("c", a, b, h, n, pos, axis, kw.pop("nominal", 0.5), kw.pop("imax", 1.0), **kw)


# --------------------------------------------------------------------------------- inductance

# Wheeler's multilayer formula is "accurate to about 1 %" when the three denominator terms are
# about equal (Wheeler 1928, Proc. IRE 16, "Simple inductance formulas for radio coils", eq. for
# multilayer coils; the accuracy statement is recalled from memory).
WHEELER_TOLERANCE = 0.01


@pytest.mark.parametrize("a_in, l_in, c_in", [(1.0, 2.0 / 3.0, 0.6), (1.0, 0.8, 0.5), (0.8, 0.5, 0.45)])
def test_multilayer_inductance_vs_wheeler(a_in, l_in, c_in):
    terms = np.array([6 * a_in, 9 * l_in, 10 * c_in])
    assert terms.max() / terms.min() < 1.5  # validity: the three terms about equal
    N = 300
    L_wheeler_H = 0.8 * a_in**2 * N**2 / (6 * a_in + 9 * l_in + 10 * c_in) * 1e-6
    c = coil((a_in - c_in / 2) * INCH, (a_in + c_in / 2) * INCH, l_in * INCH, N)
    L, err = air_self_inductance_H(c)
    assert err < 1e-9 * L
    assert abs(L / L_wheeler_H - 1) < WHEELER_TOLERANCE


def nagaoka(diameter_over_length):
    """Nagaoka's coefficient from its elliptic-integral definition (Nagaoka 1909, J. Coll. Sci. Tokyo 27(6)):
    K = 4 / (3 pi k') [ (k'^2 / k^2)(K(k) - E(k)) + E(k) - k ], k^2 = d^2 / (d^2 + l^2)."""
    m = diameter_over_length**2 / (1 + diameter_over_length**2)
    k, kp = np.sqrt(m), np.sqrt(1 - m)
    return 4 / (3 * np.pi * kp) * ((kp**2 / m) * (ellipk(m) - ellipe(m)) + ellipe(m) - k)


# Nagaoka's table (Nagaoka 1909; as reprinted in Grover, Inductance Calculations, 1946, Table 36):
# values recalled from memory, 4 decimals
NAGAOKA_TABLE = {0.1: 0.9588, 0.5: 0.8181, 1.0: 0.6884, 2.0: 0.5255, 10.0: 0.2033}


@pytest.mark.parametrize("ratio", sorted(NAGAOKA_TABLE))
def test_nagaoka_coefficient_matches_table(ratio):
    assert abs(nagaoka(ratio) - NAGAOKA_TABLE[ratio]) < 6e-5  # half a unit in the 4th decimal + margin


@pytest.mark.parametrize("ratio", [0.1, 1.0, 4.0])
def test_thin_solenoid_vs_lorenz_nagaoka(ratio):
    # Lorenz / Nagaoka current sheet: L = mu0 pi a^2 N^2 K / l. A winding of wall thickness w
    # differs from the sheet by O(w / a): check the limit and the first-order rate.
    R, N = 0.01, 50
    length = 2 * R / ratio
    L_sheet = mu_0 * np.pi * R**2 * N**2 * nagaoka(ratio) / length
    errs = []
    for w in (1e-3 * R, 1e-5 * R):
        L, _ = air_self_inductance_H(coil(R - w / 2, R + w / 2, length, N))
        errs.append(abs(L / L_sheet - 1))
    assert errs[1] < 3e-5
    assert 80 < errs[0] / errs[1] < 120  # first order in w: 100x for 100x thinner


def maxwell(a, b, d):
    """Maxwell's mutual inductance of coaxial circles (Treatise, 1873, art. 701), written out here."""
    m = 4 * a * b / ((a + b) ** 2 + d**2)
    k = np.sqrt(m)
    return mu_0 * np.sqrt(a * b) * ((2 / k - k) * ellipk(m) - 2 / k * ellipe(m))


@pytest.mark.parametrize("a, b, d", [(0.02, 0.02, 0.01), (0.01, 0.03, 0.005), (0.02, 0.015, 0.1)])
def test_coaxial_loops_vs_maxwell(a, b, d):
    w = 1e-7  # filament-like cross-section: averaging error O((w/d)^2)
    c1 = coil(a - w / 2, a + w / 2, w, 1)
    c2 = coil(b - w / 2, b + w / 2, w, 1, pos=(0.0, 0.0, d))
    M, err = air_mutual_inductance_H(c1, c2)
    assert abs(M / maxwell(a, b, d) - 1) < 1e-9


def neumann(c1, n1, a1, c2, n2, a2):
    """Neumann's double line integral M = mu0/(4 pi) oint oint dl1.dl2/|r1 - r2| by scipy dblquad."""
    def basis(n):
        n = np.asarray(n, float) / np.linalg.norm(n)
        u = np.cross(n, [0.0, 1.0, 0.0])
        u /= np.linalg.norm(u)
        return u, np.cross(n, u)
    u1, v1 = basis(n1)
    u2, v2 = basis(n2)

    def f(p2, p1):
        r1 = c1 + a1 * (np.cos(p1) * u1 + np.sin(p1) * v1)
        r2 = c2 + a2 * (np.cos(p2) * u2 + np.sin(p2) * v2)
        d1 = a1 * (-np.sin(p1) * u1 + np.cos(p1) * v1)
        d2 = a2 * (-np.sin(p2) * u2 + np.cos(p2) * v2)
        return d1 @ d2 / np.linalg.norm(r1 - r2)
    val, _ = integrate.dblquad(f, 0, 2 * np.pi, 0, 2 * np.pi, epsabs=1e-14, epsrel=1e-10)
    return mu_0 / (4 * np.pi) * val


def test_tilted_loops_vs_neumann():
    w = 1e-7
    n2 = np.array([0.3, 0.1, 1.0])
    c1 = coil(0.02 - w / 2, 0.02 + w / 2, w, 1)
    c2 = coil(0.015 - w / 2, 0.015 + w / 2, w, 1, pos=(0.01, 0.005, 0.03), axis=tuple(n2))
    M, _ = air_mutual_inductance_H(c1, c2)
    ref = neumann(np.zeros(3), (0, 0, 1), 0.02, np.array([0.01, 0.005, 0.03]), n2, 0.015)
    assert abs(M / ref - 1) < 1e-7
    M21, _ = air_mutual_inductance_H(c2, c1)
    assert abs(M21 / M - 1) < 1e-9  # reciprocity (Neumann's formula is symmetric)


def test_mutual_matrix_symmetric_and_positive_definite():
    d = make_design((coil(0.01, 0.02, 0.01, 100, pos=(0, 0, 0.02)),
                     coil(0.01, 0.02, 0.01, 100, pos=(0.045, 0, 0.02))))
    L = mutual_inductance_matrix(d)
    assert np.allclose(L, L.T, rtol=1e-9, atol=0)
    assert np.all(np.linalg.eigvalsh(L) > 0)  # magnetic energy 1/2 I.L.I > 0
    assert L[0, 1] < 0  # side-by-side coils with parallel axes link negatively (return flux)


# ------------------------------------------------------------------------- energy identity

def _thick_coil_B_per_A(a, b, h, N, rho, z, n=16):
    """B of a uniform-current thick coil from magpylib's exact cylinder kernel (Derby and Olbert 2010):
    the winding is a continuum of axially magnetized cylinders r' in [a, b] with polarization
    mu0 j dr' (Amperian equivalence), integrated by Gauss-Legendre split at r' = rho."""
    import magpylib as magpy

    j = N / ((b - a) * h)
    rc = np.clip(rho, a, b)
    x, w = np.polynomial.legendre.leggauss(n)
    Br, Bz = np.zeros_like(rho), np.zeros_like(rho)
    for lo, hi in ((np.full_like(rho, a), rc), (rc, np.full_like(rho, b))):
        half = 0.5 * (hi - lo)
        for xi, wi in zip(x, w):
            r = np.where(half > 0, lo + half * (xi + 1), 0.5 * (a + b))
            wt = np.where(half > 0, half * wi, 0.0)
            B = magpy.core.magnet_cylinder_axial_Bfield(0.5 * h / r, rho / r, z / r)
            Br += mu_0 * j * wt * B[0]
            Bz += mu_0 * j * wt * B[2]
    return Br, Bz


def test_energy_half_LI2_equals_field_energy():
    # (1/2) L I^2 = (1/(2 mu0)) int B^2 dV over all space. Box [0, X]^2 in (rho, |z|) by Gauss
    # panels aligned with the winding; outside it the dipole field m = N I pi (a^2 + ab + b^2)/3:
    # its energy outside the sphere of radius X is mu0 m^2 / (12 pi X^3), minus the part of the box
    # outside that sphere (scipy dblquad). The dipole tail is 2e-6 of the total here and its
    # octupole correction is (size / X)^2 smaller, so the identity holds to ~1e-6.
    a, b, h, N = 0.01, 0.02, 0.015, 200
    X = 40 * b

    def edges(start, end):
        e = [start]
        while e[-1] < end:
            e.append(min(2 * e[-1], end))
        return e

    def panels(ed, n):
        x, w = np.polynomial.legendre.leggauss(n)
        P = [lo + 0.5 * (hi - lo) * (x + 1) for lo, hi in zip(ed[:-1], ed[1:])]
        W = [0.5 * (hi - lo) * w for lo, hi in zip(ed[:-1], ed[1:])]
        return np.concatenate(P), np.concatenate(W)

    rr, wr = panels([0, a] + edges(b, X), 20)
    zz, wz = panels([0] + edges(h / 2, X), 20)
    R, Z = np.meshgrid(rr, zz, indexing="ij")
    Br, Bz = _thick_coil_B_per_A(a, b, h, N, R.ravel(), Z.ravel())
    W = 2 * np.outer(wr * 2 * np.pi * rr, wz).ravel()
    E_box = np.sum(W * (Br**2 + Bz**2)) / (2 * mu_0)
    m = N * np.pi * (a * a + a * b + b * b) / 3

    def u(z, r):
        s = r * r + z * z
        return mu_0 * m * m / (32 * np.pi**2) * (1 + 3 * z * z / s) / s**3 * 4 * np.pi * r

    corner = integrate.dblquad(u, 0, X, lambda r: np.sqrt(max(X * X - r * r, 0.0)), lambda r: X)[0]
    E = E_box + mu_0 * m * m / (12 * np.pi * X**3) - corner
    L, _ = air_self_inductance_H(coil(a, b, h, N))
    assert abs(E / (0.5 * L) - 1) < 1e-5


# ------------------------------------------------------------------------ wire and copper

# ASTM B258 table of nominal diameters (inches, 4 decimals); recalled from memory
AWG_TABLE_IN = {10: 0.1019, 20: 0.0320, 30: 0.0100, 26: 0.0159, 36: 0.0050}


@pytest.mark.parametrize("gauge", sorted(AWG_TABLE_IN))
def test_awg_diameters_vs_astm_b258_table(gauge):
    assert abs(tables.awg_diameter_m(gauge) / INCH - AWG_TABLE_IN[gauge]) <= 0.00005 + 1e-12


def test_copper_constants_and_resistance_vs_iec_60028():
    # IEC 60028: resistivity 1/58 ohm mm^2/m at 20 C, alpha 0.00393 1/K at 20 C
    assert tables.COPPER_RESISTIVITY_20C_OHM_M == pytest.approx(1 / 58 * 1e-6, rel=1e-12)
    assert tables.COPPER_ALPHA_20C_PER_K == pytest.approx(0.00393, rel=1e-12)
    d_wire = 0.0100 * INCH  # AWG 30 from the table above
    c = coil(0.01, 0.02, 0.02, 1000, wire_diameter_m=d_wire)
    cd = coil_datasheet(make_design((c,)), 0)
    length_m = 1000 * 2 * np.pi * 0.015  # mean turn 2 pi (a + b)/2
    area_mm2 = np.pi / 4 * (d_wire * 1e3) ** 2
    assert cd.wire_length_m == pytest.approx(length_m, rel=1e-12)
    assert cd.resistance_20C_ohm == pytest.approx(length_m / 58 / area_mm2, rel=1e-12)
    assert cd.resistance_ohm(100.0) == pytest.approx(length_m / 58 / area_mm2 * (1 + 0.00393 * 80), rel=1e-12)
    assert cd.copper_fill_factor == pytest.approx(1000 * area_mm2 * 1e-6 / (0.01 * 0.02), rel=1e-12)


def test_fill_factor_beyond_hexagonal_packing_is_an_error():
    c = coil(0.01, 0.011, 0.001, 100, wire_diameter_m=1e-4 * 1.2)  # copper 1.13 of the window
    with pytest.raises(InputError, match=r"coil c: the copper fill factor .* must be at most 0\.9069"):
        coil_datasheet(make_design((c,)), 0)


# ---------------------------------------------------------------------------------- heat

def test_steady_temperature_is_the_energy_balance_fixed_point():
    # the lumped balance I^2 R(T) = G (T - T_amb), solved independently with brentq
    from scipy.optimize import brentq
    R20, G, Tamb = 12.0, 0.08, 30.0
    for I in (0.3, 0.6):
        T, run = steady_temperature_C([I], R20, G, Tamb)
        ref = brentq(lambda t: I * I * R20 * (1 + 0.00393 * (t - 20)) - G * (t - Tamb), Tamb, 1e4)
        assert not run[0] and T[0] == pytest.approx(ref, rel=1e-12)
    # runaway when I^2 R20 alpha >= G: the balance has no root above ambient
    I = np.sqrt(G / (R20 * 0.00393)) * 1.01
    T, run = steady_temperature_C([I], R20, G, Tamb)
    assert run[0] and np.isinf(T[0])


def test_datasheet_thermal_warnings_and_voltage_drive_drift():
    c = coil(0.01, 0.02, 0.02, 400, wire_diameter_m=0.0159 * INCH, insulation_class_C=105.0)
    d = make_design((c,))
    gaps = d.study.gaps()
    hover = np.linspace(0.2, 1.0, gaps.size)
    cd = coil_datasheet(d, 0, hover_currents_A=hover)
    # surface: outer cylinder + two end annuli + open bore
    S = 2 * np.pi * 0.02 * 0.02 + 2 * np.pi * (0.02**2 - 0.01**2) + 2 * np.pi * 0.01 * 0.02
    assert cd.surface_area_m2 == pytest.approx(S, rel=1e-12)
    assert np.allclose(cd.power_W, 10.0 * S * cd.temperature_rise_K, rtol=1e-10)  # P = h A dT
    # a fixed voltage gives less current when hot: I_hot / I_cold = R20 / R(T)
    assert np.allclose(cd.current_hot_same_voltage_A / hover, 1 / (1 + 0.00393 * (cd.temperature_C - 20)), rtol=1e-12)
    codes = {n.code: n.values for n in cd.notices}
    # the hottest gap exceeds the 105 C class (IEC 60085 class A)
    assert codes["above_thermal_class"]["class_C"] == 105.0
    assert codes["above_thermal_class"]["count"] == int(np.sum(cd.temperature_C > 105.0))
    # AWG 26 at 1 A: 1 A / (pi/4 (0.0159 in)^2) = 7.8 A/mm^2, above the 3.5 A/mm^2 band
    assert codes["current_density_high"]["max_A_per_mm2"] == pytest.approx(
        1.0 / (np.pi / 4 * (0.0159 * INCH * 1e3) ** 2), rel=1e-12)
    assert np.all(cd.dL_dgap_H_per_m == 0) and cd.inductance_model == "air"
    # the sweep's cheap resistance and cooling are the data sheet's numbers
    R20, G = resistance_and_cooling(d, 0)
    assert R20 == pytest.approx(cd.resistance_20C_ohm, rel=1e-14)
    assert G == pytest.approx(10.0 * S, rel=1e-12)


def test_core_adds_inductance_and_saturation_removes_it():
    """A core filling the bore raises L (the iron's flux links the coil); a core that saturates at
    the operating currents links almost no extra flux per ampere (its differential susceptibility
    collapses: Frohlich-Kennelly curve, dJ/dh -> 0 as J -> Js; Frohlich 1881, Kennelly 1891, from
    memory). The core fills the bore: no cooling there."""
    c = coil(0.01, 0.02, 0.02, 400, pos=(0, 0, 0.02), wire_diameter_m=0.0159 * INCH)
    soft = Core("core", "cylinder", (0.016, 0.018), (0, 0, 0.02), (0, 0, 1), 1000.0, 1.6)
    weak = Core("core", "cylinder", (0.016, 0.018), (0, 0, 0.02), (0, 0, 1), 1000.0, 1e-3)
    air = coil_datasheet(make_design((c,)), 0).inductance_H
    lin = coil_datasheet(make_design((c,), (soft,)), 0)
    sat = coil_datasheet(make_design((c,), (weak,)), 0)
    assert lin.inductance_H > 1.2 * air
    assert sat.inductance_core_H < 0.05 * lin.inductance_core_H
    assert "core_saturates" in {n.code for n in sat.notices}
    assert lin.inductance_model == sat.inductance_model == "iron_cells"
    assert np.all(np.isfinite(lin.dL_dgap_H_per_m)) and np.all(np.isfinite(lin.flux_linkage_vs_gap_Wb))
    assert not lin.bore_cooled  # the core fills the bore: not a cooling surface


#: the cell solve at its reported level is within about 0.2 % of the FE reference in force and
#: flux (tests/test_iron.py); the FE linkage itself carries < 1e-5 relative error estimates
FE_LINKAGE_RTOL = 4e-3


@pytest.fixture(scope="module")
def fe_suspension():
    import json
    from pathlib import Path

    return json.loads((Path(__file__).parent / "reference_data" / "fe_suspension.json").read_text())


def test_flux_linkage_and_incremental_inductance_against_finite_elements(fe_suspension):
    """Flux linkage of the suspension coil (own air-core flux + iron + floater magnet) and the
    incremental inductance dpsi/dI against an independent axisymmetric A_phi finite-element solve
    (tests/reference_data/fe_suspension.json: scikit-fem quadratic triangles, Frohlich-Kennelly
    iron by Newton, psi = N/A_w int 2 pi r A_phi dA over the winding); dpsi/dI of the FE data by
    a cubic spline through its currents up to the rated 1.2 A."""
    from scipy.interpolate import CubicSpline

    from fields.devices.inductance import core_inductance_terms
    from fields.input.geometry import load
    from helpers import SUSPENSION

    d = load(SUSPENSION)
    ref = fe_suspension
    gaps = np.array(ref["gaps_m"])[[0, 4, 7]]
    rows = [0, 4, 7]
    I = np.array(ref["currents_A"])
    psi_fe = np.array(ref["flux_linkage_Wb"])[rows]
    L_air = air_self_inductance_H(d.coils[0])[0]
    for j in (1, 2, 4):  # 0, 0.4 and 1.2 A
        Lc, _, link = core_inductance_terms(d, gaps, np.full((gaps.size, 1), I[j]), linkage=True)
        psi = L_air * I[j] + link[:, 0]
        np.testing.assert_allclose(psi, psi_fe[:, j], rtol=FE_LINKAGE_RTOL)
        rated = I <= 1.2 + 1e-12
        for g in range(gaps.size):
            dpsi = CubicSpline(I[rated], psi_fe[g, rated])(I[j], 1)
            assert L_air + Lc[g, 0, 0] == pytest.approx(dpsi, rel=2 * FE_LINKAGE_RTOL), (gaps[g], I[j])


# -------------------------------------------------------------------------------- headroom

def test_drive_headroom_rule_and_warnings():
    c = coil(0.01, 0.02, 0.02, 400, wire_diameter_m=0.0159 * INCH)
    cd = coil_datasheet(make_design((c,)), 0)
    k, m, ki, x0, I = -50.0, 0.02, 2.0, 1e-3, 0.5
    r = drive_headroom(cd, I, ki, k, m, 12.0, x0)
    p = np.sqrt(-k / m)
    R, L = cd.resistance_operating_ohm, cd.inductance_H
    assert r.rate_per_s == pytest.approx(p)
    assert r.voltage_required_V == pytest.approx(R * (I + -k * x0 / ki) + L * (-k) * x0 * p / ki)
    assert r.linear_driver_dissipation_W == pytest.approx((12.0 - R * I) * I)
    assert r.headroom_V > 0 and not r.notices and r.unstable
    low = drive_headroom(cd, I, ki, k, m, 1.0, x0)
    assert low.headroom_V < 0
    short = [n for n in low.notices if n.code == "supply_short"]
    assert len(short) == 1 and short[0].values["required_V"] == pytest.approx(low.voltage_required_V)
    with pytest.raises(InputError, match="drive_headroom: force_per_ampere_N_per_A must be finite and nonzero"):
        drive_headroom(cd, I, 0.0, k, m, 12.0)


# ---------------------------------------------------------------------------------- quadrature

@pytest.mark.parametrize("n", [1, 3, 8])
def test_gauss_legendre_is_exact_to_degree_2n_minus_1(n):
    # Abramowitz & Stegun (1964), eq. 25.4.29: the n-point rule integrates x^k exactly for
    # k <= 2n - 1; on [a, b] the integral of x^k is (b^(k+1) - a^(k+1)) / (k + 1).
    from fields.physics.quadrature import gauss_legendre

    a, b = -0.3, 1.7
    x, w = gauss_legendre(n, a, b)
    for k in range(2 * n):
        assert w @ x**k == pytest.approx((b ** (k + 1) - a ** (k + 1)) / (k + 1), rel=1e-13, abs=1e-14)
    # degree 2n is not integrated exactly (the rule's error term is nonzero)
    assert abs(w @ x ** (2 * n) - (b ** (2 * n + 1) - a ** (2 * n + 1)) / (2 * n + 1)) > 1e-6
    with pytest.raises(InputError, match="gauss_legendre: n must be a positive integer; got 0"):
        gauss_legendre(0)


def test_hot_operating_point_is_said_first_with_contiguous_gap_runs(tmp_path, capsys):
    # the iron-free test suspension made hot: natural convection cut to 2 W/(m^2 K) and a
    # class-A (105 C, IEC 60085) winding, so the operating point (15 mm) runs over the class
    import json
    import re

    from helpers import ROOT

    from fields import cli
    from fields.devices.coil import gap_runs
    from fields.devices.winding import steady_temperature_C
    from fields.io.report_builder import build_report
    from fields.input.geometry import load

    text = (ROOT / "tests" / "data" / "air_suspension.toml").read_text()
    text = text.replace('insulation_class = "155 degC"', 'insulation_class = "105 degC"')
    text = text.replace("[study]", '[study]\nconvection_coefficient = "2 W/(m^2*K)"')
    p = tmp_path / "hot.toml"
    p.write_text(text)
    out = tmp_path / "o"
    assert cli.main(["coil", str(p), "-o", str(out)]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].startswith("HEAT: coil lift coil runs at") and "over its insulation class 105 C" in lines[0]
    assert "at the operating gap 15 mm" in lines[0]
    data = json.loads((out / "coil.json").read_text())
    c = data["coils"][0]
    op = c["at_operating_point"]
    assert op["over_insulation_class"] and not op["runaway"]
    # independent check of the operating temperature: the fixed point T = Ta + I^2 R20 (1 + alpha
    # (T - 20)) / (h A) solved in closed form (linear in T; copper alpha 0.00393 /K, IEC 60028)
    I, R20, G, Ta = op["current_A"], c["resistance_20C_ohm"], 2.0 * c["surface_area_m2"], 25.0
    a = 0.00393
    T_exact = (Ta + I * I * R20 * (1 - 20 * a) / G) / (1 - I * I * R20 * a / G)
    assert op["temperature_C"] == pytest.approx(T_exact, rel=1e-9) and T_exact > 105
    # the warning gives merged contiguous runs (no run spans a gap under the class) and names the
    # operating gap
    gaps = np.array(c["gaps_m"])
    T = np.array([np.inf if t is None else t for t in c["temperature_C"]])
    over = np.isfinite(T) & (T > 105)
    runs = gap_runs(gaps, over)
    for lo, hi in runs:
        inside = (gaps >= lo) & (gaps <= hi)
        assert over[inside].all()
    warn = next(w for w in data["warnings"] if "over the insulation class" in w)
    shown = re.search(r"at gaps ([0-9.,\- ]+) mm", warn).group(1)
    assert shown.count("-") + shown.count(",") >= 1 and len(shown.split(",")) == len(runs)
    assert "the operating gap 15 mm is one of them" in warn
    # the same check agrees with the library's own steady-temperature solve
    assert steady_temperature_C([I], R20, G, Ta)[0][0] == pytest.approx(T_exact, rel=1e-9)

    def load_json(name):
        f = out / name
        return json.loads(f.read_text()) if f.is_file() else None

    html = build_report(load(p), out, {}, load_json, None)
    box = html[html.index('<div class="verdict">'):]
    first = box[box.index("</h2>") + 5:]
    assert first.startswith('<p class="unstable"><b>Heat: coil lift coil runs at')
    for label in ("hot resistance at the operating point", "operating temperature", "linear driver dissipation at hover",
                  "supply headroom"):
        assert label in html
    assert 'data-path="coils[0].drive_headroom.linear_driver_dissipation_W"' in html


def test_gap_runs_are_contiguous():
    from fields.devices.coil import gap_runs

    # unsorted grid: runs follow the sorted gaps; a hole splits a run
    assert gap_runs([3.0, 1.0, 2.0, 5.0, 4.0], [True, True, False, True, True]) == ((1.0, 1.0), (3.0, 5.0))
    assert gap_runs([1.0, 2.0], [False, False]) == ()
