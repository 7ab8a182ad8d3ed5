"""Tests of the design sweep: sweep files (fields.input.sweepfile), expansion, evaluation, ranking,
resumable execution (fields.studies.sweep and the modules it runs).

Small sweeps (4-12 designs of the invented suspension example) keep the file well under a
minute on two shared cores. References outside the code under test are named beside each check.
"""

from __future__ import annotations

import csv
import hashlib
import json
import math
import os
import signal
import subprocess
import sys
import time
import tomllib
from pathlib import Path

import numpy as np
import pytest

from fields import analysis
from fields.analysis.operating import operating_point
from fields.devices import coil
from fields.errors import GeometryError
from fields.input import geometry
from fields.input.sweepfile import load_sweep
from fields.studies import sweep
from fields.studies.evaluate import evaluate_design
from fields.studies.expand import design_text, expand, toml_text
from fields.studies.ranking import pareto_front, rank

from helpers import REPULSIVE, ROOT, SUSPENSION

#: the suspension example without its iron core (tests/data): the sweep machinery on the
#: iron-free engine (seconds per design); the iron-core path is checked on SUSPENSION below
AIR = ROOT / "tests" / "data" / "air_suspension.toml"

EXAMPLE_SWEEP = ROOT / "geometries" / "sweeps" / "suspension_magnet.toml"

#: values that went through the CSV files (written at full precision by fields.io.export.csv_text,
#: so exact) versus values computed directly in another call: agreement to rounding
CSV_RTOL = 1e-9
#: the sweep evaluates the stiffness poses in one basis call; same arithmetic as
#: analysis.stiffness_matrix at the same pose, so only the CSV rounding remains
STIFF_RTOL = 1e-9

SMALL = """
name = "small"
invented = true
mode = "grid"
pareto = ["coil_power_W", "k_lateral_N_per_m"]

[[parameters]]
key = "floater.magnets[0].diameter"
start = "10 mm"
stop = "16 mm"
count = {nd}

[[parameters]]
key = "floater.magnets[0].height"
values = {heights}

[[objectives]]
column = "coil_power_W"
sense = "min"

[[objectives]]
column = "k_lateral_N_per_m"
sense = "max"

[[objectives]]
column = "payload_margin_kg"
sense = "max"
"""


def small_sweep(tmp_path: Path, nd: int = 3, heights=("5 mm", "6.35 mm"), name="small.toml") -> Path:
    p = tmp_path / name
    p.write_text(SMALL.format(nd=nd, heights="[" + ", ".join(f'"{h}"' for h in heights) + "]"), encoding="utf-8")
    return p


def read_rows(path: Path) -> tuple[list[str], list[list[str]]]:
    lines = [ln for ln in path.read_text(encoding="utf-8").splitlines() if ln and not ln.startswith("#")]
    rows = list(csv.reader(lines))
    return rows[0], rows[1:]


def assert_same_table(a: Path, b: Path) -> None:
    """Same columns, same text cells, numbers equal to the written precision."""
    ca, ra = read_rows(a)
    cb, rb = read_rows(b)
    assert ca == cb
    assert len(ra) == len(rb)
    for x, y in zip(ra, rb):
        for c, u, v in zip(ca, x, y):
            try:
                fu, fv = float(u), float(v)
            except ValueError:
                assert u == v, c
                continue
            if math.isfinite(fu) or math.isfinite(fv):
                assert fu == pytest.approx(fv, rel=CSV_RTOL, abs=1e-300), c
            else:
                assert u == v, c


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """The 6-design sweep evaluated in this process (workers=0)."""
    d = tmp_path_factory.mktemp("ref")
    sp = small_sweep(d)
    res = sweep.run_sweep(AIR, sp, d / "out", workers=0, progress=False)
    return sp, res, d / "out"


# ----------------------------------------------------------------------------- sweep files


def test_example_sweep_file_expands_to_its_grid():
    spec = load_sweep(EXAMPLE_SWEEP)
    assert spec.invented and spec.mode == "grid" and spec.n_designs == 64
    designs = expand(spec)
    assert [i for i, _ in designs] == list(range(64))
    # first parameter slowest (itertools.product order); 8 equal steps from 8 mm to 20 mm
    diam = sorted({_mm(o["floater.magnets[0].diameter"]) for _, o in designs})
    np.testing.assert_allclose(diam, np.linspace(8, 20, 8), rtol=1e-11)
    assert designs[1][1]["floater.magnets[0].diameter"] == "8 mm"
    assert designs[8][1]["floater.magnets[0].height"] == "3 mm"


