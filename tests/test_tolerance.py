"""Tests of the tolerance study (fields.input.tolerancefile, fields.studies.tolerance and the
modules it runs), on the iron-free suspension test design (tests/data/air_suspension.toml):
samples without tilt or offset keep the closed-form on-axis route (hundredths of a second each).
References outside the code under test are named beside each check.
"""

from __future__ import annotations

import csv
import dataclasses
import json
import math
import tomllib

import numpy as np
import pytest
from scipy.stats import norm

from fields.errors import GeometryError
from fields.input import geometry
from fields.input.sweepfile import RESULT_COLUMNS
from fields.input.tables import REMANENCE_TEMPERATURE_COEFFICIENT_PER_K, lookup_grade
from fields.input.tolerancefile import load_tolerances, zero_tolerances
from fields.studies import tolerance_control as tc
from fields.studies.evaluate import evaluate_design
from fields.studies.tolerance import plan, run_tolerance

from helpers import ROOT

AIR = ROOT / "tests" / "data" / "air_suspension.toml"
AMBIENT_C = 25.0  # the file's ambient temperature


def _only(**kw):
    """Every band zero except the ones given."""
    return dataclasses.replace(zero_tolerances(AMBIENT_C), **kw)


@pytest.mark.slow  # three runs with their figures: about 8 s
def test_the_sample_is_seeded_and_reproducible(tmp_path):
    spec = _only(samples=6, seed=7, dimension_m=1e-4, remanence="grade")
    _, _, inputs, V1, over1 = plan(AIR, spec)
    _, _, _, V2, over2 = plan(AIR, spec)
    assert np.array_equal(V1, V2) and over1 == over2
    _, _, _, V3, _ = plan(AIR, dataclasses.replace(spec, seed=8))
    assert not np.array_equal(V1, V3)
    # two runs into different folders (nothing reused) give the same rows
    a = run_tolerance(AIR, tmp_path / "a", spec, workers=0, progress=False)
    b = run_tolerance(AIR, tmp_path / "b", spec, workers=0, progress=False)
    assert a.evaluated == b.evaluated == 6
    cols = list(RESULT_COLUMNS)
    assert [[r[c] for c in cols] for r in a.table] == [[r[c] for c in cols] for r in b.table]
    # a rerun into the same folder resumes from the chunk files and evaluates nothing
    c = run_tolerance(AIR, tmp_path / "a", spec, workers=0, progress=False)
    assert c.evaluated == 0 and c.reused == 6
    assert [[r[c] for c in cols] for r in c.table] == [[r[c] for c in cols] for r in a.table]


def test_zero_tolerances_return_the_nominal_design_exactly(tmp_path):
    nominal = evaluate_design(geometry.load(AIR))
    r = run_tolerance(AIR, tmp_path, zero_tolerances(AMBIENT_C, samples=3), workers=0, progress=False)
    assert r.inputs == ()
    for row in r.table:
        assert row["failure"] == ""
        for c in RESULT_COLUMNS:  # exactly: the same design, the same engine
            assert row[c] == nominal[c] or (math.isnan(row[c]) and math.isnan(nominal[c])), c
    # the nominal controller holds the nominal plant with its design phase margin (45 deg, the
    # nominal rule of fields.control.plant; Franklin, Powell & Emami-Naeini, lead design, ch. 6)
    ctl = r.summary["control"]
    assert ctl["checked"] and ctl["stabilised_share"] == 1.0
    assert ctl["phase_margin_deg"]["mean"] == pytest.approx(45.0, abs=0.5)  # digital loop: ZOH budgeted, not exact
    # the nonlinear releases: every sample is the nominal design, so all are captured or none
    cap = ctl["nonlinear_capture"]
    assert cap["computed"] and len({row["captured"] for row in r.table}) == 1
    assert cap["captured_share"] in (0.0, 1.0)


