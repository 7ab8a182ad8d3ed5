"""``hoverfield report``: the main job, every analysis, an HTML report and exports."""

from __future__ import annotations

import sys
import time
from pathlib import Path

from fields.cli.common import add_file_command, load_design, out_dir

HELP = "the main job: every analysis, an HTML report and exports for other tools"


def run(args) -> int:
    from fields.io.wording import safety_text
    from fields.studies.stages.report import run_report

    t0 = time.perf_counter()
    design = load_design(args)
    text = Path(args.file).read_text(encoding="utf-8")
    s = run_report(design, out_dir(args, design), progress=not args.quiet, geometry_text=text)
    for ln in getattr(s.done.get("coil"), "heat_alerts", ()):  # the verdict says a too hot coil first
        print(ln)
    print(f"{design.name}: report written to {s.report} ({time.perf_counter() - t0:.1f} s)")
    if "stability" in s.done:
        for ln in s.done["stability"].verdict_lines:
            print("  " + ln)
    for k, msg in s.stages_failed.items():
        print(f"failed: {k}: {msg}", file=sys.stderr)
    print(safety_text())
    return 1 if s.stages_failed else 0


def register(sub) -> None:
    sp = add_file_command(sub, "report", run, HELP)
    sp.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