def _mm(text: str) -> float:
    from fields.input.units import parse

    return parse(text, "length") * 1e3


def test_toml_writer_round_trips_through_the_standard_parser():
    # reference: Python's tomllib (TOML 1.0 parser of the standard library)
    for f in (SUSPENSION, REPULSIVE):
        data = tomllib.loads(f.read_text(encoding="utf-8"))
        assert tomllib.loads(toml_text(data)) == data
    odd = {"a key": "quote \" and \\ and \n", "x": [1.5, -2, True], "t": {"inline": {"k": 1}}, "arr": [{"v": 1.0}, {"v": 2.0}]}
    assert tomllib.loads(toml_text(odd)) == odd


def test_unknown_key_path_names_the_nearest_valid_one(tmp_path):
    p = tmp_path / "bad.toml"
    p.write_text('[[parameters]]\nkey = "floater.magnet[0].diameter"\nvalues = ["10 mm"]\n'
                 '[[objectives]]\ncolumn = "coil_power_W"\nsense = "min"\n', encoding="utf-8")
    with pytest.raises(GeometryError, match=r'bad\.toml: parameters\[0\]\.key: the key path must be a key path that exists '
                       r'in suspension\.toml \(nearest valid: "floater\.magnets\[0\]\.diameter"\); got "floater\.magnet\[0\]\.diameter"\.'):
        load_sweep(p, SUSPENSION)


@pytest.mark.parametrize("body, match", [
    ('[[parameters]]\nkey = "floater.magnets[0].diameter"\nstart = "10 mm"\nstop = "2 A"\ncount = 3\n',
     r"parameters\[0\]\.stop: the value must be a length .*; got \"2 A\"\."),
    ('[[parameters]]\nkey = "floater.magnets[0].grade"\nstart = "N35"\nstop = "N52"\ncount = 3\n',
     r"parameters\[0\]\.start: the value must be absent: .* only a list of values can vary"),
    ('[[parameters]]\nkey = "floater.magnets[0].grade"\nvalues = ["N42", 3]\n',
     r"parameters\[0\]\.values\[1\]: the value must be a value of the same type"),
    ('mode = "grid"\nrankng = "weighted"\n[[parameters]]\nkey = "floater.payload_mass"\nvalues = ["1 g"]\n',
     r'rankng: this key must be one the sweep format knows; did you mean "ranking"; got an unknown key\.'),
])
def test_sweep_file_errors_are_one_line(tmp_path, body, match):
    p = tmp_path / "bad.toml"
    p.write_text(body + '[[objectives]]\ncolumn = "coil_power_W"\nsense = "min"\n', encoding="utf-8")
    with pytest.raises(GeometryError, match=match):
        load_sweep(p, SUSPENSION)


def test_objective_and_limit_columns_are_checked(tmp_path):
    p = tmp_path / "bad.toml"
    p.write_text('[[parameters]]\nkey = "floater.payload_mass"\nvalues = ["1 g"]\n'
                 '[[objectives]]\ncolumn = "coil_power"\nsense = "min"\n', encoding="utf-8")
    with pytest.raises(GeometryError, match=r'objectives\[0\]\.column: .*did you mean "coil_power_W"'):
        load_sweep(p, SUSPENSION)
    p.write_text('[[parameters]]\nkey = "floater.payload_mass"\nvalues = ["1 g"]\n'
                 '[[objectives]]\ncolumn = "coil_power_W"\nsense = "min"\n'
                 '[[constraints.limits]]\ncolumn = "coil_temperature_C"\nmax = "3 kg"\n', encoding="utf-8")
    with pytest.raises(GeometryError, match=r"constraints\.limits\[0\]\.max: the value must be a quantity with a unit convertible to degC"):
        load_sweep(p, SUSPENSION)


