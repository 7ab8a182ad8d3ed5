"""The control stage (multi-axis route, refusals, on/off through a real switch) and its report
section, against outside references.

Sources are named beside each check. The stage runs on the shipped examples take tens of seconds
each and are marked slow.
"""

from __future__ import annotations

import dataclasses
import json
import math
import re

import numpy as np
import pytest
from helpers import REPULSIVE, ROOT, SUSPENSION

from fields import cli
from fields.control import switching as sw
from fields.devices.winding import resistance_and_cooling, steady_temperature_C
from fields.input.geometry import load
from fields.input.tables import COPPER_ALPHA_20C_PER_K
from fields.io.report_control import control_section
from fields.studies.stages.control import run_control

RING = ROOT / "geometries" / "ring_steering.toml"


def _walk_keys(d, out=None):
    out = set() if out is None else out
    if isinstance(d, dict):
        for k, v in d.items():
            out.add(k)
            _walk_keys(v, out)
    elif isinstance(d, list):
        for v in d:
            _walk_keys(v, out)
    return out


# ------------------------------------------------------------------------- switch, R-L load


def _rl_axis(R, L, i0):
    # a pure R-L load: no force, the "sensor" reads the coil current itself
    return sw.SwitchedAxis(math.inf, R, L, i0, lambda s, i: 0.0, lambda s, i=None: 0.0, lambda s, i: i, lambda s: 0.0, (-1.0, 1.0))


@pytest.mark.parametrize("kind", sw.SWITCH_KINDS)
def test_switching_frequency_of_an_rl_load_matches_the_first_order_analysis(kind):
    """Relay with hysteresis on the current of an R-L load (Atherton, Nonlinear Control
    Engineering, 1975, ch. 4, relay systems; first-order circuit response): on, i rises from
    i_lo towards V_on/R with tau = L/R, t_on = tau ln((V_on/R - i_lo)/(V_on/R - i_hi)); off it
    falls towards V_off/R (-V_d for a low-side switch with flyback diode, -V_s for an H-bridge),
    t_off = tau ln((i_hi - V_off/R)/(i_lo - V_off/R)); f = 1/(t_on + t_off)."""
    R, L, Vs, i0, h = 4.0, 0.02, 12.0, 1.0, 0.05
    st = sw.SwitchStage(kind, Vs)
    run = sw.simulate_switched(_rl_axis(R, L, i0), st, h, t_end_s=0.2)
    tau = L / R
    v_off = -0.7 if kind == "low_side" else -Vs  # 0.7 V silicon diode drop: common practice, no source
    lo, hi = i0 - h, i0 + h
    t_on = tau * math.log((Vs / R - lo) / (Vs / R - hi))
    t_off = tau * math.log((hi - v_off / R) / (lo - v_off / R))
    assert run.status == "limit cycle"
    assert run.frequency_Hz == pytest.approx(1.0 / (t_on + t_off), rel=1e-4)
    assert run.duty == pytest.approx(t_on / (t_on + t_off), rel=1e-3)
    assert run.ripple_current_A == pytest.approx(2 * h, rel=1e-6)
    assert sw.rl_relay_frequency(R, L, Vs, v_off, lo, hi)[2] == pytest.approx(1.0 / (t_on + t_off), rel=1e-12)


def test_low_side_switch_never_reverses_the_current():
    """With a flyback diode the coil current freewheels to zero and stops there (the diode
    blocks): a band whose lower edge is below zero makes the current reach 0 and hold."""
    R, L = 4.0, 0.02
    run = sw.simulate_switched(_rl_axis(R, L, 0.05), sw.SwitchStage("low_side", 12.0), 0.2, t_end_s=0.1)
    assert np.min(run.current_A) >= -1e-12


def test_describing_function_of_a_relay_with_hysteresis():
    """Harmonic balance (Slotine & Li, Applied Nonlinear Control, 1991, sec. 5.3; Atherton 1975):
    relay output +-M, hysteresis +-h, N(A) = 4M/(pi A) (sqrt(1 - (h/A)^2) - j h/A); the predicted
    cycle satisfies 1 + N(A) G(jw) = 0 for G(s) = K / (s (s + 1) (s + 2))."""
    K, M, h = 4.0, 1.0, 0.1

    def G(s):
        return K / (s * (s + 1) * (s + 2))

    dc = sw.describing_function_cycle(G, M, h, np.logspace(-2, 2, 20000))
    assert dc.found
    A, w = dc.amplitude, 2 * math.pi * dc.frequency_Hz
    N = 4 * M / (math.pi * A) * (math.sqrt(1 - (h / A) ** 2) - 1j * h / A)
    assert abs(1 + N * G(1j * w)) < 1e-3
    # without hysteresis the crossing is the phase crossover: w = sqrt(2) for this G
    dc0 = sw.describing_function_cycle(G, M, 1e-9, np.logspace(-2, 2, 20000))
    assert 2 * math.pi * dc0.frequency_Hz == pytest.approx(math.sqrt(2.0), rel=1e-4)


