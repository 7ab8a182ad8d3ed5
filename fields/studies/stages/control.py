"""Stage "control": linear plant, controller starting point, margins, nonlinear simulations,
capture range and on/off study along the axis that needs control (control.json, plant.json,
plant.csv, sim_*.csv, capture.csv, hysteresis.csv, PNGs).

The plant as wired (the sensor sees the coil too) is exported; the controller is designed for
the usual practice of subtracting the coil's share (c I) from the reading before the loop.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fields import analysis
from fields.errors import SolverError
from fields.io.export import header_lines, write_csv, write_json, write_png
from fields.io.serialize import internal
from fields.model.design import Design
from fields.studies.stages.common import close_figure, file_list, slug


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
class ControlResult:
    """What :func:`run_control` computed and wrote (control.json is this, serialised).

    ``controller_*``, ``margins_*`` and ``proportional_only`` hold the JSON forms of the
    python-control based results of :mod:`fields.control.dynamics`; the objects themselves are
    the internal fields.
    """

    axis: str
    pattern: np.ndarray
    sensor: str
    sensor_gain_per_m: float
    sensor_crosstalk_per_A: float
    crosstalk_note: str
    sensor_unit: str
    resistance_ohm: float
    inductance_H: float
    bias_current_A: float
    max_current_A: float
    unstable_pole_rad_per_s: float
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
    hysteresis: object
    simulations: dict
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


def _axis_tables(design: Design, eq, ax, grid_points: int = 81):
    """Force table along the control axis and the positions grid (s measured along ax.direction)."""
    from fields.control.plant import ForceTable

    st = design.study
    if ax.index == 2:
        c = float(design.up @ np.asarray(st.gap_direction))  # d gap / d s
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
    vertical axis when there is one, else the first Hall sensor, else an ideal position sensor."""
    from scipy.interpolate import CubicSpline

    from fields.devices import beam as sensmod
    from fields.control.plant import Sensor
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
        sen = halls[0]
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
    """The coils of the control pattern as one drive: series R, p^T L p, current limit."""

    resistance_ohm: float
    inductance_H: float
    max_current_A: float


def _drive(design: Design, ax, coil) -> _Drive:
    from fields.devices import coil as coilmod, drive, inductance, winding  # noqa: F401

    p = ax.pattern
    active = np.flatnonzero(p)
    # coils in the pattern carry i * p_k: series resistance sum p_k^2 R_k, inductance p^T L p
    R = float(sum(p[k] ** 2 * winding.resistance_and_cooling(design, int(k))[0] for k in active))
    Lm = (np.asarray(coil.inductance_matrix_H, float) if coil is not None else inductance.mutual_inductance_matrix(design))
    imax = float(min(design.coils[k].max_current_A / abs(p[k]) for k in active))
    return _Drive(R, float(p @ Lm @ p), imax)


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


def _hysteresis(params, table, pd, ax, span: float, imax: float):
    from fields import control as dyn

    bands = np.array([0.02, 0.05, 0.1, 0.2]) * span
    if ax.index == 2:
        # suspension-type vertical axis: the coil switches between full and zero current
        return dyn.hysteresis_study(params, table, pd, bands, mode="current", t_end_s=0.6)
    # a sideways axis with no bias current: bang-bang between +max and -max, starting off-centre
    return dyn.hysteresis_study(params, table, pd, bands, mode="current", t_end_s=0.6,
                                on_current_A=imax, off_current_A=-imax, s0_m=0.5 * bands[-1])


def _write_files(design: Design, out: Path, r: ControlResult, s0, v0, sim_files: dict) -> None:
    from fields.io import plots
    from fields.io.wording import plant_note
    from fields.studies.stages.control_data import plant_data, simulation_rows

    write_json(out / "plant.json", PlantFile(design.name, r.axis, r.pattern, r.sensor, "voltage", plant_data(r.raw_plant),
                                             plant_data(r.plant), plant_note()))
    _write_plant_csv(out / "plant.csv", design, r.raw_plant, r.plant)
    for k, v in r.sims.items():
        rows = simulation_rows(v)
        write_csv(out / sim_files[k], rows[0], rows[1:],
                  header_lines(design.name, f"nonlinear simulation '{k}' along {r.axis}; s from the equilibrium"))
    cap = r.capture_result
    write_csv(out / "capture.csv", ["s0_m", "v0_m_per_s", "captured", "fate"],
              [[a, b, bool(cap.captured[i, j]), str(cap.fate[i, j])] for i, a in enumerate(s0) for j, b in enumerate(v0)],
              header_lines(design.name, f"capture map along {r.axis} with the PD starting controller"))
    h = r.hysteresis
    write_csv(out / "hysteresis.csv", ["band_m", "status", "amplitude_m", "frequency_Hz", "mean_joule_power_W", "duty"],
              zip(h.band_widths_m, h.status, h.amplitude_m, h.frequency_Hz, h.mean_joule_power_W, h.duty),
              header_lines(design.name, "on/off control with a hysteresis band; compare linear_amplitude in control.json"))
    write_json(out / "control.json", r)
    for name, fig in (("control_bode.png", plots.bode(r.margins, title=f"{design.name}: loop with the PD starting design")),
                      ("control_nyquist.png", plots.nyquist(r.margins, title=f"{design.name}: Nyquist plot (PD)")),
                      ("control_step.png", plots.time_responses(r.sims, title=f"{design.name}: nonlinear responses along {r.axis}")),
                      ("capture.png", plots.capture_map(cap, s0, v0, title=f"{design.name}: capture range (PD)"))):
        write_png(out / name, fig)
        close_figure(fig)


