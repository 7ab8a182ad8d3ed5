"""The ``hoverfield`` command: a thin shell over the package.

Every subcommand reads a geometry file, calls the compute modules and writes outputs into the
output folder (default ``out/<design-name>/``). Errors the user can fix print one line and exit
with status 2; nothing is written into the input file. This module is the only one that prints.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

from fields import __version__
from fields.errors import HoverfieldError

SAFETY = (
    "Safety: strong magnets pinch fingers and shatter when they snap together, and fly towards iron; "
    "keep them away from pacemakers and implants, cards and media. Coils get hot and supplies can deliver "
    "large currents. Follow local electrical codes and licensed practice; these numbers are design "
    "estimates, not a safety approval."
)


def _out_dir(args, design) -> Path:
    return Path(args.out) if args.out else Path("out") / design.name


def _load(args):
    from fields.input.geometry import load

    return load(args.file)


def cmd_check(args) -> int:
    from fields.io.export import write_json, write_png
    from fields.io.summary import design_summary

    design = _load(args)
    lines, data = design_summary(design)
    out = _out_dir(args, design)
    for ln in lines:
        print(ln)
    from fields.io import plots

    fig = plots.design_picture(design)
    png = write_png(out / "design.png", fig)
    js = write_json(out / "design.json", data)
    print(f"wrote {png} and {js}")
    return 0


def cmd_curves(args) -> int:
    from fields.studies.stages import run_curves

    design = _load(args)
    out = _out_dir(args, design)
    s = run_curves(design, out)
    print(f"{design.name}: weight {s['weight_N']:.4g} N ({s['mass_kg'] * 1e3:.4g} g)")
    op = s["at_operating_gap"]
    print(f"at the operating gap {op['gap_m'] * 1e3:.4g} mm: hover current {op['hover_current_A']:.4g} A, "
          f"k_i {op['ki_N_per_A']:.4g} N/A, k_z {op['kz_at_hover_N_per_m']:.4g} N/m (k = -dF/dh; < 0 is unstable)")
    for e in s["equilibria"]:
        print(f"  equilibrium at {e['current_A']:g} A: gap {e['gap_m'] * 1e3:.4g} mm, {e['label']} (k_z {e['kz_N_per_m']:.4g} N/m)")
    for w in s["warnings"]:
        print(f"warning: {w}")
    print(f"force error estimate: {s['max_force_error_N']:.2g} N; wrote " + ", ".join(s["files"]))
    return 0


def cmd_stability(args) -> int:
    from fields.studies.stages import run_stability

    design = _load(args)
    out = _out_dir(args, design)
    s = run_stability(design, out, with_maps=not args.no_maps)
    eq = s["equilibrium"]
    print(f"{design.name}: operating point: {s['operating_point']}")
    print(f"equilibrium gap {eq['gap_m'] * 1e3:.4g} mm over axes {', '.join(eq['free_axes'])}")
    for ln in s["verdict_lines"]:
        print("  " + ln)
    if "allocation" in s:
        print(f"  current-to-force/torque matrix: {s['allocation']['text']}")
    print("wrote " + ", ".join(s["files"]))
    return 0


def cmd_coil(args) -> int:
    from fields.studies.stages import run_coil, run_curves

    design = _load(args)
    out = _out_dir(args, design)
    curves = run_curves(design, out)
    s = run_coil(design, out, curves=curves)
    print(f"{design.name}: coil datasheet (control axis: {s['control_axis']})")
    for d in s["coils"]:
        print(f"  {d['name']}:")
        for label, key, unit, scale in _COIL_ROWS:
            v = d.get(key)
            if v is not None:
                print(f"    {label:<34} {v * scale:>10.4g} {unit}")
        op = d["at_operating_point"]
        print(f"    {'at the operating point, gap ' + format(op['gap_m'] * 1e3, '.3g') + ' mm':<34} {op['current_A']:>10.4g} A, "
              f"{op['power_W']:.3g} W, winding {op['temperature_C']:.3g} C (rise {op['temperature_rise_K']:.3g} K)")
        hr = d.get("drive_headroom")
        if hr:
            print(f"    {'supply needed (R I + L dI/dt)':<34} {hr['voltage_required_V']:>10.4g} V "
                  f"of {hr['supply_voltage_V']:g} V (headroom {hr['headroom_V']:.3g} V)")
            print(f"    {'linear driver dissipation at hover':<34} {hr['linear_driver_dissipation_W']:>10.4g} W")
    for w in s["warnings"]:
        print(f"warning: {w}")
    print(SAFETY)
    print("wrote " + ", ".join(s["files"]))
    return 0


_COIL_ROWS = [
    ("turns", "turns", "", 1.0),
    ("bare wire diameter", "wire_diameter_m", "mm", 1e3),
    ("copper fill factor", "copper_fill_factor", "", 1.0),
    ("mean turn length", "mean_turn_length_m", "mm", 1e3),
    ("wire length", "wire_length_m", "m", 1.0),
    ("copper mass", "copper_mass_kg", "g", 1e3),
    ("resistance at 20 C", "resistance_20C_ohm", "ohm", 1.0),
    ("self-inductance (core included)", "inductance_H", "mH", 1e3),
    ("electrical time constant L/R", "time_constant_20C_s", "ms", 1e3),
    ("current density at nominal", "current_density_nominal_A_per_mm2", "A/mm^2", 1.0),
    ("current density at max", "current_density_max_A_per_mm2", "A/mm^2", 1.0),
    ("cooling surface", "surface_area_m2", "cm^2", 1e4),
]


def cmd_sensors(args) -> int:
    from fields.studies.stages import run_sensors

    design = _load(args)
    out = _out_dir(args, design)
    s = run_sensors(design, out)
    for b in s["_beams"]:
        lo, hi = b.linear_range_m
        print(f"{b.name}: blocked {b.fraction_at_operating:.3g} of the beam at the operating gap, gain "
              f"{b.gain_per_mm:.3g} per mm, linear {lo * 1e3:.3g}..{hi * 1e3:.3g} mm")
    for h in s["_halls"]:
        comp = ", ".join(f"{c.name} {v * 1e3:.3g} mT/A" for c, v in zip(design.coils, h.compensation_T_per_A))
        print(f"{h.name}: sensitivity {h.sensitivity_at_operating_T_per_m * 1e3 / 1e3:.3g} mT/mm at the operating gap; "
              f"coil cross-talk to subtract: {comp}; worst reading {h.worst_case_T * 1e3:.3g} mT "
              f"(range {h.range_T * 1e3:g} mT)")
    if "placement" in s:
        p = s["placement"]["best_position_m"]
        print(f"placement: best candidate at ({p[0] * 1e3:.3g}, {p[1] * 1e3:.3g}, {p[2] * 1e3:.3g}) mm (see placement.csv)")
    for w in s["warnings"]:
        print(f"warning: {w}")
    print("wrote " + ", ".join(s["files"]))
    return 0


def cmd_control(args) -> int:
    from fields.studies.stages import run_control

    design = _load(args)
    out = _out_dir(args, design)
    s = run_control(design, out)
    pl, m, pd = s["_plant"], s["_margins"], s["_pd"]
    print(f"{design.name}: control along {s['axis']} (coil pattern {s['pattern'].tolist()}), sensor: {s['sensor']}")
    print(f"  unstable pole {pl.unstable_pole_rad_per_s:.4g} rad/s (time constant {pl.unstable_time_constant_s * 1e3:.3g} ms), "
          f"electrical pole R/L {pl.electrical_pole_rad_per_s:.4g} rad/s")
    print(f"  sample at >= {s['min_sample_rate_Hz']:.3g} Hz (chosen {1 / s['sample_time_s']:.4g} Hz), loop delay <= "
          f"{s['max_loop_delay_s'] * 1e3:.3g} ms")
    u = s["sensor_unit"]
    print(f"  PD starting design: crossover {pd.crossover_rad_per_s:.4g} rad/s, Kp {pd.kp_A_per_signal:.4g} A/{u}, "
          f"Kd {pd.kd_A_s_per_signal:.4g} A s/{u}, derivative filter {pd.derivative_filter_tau_s * 1e3:.3g} ms; "
          f"analog current loop gain {pd.current_loop_gain_V_per_A:.3g} V/A")
    lo, hi = m.gain_interval
    print(f"  margins: stable for gain x {lo:.3g} .. {hi:.3g}, phase margin {m.phase_margin_deg:.3g} deg, "
          f"Nyquist encirclements {m.encirclements_ccw} (= {m.open_loop_unstable_poles} unstable open-loop poles), "
          f"peak sensitivity {m.peak_sensitivity:.3g}")
    print(f"  proportional only: {s['_prop'].explanation}")
    cb = s["capture"]["band_m"]
    print(f"  capture band at rest: {cb[0] * 1e3:.3g} .. {cb[1] * 1e3:.3g} mm from the equilibrium")
    print("wrote " + ", ".join(s["files"]))
    return 0


def cmd_report(args) -> int:
    from pathlib import Path as _P

    from fields.studies.stages import run_report

    t0 = time.perf_counter()
    design = _load(args)
    out = _out_dir(args, design)
    text = _P(args.file).read_text(encoding="utf-8")
    s = run_report(design, out, progress=not args.quiet, geometry_text=text)
    done = s["_done"]
    print(f"{design.name}: report written to {s['report']} ({time.perf_counter() - t0:.1f} s)")
    if "stability" in done:
        for ln in done["stability"]["verdict_lines"]:
            print("  " + ln)
    for k, msg in s["stages_failed"].items():
        print(f"failed: {k}: {msg}", file=sys.stderr)
    print(SAFETY)
    return 1 if s["stages_failed"] else 0


def cmd_sweep(args) -> int:
    from fields.studies.sweep import sweep_command

    out = Path(args.out) if args.out else None
    if out is None:
        from fields.input.geometry import load as _ld

        out = Path("out") / _ld(args.file).name / "sweep"
    s = sweep_command(args.file, args.sweep, out, workers=args.workers, scheduler_address=args.scheduler,
                      progress=not args.quiet)
    for ln in s["lines"]:
        print(ln)
    return 0


def cmd_figures(args) -> int:
    import tempfile

    from fields.studies.stages import make_figures

    with tempfile.TemporaryDirectory() as tmp:
        files = make_figures(Path(args.out), Path(tmp), progress=not args.quiet)
    print("wrote " + ", ".join(files))
    if not any(f.endswith("report_screenshot.png") for f in files):
        print("note: no report screenshot (Chromium not found; install Debian's 'chromium')")
    return 0


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="hoverfield",
        description="Design calculations for magnetic levitation devices from a geometry file (TOML).",
        epilog=SAFETY,
    )
    p.add_argument("--version", action="version", version=f"hoverfield {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    def add(name: str, func, help_text: str):
        sp = sub.add_parser(name, help=help_text, description=help_text)
        sp.add_argument("file", help="geometry file (TOML)")
        sp.add_argument("-o", "--out", help="output folder (default: out/<design-name>/)")
        sp.set_defaults(func=func)
        return sp

    sp = add("report", cmd_report, "the main job: every analysis, an HTML report and exports for other tools")
    sp.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    add("check", cmd_check, "validate a design, print its summary and draw it to scale")
    add("curves", cmd_curves, "axial force versus gap for a family of currents, hover current, equilibria, payload envelope")
    sp = add("stability", cmd_stability, "equilibrium, 6x6 stiffness, stability verdict, sideways and tilt maps")
    sp.add_argument("--no-maps", action="store_true", help="skip the maps (faster)")
    add("coil", cmd_coil, "coil datasheet: winding, resistance, inductance, heat at the hover current, drive headroom")
    sp = sub.add_parser("sweep", help="vary a design over a grid or sample, rank designs, find the trade-off front",
                        description="vary a design over a grid or sample, rank designs, find the trade-off front; "
                                    "resumable (finished chunks are kept in OUT/sweep_chunks)")
    sp.add_argument("file", help="base geometry file (TOML)")
    sp.add_argument("sweep", help="sweep description file (TOML)")
    sp.add_argument("-o", "--out", help="output folder (default: out/<design-name>/sweep/)")
    sp.add_argument("--workers", type=int, default=None, help="local worker processes (default: all cores)")
    sp.add_argument("--scheduler", default=None, help="address of a Dask scheduler, e.g. tcp://127.0.0.1:8786")
    sp.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    sp.set_defaults(func=cmd_sweep)
    sp = sub.add_parser("figures", help="remake the README's pictures from the example designs",
                        description="remake the README's pictures (figures/) from the example designs")
    sp.add_argument("-o", "--out", default="figures", help="folder for the pictures (default: figures)")
    sp.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    sp.set_defaults(func=cmd_figures)
    add("control", cmd_control, "linear plant, controller starting point, margins, simulations, capture range, on/off study")
    add("sensors", cmd_sensors, "beam-gate and Hall sensor curves, cross-talk, placement table, inverse tables")
    return p


def _terminate(signum, frame):  # pragma: no cover - exercised through a subprocess test
    raise KeyboardInterrupt


def main(argv: list[str] | None = None) -> int:
    import signal

    if argv is None:  # a real process: SIGTERM ends it like Ctrl-C, so atomic writes clean up
        signal.signal(signal.SIGTERM, _terminate)
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return 1
    try:
        rc = args.func(args)
    except HoverfieldError as e:
        print(f"hoverfield: error: {e}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("hoverfield: interrupted; files already written are complete", file=sys.stderr)
        return 130
    return rc


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
