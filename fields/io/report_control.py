"""The control section of the HTML report, from control.json (see :mod:`fields.io.report`).

Layout: the status first (a refusal says which mode, why and the fix, and shows no gains or
margins; a design without coils has no section); then the modes and the sample-rate rule, both
controller forms with their loop-at-a-time and disk margins, the coils' hot and cold corners, the
nonlinear releases and the capture region, the on/off study through a real switch, and - where
the unstable motion is a single loop - the single-axis plant, PD/PID starting point, op-amp
build and margins.
"""

from __future__ import annotations

import math
from pathlib import Path

from fields.io.report import esc, img, num, table

SRC = "control.json"
_ANGLE = 180.0 / math.pi


def _n(v, path, unit="", digits=4, scale=1.0):
    return num(v, SRC, path, unit, digits=digits, scale=scale)


def key_rows(ctrl: dict | None) -> list[list[str]]:
    """Rows for the report's key-numbers table."""
    if not ctrl or ctrl.get("status") != "closable":
        if ctrl and ctrl.get("status") == "refused":
            return [["control", "<b>refused</b>: the loop cannot be closed (see Control)"]]
        return []
    ma = ctrl.get("multiaxis")
    if not ma:  # the single-axis route only (a soft-iron floater)
        sa = ctrl.get("single_axis") or {}
        if "unstable_pole_rad_per_s" not in sa:
            return []
        return [["unstable pole along the control axis", _n(sa["unstable_pole_rad_per_s"], "single_axis.unstable_pole_rad_per_s",
                                                            "rad/s")],
                ["minimum sample rate (single loop)", _n(sa["min_sample_rate_Hz"], "single_axis.min_sample_rate_Hz", "Hz")]]
    rows = []
    fast = max((m for m in ma["modes"] if m["kind"] == "unstable"), key=lambda m: m["growth_rate_per_s"])
    i = ma["modes"].index(fast)
    rows.append([f"fastest unstable mode ({esc(fast['name'])})",
                 _n(fast["growth_rate_per_s"], f"multiaxis.modes[{i}].growth_rate_per_s", "1/s")])
    rows.append(["sample rate (rule in Control)", _n(ma["sample_rate"]["rate_Hz"], "multiaxis.sample_rate.rate_Hz", "Hz")])
    return rows


def warnings(ctrl: dict | None) -> list[str]:
    """Control warnings for the report's warning box."""
    if not ctrl:
        return []
    out = []
    sa = ctrl.get("single_axis")
    if sa and sa.get("sensor_crosstalk_per_A"):
        out.append(f"control: {sa['crosstalk_note']}")
    for s in (ctrl.get("multiaxis") or {}).get("sensors", []):
        out += [f"control: sensor {s['name']}: {n}" for n in s["notes"]]
    return out


def _interval(lo, hi, path, digits=3):
    return f"{_n(lo, path + '[0]', digits=digits)} .. {_n(hi, path + '[1]', digits=digits)}"


def _modes(ma: dict) -> str:
    rows = []
    for i, m in enumerate(ma["modes"]):
        p = f"multiaxis.modes[{i}]"
        if m["kind"] == "unstable":
            what = (f"grows at {_n(m['growth_rate_per_s'], p + '.growth_rate_per_s', '1/s')} (time constant "
                    f"{_n(m['time_constant_s'], p + '.time_constant_s', 'ms', 3, 1e3)})")
        elif m["kind"] == "stable":
            what = f"stable, {_n(m['frequency_Hz'], p + '.frequency_Hz', 'Hz', 3)}"
        else:
            what = "neutral (no stiffness within its error bar)"
        hold = (_n(m["hold_current_per_reference_motion_A"], p + ".hold_current_per_reference_motion_A", "A", 3)
                if m["hold_current_per_reference_motion_A"] is not None else "no authority")
        reach = ""
        if m.get("static_reach_by_current_limit") is not None:
            sc, u = (1e3, "mm") if m["static_reach_unit"] == "m" else (_ANGLE, "deg")
            reach = _n(m["static_reach_by_current_limit"], p + ".static_reach_by_current_limit", u, 3, sc)
        rows.append([esc(m["name"]), what, "yes" if m["controllable"] else "<b>no</b>",
                     "yes" if m["observable"] else "<b>no</b>", hold, reach])
    return table(["mode", "motion", "controllable", "observable", "current to hold 1 mm / 1 deg",
                  "static reach at the current limit"], rows, left_cols=2)


