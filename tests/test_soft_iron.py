"""Soft-iron floaters (a steel ball) solved with the cores: checks against outside references.

- Force on the ball under the iron-cored coil against the independent axisymmetric finite-element
  reference of ``tests/fe_reference`` (scikit-fem, quadratic elements, Maxwell stress, converged by
  refinement; stored in ``tests/reference_data/fe_sphere.json`` with its provenance), linear and
  saturable iron with the same Frohlich-Kennelly curve, and the error estimate bounding the
  actual error.
- The frozen-polarization sideways stiffness against the frozen stiffness along the axis: a
  rigid polarization in a source-free static field has a traceless stiffness (Earnshaw,
  Trans. Camb. Phil. Soc. 7 (1842) 97), so k_x = -k_z / 2 for an axisymmetric body on the axis.
- The ball's mass from its volume pi d^3 / 6 and density, and the loader's rules.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from fields.errors import GeometryError
from fields.input.geometry import loads
from fields.physics.iron_floater import floater_iron_forces, floater_iron_lateral_stiffness

FE = json.loads((Path(__file__).parent / "reference_data" / "fe_sphere.json").read_text())

#: the FE reference rig as a geometry file (its dimensions are those of tests/fe_reference/cases.py
#: SPHERE_RIG, an invented rig)
RIG = """
name = "fe steel-ball rig"
invented = true
[[coils]]
name = "coil"
inner_radius = "10.5 mm"
outer_radius = "30 mm"
height = "45 mm"
turns = 1500
position = ["0 mm", "0 mm", "24.5 mm"]
nominal_current = "1 A"
max_current = "4 A"
[[cores]]
name = "core"
shape = "cylinder"
diameter = "20 mm"
height = "50 mm"
position = ["0 mm", "0 mm", "25 mm"]
relative_permeability = 1000
saturation_polarization = "1.6 T"
[floater]
name = "ball"
[[floater.soft_iron]]
name = "ball"
shape = "sphere"
diameter = "25.4 mm"
relative_permeability = 1000
saturation_polarization = "1.6 T"
[study]
gap_min = "4 mm"
gap_max = "20 mm"
operating_gap = "10 mm"
gap_reference = "core"
supply_voltage = "24 V"
"""


def _rig(text: str = RIG):
    return loads(text, "rig.toml")


def _ball_z(gaps_m):
    return -np.asarray(gaps_m) - 0.0254 / 2


def test_ball_mass_and_inertia_from_its_volume():
    d = _rig()
    m = 7850.0 * math.pi * 0.0254 ** 3 / 6  # density of carbon steel (from memory) x ball volume
    assert d.floater.mass_kg == pytest.approx(m, rel=1e-12)
    # solid sphere: I = 2/5 m a^2 (common practice, no source)
    assert d.floater.inertia_kg_m2[0][0] == pytest.approx(0.4 * m * 0.0127 ** 2, rel=1e-12)


def test_loader_refuses_magnets_together_with_soft_iron():
    text = RIG + """
