"""What every command shares: the file and output-folder arguments, loading the design."""

from __future__ import annotations

from pathlib import Path


def add_file_command(sub, name: str, func, help_text: str):
    """A subcommand taking a geometry file and ``-o/--out``."""
    sp = sub.add_parser(name, help=help_text, description=help_text)
    sp.add_argument("file", help="geometry file (TOML)")
    sp.add_argument("-o", "--out", help="output folder (default: out/<design-name>/)")
    sp.set_defaults(func=func)
    return sp


def out_dir(args, design) -> Path:
    """The output folder: ``-o`` or ``out/<design-name>/``."""
    return Path(args.out) if args.out else Path("out") / design.name


def load_design(args):
    from fields.input.geometry import load

    return load(args.file)


def print_warnings(warnings) -> None:
    for w in warnings:
        print(f"warning: {w}")


def print_files(files) -> None:
    print("wrote " + ", ".join(files))


def parse_option(args, option: str, text: str, kind: str) -> float:
    """A command-line quantity (``"12 mm"``) in SI; a bad one is a one-line error naming the option."""
    from fields.errors import GeometryError, HoverfieldError
    from fields.input.units import parse

    try:
        return parse(text, kind)
    except HoverfieldError as e:
        raise GeometryError("command line", option, f"a {kind} with a unit (e.g. '12 mm' or '0.5 A')", text) from e