def _regulator(reg: dict, key: str, title: str) -> str:
    S = [f"<h4>{esc(title)}</h4>"]
    p = f"multiaxis.{key}"
    S.append(f"<p>Drive: {esc(reg['drive'])}; closed loop stable at the hot corner: <b>{'yes' if reg['stable_hot'] else 'NO'}</b> "
             f"(largest |z| {_n(reg['spectral_radius_hot'], p + '.spectral_radius_hot', digits=5)}), at the cold corner: "
             f"<b>{'yes' if reg['stable_cold'] else 'NO'}</b> ({_n(reg['spectral_radius_cold'], p + '.spectral_radius_cold', digits=5)}). "
             + " ".join(esc(n) for n in reg["notes"]) + "</p>")
    mg = reg["margins"]
    rows = []
    for j, c in enumerate(mg["channels"]):
        q = f"{p}.margins.channels[{j}]"
        d = c["disk_balanced"]
        rows.append([esc(c["channel"]), _interval(*c["gain_interval"], q + ".gain_interval"),
                     _n(c["phase_margin_deg"], q + ".phase_margin_deg", "deg", 3),
                     _n(d["alpha"], q + ".disk_balanced.alpha", digits=3),
                     _interval(*d["gain_interval"], q + ".disk_balanced.gain_interval"),
                     _n(d["phase_deg"], q + ".disk_balanced.phase_deg", "deg", 3)])
    mm = mg["multiloop_balanced"]
    rows.append(["all channels at once (multiloop)", "", "", _n(mm["alpha"], p + ".margins.multiloop_balanced.alpha", digits=3),
                 _interval(*mm["gain_interval"], p + ".margins.multiloop_balanced.gain_interval"),
                 _n(mm["phase_deg"], p + ".margins.multiloop_balanced.phase_deg", "deg", 3)])
    S.append(table(["loop broken at", "gain interval (loop at a time)", "phase margin", "disk margin alpha",
                    "disk gain range", "disk phase"], rows))
    S.append("<p><small>" + " ".join(esc(n) for n in mg["notes"]) + f"; peak sensitivity "
             f"{_n(mg['peak_sensitivity'], p + '.margins.peak_sensitivity', digits=3)}.</small></p>")
    return "".join(S)


def _releases(ma: dict, out: Path) -> str:
    S = [f"<h3>Nonlinear releases and the capture region</h3><p>{esc(ma['start_rule'])}. Force model: cubic fit of "
         "the force engine over the box "
         + ", ".join(f"{esc(k)} +-{_n(v, 'multiaxis.force_model.box_half_width.' + k, digits=3, scale=1e3 if k.endswith('_m') else _ANGLE)}"
                     f" {'mm' if k.endswith('_m') else 'deg'}" for k, v in ma["force_model"]["box_half_width"].items())
         + "; largest validation error: "
         + ", ".join(f"{esc(k)} {_n(v, 'multiaxis.force_model.relative_error.' + k, digits=2, scale=100.0)} %"
                     for k, v in ma["force_model"]["relative_error"].items())
         + ". Sampling, one-sample delay, voltage and current limits and the coil's electrical dynamics are simulated.</p>"]
    rows = []
    for k, r in ma["releases"].items():
        p = f"multiaxis.releases.{k}"
        dev = ", ".join(f"{esc(a.rsplit('_', 1)[0])} "
                        + _n(v, f"{p}.max_deviation.{a}", "mm" if a.endswith("_m") else "deg", 3, 1e3 if a.endswith("_m") else _ANGLE)
                        for a, v in r["max_deviation"].items())
        rows.append([esc(k), "<b>held</b>" if r["held"] else "<b>LOST</b>", dev,
                     _n(max(r["peak_current_A"]), f"{p}.peak_current_A[{r['peak_current_A'].index(max(r['peak_current_A']))}]",
                        "A", 3),
                     _n(r["saturated_share"], f"{p}.saturated_share", digits=2)])
    S.append(table(["release at rest from", "outcome", "largest excursion", "peak current", "share of samples at a limit"],
                   rows, left_cols=2))
    lrows = []
    for a, v in ma["largest_held_offset"].items():
        sc, u = (1e3, "mm") if v["unit"] == "m" else (_ANGLE, "deg")
        p = f"multiaxis.largest_held_offset.{a}"
        top = (f"lost from {_n(v['lost_above'], p + '.lost_above', u, 3, sc)}" if v["lost_above"] is not None
               else f"held up to the search limit {_n(v['searched_up_to'], p + '.searched_up_to', u, 3, sc)}")
        lrows.append([esc(a), _n(v["held"], p + ".held", u, 3, sc), top])
    S.append("<p>Largest start offset held along each axis alone (bisection):</p>"
             + table(["axis", "largest held", "above it"], lrows, left_cols=1))
    cr = ma.get("capture_region")
    if cr:
        S.append(f"<p>Capture region over {esc(cr['axes'][0])} x {esc(cr['axes'][1])} "
                 f"({_n(cr['held_fraction'], 'multiaxis.capture_region.held_fraction', digits=2)} of the grid held; "
                 f"fates {esc(cr['fates'])}); grey cells are starts where a mode no loop acts on swung out of the force "
                 "model's box (undamped in the model) and are not judged. Data: <code>capture_region.csv</code>.</p>"
                 + img(out / "capture_region.png", "capture region"))
    S.append(img(out / "mimo_releases.png", "nonlinear releases"))
    return "".join(S)