def test_unknown_column_error_names_every_result_column(tmp_path):
    from fields.input.sweepfile import RESULT_COLUMNS, objective_columns

    p = tmp_path / "bad.toml"
    p.write_text('[[parameters]]\nkey = "floater.payload_mass"\nvalues = ["1 g"]\n'
                 '[[objectives]]\ncolumn = "headroom"\nsense = "max"\n', encoding="utf-8")
    with pytest.raises(GeometryError) as e:
        load_sweep(p, SUSPENSION)
    msg = str(e.value)
    assert "\n" not in msg
    for c in objective_columns():
        assert c in msg, c
    assert set(objective_columns()) | {"contact", "no_equilibrium", "core_saturation", "too_hot", "over_current",
                                       "supply_short", "at_target_gap"} == set(RESULT_COLUMNS)
    # the README's table lists every column the same way
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    for c in RESULT_COLUMNS:
        assert f"| `{c}` |" in readme, c


def test_categorical_axes_keep_the_sweep_files_order():
    from fields.io import plots

    par = {"floater.magnets[0].grade": ["N52", "N35", "N52", "N35"], "x_m": [0.01, 0.01, 0.02, 0.02]}
    obj = {"coil_power_W": np.array([1.0, 2.0, 1.5, 2.5])}
    fig = plots.objectives_vs_categories(par, obj, np.ones(4, bool), categories={"floater.magnets[0].grade": ["N52", "N35"]})
    ax_cat, ax_num = fig.axes[0], fig.axes[1]
    assert [t.get_text() for t in ax_cat.get_xticklabels()] == ["N52", "N35"]
    xs = ax_cat.collections[1].get_offsets()[:, 0]  # the feasible points
    # each point sits inside its category's slot (tick k +- 0.25)
    assert np.all(np.abs(xs - np.array([0, 1, 0, 1])) <= 0.25 + 1e-12)
    np.testing.assert_array_equal(ax_num.collections[1].get_offsets()[:, 0], par["x_m"])
    plots.close(fig)


TEXT_SWEEP = """
name = "text"
invented = true
mode = "grid"

[[parameters]]
key = "floater.magnets[0].grade"
values = ["N52", "N35"]

[[parameters]]
key = "floater.magnets[0].magnetization"
values = [[0, 0, 1], [0, 0, -1]]

[[objectives]]
column = "coil_power_W"
sense = "min"

[[objectives]]
column = "voltage_headroom_V"
sense = "max"
"""


@pytest.mark.slow
def test_text_parameters_reach_every_table_and_the_best_design(tmp_path):
    p = tmp_path / "text.toml"
    p.write_text(TEXT_SWEEP, encoding="utf-8")
    out = tmp_path / "out"
    res = sweep.run_sweep(AIR, p, out, workers=0, progress=False)
    want = [("N52", "[0, 0, 1]"), ("N52", "[0, 0, -1]"), ("N35", "[0, 0, 1]"), ("N35", "[0, 0, -1]")]
    gcol, mcol = "floater.magnets[0].grade", "floater.magnets[0].magnetization"
    # Python's csv module reads the tables as they are (header first)
    for name in ("sweep.csv", "ranked.csv", "front.csv"):
        rows = list(csv.DictReader((out / name).read_text(encoding="utf-8").splitlines()))
        assert rows, name
        for r in rows:
            assert (r[gcol], r[mcol]) == want[int(r["index"])], name
    summary = json.loads((out / "sweep.json").read_text())
    assert [(r[gcol], r[mcol]) for r in summary["designs_table"]] == want
    assert summary["parameters"][0]["text_values"] == ["N52", "N35"]
    assert (out / "objectives.png").read_bytes().startswith(b"\x89PNG")
    # flipping the floater's magnetization flips the hover current (force linear in the
    # magnetization at fixed current, and a current of the other sign restores it)
    assert res.table[1]["hover_current_A"] == pytest.approx(-res.table[0]["hover_current_A"], rel=1e-6)
    # the best design file describes its own values
    best = geometry.load(out / "best_design.toml")
    g, m = want[res.best_index]
    assert f'{gcol} = "{g}"' in best.description and f"{mcol} = {m}" in best.description
    assert f"index {res.best_index}" in best.description and "coil_power_W = " in best.description
    assert best.floater.magnets[0].grade == g

    # definition of Latin hypercube sampling: McKay, Beckman & Conover (1979), Technometrics 21(2):
    # with N points, each parameter's range split into N equal strata holds exactly one point
    n = 10
    p = tmp_path / "lhs.toml"
    p.write_text(f'mode = "sample"\n[sample]\ncount = {n}\nmethod = "latin_hypercube"\nseed = 7\n'
                 '[[parameters]]\nkey = "floater.magnets[0].diameter"\nstart = "10 mm"\nstop = "20 mm"\n'
                 '[[parameters]]\nkey = "floater.payload_mass"\nstart = "0 g"\nstop = "50 g"\n'
                 '[[objectives]]\ncolumn = "coil_power_W"\nsense = "min"\n', encoding="utf-8")
    spec = load_sweep(p, SUSPENSION)
    designs = expand(spec)
    assert len(designs) == n
    from fields.input.units import parse

    d = np.array([parse(o["floater.magnets[0].diameter"], "length") for _, o in designs])
    m = np.array([parse(o["floater.payload_mass"], "mass") for _, o in designs])
    for x, lo, hi in ((d, 0.010, 0.020), (m, 0.0, 0.050)):
        strata = np.floor((x - lo) / (hi - lo) * n).astype(int)
        assert sorted(strata.tolist()) == list(range(n))
    # seeded: the same file gives the same designs
    assert expand(load_sweep(p, SUSPENSION)) == designs