# ---------------------------------------------------------------------- degenerate designs


def test_no_coils_is_a_passive_design_not_a_failure(tmp_path):
    """A design without coils has nothing to control: control.json says so, the report shows no
    control section, and no number of a plant or controller is written."""
    d = load(REPULSIVE)
    d0 = dataclasses.replace(d, coils=())
    r = run_control(d0, tmp_path)
    data = json.loads((tmp_path / "control.json").read_text())
    assert r.status == data["status"] == "no coils"
    assert control_section(data, tmp_path) == []
    assert not {"margins", "gains", "lqg"} & _walk_keys(data)


@pytest.mark.slow
def test_coil_without_vertical_pull_is_refused_with_no_authority(tmp_path, capsys):
    """The suspension's lift coil turned on its side (axis along x, core removed): on the coil axis of a
    z-magnetized disc the field of a transverse coil has no z component and no vertical gradient,
    so the vertical force per ampere is zero by symmetry (Jackson, Classical Electrodynamics,
    3rd ed., 1999, sec. 5.7: F = grad(m . B)). The floater cannot be held; the stage must
    refuse, name the mode and the missing authority, and print no gains or margins."""
    text = SUSPENSION.read_text().replace("axis = [0, 0, 1]             # positive current", "axis = [1, 0, 0]  # positive current")
    # no iron core (its attraction alone would pull at zero current); the gap is measured to the coil
    text = re.sub(r"\[\[cores\]\].*?(?=\[floater\])", "", text, flags=re.DOTALL).replace('gap_reference = "iron core"',
                                                                                       'gap_reference = "lift coil"')
    p = tmp_path / "sideways_coil.toml"
    p.write_text(text)
    out = tmp_path / "out"
    rc = cli.main(["control", str(p), "-o", str(out)])
    printed = capsys.readouterr().out
    assert rc == 1
    assert "REFUSED" in printed and "no authority" in printed and "vertical" in printed
    data = json.loads((out / "control.json").read_text())
    assert data["status"] == "refused"
    assert "no authority" in " ".join(data["refusal"]["reasons"])
    assert not {"margins", "gains", "lqg", "single_axis", "on_off"} & _walk_keys(data)
    # no absurd hover current reaches the file: the refusal names the zero instead
    assert not re.search(r"\d{7,}", json.dumps(data["refusal"]["reasons"]))


@pytest.mark.slow
def test_one_sensor_ring_variant_is_refused_by_the_stage(tmp_path):
    """PBH observability (Hautus 1969; Kailath, Linear Systems, 1980, sec. 2.4): the ring with
    only its x-sensing Hall cannot see 'sideways y' and 'tilt about x'; the stage refuses, names
    both modes and suggests a y-sensing Hall; control.json has no gains or margins."""
    text = RING.read_text()
    text = re.sub(r'\[\[sensors\]\]\ntype = "hall"\nname = "hall y".*?(?=\n\[study\])', "", text, flags=re.DOTALL)
    p = tmp_path / "ring_one_hall.toml"
    p.write_text(text)
    d = load(p)
    assert [s.name for s in d.sensors] == ["hall x"]
    r = run_control(d, tmp_path / "out")
    data = json.loads((tmp_path / "out" / "control.json").read_text())
    assert r.status == data["status"] == "refused"
    assert set(data["refusal"]["modes"]) == {"sideways y", "tilt about x"}
    assert any("sensing y" in f for f in data["refusal"]["fix"])
    assert not {"margins", "gains", "lqg", "on_off"} & _walk_keys(data)
    html = "".join(control_section(data, tmp_path / "out"))
    assert "Control refused" in html and "sideways y" in html and "disk margin" not in html


# ---------------------------------------------------------------------- the three examples


def _check_held(data):
    ma = data["multiaxis"]
    assert data["status"] == "closable"
    # separation principle (Franklin, Powell & Workman, Digital Control of Dynamic Systems, 1998,
    # sec. 8): the LQG loop is stable at both resistance corners
    assert ma["lqg"]["stable_hot"] and ma["lqg"]["stable_cold"]
    # loop-at-a-time gain interval around the design gain (an open-loop unstable plant needs a
    # lower gain limit above zero: Nyquist criterion)
    for c in ma["lqg"]["margins"]["channels"]:
        lo, hi = c["gain_interval"]
        assert 0 < lo < 1 < hi
    return ma


