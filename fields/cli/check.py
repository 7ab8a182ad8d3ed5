"""``hoverfield check``: validate a design, print its summary, draw it to scale."""

from __future__ import annotations

from fields.cli.common import add_file_command, load_design, out_dir

HELP = "validate a design, print its summary and draw it to scale"


def run(args) -> int:
    from fields.studies.stages.report import run_check

    design = load_design(args)
    out = out_dir(args, design)
    r = run_check(design, out)
    for ln in r.lines:
        print(ln)
    print(f"wrote {out / 'design.png'} and {out / 'design.json'}")
    return 0


def register(sub) -> None:
    add_file_command(sub, "check", run, HELP)
