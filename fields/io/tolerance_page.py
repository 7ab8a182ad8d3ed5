"""The tolerance study's page (tolerance.html), built from tolerance.json.

How often the nominal controller still holds the built device (linearised loop and nonlinear
releases), the spread of the headline outputs against the nominal design and what drives it.
Every number carries ``data-src="tolerance.json"`` and its key path (the report's convention).
Pure text building.
"""

from __future__ import annotations

from pathlib import Path

from fields.io.report import esc, img, num, page, shown_path, table
from fields.io.report_builder import safety_html

SRC = "tolerance.json"
#: headline outputs shown in the spread table: key, label, unit shown, scale from SI
ROWS = (("hover_current_A", "hover current", "A", 1.0), ("kz_N_per_m", "vertical stiffness k_z", "N/m", 1.0),
        ("ki_N_per_A", "force per ampere k_i", "N/A", 1.0), ("coil_temperature_C", "coil temperature", "C", 1.0),
        ("coil_power_W", "coil power", "W", 1.0), ("operating_gap_m", "operating gap", "mm", 1e3),
        ("unstable_pole_1_per_s", "unstable pole", "1/s", 1.0), ("payload_margin_kg", "payload margin", "g", 1e3))


def _holds(s: dict) -> list[str]:
    ctl = s["control"]
    if not ctl.get("checked"):
        return [f"<h2>Does the nominal controller hold?</h2><p>Not checked: {esc(ctl.get('reason', ''))}.</p>"]
    n = s["samples"]
    rows = [["linearised vertical loop stable (PD designed on the nominal plant)",
             num(ctl["stabilised_count"], SRC, "control.stabilised_count", f"of {n}", digits=6)
             + " (" + num(ctl["stabilised_share"], SRC, "control.stabilised_share", "%", scale=100.0, digits=4) + ")"]]
    cap = ctl.get("nonlinear_capture") or {}
    if cap.get("computed"):
        starts = " and ".join(f"{a * 1e3:+g} mm" for a in cap["starts_m"])
        rows.append([f"nonlinear releases at {esc(starts)} captured",
                     num(cap["captured_count"], SRC, "control.nonlinear_capture.captured_count", f"of {n}", digits=6)
                     + " (" + num(cap["captured_share"], SRC, "control.nonlinear_capture.captured_share", "%",
                                  scale=100.0, digits=4) + ")"])
    pm = ctl.get("phase_margin_deg") or {}
    if pm.get("mean") is not None:
        rows.append(["phase margin: mean, 5 % percentile",
                     num(pm["mean"], SRC, "control.phase_margin_deg.mean", "deg", digits=3) + ", "
                     + num(pm["p5"], SRC, "control.phase_margin_deg.p5", "deg", digits=3)])
    notes = list(ctl.get("approximations", []))
    if cap.get("computed"):
        notes += [cap["rule"], cap["model"]]
    return ["<h2>Does the nominal controller hold?</h2>" + table(["check", "samples"], rows)
            + "<ul>" + "".join(f"<li>{esc(x)}</li>" for x in notes) + "</ul>"]


def _spread(s: dict) -> list[str]:
    rows = []
    for key, label, unit, sc in ROWS:
        o = s["outputs"].get(key)
        if not o or o.get("mean") is None:
            continue
        cells = [num(o[k], SRC, f"outputs.{key}.{k}", unit, scale=sc) for k in ("nominal", "mean", "std", "p5", "p95")]
        rows.append([esc(label)] + cells)
    out = ["<h2>Spread of the outputs</h2>" + table(["output", "nominal", "mean", "std", "5 %", "95 %"], rows)]
    sens = s["sensitivity"]["outputs"]
    srows = [[esc(k), esc(v["method"]), esc(", ".join(v["ranking"][:3]) or "none")] for k, v in sens.items()]
    out.append("<h2>What matters most</h2>" + table(["output", "measure", "largest influences"], srows)
               + f"<p>{esc(s['sensitivity']['method'])}.</p>")
    return out


def tolerance_html(summary: dict, out: Path) -> str:
    """The whole page for a run whose files are in ``out``."""
    s = summary
    head = [f"<h1>{esc(s['design'])}: tolerance study</h1>",
            f"<p class=\"meta\">{esc(s['tool'])} &middot; input <code>{esc(shown_path(s['file']))}</code> &middot; "
            f"{s['samples']} samples ({esc(s['method'])}, seed {s['seed']}), {s['failed']} failed"
            + (" &middot; <b>invented example</b>" if s.get("invented") else "") + "</p>"]
    inputs = "".join(f"<li><code>{esc(q['column'])}</code>: nominal {q['nominal']:.6g}, band +-{q['half_width']:.3g}"
                     + (f" ({esc(q['source'])})" if q.get("source") else "") + "</li>" for q in s["inputs"]) or "<li>none</li>"
    body = (head + _holds(s) + _spread(s)
            + ["<h2>Histograms</h2>" + img(Path(out) / "tolerance.png", "output histograms")]
            + [f"<h2>Varied inputs</h2><ul>{inputs}</ul><p>{esc(s['remanence_temperature'])}.</p>"]
            + [safety_html()])
    return page(f"{s['design']}: tolerance study", body)
