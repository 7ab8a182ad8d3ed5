"""The on/off part of the control stage: the coil driven through a real switch (low-side switch
with a flyback diode, or an H-bridge) at its hot resistance, a hysteresis band on the sensor
signal, compared with the linear controller and with the describing-function estimate.

Along the control axis of :func:`fields.analysis.control_axis` (the other axes held: for a
multi-axis design this is the single-loop view of its control axis, stated in the file).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fields.studies.result_fields import internal

#: band half-widths on the sensor signal, as the signal change of these motions along the axis
BAND_MOTIONS_M = (0.05e-3, 0.1e-3, 0.2e-3, 0.5e-3)
#: the on/off runs start at rest this far from the equilibrium
START_M = 0.1e-3
#: run length (s); measures over the second half
RUN_S = 0.6


@dataclass(frozen=True)
class SwitchStudy:
    """control.json "on_off": the switched runs per band and what they are compared with."""

    switch: str
    supply_voltage_V: float
    on_voltage_V: float
    off_voltage_V: float
    resistance_hot_ohm: float
    inductance_H: float
    lead_time_s: float
    sensor_unit: str
    half_band_signal: list
    half_band_equivalent_m: list
    status: list
    amplitude_m: list
    frequency_Hz: list
    ripple_current_A: list
    mean_current_A: list
    joule_power_W: list
    supply_power_W: list
    duty: list
    describing_function_frequency_Hz: list
    describing_function_amplitude_signal: list
    linear_amplitude_m: float | None
    linear_joule_power_W: float | None
    hover_joule_power_W: float
    notes: tuple[str, ...]
    runs: tuple = internal()
    linear_trace: tuple | None = internal()


def _f(x):
    x = float(x)
    return x if math.isfinite(x) else None


def switch_study(design, ax, params, plant, table, sensor, sensor_gain_per_m: float, switch: str = "auto",
                 linear_run=None, axis_index: int | None = None, coil_resistances_ohm=()) -> SwitchStudy:
    """Switched runs over :data:`BAND_MOTIONS_M` (module docstring).

    ``params``/``plant``/``table``/``sensor`` are the single-axis pieces of the stage (hot
    resistance); ``switch`` "auto" picks the low-side switch when the bias current is positive
    along the pattern and an H-bridge otherwise (a current of either sign is needed).
    ``linear_run`` is a multi-axis release from the same start (for the comparison) and
    ``axis_index`` the control axis's position in its free axes, ``coil_resistances_ohm`` the
    hot resistance of each coil (its Joule power).
    """
    from fields.control import switching as sw

    I0 = float(params.hover_current_A)
    kind = switch if switch != "auto" else ("low_side" if I0 > 0 and params.max_current_A > 0 else "h_bridge")
    stage = sw.SwitchStage(kind, float(params.supply_voltage_V), current_limit_A=float(params.max_current_A))
    R, L = float(params.resistance_ohm), float(params.inductance_H)

    def slope(s, h=1e-6):
        return (float(sensor(s + h, I0)) - float(sensor(s - h, I0))) / (2 * h)

    axis = sw.SwitchedAxis(mass_kg=float(params.mass_kg), resistance_ohm=R, inductance_H=L, bias_current_A=I0,
                           force_N=lambda s, i: float(table.force_N(s, i)),
                           force_per_ampere_N_per_A=lambda s, i=None: float(table.force_per_ampere_N_per_A(s, i)),
                           sensor=lambda s, i: float(sensor(s, i)), sensor_slope=slope, range_m=table.range_m)
    p = float(plant.unstable_pole_rad_per_s) if plant.unstable_pole_rad_per_s > 0 else float(plant.mechanical_pole_rad_per_s)
    lead = 2.0 / p  # the switching line s + t_lead v: a first-order approach at p/2 (a design choice)
    g = abs(float(sensor_gain_per_m))
    bands = [g * b for b in BAND_MOTIONS_M]
    orient = float(np.sign(params.force_per_ampere_N_per_A * sensor_gain_per_m)) or 1.0
    runs = [sw.simulate_switched(axis, stage, h, lead_time_s=lead, t_end_s=RUN_S, s0_m=START_M, orientation=orient)
            for h in bands]
    num, den = np.asarray(plant.numerator, float), np.asarray(plant.denominator, float)

    def G(s):
        return orient * (1 + lead * s) * np.polyval(num, s) / np.polyval(den, s)

    w = np.logspace(math.log10(0.1 * p), math.log10(1e3 * max(p, R / L)), 3000)
    M = 0.5 * (stage.on_voltage_V - stage.off_voltage_V)
    dfs = [sw.describing_function_cycle(G, M, h, w) for h in bands]
    lin_amp = lin_pj = None
    trace = None
    if linear_run is not None and axis_index is not None:
        t = linear_run.t_s
        sel = t >= 0.5 * t[-1]
        Rk = np.asarray(coil_resistances_ohm, float)
        if np.any(sel):
            lin_amp = float(0.5 * np.ptp(linear_run.q[sel, axis_index]))
            lin_pj = float(np.mean(linear_run.currents_A[sel] ** 2 @ Rk))
        pat = np.asarray(ax.pattern, float)
        trace = (t, linear_run.q[:, axis_index], linear_run.currents_A @ pat / max(pat @ pat, 1e-300))
    notes = [(f"switch: {kind.replace('_', '-')}: on {stage.on_voltage_V:g} V, off {stage.off_voltage_V:g} V"
              + (" (flyback diode; the current never reverses)" if kind == "low_side" else " (the current may reverse)")),
             (f"comparator: sigma = (y - y0) + t_lead dy/dt, t_lead = 2/p = {lead * 1e3:.3g} ms; bands are the signal "
              f"change for {', '.join(f'{b * 1e3:g}' for b in BAND_MOTIONS_M)} mm"),
             f"start at rest {START_M * 1e3:g} mm from the equilibrium; measures over the second half of {RUN_S:g} s",
             f"cycle-by-cycle current limit at {params.max_current_A:.3g} A (modelled by its average: held at the limit)",
             f"coil at its hot resistance {R:.4g} ohm, inductance {L * 1e3:.4g} mH (pattern {np.asarray(ax.pattern).tolist()})",
             ("describing function of a relay with hysteresis (Atherton 1975; Slotine & Li 1991, sec. 5.3) on the "
              "linear plant (no current limit): an estimate for comparison, not exact for an unstable plant, and far off "
              "when the current sits at its limit")]
    if ax.index != 2:
        notes.append("a sideways control axis studied alone (the other axes held): the single-loop view")
    return SwitchStudy(
        switch=kind, supply_voltage_V=stage.supply_voltage_V, on_voltage_V=stage.on_voltage_V,
        off_voltage_V=stage.off_voltage_V, resistance_hot_ohm=R, inductance_H=L, lead_time_s=lead,
        sensor_unit=params.sensor_unit, half_band_signal=bands, half_band_equivalent_m=list(BAND_MOTIONS_M),
        status=[r.status for r in runs], amplitude_m=[_f(r.amplitude_m) for r in runs],
        frequency_Hz=[_f(r.frequency_Hz) for r in runs], ripple_current_A=[_f(r.ripple_current_A) for r in runs],
        mean_current_A=[_f(r.mean_current_A) for r in runs], joule_power_W=[_f(r.joule_power_W) for r in runs],
        supply_power_W=[_f(r.supply_power_W) for r in runs], duty=[_f(r.duty) for r in runs],
        describing_function_frequency_Hz=[_f(d.frequency_Hz) if d.found else None for d in dfs],
        describing_function_amplitude_signal=[_f(d.amplitude) if d.found else None for d in dfs],
        linear_amplitude_m=lin_amp, linear_joule_power_W=lin_pj, hover_joule_power_W=R * I0 * I0,
        notes=tuple(notes), runs=tuple(runs), linear_trace=trace)


def on_off_lines(st) -> list[str]:
    """The summary lines of the on/off study (none without one)."""
    if st is None:
        return []
    lines = []
    for i, h in enumerate(st.half_band_equivalent_m):
        f = st.frequency_Hz[i]
        lines.append(f"  on/off ({st.switch}), band +-{h * 1e3:g} mm: {st.status[i]}"
                     + (f", {f:.4g} Hz, ripple {st.ripple_current_A[i]:.3g} A, {st.joule_power_W[i]:.3g} W" if f else ""))
    return lines
