"""The comparison page (compare.html): several designs side by side, built from compare.json.

Every number is shown through :func:`fields.io.report.num` with ``data-src="compare.json"`` and
the key path of the value inside it, the report's convention; a cell whose relative difference to
the first design is beyond the threshold is marked (class ``diff``). Pure text building.
"""

from __future__ import annotations

from pathlib import Path

from fields.io.report import esc, img, num, page, shown_path, table
from fields.io.report_builder import safety_html

SRC = "compare.json"
CSS_EXTRA = "<style>td.diff{background:#fff1d6;font-weight:600} small.rel{color:#56606c}</style>"

#: (section title, [(part, key, label, unit, scale)]) of the number tables
SECTIONS = (
    ("Operating point", [
        ("row", "mass_kg", "floater mass", "g", 1e3), ("row", "target_gap_m", "operating gap (study)", "mm", 1e3),
        ("row", "operating_gap_m", "gap of the operating point", "mm", 1e3),
        ("row", "hover_current_A", "hover current", "A", 1.0), ("row", "operating_current_A", "operating current", "A", 1.0),
        ("row", "ki_N_per_A", "force per ampere k_i", "N/A", 1.0), ("row", "max_payload_kg", "largest payload", "g", 1e3),
        ("row", "payload_margin_kg", "payload margin", "g", 1e3)]),
    ("Stiffness and stability", [
        ("row", "kz_N_per_m", "vertical stiffness k_z", "N/m", 1.0), ("row", "k_lateral_N_per_m", "lateral stiffness", "N/m", 1.0),
        ("row", "k_tilt_Nm_per_rad", "tilt stiffness", "N m/rad", 1.0),
        ("row", "unstable_pole_1_per_s", "unstable pole", "1/s", 1.0),
        ("row", "fastest_growth_1_per_s", "fastest growth rate", "1/s", 1.0),
        ("row", "axes_needing_control", "axes needing control", "", 1.0)]),
    ("Coil heat", [
        ("row", "coil_resistance_20C_ohm", "coil resistance at 20 C", "ohm", 1.0), ("row", "coil_power_W", "coil power", "W", 1.0),
        ("row", "coil_temperature_C", "coil temperature", "degC", 1.0),
        ("row", "coil_temperature_rise_K", "temperature rise", "K", 1.0), ("row", "coil_voltage_V", "coil voltage", "V", 1.0),
        ("row", "voltage_headroom_V", "supply headroom", "V", 1.0)]),
    ("Control (vertical loop, PD starting design)", [
        ("control", "unstable_pole_rad_per_s", "unstable pole", "rad/s", 1.0),
        ("control", "electrical_pole_rad_per_s", "electrical pole R/L", "rad/s", 1.0),
        ("control", "inductance_H", "drive inductance", "mH", 1e3),
        ("control", "crossover_rad_per_s", "crossover", "rad/s", 1.0),
        ("control", "min_sample_rate_Hz", "minimum sample rate", "Hz", 1.0),
        ("control", "phase_margin_deg", "phase margin", "deg", 1.0),
        ("control", "lower_gain_margin_dB", "lower gain margin", "dB", 1.0),
        ("control", "upper_gain_margin_dB", "upper gain margin", "dB", 1.0)]),
)


def _cell(data: dict, i: int, part: str, key: str, unit: str, scale: float) -> str:
    e = data["designs"][i]
    shown = num(e[part][key], SRC, f"designs[{i}].{part}.{key}", unit, scale=scale)
    if i == 0:
        return shown
    rel = e["relative_to_first"].get(key)
    if rel is None:
        return shown
    mark = abs(rel) > data["threshold"]
    text = f'{shown} <small class="rel">({num(rel, SRC, f"designs[{i}].relative_to_first.{key}", "%", scale=100.0, digits=3)})</small>'
    return ('<span class="mark"></span>' if mark else "") + text


def _table(data: dict, rows) -> str:
    n = len(data["designs"])
    html = table(["quantity"] + [d["name"] for d in data["designs"]],
                 [[esc(label)] + [_cell(data, i, part, key, unit, scale) for i in range(n)]
                  for part, key, label, unit, scale in rows])
    # a cell that holds the marker gets the highlight class
    return html.replace('<td class=""><span class="mark"></span>', '<td class="diff">')


def compare_html(data: dict, out: Path) -> str:
    """The page: designs, verdicts, the number tables, the overlaid axial curves, the safety box."""
    designs = data["designs"]
    names = ", ".join(d["name"] for d in designs)
    intro = (f"<h1>Design comparison: {esc(names)}</h1>"
             f"<p class=\"meta\">{esc(data['tool'])}; differences to the first design beyond "
             f"{num(data['threshold'], SRC, 'threshold', '%', scale=100.0, digits=3)} are highlighted</p>")
    if any(d["invented"] for d in designs):
        intro += "<div class=\"warn\">INVENTED EXAMPLE: at least one design is an invented scenario, not a measured device.</div>"
    files = table(["design", "file", "description", "curves stage files"],
                  [[esc(d["name"]), f"<code>{esc(shown_path(d['file']))}</code>", esc(d["description"]),
                    f"<code>{esc(d['folder'])}/</code>"] for d in designs])
    verdicts = "<h2>Verdicts</h2><ul>" + "".join(
        f"<li><b>{esc(d['name'])}</b>: {esc(d['verdict'])}"
        + (f" <small>({esc(d['control']['note'])})</small>" if d["control"]["note"] else "") + "</li>" for d in designs) + "</ul>"
    sections = [intro + CSS_EXTRA, "<h2>Designs</h2>" + files, verdicts]
    for title, rows in SECTIONS:
        sections.append(f"<h2>{esc(title)}</h2>" + _table(data, rows))
    sections.append("<h2>Axial force curves</h2>" + img(Path(out) / "compare_curves.png", "axial curves of the designs"))
    sections.append("<h2>Safety</h2>" + safety_html())
    return page(f"hoverfield comparison: {names}", sections)