def test_capture_check_matches_a_direct_simulation_and_fails_without_authority():
    """capture_of_row against fields.control.simulate.simulate (solve_ivp, the reference
    integrator) from the same release; and a loop whose current limit is far below the hover
    current cannot hold the floater (the drive saturates: it falls)."""
    import dataclasses

    from fields.control.plant import linear_sensor
    from fields.control.simulate import Scenario, simulate
    from fields.studies import tolerance_control as tc

    d = geometry.load(AIR)
    nominal = evaluate_design(d)
    drive = tc.drive_model(d)
    plant = tc.plant_of_row(nominal, drive)
    ctrl = tc.nominal_controller(plant)
    c = tc.capture_of_row(nominal, d, drive, ctrl)
    table = tc.vertical_table(d, float(nominal["operating_gap_m"]))
    lo, hi = table.range_m
    tol = 0.01 * (hi - lo)

    def held(s0):
        res = simulate(plant.params, table, ctrl, Scenario(t_end_s=tc.CAPTURE_T_END_S, s0_m=s0),
                       sensor=linear_sensor(plant.params))
        return (res.time_s[-1] >= tc.CAPTURE_T_END_S * (1 - 1e-9) and abs(res.s_m[-1]) < tol
                and abs(res.v_m_per_s[-1]) < tol * ctrl.crossover_rad_per_s)

    assert c.captured and all(held(s0) for s0 in tc.CAPTURE_STARTS_M)
    weak = dataclasses.replace(drive, max_current_A=0.2 * float(nominal["operating_current_A"]))
    assert not tc.capture_of_row(nominal, d, weak, ctrl).captured


def test_hover_current_scales_as_one_over_remanence(tmp_path):
    """A single magnet under an air coil: F = k_i(Br) I with k_i proportional to Br, because the
    force on a rigid magnet is linear in its magnetization (Jackson, Classical Electrodynamics,
    3rd ed., 1999, eq. 5.69, F = grad(m . B) for a dipole; by superposition over the magnet's
    volume) and the air coil's field does not depend on the magnet. With F0 = 0 the hover current
    W / k_i scales as 1/Br, k_i as Br, and k_z = -I dk_i/dz does not change."""
    spec = _only(samples=8, seed=3, remanence="grade")
    r = run_tolerance(AIR, tmp_path, spec, workers=0, progress=False)
    (q,) = r.inputs
    assert q.column == "floater.magnets[0].remanence_T"
    br = np.array([row[q.column] for row in r.table])
    g = lookup_grade("N42")
    assert np.all((br >= g.remanence_min_T) & (br <= g.remanence_max_T))
    ih = np.array([row["hover_current_A"] for row in r.table])
    ki = np.array([row["ki_N_per_A"] for row in r.table])
    kz = np.array([row["kz_N_per_m"] for row in r.table])
    nom = r.nominal
    br0 = g.remanence_nominal_T
    rtol = 1e-9  # the closed-form on-axis route: round-off only
    np.testing.assert_allclose(ih * br, nom["hover_current_A"] * br0, rtol=rtol)
    np.testing.assert_allclose(ki / br, nom["ki_N_per_A"] / br0, rtol=rtol)
    np.testing.assert_allclose(kz, nom["kz_N_per_m"], rtol=1e-7)  # Richardson stencil differences
    # the linear ranking names the remanence (the only input) with |SRC| = 1 for k_i
    s = r.summary["sensitivity"]["outputs"]["ki_N_per_A"]
    assert s["ranking"] == [q.column] and abs(s["src"][q.column]) == pytest.approx(1.0, abs=1e-6)


def test_ambient_temperature_scales_the_remanence_by_its_coefficient(tmp_path):
    """10 K above the file's ambient: Br (1 + alpha 10 K) with NdFeB's reversible coefficient, so
    the hover current is divided by that factor (the 1/Br law of the test above) and the coil runs
    hotter at the warmer ambient."""
    warm = AMBIENT_C + 10.0
    spec = _only(samples=1, ambient_min_C=warm, ambient_max_C=warm)
    r = run_tolerance(AIR, tmp_path, spec, workers=0, progress=False)
    factor = 1.0 + REMANENCE_TEMPERATURE_COEFFICIENT_PER_K["NdFeB"] * 10.0
    row, nom = r.table[0], r.nominal
    assert row["hover_current_A"] == pytest.approx(nom["hover_current_A"] / factor, rel=1e-9)
    assert row["coil_temperature_C"] > nom["coil_temperature_C"] + 9.0