def run_control(design: Design, out: Path, stability=None, coil=None) -> ControlResult:
    """Linear plant, controller starting point, margins, simulations, capture range and on/off
    study along the axis that needs control; control.json, plant.json, CSVs and PNGs.

    ``stability`` and ``coil`` are the results of :func:`run_stability` and :func:`run_coil`
    when the caller has them (the report does): their equilibrium and inductance matrix are
    reused instead of computed again."""
    from fields import control as dyn
    from fields.io.wording import crosstalk_note, design_rules
    from fields.studies.stages.control_data import controller_data, margins_data, proportional_data
    from fields.studies.stages.stability import run_stability

    out = Path(out)
    st = stability if stability is not None else run_stability(design, out, with_maps=False)
    eq = st.equilibrium_point
    ax = analysis.control_axis(design, st.stiffness)
    if not design.coils or ax.force_per_ampere_N_per_A == 0:
        raise SolverError(f"control: the coils exert no force along the {ax.name} axis at the equilibrium; "
                          "there is nothing to build a plant from")
    drv = _drive(design, ax, coil)
    table, I0, poses, s_grid = _axis_tables(design, eq, ax)
    sen_name, sensor, gs, gi, unit = _axis_sensor(design, eq, ax, s_grid, poses, I0)
    common = dict(axis_name=ax.name, mass_kg=design.floater.mass_kg, stiffness_N_per_m=ax.stiffness_N_per_m,
                  force_per_ampere_N_per_A=ax.force_per_ampere_N_per_A, resistance_ohm=drv.resistance_ohm,
                  inductance_H=drv.inductance_H, hover_current_A=I0, max_current_A=drv.max_current_A,
                  supply_voltage_V=design.study.supply_voltage_V, sensor_gain_per_m=gs, sensor_unit=unit,
                  gravity_m_per_s2=design.gravity_magnitude if ax.index == 2 else 0.0)
    raw_plant = dyn.linear_plant(dyn.PlantParameters(sensor_crosstalk_per_A=gi, **common), drive="voltage")
    params = dyn.PlantParameters(sensor_crosstalk_per_A=0.0, **common)
    plant = dyn.linear_plant(params, drive="voltage")
    if gi != 0.0:
        sensor = dyn.Sensor(lambda s_, i_, f=sensor.function, c=gi: f(s_, i_) - c * (np.asarray(i_) - I0),
                            sensor.range_signal, sensor.unit)
    T = _nice_sample_time(plant.min_sample_rate_Hz)
    ctrl = {"pd": dyn.design_controller(plant, sample_time_s=T, kind="pd"),
            "pid": dyn.design_controller(plant, sample_time_s=T, kind="pid")}
    m_pd, m_pid = dyn.loop_margins(plant, ctrl["pd"]), dyn.loop_margins(plant, ctrl["pid"])
    prop = dyn.proportional_only(plant)
    span = float(min(-s_grid[0], s_grid[-1]))
    # a reference step well inside the sensor's useful range: 0.2 mm, or 5 % of the table span
    step = float(min(0.2e-3, 0.05 * span))
    sims = {k: dyn.simulate(params, table, ctrl[c], sc, sensor=sensor) for k, (c, sc) in _scenarios(design, plant, step).items()}
    s0 = np.linspace(s_grid[0] * 0.95, s_grid[-1] * 0.95, 41)
    vmax = 0.5 * span * plant.unstable_pole_rad_per_s
    v0 = np.linspace(-vmax, vmax, 15)
    cap = dyn.capture_range(params, table, ctrl["pd"], s0, v0, t_end_s=0.5, sensor=sensor)
    hyst = _hysteresis(params, table, ctrl["pd"], ax, span, drv.max_current_A)
    sim_files = {k: f"sim_{slug(k)}.csv" for k in sims}
    result = ControlResult(
        axis=ax.name, pattern=ax.pattern, sensor=sen_name, sensor_gain_per_m=gs, sensor_crosstalk_per_A=gi,
        crosstalk_note=crosstalk_note(gi), sensor_unit=unit, resistance_ohm=drv.resistance_ohm,
        inductance_H=drv.inductance_H, bias_current_A=I0, max_current_A=drv.max_current_A,
        unstable_pole_rad_per_s=plant.unstable_pole_rad_per_s, unstable_time_constant_s=plant.unstable_time_constant_s,
        electrical_pole_rad_per_s=plant.electrical_pole_rad_per_s, min_sample_rate_Hz=plant.min_sample_rate_Hz,
        max_loop_delay_s=plant.max_loop_delay_s, rules=design_rules(), sample_time_s=T,
        controller_pd=controller_data(ctrl["pd"]), controller_pid=controller_data(ctrl["pid"]),
        margins_pd=margins_data(m_pd), margins_pid=margins_data(m_pid),
        proportional_only=proportional_data(prop, plant.mechanical_pole_rad_per_s),
        capture=CaptureSummary(cap.band_m, cap.band_resolution_m, float(np.mean(cap.captured))),
        hysteresis=hyst,
        simulations={k: SimulationSummary(tuple(v.events), float(v.s_m[-1]), float(np.max(np.abs(v.current_A))))
                     for k, v in sims.items()},
        files=file_list(out, "control.json", "plant.json", "plant.csv", "capture.csv", "hysteresis.csv",
                        *sim_files.values(), "control_bode.png", "control_nyquist.png", "control_step.png", "capture.png"),
        plant=plant, raw_plant=raw_plant, pd=ctrl["pd"], pid=ctrl["pid"], margins=m_pd, proportional=prop,
        table=table, params=params, sims=sims, capture_result=cap)
    _write_files(design, out, result, s0, v0, sim_files)
    return result