def _on_off(oo: dict, out: Path) -> str:
    rows = []
    for i, h in enumerate(oo["half_band_equivalent_m"]):
        p = "on_off"
        rows.append([_n(h, f"{p}.half_band_equivalent_m[{i}]", "mm", 3, 1e3), esc(oo["status"][i]),
                     _n(oo["amplitude_m"][i], f"{p}.amplitude_m[{i}]", "um", 3, 1e6),
                     _n(oo["frequency_Hz"][i], f"{p}.frequency_Hz[{i}]", "Hz", 4),
                     _n(oo["describing_function_frequency_Hz"][i], f"{p}.describing_function_frequency_Hz[{i}]", "Hz", 4),
                     _n(oo["ripple_current_A"][i], f"{p}.ripple_current_A[{i}]", "A", 3),
                     _n(oo["joule_power_W"][i], f"{p}.joule_power_W[{i}]", "W", 3),
                     _n(oo["supply_power_W"][i], f"{p}.supply_power_W[{i}]", "W", 3),
                     _n(oo["duty"][i], f"{p}.duty[{i}]", digits=2)])
    lin = (f"The linear controller (LQG) from the same start: amplitude "
           f"{_n(oo['linear_amplitude_m'], 'on_off.linear_amplitude_m', 'um', 3, 1e6)}, coil power "
           f"{_n(oo['linear_joule_power_W'], 'on_off.linear_joule_power_W', 'W', 3)} (hover power R I0^2 "
           f"{_n(oo['hover_joule_power_W'], 'on_off.hover_joule_power_W', 'W', 3)}).")
    return ("<h3>On/off control through a real switch</h3><ul>" + "".join(f"<li>{esc(n)}</li>" for n in oo["notes"]) + "</ul>"
            + table(["half band (as motion)", "outcome", "amplitude", "switching frequency", "describing-function estimate",
                     "ripple current (p-p)", "coil power", "supply power", "duty"], rows, left_cols=0)
            + f"<p>{lin} Data: <code>on_off.csv</code>.</p>" + img(out / "on_off.png", "on/off runs"))


