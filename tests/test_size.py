"""Tests of ``hoverfield size`` (fields.input.requirement, fields.studies.size*): a requirement
file -> a ranked short list of designs, each a geometry file the normal loader reads.

Small searches (a few generations of the iron-free engine) keep the fast tests short; the example
requirement and a report on its best design are marked slow. References outside the code under
test are named beside each check.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import pytest

from fields import cli
from fields.errors import GeometryError
from fields.input import geometry
from fields.input.requirement import load_requirement
from fields.studies import size_model
from fields.studies.evaluate import evaluate_design
from fields.studies.size import run_size

from helpers import REQUIREMENTS, ROOT

AIR = ROOT / "tests" / "data" / "air_suspension.toml"
AIR_REQUIREMENT = ROOT / "tests" / "data" / "requirement_air_suspension.toml"
#: numbers that went through size.csv (written at full precision by fields.io.export.csv_text)
#: against a fresh evaluation of the same file: same arithmetic, so rounding only
CSV_RTOL = 1e-9

IMPOSSIBLE = """
# INVENTED EXAMPLE: a requirement no design can meet (2 kg at 40 mm from 5 V in a thimble)
name = "impossible"
invented = true
[floater]
payload_mass = "2 kg"
[floater.magnet]
shape = "cylinder"
diameter = "12.7 mm"
height = "6.35 mm"
grade = "N42"
[operating]
gap = "40 mm"
supply_voltage = "5 V"
[coil]
max_outer_radius = "10 mm"
max_height = "10 mm"
min_inner_radius = "2 mm"
wire_gauges = ["AWG 24", "AWG 30"]
[search]
seed = 2
shortlist = 2
generations = 3
"""


def _rows(folder: Path) -> list[dict]:
    with open(folder / "size.csv", newline="", encoding="utf-8") as f:
        return list(csv.DictReader(f))


@pytest.fixture(scope="module")
def air_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("size_air")
    return run_size(AIR_REQUIREMENT, out, workers=2), out


def test_known_design_is_matched_or_beaten(air_run):
    # known by construction: the iron-free test design (its envelope, gauge, magnet, gap and
    # payload are the requirement) lies inside the search space, so the best design must need at
    # most its coil power; the reference is evaluated independently by evaluate_design
    res, _ = air_run
    ref = evaluate_design(geometry.load(AIR))
    assert res.feasible and res.designs[0].feasible
    best = res.designs[0].numbers["coil_power_W"]
    assert best <= ref["coil_power_W"] * (1 + 1e-9), (best, ref["coil_power_W"])
    # the short list is ranked on the objective
    powers = [d.numbers["coil_power_W"] for d in res.designs if d.feasible]
    assert powers == sorted(powers)


def test_written_files_load_and_match_the_csv(air_run):
    res, out = air_run
    rows = _rows(out)
    assert [int(r["rank"]) for r in rows] == list(range(1, len(res.designs) + 1))
    for r in rows:
        text = (out / r["file"]).read_text(encoding="utf-8")
        assert "INVENTED EXAMPLE" in text and "GENERATED" in text
        d = geometry.load(out / r["file"])
        assert d.invented
        ev = evaluate_design(d)
        assert ev["hover_current_A"] == pytest.approx(float(r["hover_current_A"]), rel=CSV_RTOL)
        assert ev["coil_temperature_C"] == pytest.approx(float(r["coil_temperature_C"]), rel=CSV_RTOL)
        # resistance by hand: ASTM B258 bare diameter d = 0.005 in x 92^((36 - n)/39) and the
        # annealed-copper resistivity 1/58 ohm mm^2/m of IEC 60028, mean turn pi (a + b)
        n = int(r["wire_gauge"].split()[1])
        dia = 0.005 * 0.0254 * 92.0 ** ((36 - n) / 39)
        a, b = float(r["inner_radius_m"]), float(r["outer_radius_m"])
        R = (1 / 58e6) * int(r["turns"]) * math.pi * (a + b) / (math.pi * dia**2 / 4)
        assert float(r["resistance_20C_ohm"]) == pytest.approx(R, rel=1e-12)
        # sample rate: 20 samples per crossover period, crossover 3x the unstable pole
        # sqrt(-k_z/m) (Franklin, Powell & Workman, Digital Control of Dynamic Systems, 1998,
        # ch. 11, recalled from memory; the project's stated rule)
        p = math.sqrt(-float(r["kz_N_per_m"]) / float(r["floater_mass_kg"]))
        assert float(r["sample_rate_Hz"]) == pytest.approx(20 * 3 * p / (2 * math.pi), rel=1e-12)


def test_same_seed_same_short_list(air_run, tmp_path):
    res, _ = air_run
    again = run_size(AIR_REQUIREMENT, tmp_path, workers=1, write=False)
    assert [d.candidate for d in again.designs] == [d.candidate for d in res.designs]
    assert [d.turns for d in again.designs] == [d.turns for d in res.designs]


def test_impossible_requirement_names_the_binding_limit(tmp_path, capsys):
    f = tmp_path / "impossible.toml"
    f.write_text(IMPOSSIBLE, encoding="utf-8")
    rc = cli.main(["size", str(f), "-o", str(tmp_path / "out"), "--workers", "1"])
    text = capsys.readouterr().out
    assert rc == 1
    assert "no design meets the requirement:" in text
    line = text.split("no design meets the requirement:")[1].splitlines()[0].strip()
    assert line.split(":")[0] in size_model.LIMIT_NAMES and "best candidate" in line
    rows = _rows(tmp_path / "out")
    assert rows and all(r["feasible"] == "false" for r in rows)
    # the named limit is really exceeded by the best candidate: 2 kg needs about 20 N; the
    # design that comes closest must still break that limit in its own numbers
    best = rows[0]
    req = load_requirement(f)
    lim = size_model.limits_of(req)
    name = line.split(":")[0]
    if name == "winding temperature":
        assert float(best["worst_gap_temperature_C"]) > lim.max_winding_temperature_C or "winding temperature" in best["failed_limits"]
    elif name == "current density":
        assert "current density" in best["failed_limits"]
    elif name == "supply headroom":
        assert "supply headroom" in best["failed_limits"]


def test_power_does_not_depend_on_the_gauge_at_fixed_fill():
    # Fabry's relation (Montgomery, Solenoid Magnet Design, 1969, ch. 1; from memory): for a
    # given winding shape and copper fill, ampere-turns per square root of power do not depend on
    # the wire size, so the hover power of two gauges differs only by the rounding of the turns
    req = load_requirement(ROOT / "geometries" / "requirement_suspension.toml")
    q22, q28 = size_model.evaluate_shape(req, 0, (0.02, 0.025, 0.2), ("AWG 22", "AWG 28"))
    assert q28.turns > 3 * q22.turns
    assert q22.coil_power_W == pytest.approx(q28.coil_power_W, rel=3e-3)
    assert q22.hover_current_A == pytest.approx(q28.hover_current_A * q28.turns / q22.turns, rel=1e-9)


@pytest.mark.parametrize("old, new, fragment", [
    ('grades = ["N42", "N52"]', 'grades = ["N99"]', "floater.magnet.grades[0]"),
    ('"AWG 22", "AWG 24"', '"AWG x", "AWG 24"', "coil.wire_gauges[0]"),
    ('max_winding_temperature = "120 degC"', 'max_winding_temperature = "170 degC"', "limits.max_winding_temperature"),
    ('max_current_density = "3.5 A/mm^2"', 'max_current_density = "3.5 A"', "limits.max_current_density"),
    ('minimize = "coil_power"', 'minimize = "coil_powr"', "objective.minimize"),
    ('gap_max = "18 mm"', 'gap_max = "10 mm"', "operating.gap_max"),
    ('fill_factor = 0.6', 'fill_factr = 0.6', "coil.fill_factr"),
])
def test_requirement_errors_name_file_key_and_value(tmp_path, old, new, fragment):
    text = (ROOT / "geometries" / "requirement_suspension.toml").read_text(encoding="utf-8")
    assert old in text
    f = tmp_path / "req.toml"
    f.write_text(text.replace(old, new), encoding="utf-8")
    with pytest.raises(GeometryError) as e:
        load_requirement(f)
    msg = str(e.value)
    assert "\n" not in msg and str(f) in msg and fragment in msg and "must be" in msg


def test_size_is_a_listed_command():
    out = cli.build_parser().format_help()
    assert "size" in out
    assert cli.size in cli.COMMANDS


@pytest.mark.slow
@pytest.mark.parametrize("path", REQUIREMENTS, ids=lambda p: p.name)
def test_example_requirement_solves_and_its_best_design_reports(path, tmp_path):
    res = run_size(path, tmp_path / "size", workers=2)
    assert res.feasible and res.designs[0].feasible
    assert len(res.designs) >= 2
    best = tmp_path / "size" / res.designs[0].file
    rc = cli.main(["report", str(best), "-o", str(tmp_path / "report")])
    assert rc == 0
    assert (tmp_path / "report" / "report.html").is_file()
