"""JSON and CSV layouts of the control results (plant, controller, margins, studies).

The control layer returns frozen dataclasses holding python-control objects; these functions
pick the numbers the files carry, with the sensor unit in the gain keys and complex poles as
real/imaginary lists, and add the sentences from :mod:`fields.io.wording`.
"""

from __future__ import annotations

import math

import numpy as np



def _f(x) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def _complex(z) -> dict[str, list]:
    z = np.asarray(z, dtype=complex).ravel()
    return {"real": [float(v) for v in z.real], "imag": [float(v) for v in z.imag]}


def plant_data(p) -> dict:
    """plant.json entry of a :class:`fields.control.plant.Plant`."""
    from fields.io.serialize import to_data
    from fields.io.wording import design_rules

    return {
        "params": to_data(p.params),
        "drive": p.drive, "state_names": list(p.state_names), "input_name": p.input_name,
        "output_name": p.output_name,
        "A": p.A.tolist(), "B": p.B.tolist(), "C": p.C.tolist(), "D": p.D.tolist(),
        "tf_numerator": p.numerator.tolist(), "tf_denominator": p.denominator.tolist(),
        "poles_rad_per_s": _complex(p.poles_rad_per_s),
        "mechanical_pole_rad_per_s": p.mechanical_pole_rad_per_s,
        "unstable_pole_rad_per_s": p.unstable_pole_rad_per_s,
        "unstable_time_constant_s": _f(p.unstable_time_constant_s),
        "unstable_pole_count": p.unstable_pole_count,
        "electrical_pole_rad_per_s": p.electrical_pole_rad_per_s,
        "nominal_crossover_rad_per_s": _f(p.nominal_crossover_rad_per_s),
        "min_sample_rate_Hz": _f(p.min_sample_rate_Hz),
        "max_loop_delay_s": _f(p.max_loop_delay_s),
        "rules": list(design_rules()),
    }


def analog_data(net) -> dict | None:
    """The op-amp network with its circuit sentence."""
    from fields.io.serialize import to_data
    from fields.io.wording import circuit_text

    if net is None:
        return None
    d = to_data(net)
    d.pop("second_stage", None)
    d["circuit"] = circuit_text(net)
    return d


def controller_data(c) -> dict:
    """control.json entry of a :class:`fields.control.design.ControllerDesign`."""
    from fields.io.serialize import to_data
    from fields.io.wording import discretisation_text

    u = c.signal_unit
    return {
        "kind": c.kind, "drive": c.drive, "sign": c.sign,
        "crossover_rad_per_s": c.crossover_rad_per_s,
        "phase_margin_target_deg": c.phase_margin_target_deg,
        "lead_phase_deg": c.lead_phase_deg,
        "phase_budget_deg": to_data(c.phase_budget_deg),
        "zero_rad_per_s": c.zero_rad_per_s, "pole_rad_per_s": c.pole_rad_per_s,
        "integral_zero_rad_per_s": c.integral_zero_rad_per_s,
        f"kp_A_per_{u}": c.kp_A_per_signal,
        f"kd_A_s_per_{u}": c.kd_A_s_per_signal,
        f"ki_A_per_{u}_s": c.ki_A_per_signal_s,
        "derivative_filter_tau_s": c.derivative_filter_tau_s,
        "tf_numerator": c.numerator.tolist(), "tf_denominator": c.denominator.tolist(),
        "sample_time_s": c.sample_time_s,
        "discrete_numerator": None if c.discrete_numerator is None else c.discrete_numerator.tolist(),
        "discrete_denominator": None if c.discrete_denominator is None else c.discrete_denominator.tolist(),
        "discretisation": discretisation_text(c),
        "loop_delay_s": c.loop_delay_s,
        "current_loop_gain_V_per_A": c.current_loop_gain_V_per_A,
        "current_loop_bandwidth_rad_per_s": _f(c.current_loop_bandwidth_rad_per_s),
        "analog": analog_data(c.analog),
    }


def margins_data(m) -> dict:
    """control.json entry of :class:`fields.control.margins.Margins`."""
    from fields.io.wording import margins_domain_text

    return {
        "domain": margins_domain_text(m),
        "gain_interval": [_f(m.gain_interval[0]), _f(m.gain_interval[1])],
        "lower_gain_margin_dB": _f(m.lower_gain_margin_dB),
        "upper_gain_margin_dB": _f(m.upper_gain_margin_dB),
        "phase_margin_deg": _f(m.phase_margin_deg),
        "gain_crossovers_rad_per_s": np.asarray(m.gain_crossovers_rad_per_s).tolist(),
        "phase_margins_deg": np.asarray(m.phase_margins_deg).tolist(),
        "phase_crossovers_rad_per_s": np.asarray(m.phase_crossovers_rad_per_s).tolist(),
        "real_axis_crossings": np.asarray(m.real_axis_crossings).tolist(),
        "encirclements_ccw": m.encirclements_ccw,
        "open_loop_unstable_poles": m.open_loop_unstable_poles,
        "peak_sensitivity": m.peak_sensitivity,
        "peak_sensitivity_rad_per_s": m.peak_sensitivity_rad_per_s,
        "closed_loop_poles": _complex(m.closed_loop_poles),
        "closed_loop_poles_rad_per_s": _complex(m.closed_loop_poles_rad_per_s),
        "stable": m.stable,
    }


def proportional_data(s, mechanical_pole_rad_per_s: float) -> dict:
    """control.json entry of :class:`fields.control.margins.ProportionalStudy`."""
    from fields.io.wording import proportional_text

    return {
        "drive": s.drive, "critical_gain": s.critical_gain, "gains": np.asarray(s.gains).tolist(),
        "closed_loop_poles_rad_per_s": [_complex(r) for r in s.closed_loop_poles_rad_per_s],
        "max_real_part_rad_per_s": np.asarray(s.max_real_part_rad_per_s).tolist(),
        "min_damping_ratio": [_f(v) for v in s.min_damping_ratio],
        "stabilisable": s.stabilisable,
        "back_emf_damping_per_s2": s.back_emf_damping_per_s2,
        "explanation": proportional_text(s, mechanical_pole_rad_per_s),
    }


def simulation_rows(r) -> list[list]:
    """Header of unit-named columns, then one row per sample, of a
    :class:`fields.control.simulate.SimulationResult`."""
    cols = {"time_s": r.time_s, "s_m": r.s_m, "v_m_per_s": r.v_m_per_s, "current_A": r.current_A,
            "voltage_V": r.voltage_V, f"signal_{r.signal_unit}": r.signal, "command_A": r.command_A}
    rows = [list(cols)]
    rows.extend([float(v) for v in row] for row in zip(*cols.values()))
    return rows