def _single_axis(sa: dict, out: Path) -> str:
    u = sa["sensor_unit"]
    pd, pid, m = sa["controller_pd"], sa["controller_pid"], sa["margins_pd"]
    p = "single_axis"
    S = [f"<h3>Single loop along {esc(sa['axis'])}</h3>"]
    S.append(f"<p>Plant (voltage drive, states s, v, I; output the {esc(sa['sensor'])} signal in {esc(u)}; coil at its hot "
             f"resistance {_n(sa['resistance_ohm'], p + '.resistance_ohm', 'ohm')}, cold corner "
             f"{_n(sa['resistance_cold_ohm'], p + '.resistance_cold_ohm', 'ohm')}): unstable pole "
             f"{_n(sa['unstable_pole_rad_per_s'], p + '.unstable_pole_rad_per_s', 'rad/s')} hot, "
             f"{_n(sa['unstable_pole_cold_rad_per_s'], p + '.unstable_pole_cold_rad_per_s', 'rad/s')} cold (time constant "
             f"{_n(sa['unstable_time_constant_s'], p + '.unstable_time_constant_s', 'ms', scale=1e3)} under voltage drive, "
             "hot coil, back-EMF included; the verdict's time constant is the floater alone at a held current, "
             "i.e. current drive), electrical pole R/L "
             f"{_n(sa['electrical_pole_rad_per_s'], p + '.electrical_pole_rad_per_s', 'rad/s')}; sample at least "
             f"{_n(sa['min_sample_rate_Hz'], p + '.min_sample_rate_Hz', 'Hz')}, loop delay at most "
             f"{_n(sa['max_loop_delay_s'], p + '.max_loop_delay_s', 'ms', scale=1e3)}. State-space matrices and transfer "
             "function: <code>plant.json</code>.</p>")
    S.append("<ul>" + "".join(f"<li>{esc(r)}</li>" for r in sa["rules"]) + "</ul>")
    g_rows = []
    for name, c, key in (("PD (lead)", pd, "controller_pd"), ("PID", pid, "controller_pid")):
        q = f"{p}.{key}"
        g_rows.append([name, _n(c["crossover_rad_per_s"], q + ".crossover_rad_per_s", "rad/s"),
                       _n(c[f"kp_A_per_{u}"], f"{q}.kp_A_per_{u}", f"A/{u}"),
                       _n(c[f"kd_A_s_per_{u}"], f"{q}.kd_A_s_per_{u}", f"A s/{u}"),
                       _n(c[f"ki_A_per_{u}_s"], f"{q}.ki_A_per_{u}_s", f"A/({u} s)"),
                       _n(c["derivative_filter_tau_s"], q + ".derivative_filter_tau_s", "ms", scale=1e3)])
    S.append(table(["design", "crossover", "Kp", "Kd", "Ki", "derivative filter"], g_rows)
             + f"<p>Discrete form at T = {_n(sa['sample_time_s'], p + '.sample_time_s', 'ms', scale=1e3)}: "
             f"{esc(pd['discretisation'])}; analog current loop gain "
             f"{_n(pd['current_loop_gain_V_per_A'], p + '.controller_pd.current_loop_gain_V_per_A', 'V/A')}.</p>")
    an = pd.get("analog")
    if an:
        q = f"{p}.controller_pd.analog"
        S.append("<p>Analog build (IEC 60063 series): "
                 f"R1 {_n(an['R1_ohm'], q + '.R1_ohm', 'ohm')}, C1 {_n(an['C1_F'], q + '.C1_F', 'nF', scale=1e9)}, "
                 f"R3 {_n(an['R3_ohm'], q + '.R3_ohm', 'ohm')}, R2 {_n(an['R2_ohm'], q + '.R2_ohm', 'ohm')}; "
                 f"{esc(an['circuit'])}.</p>")
    else:
        S.append("<p>No practical single op-amp lead network fits these numbers; build it digitally.</p>")
    lo, hi = m["gain_interval"]
    S.append("<p>Margins (PD): stable for "
             f"{_n(lo, p + '.margins_pd.gain_interval[0]', digits=3)} to {_n(hi, p + '.margins_pd.gain_interval[1]', digits=3)} "
             f"times the design gain; phase margin {_n(m['phase_margin_deg'], p + '.margins_pd.phase_margin_deg', 'deg', 3)}; "
             f"counter-clockwise encirclements of -1: {_n(m['encirclements_ccw'], p + '.margins_pd.encirclements_ccw', digits=3)} "
             f"(unstable open-loop poles {_n(m['open_loop_unstable_poles'], p + '.margins_pd.open_loop_unstable_poles', digits=3)}); "
             f"peak sensitivity {_n(m['peak_sensitivity'], p + '.margins_pd.peak_sensitivity', digits=3)}.</p>")
    S.append(f"<p>Pure proportional feedback: {esc(sa['proportional_only']['explanation'])}</p>")
    S.append(img(out / "control_bode.png", "Bode plot") + img(out / "control_nyquist.png", "Nyquist plot")
             + img(out / "control_step.png", "nonlinear responses") + img(out / "capture.png", "capture range"))
    cb = sa["capture"]["band_m"]
    S.append(f"<p>Capture band along the axis (starting at rest, PD): {_n(cb[0], p + '.capture.band_m[0]', '', scale=1e3)} to "
             f"{_n(cb[1], p + '.capture.band_m[1]', 'mm', scale=1e3)} from the equilibrium.</p>")
    return "".join(S)


