"""The README's pictures: the report on both examples, selected figures collected, and a
screenshot of the suspension report (needs Chromium; skipped when absent)."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

ROOT = Path(__file__).resolve().parents[3]

#: example file -> (figure written by the report, name in the README's folder)
PICKS = {
    "suspension.toml": [("design.png", "suspension_design.png"), ("curves.png", "suspension_curves.png"),
                        ("maps.png", "suspension_maps.png"), ("control_step.png", "suspension_control_step.png"),
                        ("capture.png", "suspension_capture.png")],
    "repulsive_base.toml": [("design.png", "repulsive_design.png"), ("maps.png", "repulsive_maps.png"),
                            ("curves.png", "repulsive_curves.png")],
}


def _collect(out_dir: Path, work_dir: Path, progress: bool) -> list[str]:
    from fields.input.geometry import load
    from fields.io.export import write_atomic
    from fields.studies.stages.report import run_report

    written = []
    for name, files in PICKS.items():
        path = ROOT / "geometries" / name
        d = load(path)
        o = work_dir / d.name
        run_report(d, o, progress=progress, geometry_text=path.read_text(encoding="utf-8"))
        for src, dst in files:
            if (o / src).is_file():
                written.append(str(write_atomic(out_dir / dst, (o / src).read_bytes())))
    return written


def _screenshot(out_dir: Path, work_dir: Path) -> list[str]:
    from fields.io.export import write_atomic

    browser = shutil.which("chromium") or shutil.which("chromium-browser")
    if not browser:
        return []
    shot = work_dir / "report_screenshot.png"
    report = work_dir / "suspension-demo" / "report.html"
    subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                    "--disable-background-networking", "--disable-component-update", "--disable-sync",
                    f"--user-data-dir={work_dir / 'browser-profile'}", "--hide-scrollbars",
                    "--window-size=1100,1500", f"--screenshot={shot}", report.as_uri()],
                   capture_output=True, timeout=120, check=False)
    if not shot.is_file():
        return []
    return [str(write_atomic(out_dir / "report_screenshot.png", shot.read_bytes()))]


def make_figures(out_dir: Path, work_dir: Path, progress: bool = False) -> list[str]:
    """Run the report on both examples and collect the README's pictures into ``out_dir``:
    the suspension example's drawing, curve family, maps and control pictures, the repulsive
    base's maps, and a screenshot of the suspension report (needs Chromium; skipped when
    absent). Returns the files written."""
    out_dir, work_dir = Path(out_dir), Path(work_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    return _collect(out_dir, work_dir, progress) + _screenshot(out_dir, work_dir)
