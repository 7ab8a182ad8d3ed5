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

from . import __version__
from .errors import HoverfieldError

SAFETY = (
    "Safety: strong magnets pinch fingers and shatter when they snap together, and fly towards iron; "
    "keep them away from pacemakers and implants, cards and media. Coils get hot and supplies can deliver "
    "large currents. Follow local electrical codes and licensed practice; these numbers are design "
    "estimates, not a safety approval."
)


def _out_dir(args, design) -> Path:
    return Path(args.out) if args.out else Path("out") / design.name


def _load(args):
    from .geometry import load

    return load(args.file)


def cmd_check(args) -> int:
    from .export import write_json, write_png
    from .summary import design_summary

    design = _load(args)
    lines, data = design_summary(design)
    out = _out_dir(args, design)
    for ln in lines:
        print(ln)
    from . import plots

    fig = plots.design_picture(design)
    png = write_png(out / "design.png", fig)
    js = write_json(out / "design.json", data)
    print(f"wrote {png} and {js}")
    return 0


def cmd_curves(args) -> int:
    from .runs import run_curves

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
    from .runs import run_stability

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

    add("check", cmd_check, "validate a design, print its summary and draw it to scale")
    add("curves", cmd_curves, "axial force versus gap for a family of currents, hover current, equilibria, payload envelope")
    sp = add("stability", cmd_stability, "equilibrium, 6x6 stiffness, stability verdict, sideways and tilt maps")
    sp.add_argument("--no-maps", action="store_true", help="skip the maps (faster)")
    return p


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return 1
    t0 = time.perf_counter()
    try:
        rc = args.func(args)
    except HoverfieldError as e:
        print(f"hoverfield: error: {e}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("hoverfield: interrupted; files already written are complete", file=sys.stderr)
        return 130
    if getattr(args, "verbose", False):
        print(f"done in {time.perf_counter() - t0:.2f} s")
    return rc


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
