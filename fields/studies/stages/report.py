"""The whole job: every stage in turn, then the HTML report and run_status.json.

A stage that fails is recorded (and later stages that need it are skipped); the report says what
failed and keeps everything that finished.
"""

from __future__ import annotations

import traceback
from dataclasses import dataclass
from pathlib import Path

from fields.errors import HoverfieldError
from fields.model.design import Design
from fields.studies.result_fields import internal
from fields.studies.stages.common import close_figure

STAGES = ("check", "curves", "stability", "coil", "sensors", "control", "exports")


@dataclass(frozen=True)
class CheckResult:
    """The design summary (design.json is ``data``) and its printable lines."""

    lines: tuple[str, ...]
    data: dict = internal()


@dataclass(frozen=True)
class ReportRun:
    """What :func:`run_report` did (run_status.json is this, serialised); ``done`` holds each
    finished stage's result by stage name."""

    stages_done: tuple[str, ...]
    stages_failed: dict
    report: str
    done: dict = internal()


def run_check(design: Design, out: Path) -> CheckResult:
    """Design summary (design.json) and the drawing to scale (design.png)."""
    from fields.io import plots
    from fields.io.export import write_json, write_png
    from fields.io.summary import design_summary

    out = Path(out)
    lines, data = design_summary(design)
    fig = plots.design_picture(design)
    write_png(out / "design.png", fig)
    close_figure(fig)
    write_json(out / "design.json", data)
    return CheckResult(tuple(lines), data)


class _Runner:
    """Runs stages in order, keeping each result or the reason it failed."""

    def __init__(self, bar) -> None:
        self.done: dict[str, object] = {}
        self.failed: dict[str, str] = {}
        self.bar = bar

    def stage(self, name: str, func, needs: tuple[str, ...] = ()) -> None:
        self.bar.set_postfix_str(name)
        missing = [n for n in needs if n not in self.done]
        if missing:
            self.failed[name] = f"skipped: needs {', '.join(missing)}, which failed"
        else:
            try:
                self.done[name] = func()
            except HoverfieldError as e:
                self.failed[name] = str(e)
            except Exception as e:  # noqa: BLE001 - a report keeps what it finished and says what failed
                self.failed[name] = (f"internal error {type(e).__name__}: {e} "
                                     f"({traceback.format_exc(limit=2).splitlines()[-1]})")
        self.bar.update(1)


def _run_stages(design: Design, out: Path, progress: bool) -> _Runner:
    from tqdm import tqdm

    from fields.physics.parallel import background
    from fields.studies.stages.coil import run_coil
    from fields.studies.stages.control import run_control
    from fields.studies.stages.curves import run_curves
    from fields.studies.stages.exports import run_exports
    from fields.studies.stages.sensors import run_sensors
    from fields.studies.stages.stability import run_stability

    bar = tqdm(total=len(STAGES), desc=design.name, unit="stage", disable=not progress, leave=False)
    r = _Runner(bar)
    d = r.done
    r.stage("check", lambda: run_check(design, out))
    r.stage("curves", lambda: run_curves(design, out))
    r.stage("stability", lambda: run_stability(design, out, curves=d["curves"].curves), needs=("curves",))
    # the sensor stage needs no other stage: it runs in a second process (forked now, so that it
    # inherits the iron matrices built so far) while coil and control run here
    sensors = background(lambda: run_sensors(design, out))
    r.stage("coil", lambda: run_coil(design, out, curves=d["curves"], stability=d["stability"]), needs=("curves", "stability"))
    r.stage("control", lambda: run_control(design, out, stability=d["stability"], coil=d.get("coil")), needs=("stability",))
    r.stage("sensors", sensors.get)
    r.stage("exports", lambda: run_exports(design, out, d["curves"], d.get("control")), needs=("curves",))
    bar.close()
    return r


def run_report(design: Design, out: Path, progress: bool = True, geometry_text: str | None = None) -> ReportRun:
    """Run every analysis, write every file, then the HTML report (report.html) and run_status.json."""
    import json

    from fields.io.export import write_atomic, write_json
    from fields.io.report_builder import build_report

    out = Path(out)
    r = _run_stages(design, out, progress)

    def load(name):
        p = out / name
        return json.loads(p.read_text(encoding="utf-8")) if p.is_file() else None

    check = r.done.get("check")
    write_atomic(out / "report.html", build_report(design, out, r.failed, load, geometry_text,
                                                   check.lines if check is not None else None))
    run = ReportRun(stages_done=tuple(s for s in STAGES if s in r.done), stages_failed=dict(r.failed),
                    report=str(out / "report.html"), done=dict(r.done))
    write_json(out / "run_status.json", run)
    return run