# ----------------------------------------------------------------------------- ranking


def brute_force_dominated(V: np.ndarray, senses) -> np.ndarray:
    """Domination by definition (Deb 2001, Multi-Objective Optimization using Evolutionary
    Algorithms, Def. 2.5): j dominates i when j is no worse in every objective and better in one."""
    s = np.array([1.0 if x == "min" else -1.0 for x in senses])
    X = V * s
    n = len(X)
    dom = np.zeros(n, bool)
    for i in range(n):
        for j in range(n):
            if i != j and all(X[j] <= X[i]) and any(X[j] < X[i]):
                dom[i] = True
    return dom


@pytest.mark.parametrize("seed, m", [(0, 2), (1, 3), (2, 2)])
def test_pareto_front_is_exactly_the_non_dominated_set(seed, m):
    rng = np.random.default_rng(seed)
    V = rng.integers(0, 6, size=(60, m)).astype(float)  # small integers: many ties and duplicates
    senses = ["min", "max", "min"][:m]
    front = pareto_front(V, senses)
    dom = brute_force_dominated(V, senses)
    assert sorted(front.tolist()) == np.flatnonzero(~dom).tolist()


def test_weighted_and_lexicographic_ranking_worked_example():
    # hand-worked: objectives (power min, stiffness max) for three designs
    # power 1, 3, 2 -> scaled 0, 1, 0.5; stiffness 10, 30, 10 -> scaled (max) 1, 0, 1
    # weights 1, 1 -> scores 0.5, 0.5, 0.75: designs 0 and 1 tie, the lower index first
    V = np.array([[1.0, 10.0], [3.0, 30.0], [2.0, 10.0]])
    order, score = rank(V, ["min", "max"], [1.0, 1.0], "weighted")
    np.testing.assert_allclose(score, [0.5, 0.5, 0.75])
    assert order.tolist() == [0, 1, 2]
    # weights 1, 3 -> scores 0.75, 0.25, 0.875
    order, score = rank(V, ["min", "max"], [1.0, 3.0], "weighted")
    np.testing.assert_allclose(score, [0.75, 0.25, 0.875])
    assert order.tolist() == [1, 0, 2]
    # lexicographic: power first (1 < 2 < 3)
    order, _ = rank(V, ["min", "max"], method="lexicographic")
    assert order.tolist() == [0, 2, 1]


# ----------------------------------------------------------------------------- evaluation


