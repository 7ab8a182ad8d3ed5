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
