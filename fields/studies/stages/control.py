"""Stage "control": every design with coils goes the multi-axis route - operating point (the one
rule of :func:`fields.analysis.operating.operating_point`), plant over all free axes at the hot
coil resistance, structural checks first, then both controller forms (mode-space PD where the
sensors allow it, LQR + observer), margins, nonlinear releases and the capture region; and the
on/off study through a real switch along the control axis. Where the unstable motion is a single
loop (one unstable mode along the control axis, e.g. a suspension's vertical axis) the
single-axis results are kept too: plant.json (transfer function), the PD/PID starting point with
its op-amp realisation, margins, simulations and the 1-D capture band.

A design that cannot be closed gets a refusal (which mode, why, the fix) and no gains or
margins. A design without coils gets no control result at all (status "no coils"), which is not
a failure. Files: control.json always; plant.json, plant.csv, sim_*.csv, capture.csv and the
single-axis PNGs for a single loop; mimo_plant.csv, mimo_sim_*.csv, capture_region.csv/png,
mimo_releases.png, on_off.csv/png otherwise as they apply.

The plant as wired (the sensor sees the coil too) is exported; the controller is designed for
the usual practice of subtracting the coil's share (c I) from the reading before the loop.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fields import analysis
from fields.control.simulate import Outcome
from fields.errors import InputError, SolverError
from fields.studies.result_fields import internal, optional
from fields.model.design import Design
from fields.studies.stages.common import close_figure, file_list, slug

#: the single-axis route applies when the only unstable mode has at least this share of its
#: kinetic energy on the control axis
SINGLE_LOOP_SHARE = 0.9


@dataclass(frozen=True)
class CaptureSummary:
    band_m: np.ndarray
    band_resolution_m: float
    captured_fraction: float


@dataclass(frozen=True)
class SimulationSummary:
    events: tuple
    final_s_m: float
    peak_current_A: float


@dataclass(frozen=True)
class PlantFile:
    """plant.json: both plant variants."""

    design: str
    axis: str
    pattern: np.ndarray
    sensor: str
    drive: str
    as_wired: dict
    crosstalk_compensated: dict
    note: str


@dataclass(frozen=True)
class SingleAxis:
    """The single-loop results along the control axis (control.json "single_axis")."""

    axis: str
    pattern: np.ndarray
    sensor: str
    sensor_gain_per_m: float
    sensor_crosstalk_per_A: float
    crosstalk_note: str
    sensor_unit: str
    resistance_ohm: float
    resistance_cold_ohm: float
    inductance_H: float
    bias_current_A: float
    max_current_A: float
    unstable_pole_rad_per_s: float
    unstable_pole_cold_rad_per_s: float
    unstable_time_constant_s: float
    electrical_pole_rad_per_s: float
    min_sample_rate_Hz: float
    max_loop_delay_s: float
    rules: tuple[str, ...]
    sample_time_s: float
    controller_pd: dict
    controller_pid: dict
    margins_pd: dict
    margins_pid: dict
    proportional_only: dict
    capture: CaptureSummary
    simulations: dict


@dataclass(frozen=True)
class ControlResult:
    """What :func:`run_control` computed and wrote (control.json is this, serialised).

    ``status``: "closable", "refused", "passive" (no unstable mode) or "no coils".
    ``summary``: the lines the CLI prints and the report leads with. ``axis`` .. ``max_current_A``
    describe the control axis (the on/off study and the exports' SPICE plant use it);
    ``single_axis`` is present for a single loop, ``multiaxis`` for every design with coils,
    ``refusal`` when the loop cannot be closed.
    """

    status: str
    route: str
    summary: tuple[str, ...]
    axis: str | None = optional()
    pattern: np.ndarray | None = optional()
    bias_current_A: float | None = optional()
    resistance_hot_ohm: float | None = optional()
    resistance_cold_ohm: float | None = optional()
    inductance_H: float | None = optional()
    refusal: dict | None = optional()
    multiaxis: dict | None = optional()
    single_axis: SingleAxis | None = optional()
    on_off: object = optional()
    files: tuple[str, ...] = ()
    plant: object = internal()
    raw_plant: object = internal()
    pd: object = internal()
    pid: object = internal()
    margins: object = internal()
    proportional: object = internal()
    table: object = internal()
    params: object = internal()
    sims: dict = internal()
    capture_result: object = internal()
    outcome: object = internal()


def _axis_tables(design: Design, eq, ax, grid_points: int = 81):
    """Force table along the control axis and the positions grid (s measured along ax.direction)."""
    from fields.control.plant import ForceTable

    st = design.study
    if ax.index == 2:
        c = float(design.axial @ np.asarray(st.gap_direction))  # d gap / d s
        lo_gap, hi_gap = st.gap_min_m, st.gap_max_m
        s_a = (lo_gap - eq.gap_m) / c
        s_b = (hi_gap - eq.gap_m) / c
        s_lo, s_hi = min(s_a, s_b), max(s_a, s_b)
    else:
        s_lo, s_hi = -st.lateral_span_m, st.lateral_span_m
    s = np.linspace(s_lo, s_hi, grid_points)
    dq = np.zeros((len(s), 6))
    dq[:, :3] = s[:, None] * ax.direction[None, :]
    P, Rv = analysis.displace(design, eq.position_m, eq.rotvec_rad, dq)
    from fields.physics.wrench import wrench_basis

    b = wrench_basis(design, P, Rv)
    p = ax.pattern
    I0 = float(ax.bias_currents_A @ p / (p @ p)) if np.any(p) else 0.0
    Fb = b.force(ax.bias_currents_A) if len(p) else b.F0_N
    Fk = (b.Fk_N_per_A @ ax.direction) @ p if len(p) else np.zeros(len(s))
    F0 = Fb @ ax.direction - I0 * Fk
    ok = ~b.contact
    # keep the contiguous stretch around s = 0 that is clear of contact
    i0 = int(np.argmin(np.abs(s)))
    lo = i0
    while lo > 0 and ok[lo - 1]:
        lo -= 1
    hi = i0
    while hi < len(s) - 1 and ok[hi + 1]:
        hi += 1
    sl = slice(lo, hi + 1)
    return ForceTable(s[sl], F0[sl], Fk[sl]), I0, (P[sl], Rv[sl]), s[sl]


def _axis_sensor(design: Design, eq, ax, s_grid, poses, I0):
    """(name, Sensor, gain per m, crosstalk per A, unit) for the control axis: the beam gate for a
    vertical axis when there is one, else the Hall sensor whose axis lines up best with the
    control axis (the first on a tie), else an ideal position sensor."""
    from scipy.interpolate import CubicSpline

    from fields.control.plant import Sensor
    from fields.devices import beam as sensmod
    from fields.physics.field_basis import fixed_field_basis, floater_field_T

    st = design.study
    beams = [s for s in design.sensors if s.kind == "beam"]
    halls = [s for s in design.sensors if s.kind == "hall"]
    P, Rv = poses
    if ax.index == 2 and beams:
        sen = beams[0]
        gaps = np.asarray([(p - np.asarray(st.gap_origin_m)) @ np.asarray(st.gap_direction) for p in P])
        y = sensmod.beam_blocked_fraction(design, sen, gaps)
        if sen.output_span_V:
            # receiver voltage: proportional to the light that gets through
            y = sen.output_span_V * (1.0 - y)
            unit, rng = "V", (0.0, sen.output_span_V)
        else:
            unit, rng = "fraction", (0.0, 1.0)
        spl = CubicSpline(s_grid, y)
        return sen.name, Sensor(lambda s, i: spl(s), rng, unit), float(spl(0.0, 1)), 0.0, unit
    if halls:
        # the Hall whose sensing axis lines up best with the control axis (a sideways axis needs
        # the sensor that sees it; a vertical axis without a beam the one most along the vertical)
        sen = max(halls, key=lambda h: abs(float(np.asarray(h.axis, float) @ ax.direction))
                  / max(float(np.linalg.norm(h.axis)), 1e-300))
        pt = np.asarray(sen.position_m, float)[None, :]
        axis = np.asarray(sen.axis, float)
        y = np.array([float(np.ravel(np.asarray(floater_field_T(design, pt, p[None, :], r[None, :])).reshape(-1, 3)[0] @ axis)[0])
                      for p, r in zip(P, Rv)])
        fb = fixed_field_basis(design, np.broadcast_to(pt, (len(P), 1, 3)).copy(), P, Rv)
        y = y + fb.field_T(ax.bias_currents_A)[:, 0, :] @ axis if len(ax.pattern) else y + fb.B0_T[:, 0, :] @ axis
        i0 = int(np.argmin(np.abs(s_grid)))
        xt = float((fb.Bk_T_per_A[i0, :, 0, :] @ axis) @ ax.pattern) if len(ax.pattern) else 0.0
        rng = (-sen.range_T, sen.range_T)
        unit = "T"
        if sen.sensitivity_V_per_T:
            g = sen.sensitivity_V_per_T
            y, xt, rng, unit = y * g, xt * g, (-sen.range_T * g, sen.range_T * g), "V"
        spl = CubicSpline(s_grid, y)
        return sen.name, Sensor(lambda s, i: spl(s) + xt * (np.asarray(i) - I0), rng, unit), float(spl(0.0, 1)), xt, unit
    return "ideal position sensor", Sensor(lambda s, i: np.asarray(s, float), (-np.inf, np.inf), "m"), 1.0, 0.0, "m"


def _write_plant_csv(path: Path, design: Design, raw_plant, plant) -> None:
    """State-space matrices and transfer-function coefficients, one matrix entry per row."""
    from fields.io.export import header_lines, write_csv
    rows = []
    for label, pl in (("as_wired", raw_plant), ("crosstalk_compensated", plant)):
        A, B, C, D = (np.atleast_2d(np.asarray(m, float)) for m in (pl.ss.A, pl.ss.B, pl.ss.C, pl.ss.D))
        for name, M in (("A", A), ("B", B), ("C", C), ("D", D)):
            for i in range(M.shape[0]):
                for j in range(M.shape[1]):
                    rows.append([label, name, i, j, M[i, j]])
        for k, v in enumerate(np.atleast_1d(pl.numerator)):
            rows.append([label, "tf_numerator", k, 0, v])
        for k, v in enumerate(np.atleast_1d(pl.denominator)):
            rows.append([label, "tf_denominator", k, 0, v])
    states = ", ".join(plant.state_names)
    write_csv(path, ["variant", "matrix", "row", "col", "value_SI"], rows,
              header_lines(design.name, f"linear plant, states ({states}) in SI units, input {plant.input_name}, "
                                        f"output {plant.output_name}; tf coefficients in descending powers of s"))


def _nice_sample_time(min_rate_Hz: float) -> float:
    for f in (500.0, 1e3, 2e3, 5e3, 1e4, 2e4, 5e4, 1e5):
        if f >= 2.0 * min_rate_Hz:
            return 1.0 / f
    return 1.0 / 1e5


@dataclass(frozen=True)
class _Drive:
    """The coils of the control pattern as one drive: series R (hot and cold), p^T L p, limit."""

    resistance_ohm: float
    resistance_cold_ohm: float
    inductance_H: float
    max_current_A: float


def _drive(ax, mplant) -> _Drive:
    """Coils in the pattern carry i * p_k: series resistance sum p_k^2 R_k, inductance p^T L p,
    resistances at the hot and cold corners of the multi-axis plant."""
    p = np.asarray(ax.pattern, float)
    active = np.flatnonzero(p)
    R = float(np.sum(p[active] ** 2 * mplant.resistance_hot_ohm[active]))
    Rc = float(np.sum(p[active] ** 2 * mplant.resistance_cold_ohm[active]))
    imax = float(min(mplant.max_current_A[k] / abs(p[k]) for k in active))
    return _Drive(R, Rc, float(p @ mplant.inductance_H @ p), imax)


def _scenarios(design: Design, plant, step: float) -> dict:
    from fields import control as dyn

    m = design.floater.mass_kg
    return {
        f"reference step {step * 1e3:+.2g} mm": ("pd", dyn.Scenario(t_end_s=0.4, reference_m=step, reference_step_time_s=0.05)),
        "force impulse": ("pd", dyn.Scenario(t_end_s=0.4, force_impulse_N_s=0.2 * m * step * plant.unstable_pole_rad_per_s,
                                             force_impulse_time_s=0.05)),
        "payload +10 % (PD)": ("pd", dyn.Scenario(t_end_s=0.6, payload_kg=0.1 * m, payload_time_s=0.05)),
        "payload +10 % (PID)": ("pid", dyn.Scenario(t_end_s=0.6, payload_kg=0.1 * m, payload_time_s=0.05)),
    }


@dataclass(frozen=True, eq=False)
class _AxisPieces:
    """Force table, sensor, parameters and linear plants along the control axis."""

    ax: object
    drive: _Drive
    table: object
    sensor_name: str
    sensor: object
    gain_per_m: float
    crosstalk_per_A: float
    unit: str
    params: object
    params_cold: object
    raw_plant: object
    plant: object
    s_grid: np.ndarray


def _axis_pieces(design: Design, eq, ax, mplant, drv=None, tables=None) -> _AxisPieces:
    """The single-axis model along the control axis at the hot resistance (cold for the corner);
    ``drv`` and ``tables`` replace the multi-axis plant's drive and the affine force table."""
    from fields import control as dyn

    drv = _drive(ax, mplant) if drv is None else drv
    table, I0, poses, s_grid = _axis_tables(design, eq, ax) if tables is None else tables
    name, sensor, gs, gi, unit = _axis_sensor(design, eq, ax, s_grid, poses, I0)
    common = dict(axis_name=ax.name, mass_kg=design.floater.mass_kg, stiffness_N_per_m=ax.stiffness_N_per_m,
                  force_per_ampere_N_per_A=ax.force_per_ampere_N_per_A, inductance_H=drv.inductance_H,
                  hover_current_A=I0, max_current_A=drv.max_current_A, supply_voltage_V=design.study.supply_voltage_V,
                  sensor_gain_per_m=gs, sensor_unit=unit, gravity_m_per_s2=design.gravity_magnitude if ax.index == 2 else 0.0)
    raw = dyn.linear_plant(dyn.PlantParameters(sensor_crosstalk_per_A=gi, resistance_ohm=drv.resistance_ohm, **common),
                           drive="voltage")
    params = dyn.PlantParameters(sensor_crosstalk_per_A=0.0, resistance_ohm=drv.resistance_ohm, **common)
    cold = dyn.PlantParameters(sensor_crosstalk_per_A=0.0, resistance_ohm=drv.resistance_cold_ohm, **common)
    plant = dyn.linear_plant(params, drive="voltage")
    if gi != 0.0:
        sensor = dyn.Sensor(lambda s_, i_, f=sensor.function, c=gi: f(s_, i_) - c * (np.asarray(i_) - I0),
                            sensor.range_signal, sensor.unit)
    return _AxisPieces(ax, drv, table, name, sensor, gs, gi, unit, params, cold, raw, plant, s_grid)


def _single_axis(design: Design, out: Path, pc: _AxisPieces):
    """PD/PID starting point, margins, simulations and 1-D capture band; writes their files."""
    from fields.io.export import header_lines, write_csv, write_json, write_png
    from fields import control as dyn
    from fields.io import plots
    from fields.io.wording import crosstalk_note, design_rules, plant_note
    from fields.studies.stages.control_data import (
        controller_data,
        margins_data,
        plant_data,
        proportional_data,
        simulation_rows,
    )

    plant, params, table, sensor = pc.plant, pc.params, pc.table, pc.sensor
    T = _nice_sample_time(plant.min_sample_rate_Hz)
    ctrl = {"pd": dyn.design_controller(plant, sample_time_s=T, kind="pd"),
            "pid": dyn.design_controller(plant, sample_time_s=T, kind="pid")}
    m_pd, m_pid = dyn.loop_margins(plant, ctrl["pd"]), dyn.loop_margins(plant, ctrl["pid"])
    prop = dyn.proportional_only(plant)
    span = float(min(-pc.s_grid[0], pc.s_grid[-1]))
    # a reference step well inside the sensor's useful range: 0.2 mm, or 5 % of the table span
    step = float(min(0.2e-3, 0.05 * span))
    sims = {k: dyn.simulate(params, table, ctrl[c], sc, sensor=sensor) for k, (c, sc) in _scenarios(design, plant, step).items()}
    s0 = np.linspace(pc.s_grid[0] * 0.95, pc.s_grid[-1] * 0.95, 41)
    vmax = 0.5 * span * plant.unstable_pole_rad_per_s
    v0 = np.linspace(-vmax, vmax, 15)
    cap = dyn.capture_range(params, table, ctrl["pd"], s0, v0, t_end_s=0.5, sensor=sensor)
    cold_plant = dyn.linear_plant(pc.params_cold, drive="voltage")
    sim_files = {k: f"sim_{slug(k)}.csv" for k in sims}
    sa = SingleAxis(
        axis=pc.ax.name, pattern=pc.ax.pattern, sensor=pc.sensor_name, sensor_gain_per_m=pc.gain_per_m,
        sensor_crosstalk_per_A=pc.crosstalk_per_A, crosstalk_note=crosstalk_note(pc.crosstalk_per_A), sensor_unit=pc.unit,
        resistance_ohm=pc.drive.resistance_ohm, resistance_cold_ohm=pc.drive.resistance_cold_ohm,
        inductance_H=pc.drive.inductance_H, bias_current_A=params.hover_current_A, max_current_A=pc.drive.max_current_A,
        unstable_pole_rad_per_s=plant.unstable_pole_rad_per_s, unstable_pole_cold_rad_per_s=cold_plant.unstable_pole_rad_per_s,
        unstable_time_constant_s=plant.unstable_time_constant_s, electrical_pole_rad_per_s=plant.electrical_pole_rad_per_s,
        min_sample_rate_Hz=plant.min_sample_rate_Hz, max_loop_delay_s=plant.max_loop_delay_s, rules=design_rules(),
        sample_time_s=T, controller_pd=controller_data(ctrl["pd"]), controller_pid=controller_data(ctrl["pid"]),
        margins_pd=margins_data(m_pd), margins_pid=margins_data(m_pid),
        proportional_only=proportional_data(prop, plant.mechanical_pole_rad_per_s),
        capture=CaptureSummary(cap.band_m, cap.band_resolution_m, float(np.mean(cap.captured))),
        simulations={k: SimulationSummary(tuple(v.events), float(v.s_m[-1]), float(np.max(np.abs(v.current_A))))
                     for k, v in sims.items()})
    write_json(out / "plant.json", PlantFile(design.name, sa.axis, sa.pattern, sa.sensor, "voltage", plant_data(pc.raw_plant),
                                             plant_data(plant), plant_note()))
    _write_plant_csv(out / "plant.csv", design, pc.raw_plant, plant)
    for k, v in sims.items():
        rows = simulation_rows(v)
        write_csv(out / sim_files[k], rows[0], rows[1:],
                  header_lines(design.name, f"nonlinear simulation '{k}' along {sa.axis}; s from the equilibrium"))
    write_csv(out / "capture.csv", ["s0_m", "v0_m_per_s", "captured", "fate"],
              [[a, b, bool(cap.captured[i, j]), str(cap.fate[i, j])] for i, a in enumerate(cap.s0_grid_m)
               for j, b in enumerate(cap.v0_grid_m_per_s)],
              header_lines(design.name, f"capture map along {sa.axis} with the PD starting controller; fate in words: "
                                        + ", ".join(o.value for o in Outcome if o not in (Outcome.LIMIT_CYCLE, Outcome.GROWING))))
    for name, fig in (("control_bode.png", plots.bode(m_pd, title=f"{design.name}: loop with the PD starting design")),
                      ("control_nyquist.png", plots.nyquist(m_pd, title=f"{design.name}: Nyquist plot (PD)")),
                      ("control_step.png", plots.time_responses(sims, title=f"{design.name}: nonlinear responses along {sa.axis}")),
                      ("capture.png", plots.capture_map(cap, title=f"{design.name}: capture range (PD)"))):
        write_png(out / name, fig)
        close_figure(fig)
    files = ["plant.json", "plant.csv", "capture.csv", *sim_files.values(), "control_bode.png", "control_nyquist.png",
             "control_step.png", "capture.png"]
    extra = dict(pd=ctrl["pd"], pid=ctrl["pid"], margins=m_pd, proportional=prop, sims=sims, capture_result=cap)
    return sa, files, extra


def _write_on_off(design: Design, out: Path, st) -> list[str]:
    from fields.io.export import header_lines, write_csv, write_png
    from fields.io import plots_control

    rows = list(zip(st.half_band_signal, st.half_band_equivalent_m, st.status, st.amplitude_m, st.frequency_Hz,
                    st.ripple_current_A, st.mean_current_A, st.joule_power_W, st.supply_power_W, st.duty,
                    st.describing_function_frequency_Hz))
    write_csv(out / "on_off.csv", [f"half_band_{st.sensor_unit}", "half_band_equivalent_m", "status", "amplitude_m",
                                   "frequency_Hz", "ripple_current_A", "mean_current_A", "joule_power_W", "supply_power_W",
                                   "duty", "describing_function_frequency_Hz"], rows,
              header_lines(design.name, f"on/off control through a {st.switch} switch stage; compare "
                                        "linear_joule_power_W in control.json; status in words: "
                                        + ", ".join(o.value for o in Outcome if o is not Outcome.CAPTURED)))
    fig = plots_control.switched_runs(st.runs, st.linear_trace, labels=[f"band +-{h * 1e3:g} mm (as motion)" for h in st.half_band_equivalent_m],
                              title=f"{design.name}: on/off control, {st.switch.replace('_', '-')} "
                                                               "switch (dashed: linear controller)")
    write_png(out / "on_off.png", fig)
    close_figure(fig)
    return ["on_off.csv", "on_off.png"]


def _authority_refusal(design: Design, err: Exception) -> dict | None:
    """When the operating point fails because the coils cannot pull along the vertical: the
    force per ampere at the operating gap and its error bar (two quadrature levels)."""
    from fields.physics.wrench import wrench_basis

    if not design.coils:
        return None
    gop = design.study.operating_gap_m
    one = analysis.axial_curves(design, gaps_m=[gop], currents_A=[0.0])
    ki = float(one.ki_N_per_A[0])
    up = design.axial
    P, Rv = analysis.pose_at_gap(design, [gop])
    pat = np.asarray(one.pattern, float)
    k_std = float((wrench_basis(design, P, Rv).Fk_N_per_A[0] @ up) @ pat)
    k_hi = float((wrench_basis(design, P, Rv, order="high", estimate_error=False).Fk_N_per_A[0] @ up) @ pat)
    e = abs(k_std - k_hi)
    W = design.floater.mass_kg * design.gravity_magnitude
    imax = max(abs(c.max_current_A) for c in design.coils)
    if abs(ki) > max(3 * e, 1e-6 * W / imax):
        return None
    return {"mode": "vertical", "why": (f"no authority: the coils' vertical force per ampere at the operating gap "
                                        f"{gop * 1e3:.4g} mm is k_i = {ki:.2g} N/A, zero within its error bar "
                                        f"({e:.2g} N/A; the weight needs {W:.3g} N); the floater can be neither "
                                        "held nor controlled"),
            "fix": "turn or move the coils so that their field gradient pulls along the vertical at the floater "
                   "(e.g. a coil on the floater's axis, its axis vertical)",
            "operating_point_error": str(err)}


def _refused_result(design: Design, out: Path, refusal: dict, multiaxis: dict | None, pieces=None,
                    outcome=None) -> ControlResult:
    from fields.io.export import write_json
    lines = (f"{design.name}: control REFUSED - the loop cannot be closed (no gains, no margins)",
             *[f"  {r}" for r in refusal["reasons"]], *[f"  fix: {f}" for f in refusal["fix"]],
             *[f"  sensor {sn['name']}: {n}" for sn in (multiaxis or {}).get("sensors", []) for n in sn["notes"]])
    r = ControlResult(status="refused", route="multi-axis", summary=lines, refusal=refusal, multiaxis=multiaxis,
                      **_axis_fields(pieces), files=file_list(out, "control.json", *(["mimo_plant.csv"] if multiaxis else [])),
                      table=None if pieces is None else pieces.table, params=None if pieces is None else pieces.params,
                      outcome=outcome)
    write_json(out / "control.json", r)
    return r


def _axis_fields(pc) -> dict:
    if pc is None:
        return {}
    return dict(axis=pc.ax.name, pattern=pc.ax.pattern, bias_current_A=pc.params.hover_current_A,
                resistance_hot_ohm=pc.drive.resistance_ohm, resistance_cold_ohm=pc.drive.resistance_cold_ohm,
                inductance_H=pc.drive.inductance_H)


def _is_single_loop(rep, ax) -> bool:
    un = rep.unstable
    return (rep.status == "closable" and len(un) == 1
            and un[0].shares.get("xyz"[ax.index], 0.0) >= SINGLE_LOOP_SHARE)


def _summary(design, o, sa, st) -> tuple[str, ...]:
    md = o.report
    lines = [f"{design.name}: control over the free axes {', '.join(o.plant.free_axes)} (structure: {md.status})"]
    lines += [f"  mode {m.text}" for m in md.modes]
    lines += [f"  sensor {sn.name}: {n}" for sn in o.plant.sensors for n in sn.notes]
    if md.status != "closable":
        return tuple(lines)
    lines.append(f"  sample rate {o.sample_rate.rate_Hz:g} Hz: {o.sample_rate.rule}")
    for lab, reg, mm in (("LQG", o.lqg, o.lqg_margins), ("mode-space PD", o.pd, o.pd_margins)):
        if reg is None:
            lines.append(f"  {lab}: not possible: {o.pd_refusal}")
            continue
        lines.append(f"  {lab}: stable hot {reg.stable}, cold {reg.stable_cold}; multiloop disk margin "
                     f"{mm.multiloop_balanced.alpha:.3g} (gain {mm.multiloop_balanced.gain_interval[0]:.3g}.."
                     f"{mm.multiloop_balanced.gain_interval[1]:.3g}, phase +-{mm.multiloop_balanced.phase_deg:.3g} deg)")
        for c in mm.channels:
            lo, hi = c.gain_interval
            lines.append(f"    {c.channel}: gain x {lo:.3g} .. {hi:.3g}, phase margin {c.phase_margin_deg:.3g} deg, "
                         f"disk {c.disk_balanced.alpha:.3g}")
    if o.releases:
        for k, r in o.releases.items():
            lines.append(f"  release {k}: {'held' if r.held else 'LOST'}, peak current {np.max(r.peak_current_A):.3g} A")
        for a, v in o.largest.items():
            sc, u = (1e3, "mm") if v.unit == "m" else (180 / math.pi, "deg")
            top = "the whole box" if not math.isfinite(v.lost) else f"lost at {v.lost * sc:.3g} {u}"
            lines.append(f"  largest start offset held along {a}: {v.held * sc:.3g} {u} ({top})")
        if o.region is not None:
            lines.append(f"  capture region {o.region.axes[0]} x {o.region.axes[1]}: {100 * o.region.held_fraction:.0f} % "
                         "of the grid held (capture_region.csv/png)")
    if sa is not None:
        lines.append(single_loop_line(sa))
    from fields.studies.stages.control_switch import on_off_lines

    return tuple(lines + on_off_lines(st))


def single_loop_line(sa) -> str:
    """The summary line of the single-axis loop."""
    return (f"  single loop along {sa.axis}: PD crossover {sa.controller_pd['crossover_rad_per_s']:.4g} rad/s, "
            f"unstable pole {sa.unstable_pole_rad_per_s:.4g} rad/s hot, {sa.unstable_pole_cold_rad_per_s:.4g} cold")


def run_control(design: Design, out: Path, stability=None, coil=None, switch: str = "auto",
                with_capture: bool = True) -> ControlResult:
    """The control stage (module docstring): control.json and the files that apply.

    ``stability`` and ``coil`` are the results of :func:`run_stability` and :func:`run_coil`
    when the caller has them (the report does): their equilibrium and inductance matrix are
    reused. ``switch`` chooses the on/off stage ("auto", "low_side", "h_bridge");
    ``with_capture`` False skips the releases, capture region and on/off study (quick check).
    """
    from fields.io.export import write_json
    from fields.studies.stages.control_multi import multiaxis_data, multiaxis_study, write_multiaxis_files
    from fields.studies.stages.control_switch import switch_study
    from fields.studies.stages.stability import run_stability

    out = Path(out)
    if not design.coils:
        r = ControlResult(status="no coils", route="none",
                          summary=(f"{design.name}: no coils - a passive design; there is nothing to control",),
                          files=file_list(out, "control.json"))
        write_json(out / "control.json", r)
        return r
    if stability is None:
        try:
            stability = run_stability(design, out, with_maps=False)
        except SolverError as e:
            ref = _authority_refusal(design, e)
            if ref is None:
                raise
            return _refused_result(design, out, {"reasons": [f"mode '{ref['mode']}': {ref['why']}"], "fix": [ref["fix"]],
                                                 "modes": [ref["mode"]], "detail": ref["operating_point_error"]}, None)
    if design.floater.soft_iron:
        from fields.studies.stages.control_iron import soft_iron_control

        return soft_iron_control(design, out, stability, coil, switch, with_capture)
    eq = stability.equilibrium_point
    L = None if coil is None else np.asarray(coil.inductance_matrix_H, float)
    o = multiaxis_study(design, eq, inductance_H=L, with_capture=with_capture, stiffness=stability.stiffness)
    ax = analysis.control_axis(design, stability.stiffness)
    pieces = None
    if ax.force_per_ampere_N_per_A != 0:
        try:
            pieces = _axis_pieces(design, eq, ax, o.plant)
        except InputError:
            pieces = None  # e.g. no sensor signal along the axis: the multi-axis refusal says why
    mdata = multiaxis_data(o, coil)
    files = write_multiaxis_files(design, out, o)
    if o.report.status == "refused":
        modes = [m.name for m in o.report.unstable if not (m.controllable and m.observable)]
        return _refused_result(design, out, {"reasons": list(o.report.reasons), "fix": mdata.get("fix", []),
                                             "modes": modes}, mdata, pieces, o)
    if o.report.status == "passive":
        r = ControlResult(status="passive", route="multi-axis",
                          summary=(f"{design.name}: no unstable mode - the floater needs no active control",),
                          multiaxis=mdata, **_axis_fields(pieces), files=file_list(out, "control.json", *files),
                          table=None if pieces is None else pieces.table, params=None if pieces is None else pieces.params,
                          outcome=o)
        write_json(out / "control.json", r)
        return r
    sa, extra = None, {}
    if pieces is not None and _is_single_loop(o.report, ax):
        sa, f1, extra = _single_axis(design, out, pieces)
        files += f1
    st = None
    if with_capture and pieces is not None:
        j = o.plant.free_axes.index("xyz"[ax.index]) if "xyz"[ax.index] in o.plant.free_axes else None
        lin = None
        if j is not None:
            from fields.control import multiaxis as mx

            q0 = np.zeros(o.plant.n_axes)
            q0[j] = 0.1e-3 * float(np.sign(ax.direction[ax.index]) or 1.0)
            lin = mx.simulate_multiaxis(o.plant, o.report, o.lqg, o.model, design, q0=q0, t_end_s=0.6)
        st = switch_study(design, ax, pieces.params, pieces.plant, pieces.table, pieces.sensor, pieces.gain_per_m,
                          switch=switch, linear_run=lin, axis_index=j, coil_resistances_ohm=o.plant.resistance_hot_ohm)
        files += _write_on_off(design, out, st)
    r = ControlResult(status="closable", route="multi-axis" + (" + single-axis" if sa is not None else ""),
                      summary=_summary(design, o, sa, st), multiaxis=mdata, single_axis=sa, on_off=st,
                      **_axis_fields(pieces), files=file_list(out, "control.json", *files),
                      plant=pieces.plant if pieces else None, raw_plant=pieces.raw_plant if pieces else None,
                      table=pieces.table if pieces else None, params=pieces.params if pieces else None,
                      outcome=o, **extra)
    write_json(out / "control.json", r)
    return r