def control_section(ctrl: dict | None, out: Path) -> list[str]:
    """The report's control section (empty for a design without coils)."""
    if not ctrl or ctrl.get("status") == "no coils":
        return []
    out = Path(out)
    S = ["<h2>Control</h2>"]
    ma = ctrl.get("multiaxis")
    if ctrl["status"] == "refused":
        ref = ctrl["refusal"]
        S.append('<div class="fail"><h3>Control refused: the loop cannot be closed</h3><ul>'
                 + "".join(f"<li>{esc(r)}</li>" for r in ref["reasons"]) + "</ul>"
                 + ("<p><b>Fix:</b></p><ul>" + "".join(f"<li>{esc(f)}</li>" for f in ref["fix"]) + "</ul>" if ref["fix"] else "")
                 + "<p>No gains or margins are given for a loop that cannot be closed.</p></div>")
        if ma:
            S.append(_modes(ma))
        return S
    if ctrl["status"] == "passive":
        S.append("<p>No unstable mode: the floater needs no active control.</p>")
        if ma:
            S.append(_modes(ma))
        return S
    if not ma:  # the single-axis route only (a soft-iron floater: no forces off the axis)
        S.append("<p>" + "".join(esc(x) + "<br>" for x in ctrl.get("summary", ())) + "</p>")
        if ctrl.get("on_off"):
            S.append(_on_off(ctrl["on_off"], out))
        if ctrl.get("single_axis"):
            S.append(_single_axis(ctrl["single_axis"], out))
        return S
    S.append(f"<p>Every free axis ({esc(', '.join(ma['free_axes']))}) in one plant: voltage drive, the full inductance "
             "matrix, back-EMF by reciprocity, every sensor linearised; modes of the rigid body, each checked for "
             "controllability from the coils and observability from the sensors (PBH test) before any design. "
             f"Matrices: <code>mimo_plant.csv</code>.</p>")
    S.append(_modes(ma))
    crow = []
    for k, c in enumerate(ma["coils"]):
        q = f"multiaxis.coils[{k}]"
        crow.append([esc(c["name"]), _n(c["bias_current_A"], q + ".bias_current_A", "A", 3),
                     _n(c["temperature_hot_C"], q + ".temperature_hot_C", "C", 3),
                     _n(c["resistance_hot_ohm"], q + ".resistance_hot_ohm", "ohm", 4),
                     _n(c["resistance_cold_ohm"], q + ".resistance_cold_ohm", "ohm", 4),
                     _n(c["max_current_A"], q + ".max_current_A", "A", 3)])
    S.append("<p>The plant and the simulations use the hot coil resistance (steady temperature at the bias current, "
             f"lumped heat model); the cold corner at {_n(ma['temperature_cold_C'], 'multiaxis.temperature_cold_C', 'C', 3)} "
             "is checked for stability too.</p>"
             + table(["coil", "bias current", "hot temperature", "R hot", "R cold", "current limit"], crow))
    S.append(f"<p>Sample rate {_n(ma['sample_rate']['rate_Hz'], 'multiaxis.sample_rate.rate_Hz', 'Hz')}: "
             f"{esc(ma['sample_rate']['rule'])}. One sample of computation delay and the zero-order hold are in every loop.</p>")
    S.append("<h3>Controllers</h3>" + _regulator(ma["lqg"], "lqg", "LQR with a Kalman predictor (LQG)"))
    if "margins" in ma["mode_pd"]:
        S.append(_regulator(ma["mode_pd"], "mode_pd", "Decoupled per-mode PD through the allocation matrix"))
    else:
        S.append(f"<h4>Decoupled per-mode PD</h4><p>{esc(ma['mode_pd']['status'])}: {esc(ma['mode_pd']['reason'])}</p>")
    if "releases" in ma:
        S.append(_releases(ma, out))
    if ctrl.get("on_off"):
        S.append(_on_off(ctrl["on_off"], out))
    if ctrl.get("single_axis"):
        S.append(_single_axis(ctrl["single_axis"], out))
    return S
