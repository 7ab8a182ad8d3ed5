"""Stability at a point the user chooses (gap and current) instead of the equilibrium.

References: the axial stiffness k_z = -dF_z/dz of the closed-form on-axis route
(fields.analysis.axial_curves; Derby and Olbert, Am. J. Phys. 78 (2010) 229, for the coil field)
is an independent path from the 6x6 stiffness (surface-charge quadrature at 25 stencil poses);
Newton's second law gives the net force F + m g at a pose out of balance.
"""

import json

import numpy as np
import pytest

from fields import analysis
from fields.analysis.operating import chosen_point, operating_point
from fields.errors import InputError
from fields.input import geometry
from fields.studies.stages.stability import run_stability

from helpers import ROOT

AIR = ROOT / "tests" / "data" / "air_suspension.toml"


def test_chosen_point_matches_the_axial_curves_and_newtons_law():
    d = geometry.load(AIR)
    g, I = 0.010, 0.3
    op = chosen_point(d, g, I)
    assert op.chosen and op.equilibrium.free_axes == ()
    c = analysis.axial_curves(d, gaps_m=[g], currents_A=[I])
    # net force along up: F_up(g, I) - W from the on-axis route
    up = d.up
    assert op.equilibrium.residual_force_N @ up == pytest.approx(float(c.Fup_N[0, 0]) - d.weight_N, rel=1e-7)
    S = analysis.stiffness_matrix(d, op.equilibrium.position_m, op.equilibrium.rotvec_rad, op.currents_A)
    assert S.K[2, 2] == pytest.approx(float(c.kz_N_per_m[0, 0]), rel=1e-6)
    # off the hover current the floater is not in balance: the pose is reported, not solved
    assert abs(op.equilibrium.residual_force_N @ up) > 0.1 * d.weight_N


def test_chosen_point_at_the_operating_gap_is_the_operating_point():
    d = geometry.load(AIR)
    op = operating_point(d)
    ch = chosen_point(d, d.study.operating_gap_m)  # default current: the hover current there
    np.testing.assert_allclose(ch.currents_A, op.currents_A, rtol=1e-12)
    np.testing.assert_allclose(ch.equilibrium.position_m, op.equilibrium.position_m, atol=1e-12)
    assert np.max(np.abs(ch.equilibrium.residual_force_N)) < 1e-6 * d.weight_N


def test_chosen_point_refuses_gaps_outside_the_range_and_currents_without_coils():
    d = geometry.load(AIR)
    with pytest.raises(InputError, match="inside gap_min..gap_max"):
        chosen_point(d, 0.5)
    with pytest.raises(InputError, match="needs its gap"):
        run_stability(d, "unused", at_current_A=0.2)


def test_stability_command_at_a_chosen_point(tmp_path, capsys):
    from fields import cli

    rc = cli.main(["stability", str(AIR), "-o", str(tmp_path), "--gap", "12 mm", "--current", "0.25 A", "--no-maps"])
    assert rc == 0
    out = capsys.readouterr().out
    assert "chosen point: gap 12 mm, drive current 0.25 A" in out and "not solved for balance" in out
    js = json.loads((tmp_path / "stability.json").read_text())
    assert js["chosen_point"] is True and js["equilibrium"]["gap_m"] == pytest.approx(0.012, abs=1e-12)
    rc = cli.main(["stability", str(AIR), "-o", str(tmp_path), "--gap", "12 A", "--no-maps"])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 2 and len(err) == 1 and "--gap" in err[0] and "12 A" in err[0]


@pytest.mark.slow
def test_stability_says_how_many_gaps_the_maps_use(tmp_path):
    d = geometry.load(AIR)
    s = run_stability(d, tmp_path)
    assert s.map_grid.startswith(f"maps on {len(s.maps.lateral.gaps_m)} gaps x {len(s.maps.lateral.coordinate)}")
    assert f"gap_points = {d.study.gap_points}" in s.map_grid


TWO_SPHERES = """
name = "two spheres"
invented = true
[[magnets]]
name = "top"
shape = "sphere"
diameter = "10 mm"
grade = "N42"
position = ["0 mm", "0 mm", "60 mm"]
magnetization = [0, 0, 1]
[floater]
name = "ball magnet"
[[floater.magnets]]
name = "ball"
shape = "sphere"
diameter = "6 mm"
grade = "N42"
magnetization = [0, 0, 1]
[study]
gap_min = "5 mm"
gap_max = "50 mm"
operating_gap = "20 mm"
gap_reference = "top"
"""


def test_unstable_zero_current_balance_without_coils_gets_stiffness_and_verdict():
    """Two sphere magnets, the lower one hanging: outside a uniformly magnetized sphere the field is
    exactly a dipole's (Jackson, Classical Electrodynamics, 3rd ed., sec. 5.10), so the pull is the
    coaxial dipole-dipole force F = 3 mu0 m1 m2 / (2 pi d^4) (ibid. sec. 5.6). The balance is at
    F = m g and the vertical stiffness there is -4 m g / d (unstable); Earnshaw: the trace vanishes."""
    from scipy.constants import mu_0

    d = geometry.loads(TWO_SPHERES, "two_spheres.toml")
    op = operating_point(d)
    assert op.passive and not op.axially_stable
    top, ball = d.magnets[0], d.floater.magnets[0]
    m1 = np.linalg.norm(top.polarization_T) / mu_0 * top.volume_m3
    m2 = np.linalg.norm(ball.polarization_T) / mu_0 * ball.volume_m3
    W = d.weight_N
    dist = (3 * mu_0 * m1 * m2 / (2 * np.pi * W)) ** 0.25
    eq = op.equilibrium
    centre_distance = 0.060 - float(eq.position_m[2])
    assert centre_distance == pytest.approx(dist, rel=1e-6)
    S = analysis.stiffness_matrix(d, eq.position_m, eq.rotvec_rad, eq.currents_A)
    assert S.K[2, 2] == pytest.approx(-4 * W / dist, rel=1e-5)
    assert abs(np.trace(S.K[:3, :3])) < 1e-6 * abs(S.K[2, 2])
    v = analysis.stability_verdict(d, S)
    assert v.unstable_count >= 1