@pytest.mark.slow
def test_sweep_rows_equal_the_single_design_analysis(reference):
    sp, res, out = reference
    spec = res.spec
    designs = dict(expand(spec))
    for i in (0, 4):
        row = res.table[i]
        text = design_text(spec.base_text, designs[i])
        d = geometry.loads(text, file="direct", base_dir=AIR.parent)
        gop = d.study.operating_gap_m
        c = analysis.axial_curves(d, gaps_m=[gop], currents_A=[0.0])
        ih = float(c.hover_current_A[0])
        assert row["hover_current_A"] == pytest.approx(ih, rel=CSV_RTOL)
        assert row["max_payload_kg"] == pytest.approx(float(c.max_payload_kg[0]), rel=CSV_RTOL)
        assert row["payload_margin_kg"] == pytest.approx(float(c.max_payload_kg[0]) - d.floater.payload_mass_kg, rel=CSV_RTOL)
        # the suspension designs hover at the operating gap on the hover current (no passive height)
        op = operating_point(d)
        assert not op.passive and row["at_target_gap"]
        eq = op.equilibrium
        assert row["operating_gap_m"] == pytest.approx(eq.gap_m, rel=CSV_RTOL)
        # the six-axis equilibrium at the hover current is the on-axis hover pose (axisymmetric design)
        assert eq.gap_m == pytest.approx(gop, abs=1e-9)
        assert row["ki_N_per_A"] == pytest.approx(float(c.ki_N_per_A[0]), rel=1e-7)
        S = analysis.stiffness_matrix(d, eq.position_m, eq.rotvec_rad, eq.currents_A)
        assert row["kz_N_per_m"] == pytest.approx(S.K[2, 2], rel=STIFF_RTOL)
        assert row["k_lateral_N_per_m"] == pytest.approx(0.5 * (S.K[0, 0] + S.K[1, 1]), rel=STIFF_RTOL)
        assert row["k_tilt_Nm_per_rad"] == pytest.approx(0.5 * (S.K[3, 3] + S.K[4, 4]), rel=STIFF_RTOL)
        v = analysis.stability_verdict(d, S)
        assert row["axes_needing_control"] == v.unstable_count
        # coil heat: the project's coil data sheet at the same current
        cd = coil.coil_datasheet(d, 0, hover_currents_A=[ih], gaps_m=[gop])
        assert row["coil_resistance_20C_ohm"] == pytest.approx(cd.resistance_20C_ohm, rel=CSV_RTOL)
        assert row["coil_power_W"] == pytest.approx(float(cd.power_W[0]), rel=CSV_RTOL)
        assert row["coil_temperature_rise_K"] == pytest.approx(float(cd.temperature_rise_K[0]), rel=CSV_RTOL)
        # supply and headroom: Ohm's law at the steady winding temperature with copper's
        # temperature coefficient 0.00393 1/K at 20 C (IEC 60028:1925, annealed copper)
        V = abs(row["operating_current_A"]) * row["coil_resistance_20C_ohm"] * (1 + 0.00393 * (row["coil_temperature_C"] - 20.0))
        assert row["supply_voltage_V"] == 24.0  # the suspension example's study.supply_voltage
        assert row["coil_voltage_V"] == pytest.approx(V, rel=1e-12)
        assert row["voltage_headroom_V"] == pytest.approx(24.0 - V, rel=1e-12)
        assert row["supply_short"] is (V > 24.0)
        # P = V I for the one coil (Joule's law)
        assert row["coil_power_W"] == pytest.approx(V * abs(row["operating_current_A"]), rel=1e-12)
        # unstable pole: the positive pole of m z'' = -k_z z, from python-control (a general
        # linear-systems library): A = [[0, 1], [-k_z/m, 0]]
        import control

        kz = S.K[2, 2]
        sys_ = control.ss([[0.0, 1.0], [-kz / d.floater.mass_kg, 0.0]], [[0.0], [1.0]], [[1.0, 0.0]], [[0.0]])
        assert row["unstable_pole_1_per_s"] == pytest.approx(max(control.poles(sys_).real), rel=1e-7)


ONE_DESIGN = """
name = "one"
invented = true
[[parameters]]
key = "study.operating_gap"
values = ["{gap}"]
[[objectives]]
column = "coil_power_W"
sense = "min"
"""