[[floater.magnets]]
name = "disc"
shape = "cylinder"
diameter = "10 mm"
height = "5 mm"
grade = "N42"
"""
    text = text.replace('[floater]\nname = "ball"\n', '[floater]\nname = "ball"\n', 1)
    with pytest.raises(GeometryError, match=r"rig.toml: floater.soft_iron.*one soft-iron part and no magnets"):
        _rig(text)


def test_loader_refuses_an_off_axis_part():
    bad = RIG.replace('diameter = "25.4 mm"\nrelative', 'diameter = "25.4 mm"\nposition = ["1 mm", "0 mm", "0 mm"]\nrelative')
    with pytest.raises(GeometryError, match=r"floater.soft_iron\[0\].position.*on the floater's z axis"):
        _rig(bad)


@pytest.mark.slow
def test_ball_force_against_finite_elements():
    """Within 0.5 % of the FE force at every stored gap and current, saturation included (the
    issue's acceptance limit); the two-level estimate bounds the actual error up to 2 A. Deep in
    saturation (4 A) the two cell levels come close together and the estimate is not a strict
    bound: measured, the actual error reaches 1.11 x (estimate + FE error) at a 6 mm gap (the
    README's limits say so); the test holds it below 1.5x so that a change shows."""
    d = _rig()
    gaps = np.array(FE["gaps_m"])
    cur = np.array(FE["currents_A"])[:, None]
    fine = floater_iron_forces(d, _ball_z(gaps), cur, "fine")
    coarse = floater_iron_forces(d, _ball_z(gaps), cur, "coarse")
    F_fe = np.array(FE["Fz_N"])
    err_fe = np.array(FE["Fz_error_N"])
    actual = np.abs(fine.Fz_N - F_fe)
    assert np.max(actual / F_fe) < 5e-3
    estimate = np.abs(fine.Fz_N - coarse.Fz_N)
    low = cur[:, 0] <= 2.0
    assert np.all(actual[:, low] <= estimate[:, low] + err_fe[:, low])
    assert np.all(actual[:, ~low] <= 1.5 * (estimate[:, ~low] + err_fe[:, ~low]))
    # linear iron (initial susceptibility) against the FE's linear run
    lin = np.array(FE["Fz_linear_N"])
    assert np.max(np.abs(fine.Fz_linear_N - lin) / lin) < 5e-3


@pytest.mark.slow
def test_frozen_sideways_stiffness_is_minus_half_the_axial_one():
    d = _rig()
    z = float(_ball_z([0.01])[0])
    kx = floater_iron_lateral_stiffness(d, z, [1.5], "coarse")
    kz = floater_iron_lateral_stiffness(d, z, [1.5], "coarse", direction="z")
    assert kx > 0
    assert kx == pytest.approx(-kz / 2, rel=1e-5)  # finite-difference offsets of 1e-5 m: about 4e-7 seen


def test_linear_iron_pull_is_quadratic_in_current():
    """Linear media and no magnets: the fields scale with the current, so the force on the induced
    ball scales with its square (superposition, Maxwell's equations being linear)."""
    d = _rig()
    z = _ball_z([0.008])
    r = floater_iron_forces(d, z, np.array([[0.3], [0.6], [-0.6]]), "coarse", saturable=False)
    F = r.Fz_linear_N[0]
    assert F[1] == pytest.approx(4 * F[0], rel=1e-10)
    assert F[2] == pytest.approx(F[1], rel=1e-10)
    assert F[0] > 0  # pulled up towards the core whatever the current's sign


@pytest.mark.slow
def test_steel_ball_example_gets_a_single_axis_controller(tmp_path):
    """The control stage on the steel-ball example: the loop closes along the vertical axis with
    the single-axis route, the grid table balances the weight at the bias current, and two routes
    agree: k_i and k_z of the plant (central differences of direct joint solves) against the
    table's dF/dI and -dF/ds (bicubic spline through the family at 13 currents)."""
    from fields.input.geometry import load
    from fields.studies.stages.coil import run_coil
    from fields.studies.stages.control import run_control
    from fields.studies.stages.stability import run_stability

    d = load(Path(__file__).parent.parent / "geometries" / "steel_ball.toml")
    st = run_stability(d, tmp_path, with_maps=False)
    co = run_coil(d, tmp_path, stability=st)
    # a ball's neutral tilt is symmetry, not a warning; the notes say what the numbers are
    assert not any(n.startswith("tilt") for n in st.notes)
    assert any("upper bound" in n for n in st.notes)
    r = run_control(d, tmp_path, stability=st, coil=co, with_capture=False)
    assert r.status == "closable" and r.route == "single-axis" and r.single_axis is not None
    I0 = float(st.equilibrium_point.currents_A[0])
    t = r.table
    assert float(t.force_N(0.0, I0)) == pytest.approx(d.weight_N, rel=1e-5)
    assert r.params.force_per_ampere_N_per_A == pytest.approx(float(t.force_per_ampere_N_per_A(0.0, I0)), rel=2e-3)
    assert r.params.stiffness_N_per_m == pytest.approx(float(t.stiffness_N_per_m(0.0, I0)), rel=2e-3)


def test_hall_sensor_and_studies_are_refused_for_a_soft_iron_floater(tmp_path):
    """Named refusals instead of silently wrong numbers: a Hall sensor would miss the ball's induced
    field, and sweeps/tolerance/sizing use the force basis affine in current."""
    from fields.studies.evaluate import evaluate_design

    hall = RIG.replace("[study]", '[[sensors]]\ntype = "hall"\nname = "h"\nposition = ["20 mm", "0 mm", "-3 mm"]\n'
                                  'axis = [0, 0, 1]\nrange = "100 mT"\n\n[study]')
    with pytest.raises(GeometryError, match=r"rig.toml: sensors\[0\].type: .*must be a beam gate"):
        _rig(hall)
    with pytest.raises(GeometryError, match=r"floater.soft_iron: the floater of a sweep.*must be made of magnets"):
        evaluate_design(_rig())
