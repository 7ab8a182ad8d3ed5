"""Stiffness, equilibrium and stability against outside references.

References:
- Earnshaw, S. (1842), Trans. Camb. Phil. Soc. 7, 97: no stable equilibrium of rigid magnets in
  static fields; the Laplace-equation form (Jackson, Classical Electrodynamics, 3rd ed., sec. 1.7
  and problem 5.x on force = grad(m.B)) makes the translational stiffness of a rigid magnet in a
  source-free field traceless, and symmetric (a Hessian of the energy).
- Dipole-dipole energy U = -(mu0 / 4 pi r^3) [3 (m1.r^)(m2.r^) - m1.m2] (Jackson eq. 5.98
  rearranged); a uniformly magnetized sphere has exactly a dipole field outside (Jackson sec. 5.10)
  and feels exactly the dipole force in an external field (mean-value property of harmonic fields).
- Tilt stiffness of a dipole in a uniform field: torque m x B, so k = m B at alignment (any text,
  e.g. Griffiths, Introduction to Electrodynamics, eq. 6.1).
- Yonnet, J.-P. (1981), "Permanent magnet bearings and couplings", IEEE Trans. Magn. 17(1),
  1169: for coaxial ring magnets the radial stiffness is minus half the axial stiffness.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from helpers import REPULSIVE, SUSPENSION
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import constants

from fields import analysis
from fields.errors import InputError, SolverError
from fields.input.geometry import load, loads
from fields.physics.wrench import wrench_basis

MU0 = constants.mu_0


def _sphere_pair(d_fixed_mm=10.0, d_float_mm=8.0, br_fixed="1.2 T", br_float="1.3 T", sign=1):
    text = f'''
name = "spheres"
[[magnets]]
name = "fixed sphere"
shape = "sphere"
diameter = "{d_fixed_mm} mm"
remanence = "{br_fixed}"
position = ["0 mm", "0 mm", "0 mm"]
[floater]
[[floater.magnets]]
shape = "sphere"
diameter = "{d_float_mm} mm"
remanence = "{br_float}"
magnetization = [0, 0, {sign}]
[study]
gap_min = "5 mm"
gap_max = "40 mm"
gap_reference = "fixed sphere"
gap_side = "below"
supply_voltage = "1 V"
'''
    return loads(text, "spheres.toml")


def _moment(br_T, d_m):
    return br_T / MU0 * math.pi * d_m**3 / 6


def test_dipole_dipole_stiffness_equals_energy_hessian():
    d = _sphere_pair()
    m1 = _moment(1.2, 0.010)
    m2 = _moment(1.3, 0.008)
    z = 0.025  # centre distance
    gap = z - 0.005 - 0.004
    pos, rot = analysis.pose_at_gap(d, [gap])
    S = analysis.stiffness_matrix(d, pos[0], rot[0])
    # coaxial aligned dipoles: U(z) = -mu0 m1 m2 / (2 pi z^3); k_z = d2U/dz2 = -6 mu0 m1 m2 / (pi z^5)
    kz = -6 * MU0 * m1 * m2 / (math.pi * z**5)
    # sideways: U(x) at fixed z, from the full dipole energy: k_x = -k_z / 2 (Laplace)
    assert S.K[2, 2] == pytest.approx(kz, rel=1e-6)
    assert S.K[0, 0] == pytest.approx(-kz / 2, rel=1e-6)
    assert S.K[1, 1] == pytest.approx(-kz / 2, rel=1e-6)
    # force check too: F_z = -dU/dz = -3 mu0 m1 m2 / (2 pi z^4) (attractive: points down, to the fixed one)
    assert S.force_N[2] == pytest.approx(-3 * MU0 * m1 * m2 / (2 * math.pi * z**4), rel=1e-8)


def test_tilt_stiffness_in_uniform_field_is_mB():
    # a sphere at the centre of a large, long solenoid: field uniform to ~1e-7 over the sphere
    R, L, N, I = 0.5, 4.0, 20000, 1.0
    text = f'''
name = "uniform"
[[coils]]
name = "big"
inner_radius = "{R * 1000} mm"
outer_radius = "{R * 1000 + 1} mm"
height = "{L * 1000} mm"
turns = {N}
position = ["0 mm", "0 mm", "0 mm"]
nominal_current = "{I} A"
max_current = "{I} A"
[floater]
[[floater.magnets]]
shape = "sphere"
diameter = "6 mm"
remanence = "1.2 T"
[study]
gap_min = "100 mm"
gap_max = "3000 mm"
gap_reference = "big"
gap_side = "above"
supply_voltage = "1 V"
'''
    d = loads(text, "uniform.toml")
    pos = np.array([0.0, 0.0, 0.0])
    S = analysis.stiffness_matrix(d, pos, np.zeros(3), [I])
    # on-axis field at the centre of a thin finite solenoid: B = mu0 n I (L/2) / sqrt(R'^2 + (L/2)^2)
    # (any electromagnetism text; R' the mean radius of the 1 mm thick winding, effect < 1e-6)
    Rm = R + 0.0005
    B = MU0 * N / L * I * (L / 2) / math.sqrt(Rm**2 + (L / 2) ** 2)
    m = _moment(1.2, 0.006)
    assert S.K[3, 3] == pytest.approx(m * B, rel=1e-5)
    assert S.K[4, 4] == pytest.approx(m * B, rel=1e-5)
    assert abs(S.K[5, 5]) < 1e-9 * m * B  # spin about the field: no stiffness


def test_axisymmetric_lateral_is_minus_half_axial():
    d = load(SUSPENSION)
    # iron-free version of the suspension example (the core breaks the rigid-magnet assumption)
    from dataclasses import replace

    d = replace(d, cores=())
    pos, rot = analysis.pose_at_gap(d, [0.012])
    S = analysis.stiffness_matrix(d, pos[0], rot[0], [0.5])
    assert S.K[0, 0] == pytest.approx(-S.K[2, 2] / 2, rel=1e-6)
    assert S.K[1, 1] == pytest.approx(-S.K[2, 2] / 2, rel=1e-6)


def test_ring_pair_bearing_yonnet():
    # two coaxial axially magnetized rings repelling (a passive magnetic bearing, Yonnet 1981):
    # axial stiffness > 0 implies radial stiffness = -axial / 2 < 0
    text = '''
name = "bearing"
[[magnets]]
name = "stator ring"
shape = "ring"
inner_diameter = "10 mm"
outer_diameter = "20 mm"
height = "5 mm"
remanence = "1.2 T"
[floater]
[[floater.magnets]]
shape = "ring"
inner_diameter = "10 mm"
outer_diameter = "20 mm"
height = "5 mm"
remanence = "1.2 T"
magnetization = [0, 0, -1]
[study]
gap_min = "1 mm"
gap_max = "10 mm"
gap_reference = "stator ring"
gap_side = "below"
supply_voltage = "1 V"
'''
    d = loads(text, "bearing.toml")
    pos, rot = analysis.pose_at_gap(d, [0.002])
    S = analysis.stiffness_matrix(d, pos[0], rot[0])
    assert S.K[2, 2] > 0
    assert S.K[0, 0] == pytest.approx(-S.K[2, 2] / 2, rel=1e-6)


# ---- Earnshaw: random iron-free arrangements ----

_shapes = st.sampled_from(["cylinder", "cuboid", "sphere", "ring"])


def _magnet_toml(section, name, shape, size, pos, mag):
    lines = [f"[[{section}]]", f'name = "{name}"', f'shape = "{shape}"', 'remanence = "1.2 T"',
             f"magnetization = [{mag[0]:.3f}, {mag[1]:.3f}, {mag[2]:.3f}]",
             f'position = ["{pos[0]:.3f} mm", "{pos[1]:.3f} mm", "{pos[2]:.3f} mm"]']
    if shape == "cylinder":
        lines += [f'diameter = "{size:.3f} mm"', f'height = "{0.6 * size:.3f} mm"']
    elif shape == "cuboid":
        lines += [f'size = ["{size:.3f} mm", "{0.8 * size:.3f} mm", "{0.5 * size:.3f} mm"]']
    elif shape == "sphere":
        lines += [f'diameter = "{size:.3f} mm"']
    else:
        lines += [f'inner_diameter = "{0.4 * size:.3f} mm"', f'outer_diameter = "{size:.3f} mm"', f'height = "{0.5 * size:.3f} mm"']
    return "\n".join(lines) + "\n"


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    fixed_shape=_shapes, float_shape=_shapes,
    fx=st.floats(-6, 6), fy=st.floats(-6, 6),
    mag=st.tuples(st.floats(-1, 1), st.floats(-1, 1), st.floats(0.2, 1)),
    fmag=st.tuples(st.floats(-1, 1), st.floats(-1, 1), st.floats(-1, 1)).filter(lambda v: sum(c * c for c in v) > 0.05),
    current=st.floats(-2, 2),
    coil_x=st.floats(-10, 10),
)
def test_earnshaw_trace_and_symmetry(fixed_shape, float_shape, fx, fy, mag, fmag, current, coil_x):
    text = 'name = "random"\n'
    text += _magnet_toml("magnets", "m1", fixed_shape, 10.0, (fx, fy, 0.0), mag)
    text += f'''
[[coils]]
name = "c1"
inner_radius = "3 mm"
outer_radius = "8 mm"
height = "6 mm"
turns = 300
position = ["{coil_x:.3f} mm", "0 mm", "-20 mm"]
nominal_current = "{current:.4f} A"
max_current = "2 A"
[floater]
'''
    text += _magnet_toml("floater.magnets", "f", float_shape, 8.0, (0, 0, 0), fmag)
    text += '''
[study]
gap_min = "4 mm"
gap_max = "30 mm"
operating_gap = "10 mm"
gap_reference = "m1"
gap_side = "below"
supply_voltage = "1 V"
'''
    d = loads(text, "random.toml")
    pos, rot = analysis.pose_at_gap(d, [0.010])
    S = analysis.stiffness_matrix(d, pos[0], rot[0], [current])
    Kt = S.translational
    Et = S.error[:3, :3]
    scale = np.abs(Kt).max()
    # error bars: Richardson estimate plus the quadrature's relative accuracy (~1e-7 of the scale;
    # the force rule is accurate to ~1e-8 relative, the central difference amplifies it by ~size/h)
    tol = 3 * Et + 1e-5 * scale
    assert abs(np.trace(Kt)) <= 3 * np.trace(Et) + 1e-5 * scale
    assert np.all(np.abs(Kt - Kt.T) <= tol + tol.T)


# ---- finite-difference step: convergence order ----


def test_stiffness_step_convergence_order():
    d = _sphere_pair()
    m1 = _moment(1.2, 0.010)
    m2 = _moment(1.3, 0.008)
    z = 0.025
    kz = -6 * MU0 * m1 * m2 / (math.pi * z**5)
    pos, rot = analysis.pose_at_gap(d, [z - 0.009])
    hs = np.array([4e-4, 2e-4, 1e-4])
    err_c, err_r = [], []
    for h in hs:
        S = analysis.stiffness_matrix(d, pos[0], rot[0], step_length_m=h)
        err_r.append(abs(S.K[2, 2] - kz))
        # central difference at step h from the forces directly
        b = wrench_basis(d, np.array([pos[0] + [0, 0, h], pos[0] - [0, 0, h]]), np.zeros((2, 3)))
        Dh = -(b.F0_N[0, 2] - b.F0_N[1, 2]) / (2 * h)
        err_c.append(abs(Dh - kz))
    slope_c = np.polyfit(np.log(hs), np.log(err_c), 1)[0]
    slope_r = np.polyfit(np.log(hs), np.log(err_r), 1)[0]
    # central difference: second order; Richardson-extrapolated: fourth order
    assert slope_c == pytest.approx(2.0, abs=0.15)
    assert slope_r == pytest.approx(4.0, abs=0.4)


# ---- the examples: the verdicts the design intends ----


@pytest.mark.slow
def test_suspension_verdict():
    d = load(SUSPENSION)
    c = analysis.axial_curves(d)
    gi = int(np.argmin(np.abs(c.gaps_m - d.study.operating_gap_m)))
    eq = analysis.find_equilibrium(d, [c.hover_current_A[gi]], start_gap_m=c.gaps_m[gi])
    S = analysis.stiffness_matrix(d, eq.position_m, eq.rotvec_rad, eq.currents_A)
    v = analysis.stability_verdict(d, S)
    modes = {(m.kind, m.axes): m for m in v.modes}
    assert not modes[(analysis.ModeKind.VERTICAL, ("z",))].stable
    sideways = [m for m in v.modes if m.kind is analysis.ModeKind.SIDEWAYS]
    assert len(sideways) == 1 and set(sideways[0].axes) == {"x", "y"}  # axisymmetric: one merged pair
    assert sideways[0].stable and sideways[0].frequency_Hz > 0
    assert v.unstable_count == 1
    # the spin of the axisymmetric floater has no restoring stiffness
    assert any(m.kind is analysis.ModeKind.SPIN and m.neutral and m.stiffness == 0.0 for m in v.modes)
    # the axial curve's k_z at the hover current agrees with the 6x6 matrix
    assert S.K[2, 2] == pytest.approx(c.kz_at_hover()[gi], rel=1e-4)


@pytest.mark.slow
def test_repulsive_verdict():
    d = load(REPULSIVE)
    c = analysis.axial_curves(d)
    eqs = [e for e in analysis.axial_equilibria(d, 0.0, c) if e.stable]
    assert eqs, "the repulsive base must have a stable passive height"
    eq = analysis.find_equilibrium(d, np.zeros(len(d.coils)), start_gap_m=eqs[0].gap_m)
    S = analysis.stiffness_matrix(d, eq.position_m, eq.rotvec_rad, eq.currents_A)
    v = analysis.stability_verdict(d, S)
    by_kind = {m.kind: m for m in v.modes}
    assert by_kind[analysis.ModeKind.VERTICAL].stable
    assert not by_kind[analysis.ModeKind.SIDEWAYS].stable and set(by_kind[analysis.ModeKind.SIDEWAYS].axes) == {"x", "y"}
    # a merged unstable pair counts as two axes needing control
    assert v.unstable_count == sum(len(m.axes) for m in v.modes if not m.stable)
    # Earnshaw: iron-free, so the translational trace vanishes
    assert v.earnshaw_residual < 1e-6


def test_equilibrium_failure_is_clear():
    d = _sphere_pair()
    # two attracting spheres: no equilibrium with gravity pulling them apart at any height above
    with pytest.raises(SolverError, match=r"equilibrium: no pose found from gap .* over axes"):
        analysis.find_equilibrium(d, start_gap_m=0.03, free_axes=("z",))


def test_allocation_least_squares_and_limits():
    d = load(REPULSIVE)
    pos, rot = analysis.pose_at_gap(d, [0.03])
    A = analysis.allocation_matrix(d, pos[0], rot[0])
    want = np.array([1e-3, -5e-4, 0.0])
    I = A.currents_for(want, [0, 0, 0], 1.0, axes=("x", "y", "z"))
    assert np.all(np.abs(I) <= 1.0 + 1e-12)
    np.testing.assert_allclose(A.G[:3] @ I, want, atol=1e-9)
    with pytest.raises(SolverError, match="beyond the limits"):
        A.currents_for([1.0, 0, 0], [0, 0, 0], 1.0, axes=("x", "y", "z"))


# ---- the finite-difference stencil ----


def test_stencil_is_exact_for_low_degree_polynomials():
    """Central differences are exact for polynomials of degree <= 2, and their Richardson
    combination (4 D_h - D_2h) / 3 for degree <= 4 (the truncation series of the central
    difference has only even powers of h: Press et al., Numerical Recipes, 3rd ed. 2007, sec. 5.7)."""
    from fields.analysis.stencil import central_offsets, richardson, stencil_derivatives

    steps = np.array([0.3, 0.2])
    x0 = np.array([0.7, -0.4])

    def f(x):  # degree 4 in x, degree 2 in y; two outputs
        return np.array([x[0] ** 4 - 2 * x[0] ** 3 * x[1] + x[1] ** 2, 3 * x[0] * x[1] ** 2])

    def grad(x):
        return np.array([[4 * x[0] ** 3 - 6 * x[0] ** 2 * x[1], -2 * x[0] ** 3 + 2 * x[1]],
                         [3 * x[1] ** 2, 6 * x[0] * x[1]]])

    dq = central_offsets(steps, multiples=(1.0, 2.0), centre=True)
    assert dq.shape == (9, 2) and np.all(dq[-1] == 0.0)
    W = np.array([f(x0 + d) for d in dq])
    D = stencil_derivatives(W, steps, multiples=(1.0, 2.0))  # (2, outputs, axes)
    R, err = richardson(D[0], D[1])
    np.testing.assert_allclose(R, grad(x0), rtol=1e-12, atol=1e-12)
    # the y derivatives (degree 2 in y) are exact already at step h; the x ones are not
    np.testing.assert_allclose(D[0][:, 1], grad(x0)[:, 1], rtol=1e-12, atol=1e-12)
    assert abs(D[0][0, 0] - grad(x0)[0, 0]) > 1e-3
    # the error bar is the distance of D_h from the extrapolated value
    np.testing.assert_allclose(err, np.abs(R - D[0]), rtol=0, atol=0)


def test_api_misuse_raises_input_error():
    """Wrong arguments through the Python API raise InputError (a ValueError) naming the rule."""
    d = _sphere_pair()
    with pytest.raises(InputError, match="pose_map: kind must be 'lateral' or 'tilt'; got spin"):
        analysis.pose_map(d, kind="spin")
    with pytest.raises(InputError, match="drive_pattern: pattern must be 0 numbers, one per coil"):
        analysis.drive_pattern(d, [1.0])
    assert issubclass(InputError, ValueError)


@pytest.fixture(scope="module")
def air_verdict():
    from helpers import ROOT

    d = load(ROOT / "tests" / "data" / "air_suspension.toml")
    c = analysis.axial_curves(d)
    gi = int(np.argmin(np.abs(c.gaps_m - d.study.operating_gap_m)))
    eq = analysis.find_equilibrium(d, [c.hover_current_A[gi]], start_gap_m=c.gaps_m[gi])
    S = analysis.stiffness_matrix(d, eq.position_m, eq.rotvec_rad, eq.currents_A)
    return d, S, analysis.stability_verdict(d, S)


def test_verdict_names_coupled_modes_with_the_matrix_diagonal(air_verdict):
    from fields.analysis.verdict import mass_matrix
    from fields.io.wording import mode_text, verdict_lines

    d, S, v = air_verdict
    side = next(m for m in v.modes if m.kind is analysis.ModeKind.SIDEWAYS)
    # independent check: the x-ry block alone (the other entries are round-off here) as a 2-DOF
    # generalized eigenproblem K v = lambda M v (Goldstein, Poole & Safko, Classical Mechanics,
    # 3rd ed. 2002, ch. 6), solved with numpy's general eigvals of M^-1 K
    M = mass_matrix(d, S.rotvec_rad)
    b = [0, 4]
    lam = np.sort(np.linalg.eigvals(np.linalg.solve(M[np.ix_(b, b)], S.K[np.ix_(b, b)])).real)
    assert side.stiffness == pytest.approx(lam[0] * M[0, 0], rel=1e-6)
    # the mode mixes sideways motion and tilt: its modal stiffness is far from K[x,x], which is
    # quoted beside it, and it is named coupled
    assert side.diagonal_stiffness == pytest.approx((S.K[0, 0], S.K[1, 1]), rel=1e-12)
    assert abs(side.stiffness - S.K[0, 0]) > 0.2 * S.K[0, 0]
    assert side.coupled and set(side.coupled_axes) == {"rx", "ry"} and side.coupling_share > 0.01
    text = mode_text(side)
    assert text.startswith("sideways x/y coupled with tilt about x/y: stable, modal stiffness")
    assert f"K[x,x] = K[y,y] {S.K[0, 0]:.3g} N/m" in text
    vert = next(m for m in v.modes if m.kind is analysis.ModeKind.VERTICAL)
    assert not vert.coupled and "coupled" not in mode_text(vert)
    assert "not the modal stiffnesses" in verdict_lines(v)[-1]


def test_round_off_zeros_print_as_zero(air_verdict):
    from fields.io.numbers import fmt
    from fields.io.report import num

    _, S, _ = air_verdict
    K, E = S.K, S.error
    scale = np.max(np.abs(K[:3, :3]))
    # K[x,y] of a round design vanishes by symmetry; computed it is round-off (about 1e-12 N/m
    # against 5.4 N/m on the diagonal)
    assert K[0, 1] != 0.0 and abs(K[0, 1]) < 1e-9 * scale
    assert fmt(K[0, 1], error=E[0, 1], scale=scale) == "0"
    assert fmt(K[0, 0], 4, error=E[0, 0], scale=scale) == f"{K[0, 0]:.4g}"
    assert fmt(-0.0) == "0" and fmt(-1e-30, 3) == "-1e-30" and fmt(-1e-30, 3, scale=1.0) == "0"
    # the report's span keeps the full value and states the bound it was shown as 0 under
    html = num(K[0, 1], "stability.json", "stiffness_matrix[0][1]", zero_below=1e-12 * scale)
    assert ">0</span>" in html and f'data-value="{float(K[0, 1])!r}"' in html and "data-zero-below" in html
    assert ">0</span>" in num(-0.0, "x.json", "a")


# INVENTED EXAMPLE: a bar magnet (not round) under an air-core coil; every number is made up
BAR = """
name = "bar-under-coil"
invented = true
[[coils]]
name = "lift"
inner_radius = "7 mm"
outer_radius = "22 mm"
height = "30 mm"
wire_gauge = "AWG 26"
fill_factor = 0.6
position = ["0 mm", "0 mm", "85 mm"]
axis = [0, 0, 1]
nominal_current = "0.4 A"
max_current = "1.2 A"
[floater]
name = "bar"
[[floater.magnets]]
name = "bar"
shape = "cuboid"
size = [{sx}, {sy}, "5 mm"]
grade = "N42"
magnetization = [0, 0, 1]
[study]
gap_min = "10 mm"
gap_max = "20 mm"
gap_points = 11
operating_gap = "15 mm"
gap_reference = "lift"
supply_voltage = "24 V"
currents = ["0.4 A"]
lateral_span = "4 mm"
tilt_span = "10 deg"
"""


def test_stiffness_versus_gap_keeps_x_and_y_apart_for_a_bar():
    from fields.io import plots

    gaps = np.array([0.012, 0.016])
    a = analysis.stiffness_versus_gap(loads(BAR.format(sx='"30 mm"', sy='"8 mm"'), file="bar_x.toml"), gaps_m=gaps)
    b = analysis.stiffness_versus_gap(loads(BAR.format(sx='"8 mm"', sy='"30 mm"'), file="bar_y.toml"), gaps_m=gaps)
    # a bar is not round: k_x and k_y differ, and so do the two tilts
    assert np.all(np.abs(a.k_x_N_per_m - a.k_y_N_per_m) > 0.05 * np.abs(a.k_x_N_per_m))
    assert a.same_xy() == (False, False)
    # symmetry (independent of the force model): turning the bar a quarter turn about the
    # vertical swaps x and y, so k_x of one is k_y of the other (and the tilts likewise)
    sym = 1e-6  # the same quadrature on mirrored geometry: agreement to round-off and rule noise
    assert a.k_x_N_per_m == pytest.approx(b.k_y_N_per_m, rel=sym)
    assert a.k_rx_Nm_per_rad == pytest.approx(b.k_ry_Nm_per_rad, rel=sym)
    assert a.k_lateral_N_per_m == pytest.approx(0.5 * (a.k_x_N_per_m + a.k_y_N_per_m))
    fig = plots.stiffness_vs_gap(a)
    labels = [t.get_text() for ax in fig.axes for t in ax.get_legend().get_texts()]
    assert "sideways k_x" in labels and "sideways k_y" in labels and not any("=" in s for s in labels)
    assert "tilt k_rx (about x)" in labels and "tilt k_ry (about y)" in labels