def test_sampled_remanence_mean_within_its_confidence_interval():
    """Latin hypercube (scipy.stats.qmc) of n points: the variance of a sample mean is at most
    sigma^2 / (n - 1) (Owen, "Monte Carlo variance of scrambled net quadrature", SIAM J. Numer.
    Anal. 34, 1997, the LHS bound; recalled from memory), so the mean of the sampled remanence lies
    within z_0.995 sigma / sqrt(n - 1) of the distribution's mean (uniform over the grade range:
    mean (a+b)/2, sigma (b-a)/sqrt(12)); the sample standard deviation within 10 % of sigma."""
    n = 64
    g = lookup_grade("N42")
    a, b = g.remanence_min_T, g.remanence_max_T
    for seed in (1, 2, 3):
        spec = _only(samples=n, seed=seed, method="latin_hypercube", remanence="grade")
        _, _, inputs, V, over = plan(AIR, spec)
        x = V[:, 0]
        sigma = (b - a) / math.sqrt(12.0)
        assert abs(x.mean() - 0.5 * (a + b)) <= norm.ppf(0.995) * sigma / math.sqrt(n - 1)
        assert x.std(ddof=1) == pytest.approx(sigma, rel=0.10)
        # what is written into the file is the sampled value (no temperature change here)
        assert [float(o["floater.magnets[0].remanence"].split()[0]) for o in over] == list(x)


def test_normal_distribution_uses_the_band_as_three_sigma():
    """distribution = "normal": the band is 3 sigma; scrambled Sobol, n = 256: the sample std of a
    dimension within 10 % of band/3 (the normal quantile map, scipy.stats.norm.ppf)."""
    spec = _only(samples=256, seed=5, dimension_m=3e-4, distribution="normal")
    _, design, inputs, V, _ = plan(AIR, spec)
    j = [q.column for q in inputs].index("floater.magnets[0].diameter_m")
    assert V[:, j].std(ddof=1) == pytest.approx(1e-4, rel=0.10)
    assert V[:, j].mean() == pytest.approx(design.floater.magnets[0].dimensions_m[0], abs=3e-5)


def test_geometric_inputs_reach_the_loaded_design():
    """Offsets, tilts and magnetization errors are written so that the loader's design carries
    them (rotation vectors compose as rotations, scipy.spatial.transform.Rotation)."""
    from fields.studies.expand import design_text

    spec = _only(samples=2, seed=4, mounting_offset_m=2e-4, mounting_tilt_rad=math.radians(1),
                 magnetization_angle_rad=math.radians(1))
    text, design, inputs, V, over = plan(AIR, spec)
    cols = [q.column for q in inputs]
    d = geometry.loads(design_text(text, over[0]), file="sample", check_overlaps=False)
    m = d.floater.magnets[0]
    v = dict(zip(cols, V[0]))
    p = "floater.magnets[0]."
    assert m.position_m[0] == pytest.approx(v[p + "offset_x_m"], abs=1e-15)
    assert m.position_m[1] == pytest.approx(v[p + "offset_y_m"], abs=1e-15)
    np.testing.assert_allclose(m.rotvec_rad, [v[p + "tilt_x_rad"], v[p + "tilt_y_rad"], 0.0], atol=1e-12)
    tilt = math.acos(m.polarization_T[2] / m.remanence_T)
    assert tilt == pytest.approx(math.hypot(v[p + "magnetization_tilt_a_rad"], v[p + "magnetization_tilt_b_rad"]), rel=1e-6)