@pytest.mark.slow
@pytest.mark.parametrize("path, gap", [(SUSPENSION, "15 mm"), (REPULSIVE, "30 mm")], ids=["suspension", "repulsive"])
def test_sweep_uses_the_reports_operating_point(path, gap, tmp_path):
    # the sweep and the report (stability stage) linearise about the same operating point: the
    # repulsive base rests passively at zero current, the suspension floater hovers on its hover
    # current at the operating gap; the reference is the report's own stability.json
    from fields.studies.stages import run_stability

    sp = tmp_path / "one.toml"
    sp.write_text(ONE_DESIGN.format(gap=gap), encoding="utf-8")
    res = sweep.run_sweep(path, sp, tmp_path / "sweep", workers=0, progress=False)
    row = res.table[0]
    assert row["failure"] == ""
    st = run_stability(geometry.load(path), tmp_path / "report", with_maps=False)
    eq = json.loads((tmp_path / "report" / "stability.json").read_text(encoding="utf-8"))["equilibrium"]
    assert row["operating_gap_m"] == pytest.approx(eq["gap_m"], rel=CSV_RTOL)
    pattern = analysis.drive_pattern(geometry.load(path))
    np.testing.assert_allclose(eq["currents_A"], row["operating_current_A"] * pattern, rtol=CSV_RTOL, atol=1e-12)
    assert row["at_target_gap"] == (not st.operating.passive)
    assert row["kz_N_per_m"] == pytest.approx(st.stiffness_matrix[2, 2], rel=STIFF_RTOL)


@pytest.mark.slow
def test_design_without_operating_point_is_flagged():
    # a 300 g payload is far beyond the coil's reach at 15 mm and the suspension floater has no
    # passive height: the operating-point rule finds nothing, so the row says no_equilibrium
    text = design_text(SUSPENSION.read_text(encoding="utf-8"), {"floater.payload_mass": "300 g"})
    d = geometry.loads(text, file="heavy", base_dir=SUSPENSION.parent)
    from fields.errors import SolverError

    with pytest.raises(SolverError, match="operating point: the floater cannot hover"):
        operating_point(d)
    row = evaluate_design(d)
    assert row["over_current"] and row["no_equilibrium"] and not row["at_target_gap"]
    assert math.isnan(row["kz_N_per_m"]) and math.isnan(row["operating_gap_m"])
    # Newton: the hover current balances the weight; the core saturates, so the check is the
    # force of the saturable solve at that current, computed afresh (not the affine F0 + k_i I)
    c = analysis.axial_curves(d, gaps_m=[d.study.operating_gap_m], currents_A=[row["hover_current_A"]])
    assert float(c.Fup_N[0, 0]) == pytest.approx(d.weight_N, rel=1e-6)
    affine = float(c.F0_N[0]) + float(c.ki_N_per_A[0]) * row["hover_current_A"]
    assert abs(affine - d.weight_N) > 1e-3 * d.weight_N  # the affine model would be wrong here


@pytest.mark.slow
def test_failed_designs_carry_their_reason(tmp_path):
    p = tmp_path / "fail.toml"
    p.write_text('[[parameters]]\nkey = "coils[0].inner_radius"\nvalues = ["7 mm", "3 mm"]\n'
                 '[[parameters]]\nkey = "study.operating_gap"\nvalues = ["15 mm", "40 mm"]\n'
                 '[[objectives]]\ncolumn = "coil_power_W"\nsense = "min"\n', encoding="utf-8")
    res = sweep.run_sweep(SUSPENSION, p, tmp_path / "out", workers=0, progress=False)
    fail = [r["failure"] for r in res.table]
    assert fail[0] == ""
    # design 1: operating gap outside gap_min..gap_max (the loader's rule)
    assert "suspension.toml (sweep design 1): study.operating_gap" in fail[1] and "inside gap_min..gap_max" in fail[1]
    # design 2: a winding of inner radius 3 mm overlaps the 12 mm diameter core
    assert "(sweep design 2)" in fail[2] and "overlap" in fail[2] and "iron core" in fail[2]
    assert fail[3] != ""
    assert res.best_index == 0 and res.feasible.tolist() == [True, False, False, False]
    _, rows = read_rows(tmp_path / "out" / "ranked.csv")
    assert rows[0][2] == "0" and all("failed" in r[-1] for r in rows[1:])


# ----------------------------------------------------------------------------- execution