@pytest.mark.slow
def test_suspension_stage_holds_and_uses_the_hot_resistance(tmp_path):
    """Suspension: a single loop (vertical). The nonlinear releases hold from 0.5 mm vertical,
    0.5 mm sideways and 1 degree of tilt; the single-axis route is kept; its resistance is the
    lumped steady state at the bias current, R20 (1 + alpha (T - 20 C)), alpha = 0.00393 /K
    (IEC 60028), the cold corner at min(20 C, ambient)."""
    d = load(SUSPENSION)
    r = run_control(d, tmp_path)
    data = json.loads((tmp_path / "control.json").read_text())
    ma = _check_held(data)
    assert r.route == "multi-axis + single-axis"
    for k in ("vertical 500 um", "sideways x 500 um", "tilt about y 1 deg"):
        assert ma["releases"][k]["held"], k
    R20, Gth = resistance_and_cooling(d, 0)
    I0 = data["bias_current_A"]
    T, _ = steady_temperature_C([I0], R20, Gth, d.study.ambient_temperature_C)
    assert data["single_axis"]["resistance_ohm"] == pytest.approx(R20 * (1 + COPPER_ALPHA_20C_PER_K * (T[0] - 20)), rel=1e-9)
    assert data["single_axis"]["resistance_cold_ohm"] == pytest.approx(
        R20 * (1 + COPPER_ALPHA_20C_PER_K * (min(20.0, d.study.ambient_temperature_C) - 20)), rel=1e-9)
    # on/off with a low-side switch: the current never reverses and the switch costs more
    # copper power than the linear loop (R <i^2> >= R <i>^2, Cauchy-Schwarz)
    oo = data["on_off"]
    assert oo["switch"] == "low_side"
    for i, st in enumerate(oo["status"]):
        if st == "limit cycle":
            assert oo["joule_power_W"][i] >= oo["resistance_hot_ohm"] * oo["mean_current_A"][i] ** 2
    assert (tmp_path / "capture_region.csv").is_file() and (tmp_path / "capture_region.png").is_file()


@pytest.mark.slow
@pytest.mark.parametrize("path", [REPULSIVE, RING], ids=["repulsive", "ring"])
def test_sideways_examples_are_held_from_small_offsets(tmp_path, path):
    """Repulsive and ring bases: four unstable modes (sideways and tilt pairs, Earnshaw 1842),
    LQG through the coils. The nonlinear loop holds releases along x up to its stated largest
    offset (bisection); the largest is a positive number below the force model's box."""
    r = run_control(load(path), tmp_path)
    data = json.loads((tmp_path / "control.json").read_text())
    ma = _check_held(data)
    assert r.route == "multi-axis"
    assert {m["name"] for m in ma["modes"] if m["kind"] == "unstable"} == {
        "sideways x", "sideways y", "tilt about x", "tilt about y"}
    lx = ma["largest_held_offset"]["x"]
    assert 0 < lx["held"] < lx["lost_above"]
    cols = (tmp_path / "capture_region.csv").read_text().splitlines()
    assert any(c.endswith(",held") for c in cols)


@pytest.mark.slow
def test_report_builds_with_the_control_section(report_dir):
    """The report carries the control section, and every control number shown traces back to
    control.json (data-path/data-value) - the report's provenance rule (report_dir: the
    suspension report of tests/conftest.py)."""
    tmp_path = report_dir
    assert (tmp_path / "control.json").is_file()
    html = (tmp_path / "report.html").read_text()
    assert re.search(r"<h2[^>]*>Control</h2>", html) and "LQR with a Kalman predictor" in html
    assert "Capture region" in html and "On/off control through a real switch" in html
    data = json.loads((tmp_path / "control.json").read_text())
    spans = re.findall(r'data-src="control.json" data-path="([^"]+)" data-value="([^"]+)"', html)
    assert len(spans) > 50
    for path, value in spans:
        node = _resolve(data, path)
        if value != "null":
            assert float(node) == pytest.approx(float(value), rel=1e-12), path


def _resolve(data, path: str):
    """Follow a report data-path (keys may contain dots: the longest matching key wins)."""
    node, rest = data, path
    while rest:
        if rest.startswith("["):
            j = rest.index("]")
            node, rest = node[int(rest[1:j])], rest[j + 1:].lstrip(".")
            continue
        key = max((k for k in node if rest == k or rest.startswith((k + ".", k + "["))), key=len)
        node, rest = node[key], rest[len(key):].lstrip(".")
    return node