def test_tolerance_errors_name_file_key_value_and_rule(tmp_path):
    bad = tmp_path / "tol.toml"
    bad.write_text('dimension = "-0.1 mm"\n')
    with pytest.raises(GeometryError) as e:
        load_tolerances(str(AIR), AMBIENT_C, str(bad))
    msg = str(e.value)
    assert str(bad) in msg and "dimension" in msg and '"-0.1 mm"' in msg and "positive" in msg and "\n" not in msg
    bad.write_text('[tolerance]\ndimenson = "0.1 mm"\n')
    with pytest.raises(GeometryError, match=r"tolerance\.dimenson.*did you mean \"dimension\""):
        load_tolerances(str(AIR), AMBIENT_C, str(bad))
    bad.write_text('ambient_min = "40 degC"\nambient_max = "30 degC"\n')
    with pytest.raises(GeometryError, match="ambient_max.*at least ambient_min"):
        load_tolerances(str(AIR), AMBIENT_C, str(bad))
    # a [tolerance] table in the geometry file is read, and the loader accepts it
    geo = tmp_path / "g.toml"
    geo.write_text(AIR.read_text() + '\n[tolerance]\nsamples = 5\nmounting_tilt = "0.5 deg"\n')
    geometry.load(geo)
    s = load_tolerances(str(geo), AMBIENT_C)
    assert s.samples == 5 and s.mounting_tilt_rad == pytest.approx(math.radians(0.5))


def test_a_much_stiffer_plant_escapes_the_nominal_controller():
    """The controller is placed at 3x the nominal unstable pole; a plant whose unstable pole is
    well above that crossover is not stabilised (an open-loop-unstable pole above the crossover
    cannot be held: Skogestad & Postlethwaite, Multivariable Feedback Control, 2nd ed., 2005,
    sec. 5.8, omega_c > 2 p; from memory)."""
    d = geometry.load(AIR)
    nom = evaluate_design(d)
    drive = tc.drive_model(d)
    ctrl = tc.nominal_controller(tc.plant_of_row(nom, drive))
    assert tc.check_row(nom, drive, ctrl).stabilised
    assert not tc.check_row({**nom, "kz_N_per_m": 25.0 * nom["kz_N_per_m"]}, drive, ctrl).stabilised


def test_cli_tolerance_writes_its_files(tmp_path, capsys):
    from fields.cli import main

    spec = tmp_path / "tol.toml"
    spec.write_text('[tolerance]\nmounting_offset = "0 mm"\nmounting_tilt = "0 deg"\nmagnetization_angle = "0 deg"\n')
    out = tmp_path / "out"
    assert main(["tolerance", str(AIR), "-o", str(out), "--samples", "4", "--seed", "2", "--workers", "0", "-q",
                 "--spec", str(spec)]) == 0
    text = capsys.readouterr().out
    assert "nominal controller stabilises" in text and "Safety:" in text
    with open(out / "tolerance.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    assert len(rows) == 4 and "hover_current_A" in rows[0] and "ambient_temperature_C" in rows[0]
    s = json.loads((out / "tolerance.json").read_text())
    assert s["samples"] == 4 and s["seed"] == 2
    hv = [float(r["hover_current_A"]) for r in rows]
    assert s["outputs"]["hover_current_A"]["mean"] == pytest.approx(float(np.mean(hv)), rel=1e-12)
    assert (out / "tolerance.png").stat().st_size > 10_000
    # geometry file untouched and valid TOML
    tomllib.loads(AIR.read_text())


def test_a_design_that_raises_a_bug_is_recorded_not_fatal(monkeypatch):
    """One design's unexpected error keeps its reason in ``failure`` (a long run goes on); no
    physics here: the executor's contract."""
    from fields.studies import evaluate, executors

    def boom(design):
        raise ZeroDivisionError("division by zero")

    monkeypatch.setattr(evaluate, "evaluate_design", boom)
    rows = executors.run_chunk((AIR.read_text(encoding="utf-8"), AIR.name, str(AIR.parent), [(0, {})]))
    assert rows[0]["failure"] == "internal error ZeroDivisionError: division by zero"
