"""Several designs side by side: each design's own evaluation, its axial curves and its control
starting point, written as compare.json / compare.csv / compare_curves.png and one HTML page.

Every number is that design's own: the row of :func:`fields.studies.evaluate.evaluate_design`
(the sweep's and the report's operating-point rule), the curves of the curves stage
(:func:`fields.studies.stages.run_curves`, written per design under ``designs/``) and the
nominal PD starting design of :mod:`fields.studies.tolerance_control`. The page
(:func:`fields.io.compare_page.compare_html`) shows them through ``report.num`` pointing into
compare.json, with the relative difference to the first design.
"""

from __future__ import annotations

import math
import re
import time
from dataclasses import dataclass, field
from pathlib import Path

from fields import __version__
from fields.errors import HoverfieldError, InputError
from fields.input.sweepfile import RESULT_COLUMNS

#: a relative difference to the first design beyond this is marked on the page (5 %, a choice)
DEFAULT_THRESHOLD = 0.05
CONTROL_KEYS = ("unstable_pole_rad_per_s", "electrical_pole_rad_per_s", "min_sample_rate_Hz", "crossover_rad_per_s",
                "phase_margin_deg", "lower_gain_margin_dB", "upper_gain_margin_dB", "inductance_H")


@dataclass(frozen=True)
class CompareResult:
    """What :func:`run_compare` wrote (compare.json holds ``data``)."""

    data: dict = field(repr=False)
    files: dict = field(default_factory=dict)
    seconds: float = 0.0


def relative_difference(value, first) -> float | None:
    """``(value - first) / |first|``; None when either is not finite or the first is zero.

    >>> relative_difference(1.1, 1.0), relative_difference(0.0, 0.0)
    (0.10000000000000009, None)
    """
    if value is None or first is None or isinstance(value, bool) or isinstance(first, bool):
        return None
    v, f = float(value), float(first)
    if not (math.isfinite(v) and math.isfinite(f)) or f == 0.0:
        return None
    return (v - f) / abs(f)


def _control(design, row: dict) -> dict:
    """The vertical loop's numbers with the PD starting design (None values when there is none)."""
    from fields.studies import tolerance_control as tc

    out = dict.fromkeys(CONTROL_KEYS)
    out["note"] = ""
    if not design.coils or row["no_equilibrium"]:
        out["note"] = "no coils" if not design.coils else "no operating point"
        return out
    try:
        drive = tc.drive_model(design)
        plant = tc.plant_of_row(row, drive)
        ctrl = tc.nominal_controller(plant)
        chk = tc.check_row(row, drive, ctrl)
    except HoverfieldError as e:
        out["note"] = str(e).replace("\n", " ")
        return out
    out.update(unstable_pole_rad_per_s=plant.unstable_pole_rad_per_s, electrical_pole_rad_per_s=plant.electrical_pole_rad_per_s,
               min_sample_rate_Hz=plant.min_sample_rate_Hz, crossover_rad_per_s=ctrl.crossover_rad_per_s,
               phase_margin_deg=chk.phase_margin_deg, lower_gain_margin_dB=chk.lower_gain_margin_dB,
               upper_gain_margin_dB=chk.upper_gain_margin_dB, inductance_H=drive.inductance_H)
    out["note"] = ("vertical axis, voltage drive, PD starting design, ideal position sensor"
                   + ("" if chk.stabilised else "; " + chk.reason))
    return out


def verdict(row: dict) -> str:
    """One line on the operating point and the flags of an evaluated row."""
    from fields.input.sweepfile import FLAGS

    if row["no_equilibrium"]:
        head = "no operating point (no passive stable height, no hover within the current limit)"
    elif row["at_target_gap"]:
        n = int(row["axes_needing_control"]) if math.isfinite(row["axes_needing_control"]) else None
        head = (f"hovers at the operating gap on {row['operating_current_A']:.4g} A; "
                + (f"{n} axis(es) need control" if n else "passively stable"))
    else:
        head = f"passive stable height at {row['operating_gap_m'] * 1e3:.4g} mm gap"
    flags = [f for f in FLAGS if f != "no_equilibrium" and row[f]]
    return head + ("; flags: " + ", ".join(flags) if flags else "")


def _slug(i: int, name: str) -> str:
    return f"{i + 1}_" + (re.sub(r"[^0-9A-Za-z._-]+", "-", name).strip("-") or "design")


def run_compare(paths, out_dir, threshold: float = DEFAULT_THRESHOLD) -> CompareResult:
    """Evaluate each geometry file and write the comparison into ``out_dir``.

    Files: ``designs/<n>_<name>/`` (each design's curves stage files), compare.json, compare.csv
    (one row per design: the evaluation row with units in the column names, then the control
    numbers), compare_curves.png and compare.html.
    """
    from fields.input.geometry import load
    from fields.io import plots_tolerance
    from fields.io.compare_page import compare_html
    from fields.io.export import header_lines, write_atomic, write_csv, write_json, write_png
    from fields.studies.evaluate import evaluate_design
    from fields.studies.stages import run_curves

    t0 = time.perf_counter()
    paths = [str(p) for p in paths]
    if len(paths) < 2:
        raise InputError(f"run_compare: the files must be two or more geometry files; got {len(paths)}.")
    if not 0 < threshold < 10:
        raise InputError(f"run_compare: threshold must be a relative difference between 0 and 10; got {threshold!r}.")
    out = Path(out_dir)
    designs, curves, entries = [], [], []
    for i, p in enumerate(paths):
        d = load(p)
        row = evaluate_design(d)
        sub = out / "designs" / _slug(i, d.name)
        cr = run_curves(d, sub)
        designs.append(d)
        curves.append(cr.curves)
        entries.append({"file": p, "name": d.name, "description": d.description, "invented": d.invented,
                        "folder": f"designs/{sub.name}", "row": row, "control": _control(d, row), "verdict": verdict(row)})
    first = entries[0]
    for e in entries:
        e["relative_to_first"] = {k: relative_difference(e[part][k], first[part][k])
                                  for part, keys in (("row", RESULT_COLUMNS), ("control", CONTROL_KEYS)) for k in keys}
    data = {"tool": f"hoverfield {__version__}", "threshold": threshold,
            "columns": {c: {"unit": u, "meaning": m} for c, (u, m) in RESULT_COLUMNS.items()}, "designs": entries}
    files = {}
    fig = plots_tolerance.force_curves_overlay(curves, [e["name"] for e in entries], title="axial curves of the compared designs")
    files["compare_curves.png"] = str(write_png(out / "compare_curves.png", fig))
    plots_tolerance.close(fig)
    cols = ["file", "name"] + list(RESULT_COLUMNS) + [f"control_{k}" for k in CONTROL_KEYS]
    rows = [[e["file"], e["name"]] + [e["row"][c] for c in RESULT_COLUMNS]
            + [math.nan if e["control"][k] is None else e["control"][k] for k in CONTROL_KEYS] for e in entries]
    files["compare.csv"] = str(write_csv(out / "compare.csv", cols, rows, header_lines(
        ", ".join(e["name"] for e in entries), "design comparison: one row per design, evaluate_design's row "
        "(units in the column names) and the vertical loop with the PD starting design")))
    files["compare.json"] = str(out / "compare.json")
    files["compare.html"] = str(out / "compare.html")
    data["files"] = dict(files)
    write_json(out / "compare.json", data)
    write_atomic(out / "compare.html", compare_html(data, out))
    return CompareResult(data, files, time.perf_counter() - t0)
