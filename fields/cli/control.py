"""``hoverfield control``: linear plant, controller starting point, margins, simulations."""

from __future__ import annotations

from fields.cli.common import add_file_command, load_design, out_dir, print_files

HELP = "linear plant, controller starting point, margins, simulations, capture range, on/off study"


def run(args) -> int:
    from fields.io.wording import proportional_text
    from fields.studies.stages.control import run_control

    design = load_design(args)
    s = run_control(design, out_dir(args, design))
    pl, m, pd = s.plant, s.margins, s.pd
    print(f"{design.name}: control along {s.axis} (coil pattern {s.pattern.tolist()}), sensor: {s.sensor}")
    print(f"  unstable pole {pl.unstable_pole_rad_per_s:.4g} rad/s (time constant {pl.unstable_time_constant_s * 1e3:.3g} ms), "
          f"electrical pole R/L {pl.electrical_pole_rad_per_s:.4g} rad/s")
    print(f"  sample at >= {s.min_sample_rate_Hz:.3g} Hz (chosen {1 / s.sample_time_s:.4g} Hz), loop delay <= "
          f"{s.max_loop_delay_s * 1e3:.3g} ms")
    u = s.sensor_unit
    print(f"  PD starting design: crossover {pd.crossover_rad_per_s:.4g} rad/s, Kp {pd.kp_A_per_signal:.4g} A/{u}, "
          f"Kd {pd.kd_A_s_per_signal:.4g} A s/{u}, derivative filter {pd.derivative_filter_tau_s * 1e3:.3g} ms; "
          f"analog current loop gain {pd.current_loop_gain_V_per_A:.3g} V/A")
    lo, hi = m.gain_interval
    print(f"  margins: stable for gain x {lo:.3g} .. {hi:.3g}, phase margin {m.phase_margin_deg:.3g} deg, "
          f"Nyquist encirclements {m.encirclements_ccw} (= {m.open_loop_unstable_poles} unstable open-loop poles), "
          f"peak sensitivity {m.peak_sensitivity:.3g}")
    print(f"  proportional only: {proportional_text(s.proportional, s.plant.mechanical_pole_rad_per_s)}")
    cb = s.capture.band_m
    print(f"  capture band at rest: {cb[0] * 1e3:.3g} .. {cb[1] * 1e3:.3g} mm from the equilibrium")
    print_files(s.files)
    return 0


def register(sub) -> None:
    add_file_command(sub, "control", run, HELP)