@pytest.mark.slow
def test_outputs_front_and_best_design(reference):
    sp, res, out = reference
    for name in ("sweep.csv", "ranked.csv", "front.csv", "sweep.json", "front.png", "objectives.png", "best_design.toml"):
        assert (out / name).is_file(), name
    # the written front is non-dominated among the feasible designs, and complete
    names = list(res.spec.pareto)
    senses = [o.sense for o in res.spec.objectives if o.column in names]
    fidx = np.flatnonzero(res.feasible)
    V = np.array([[res.table[i][c] for c in names] for i in fidx])
    dom = brute_force_dominated(V, senses)
    assert sorted(res.front.tolist()) == fidx[~dom].tolist()
    _, frows = read_rows(out / "front.csv")
    assert sorted(int(r[0]) for r in frows) == sorted(res.front.tolist())
    # the best design file loads and carries the best overrides
    best = geometry.load(out / "best_design.toml")
    over = dict(expand(res.spec))[res.best_index]
    assert best.floater.magnets[0].dimensions_m[0] == pytest.approx(_mm(over["floater.magnets[0].diameter"]) * 1e-3)
    assert best.name.endswith("-sweep-best") and best.invented


@pytest.mark.slow
def test_local_pool_and_dask_cluster_give_the_same_table(reference, tmp_path):
    distributed = pytest.importorskip("distributed")
    sp, _, ref_out = reference
    base_before = hashlib.sha256(AIR.read_bytes()).hexdigest()
    pool = sweep.run_sweep(AIR, sp, tmp_path / "pool", workers=2, progress=False)
    assert pool.evaluated == 6
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        dk = sweep.run_sweep(AIR, sp, tmp_path / "dask", scheduler_address=cluster.scheduler_address,
                             progress=False)
    assert dk.evaluated == 6
    assert_same_table(tmp_path / "pool" / "sweep.csv", tmp_path / "dask" / "sweep.csv")
    assert_same_table(tmp_path / "pool" / "sweep.csv", ref_out / "sweep.csv")
    assert hashlib.sha256(AIR.read_bytes()).hexdigest() == base_before  # input never written


@pytest.mark.slow
def test_rerun_recomputes_nothing_and_changed_sweep_recomputes(reference, tmp_path):
    sp, res, out = reference
    again = sweep.run_sweep(AIR, sp, out, workers=0, progress=False)
    assert again.evaluated == 0 and again.reused == 6
    assert [r["kz_N_per_m"] for r in again.table] == [r["kz_N_per_m"] for r in res.table]
    # a different sweep description never reuses the old rows
    sp2 = small_sweep(tmp_path, nd=2, name="small2.toml")
    other = sweep.run_sweep(AIR, sp2, out, workers=0, progress=False)
    assert other.evaluated == 4 and other.reused == 0


@pytest.mark.slow
def test_interrupted_sweep_resumes_and_matches(tmp_path):
    sp = small_sweep(tmp_path, nd=2, heights=("5 mm", "6 mm", "7 mm"))  # 6 designs
    out = tmp_path / "run"
    code = (
        "from fields.studies.sweep import run_sweep\n"
        f"run_sweep({str(AIR)!r}, {str(sp)!r}, {str(out)!r}, workers=0, progress=False, chunk_size=1)\n"
    )
    proc = subprocess.Popen([sys.executable, "-c", code], start_new_session=True,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    chunks = out / "sweep_chunks"
    t0 = time.monotonic()
    try:
        while time.monotonic() - t0 < 60:
            if chunks.is_dir() and len(list(chunks.glob("*.csv"))) >= 2:  # one design per chunk
                break
            assert proc.poll() is None, proc.stderr.read().decode()
            time.sleep(0.02)
    finally:
        os.killpg(proc.pid, signal.SIGKILL)  # the process group of the child started above
        proc.wait()
    done_before = len(list(chunks.glob("*.csv")))
    assert 2 <= done_before < 6
    assert not (out / "sweep.csv").exists()
    resumed = sweep.run_sweep(AIR, sp, out, workers=0, progress=False)
    assert resumed.evaluated == 6 - done_before and resumed.reused == done_before
    fresh = sweep.run_sweep(AIR, sp, tmp_path / "fresh", workers=0, progress=False)
    assert fresh.evaluated == 6
    assert_same_table(out / "sweep.csv", tmp_path / "fresh" / "sweep.csv")


@pytest.mark.slow
def test_sweep_command_prints_the_summary(reference, capsys):
    from fields import cli

    sp, res, out = reference
    assert cli.main(["sweep", str(AIR), str(sp), "-o", str(out), "--workers", "0", "-q"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].startswith("sweep small: 6 designs of air_suspension.toml (grid); 0 evaluated now, 6 reused")
    assert lines[1].startswith(f"best design {res.best_index}: ")
