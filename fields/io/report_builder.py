"""Assemble the HTML report from the JSON files a run wrote (see :mod:`fields.io.report`)."""

from __future__ import annotations

from pathlib import Path

from fields import __version__
from fields.input.csvtable import read_csv_meta
from fields.io.report import esc, img, num, page, shown_path, table, with_contents
from fields.io.wording import COIL_SHEET_ROWS, SAFETY_POINTS, file_description

#: the JSON files the report reads, by the names the sections use
_FILES = ("stability.json", "curves.json", "coil.json", "sensors.json", "control.json")


def safety_html() -> str:
    """The safety points (:data:`fields.io.wording.SAFETY_POINTS`) as a report box."""
    items = "".join(f"<li><b>{esc(lead)}</b> {esc(text)}</li>" if lead else f"<li>{esc(text)}</li>"
                    for lead, text in SAFETY_POINTS)
    return f'<div class="safety"><h3>Safety</h3><ul>{items}</ul></div>'


def _mode_class(m: dict) -> str:
    return "stable" if m.get("stable") else "unstable"


def _verdict(J: dict, failed: dict) -> list[str]:
    """The verdict first, then what failed, the warnings and the safety points."""
    stab, ctrl = J["stability.json"], J["control.json"]
    S: list[str] = []
    v = ['<div class="verdict"><h2 style="margin-top:0;border:0">Verdict</h2>'] + _heat_verdict(J["coil.json"])
    if stab:
        v.append(f"<p>Operating point: {esc(stab['operating_point'])}.</p><ul>")
        for i, m in enumerate(stab["modes"]):
            v.append(f'<li class="{_mode_class(m)}" id="mode-{i}">{esc(m["text"])}</li>')
        v.append("</ul>")
        v.append(f"<p><b>Axes needing active control: {num(stab['unstable_count'], 'stability.json', 'unstable_count', digits=3)}</b>"
                 f" of {len(stab['equilibrium']['free_axes'])} free axes.</p>")
    else:
        v.append("<p>No stability verdict: the stability stage did not complete (see below).</p>")
    v.append("</div>")
    S.append("".join(v))
    if failed:
        S.append('<div class="fail"><h3>What failed</h3><ul>' + "".join(
            f"<li><b>{esc(k)}</b>: {esc(msg)}</li>" for k, msg in failed.items()) + "</ul>"
                 "<p>Everything else in this report and its files was completed.</p></div>")
    warnings = []
    for src in (J["curves.json"], J["coil.json"], J["sensors.json"]):
        if src:
            warnings += src.get("warnings", [])
    if stab:
        warnings += stab.get("notes", [])
    from fields.io.report_control import warnings as control_warnings

    warnings += control_warnings(ctrl)
    if warnings:
        S.append('<div class="warn"><h3>Warnings</h3><ul>' + "".join(f"<li>{esc(w)}</li>" for w in dict.fromkeys(warnings))
                 + "</ul></div>")
    S.append(safety_html())
    return S


def _heat_verdict(coil: dict | None) -> list[str]:
    """First in the verdict: every coil whose operating point runs over its insulation class or
    into thermal runaway (coil.json)."""
    out = []
    for i, c in enumerate((coil or {}).get("coils", [])):
        op = c.get("at_operating_point") or {}
        if not op.get("over_insulation_class"):
            continue
        p = f"coils[{i}].at_operating_point"
        where = (f"at the operating gap {num(op['gap_m'], 'coil.json', p + '.gap_m', 'mm', digits=3, scale=1e3)} "
                 f"({num(op['current_A'], 'coil.json', p + '.current_A', 'A', digits=3)})")
        what = ("runs into thermal runaway (no steady temperature)" if op.get("runaway") else
                f"runs at {num(op['temperature_C'], 'coil.json', p + '.temperature_C', 'C', digits=3)}, over its "
                f"insulation class {num(op['insulation_class_C'], 'coil.json', p + '.insulation_class_C', 'C', digits=3)}")
        out.append(f'<p class="unstable"><b>Heat: coil {esc(c["name"])} {what} {where}: it will not survive continuous '
                   "operation there.</b></p>")
    return out


def _key_numbers(J: dict, out: Path) -> list[str]:
    """The key numbers table and the drawing."""
    stab, curves, coil, ctrl = (J[k] for k in ("stability.json", "curves.json", "coil.json", "control.json"))
    rows = []
    if curves:
        rows.append(["floater mass", num(curves["mass_kg"], "curves.json", "mass_kg", "g", scale=1e3)])
        across = curves.get("gravity_across_axis", False)
        rows.append(["floater weight", num(curves["weight_N"], "curves.json", "weight_N", "N")])
        if across:
            rows.append(["axial load (weight along the gap direction)", "0 N (gravity acts across the gap direction)"])
        op = curves["at_operating_gap"]
        rows.append(["operating gap", num(op["gap_m"], "curves.json", "at_operating_gap.gap_m", "mm", scale=1e3)])
        if curves.get("max_current_A", 0.0) > 0:
            rows.append(["hover current at the operating gap", num(op["hover_current_A"], "curves.json", "at_operating_gap.hover_current_A", "A")])
            rows.append(["force per ampere k_i there", num(op["ki_N_per_A"], "curves.json", "at_operating_gap.ki_N_per_A", "N/A")])
        else:
            rows.append(["hover current, force per ampere", "none: the design has no coils"])
        rows.append(["axial stiffness k_z there (k = -dF/dz)", num(op["kz_at_hover_N_per_m"], "curves.json", "at_operating_gap.kz_at_hover_N_per_m", "N/m")])
    if stab:
        rows.append(["equilibrium gap (six-axis)", num(stab["equilibrium"]["gap_m"], "stability.json", "equilibrium.gap_m", "mm", scale=1e3)])
    from fields.io.report_control import key_rows

    rows += key_rows(ctrl)
    if coil:
        for i, c in enumerate(coil["coils"]):
            op = c["at_operating_point"]
            rows.append([f"{esc(c['name'])}: power at the operating point",
                         num(op["power_W"], "coil.json", f"coils[{i}].at_operating_point.power_W", "W")])
            rows.append([f"{esc(c['name'])}: winding temperature there",
                         num(op["temperature_C"], "coil.json", f"coils[{i}].at_operating_point.temperature_C", "C", digits=3)])
            if "drive_headroom" in c:
                rows.append([f"{esc(c['name'])}: supply needed (R I + L dI/dt)",
                             num(c["drive_headroom"]["voltage_required_V"], "coil.json", f"coils[{i}].drive_headroom.voltage_required_V", "V")])
    return ["<h2>Key numbers</h2>" + table(["quantity", "value"], rows),
            "<h2>The design</h2>" + img(out / "design.png", "design drawn to scale")]


def _curves(curves: dict, out: Path) -> list[str]:
    """Axial force versus gap (curves.json)."""
    S = ["<h2>Axial force versus gap</h2>" + img(out / "curves.png", "force versus gap")]
    eq_rows = [[num(e["current_A"], "curves.json", f"equilibria[{i}].current_A", "A"),
                num(e["gap_m"], "curves.json", f"equilibria[{i}].gap_m", "mm", scale=1e3),
                num(e["kz_N_per_m"], "curves.json", f"equilibria[{i}].kz_N_per_m", "N/m"), esc(e["label"])]
               for i, e in enumerate(curves["equilibria"])]
    if eq_rows:
        what = "axial force = 0" if curves.get("gravity_across_axis", False) else "force = weight"
        S.append(f"<h3>Equilibria ({what})</h3>" + table(["current", "gap", "k_z", "kind"], eq_rows, left_cols=0))
    S.append('<p>Data: <code>curves.csv</code>, <code>kz_table.csv</code>, <code>curves.json</code>. The payload '
             'envelope (heaviest and lightest floater that can hover within the current limit) is in '
             '<code>curves.csv</code> (max_payload_kg, min_payload_kg).</p>')
    return S


def _stability(stab: dict, out: Path) -> list[str]:
    """Stiffness matrix, Earnshaw check, maps (stability.json)."""
    S = ["<h2>Stability at the operating point</h2>"]
    axes = ["x", "y", "z", "rx", "ry", "rz"]
    K = stab["stiffness_matrix"]
    E = stab["stiffness_error"]
    krows = [[esc(a)] + [_stiffness_cell(K, E, i, j) for j in range(6)] for i, a in enumerate(axes)]
    S.append("<p>Stiffness matrix K = -d(F, T)/d(x, y, z, rx, ry, rz) about the centre of mass "
             "(N/m, N/rad, N m/m, N m/rad by block; every error bar carries its unit), with the error bar "
             "of each entry (finite-difference plus quadrature share). "
             f"{esc(stab['step_rule'])}.</p>" + table(["row"] + axes, krows))
    S.append(f"<p>Earnshaw check: trace of the translational block "
             f"{num(stab['earnshaw_trace_N_per_m'], 'stability.json', 'earnshaw_trace_N_per_m', 'N/m')} "
             f"({num(stab['earnshaw_residual'], 'stability.json', 'earnshaw_residual', digits=2)} (a fraction) of the largest diagonal entry); "
             f"{esc(stab['earnshaw_note'])}.</p>")
    if "allocation" in stab:
        S.append(f"<p>Coils to force/torque: {esc(stab['allocation']['text'])} (<code>allocation.csv</code>).</p>")
    S.append(img(out / "maps.png", "sideways and tilt maps") + img(out / "stiffness_vs_gap.png", "stiffness versus gap"))
    return S


def _stiffness_cell(K, E, i: int, j: int) -> str:
    """One stiffness entry with its error bar; round-off of an exact zero (within its error bar or
    1e-12 of its block's largest entry, :mod:`fields.io.numbers`) is shown as 0, without a bar."""
    from fields.io.numbers import zero_bound

    rows, cols = (range(3), range(3, 6))[i >= 3], (range(3), range(3, 6))[j >= 3]
    bound = zero_bound(E[i][j], max(abs(K[a][b]) for a in rows for b in cols))
    cell = num(K[i][j], "stability.json", f"stiffness_matrix[{i}][{j}]", digits=4, zero_below=bound)
    if abs(K[i][j]) <= bound:
        return cell + f" {stiffness_unit(i, j)}"
    return cell + f' <small>&plusmn;{num(E[i][j], "stability.json", f"stiffness_error[{i}][{j}]", stiffness_unit(i, j), digits=1)}</small>'


def _coil(coil: dict, out: Path) -> list[str]:
    """Coil datasheet (coil.json)."""
    hdr = ["quantity"] + [esc(c["name"]) for c in coil["coils"]]
    crow = []
    for label, key, unit, sc in COIL_SHEET_ROWS:
        crow.append([label] + [num(c.get(key), "coil.json", f"coils[{i}].{key}", unit, scale=sc) for i, c in enumerate(coil["coils"])])
    crow.append(["dL/dgap"] + [esc(c["dL_dgap_note"]) for c in coil["coils"]])
    for label, key, unit, digits in (("hot resistance at the operating point", "resistance_hot_ohm", "ohm", 4),
                                     ("operating temperature (steady, at the hover current)", "temperature_C", "C", 3),
                                     ("insulation class", "insulation_class_C", "C", 3)):
        crow.append([label] + [num((c.get("at_operating_point") or {}).get(key), "coil.json",
                                   f"coils[{i}].at_operating_point.{key}", unit, digits=digits)
                               for i, c in enumerate(coil["coils"])])
    for label, key in (("linear driver dissipation at hover", "linear_driver_dissipation_W"),
                       ("supply headroom (supply - R I - L dI/dt)", "headroom_V")):
        unit = key.rsplit("_", 1)[1]
        crow.append([label] + [num(c["drive_headroom"][key], "coil.json", f"coils[{i}].drive_headroom.{key}", unit)
                               if "drive_headroom" in c else "n/a (not on the control axis)"
                               for i, c in enumerate(coil["coils"])])
    return ["<h2>Coil datasheet</h2>", table(hdr, crow) + "<p>Power and steady temperature at the hover current of "
            "every gap: <code>coil_heat.csv</code>. Copper data: IEC 60028. Thermal classes: IEC 60085.</p>"]


def _range_cell(s: dict, i: int) -> str:
    """A sensor's linear range with provenance, or in words when there is none."""
    from fields.io.wording import NO_LINEAR_RANGE

    lo, hi = s["linear_range_m"]
    if lo is None or hi is None:
        return esc(NO_LINEAR_RANGE)
    return (num(lo, "sensors.json", f"sensors[{i}].linear_range_m[0]", "", scale=1e3) + " .. "
            + num(hi, "sensors.json", f"sensors[{i}].linear_range_m[1]", "mm", scale=1e3))


def _placement_paragraphs(sens: dict) -> list[str]:
    """The Hall and beam placement studies in words (sensors.json)."""
    S = []
    if "placement" in sens:
        pl = sens["placement"]
        c = pl["counts"]
        counts = (f"{num(c['usable'], 'sensors.json', 'placement.counts.usable')} usable of {len(pl['rows'])}; "
                  f"excluded {num(pl['excluded'], 'sensors.json', 'placement.excluded')} "
                  f"(inside a body {num(c['inside_body'], 'sensors.json', 'placement.counts.inside_body')}, inside the "
                  f"floater's travel {num(c['floater_travel'], 'sensors.json', 'placement.counts.floater_travel')})")
        if "best_position_m" in pl:
            p = pl["best_position_m"]
            S.append(f"<p>Hall placement: best candidate at ({num(p[0], 'sensors.json', 'placement.best_position_m[0]', '', scale=1e3)}, "
                     f"{num(p[1], 'sensors.json', 'placement.best_position_m[1]', '', scale=1e3)}, "
                     f"{num(p[2], 'sensors.json', 'placement.best_position_m[2]', 'mm', scale=1e3)}) by the stated rule "
                     f"({esc(pl['rule'])}); {counts}; all candidates in <code>placement.csv</code>.</p>")
        else:
            S.append(f"<p>Hall placement: no candidate is usable; {counts}; the reasons per candidate are in "
                     "<code>placement.csv</code> (column <code>status</code>).</p>")
    for j, bp in enumerate(sens.get("beam_placement", [])):
        n_ok = num(bp["counts"]["usable"], "sensors.json", f"beam_placement[{j}].counts.usable")
        if "best_height_m" in bp:
            S.append(f"<p>Beam placement for {esc(bp['sensor'])}: best beam height "
                     f"{num(bp['best_height_m'], 'sensors.json', f'beam_placement[{j}].best_height_m', 'mm', scale=1e3)} "
                     f"by the stated rule ({esc(bp['rule'])}); {n_ok} of {len(bp['rows'])} heights usable.</p>")
        else:
            S.append(f"<p>Beam placement for {esc(bp['sensor'])}: no beam height is usable ({n_ok} of "
                     f"{len(bp['rows'])}).</p>")
    return S


def _sensors(sens: dict, out: Path) -> list[str]:
    """Sensor curves and placement (sensors.json)."""
    if not sens.get("sensors"):
        return []
    S = ["<h2>Sensors</h2>" + img(out / "sensors.png", "sensor curves")]
    srows = []
    for i, s in enumerate(sens["sensors"]):
        if s["kind"] == "beam":
            lat = s["lateral_slope_per_m"]
            srows.append([esc(s["name"]), "optical beam gate",
                          "gain " + num(s["gain_per_mm"], "sensors.json", f"sensors[{i}].gain_per_mm", "per mm"),
                          "x " + num(lat[0], "sensors.json", f"sensors[{i}].lateral_slope_per_m[0]", "", scale=1e-3)
                          + ", y " + num(lat[1], "sensors.json", f"sensors[{i}].lateral_slope_per_m[1]", "per mm",
                                         scale=1e-3),
                          _range_cell(s, i)])
        else:
            lat = s["lateral_sensitivity_T_per_m"]
            srows.append([esc(s["name"]), "Hall sensor",
                          "sensitivity " + num(s["sensitivity_at_operating_T_per_m"], "sensors.json",
                                               f"sensors[{i}].sensitivity_at_operating_T_per_m", "mT/mm", scale=1.0),
                          "x " + num(lat[0], "sensors.json", f"sensors[{i}].lateral_sensitivity_T_per_m[0]", "")
                          + ", y " + num(lat[1], "sensors.json", f"sensors[{i}].lateral_sensitivity_T_per_m[1]", "mT/mm"),
                          _range_cell(s, i)])
    S.append(table(["sensor", "kind", "at the operating gap", "sideways (floater offset x, y)", "linear range"], srows,
                   left_cols=2))
    S += _placement_paragraphs(sens)
    return S


def _control(J: dict, out: Path) -> list[str]:
    """The control section (:mod:`fields.io.report_control`)."""
    from fields.io.report_control import control_section

    return control_section(J["control.json"], out)


def _accuracy(J: dict, design=None) -> list[str]:
    """Numerical accuracy estimates (``design``: says how its soft iron is modelled)."""
    stab, curves, coil = (J[k] for k in ("stability.json", "curves.json", "coil.json"))
    acc = []
    if curves:
        acc.append(["force quadrature (two rule orders), largest over the gaps",
                    num(curves["max_force_error_N"], "curves.json", "max_force_error_N", "N", digits=2)])
    if stab:
        E = stab["stiffness_error"]
        i, j = max(((a, b) for a in range(6) for b in range(6)), key=lambda ab: E[ab[0]][ab[1]])
        axes = ("x", "y", "z", "rx", "ry", "rz")
        acc.append([f"stiffness error bar, largest entry (Richardson + quadrature): K[{axes[i]}][{axes[j]}]",
                    num(E[i][j], "stability.json", f"stiffness_error[{i}][{j}]", stiffness_unit(i, j), digits=2)])
    if coil:
        for i, c in enumerate(coil["coils"]):
            acc.append([f"{esc(c['name'])}: inductance quadrature", num(c["inductance_error_H"], "coil.json", f"coils[{i}].inductance_error_H", "H", digits=2)])
    if not acc:
        return []
    iron = ""
    if design is not None and (design.cores or design.floater.soft_iron):
        iron = ("<p>Soft iron is solved, not assumed: ring cells with the B-H curve, and every force with iron "
                "carries the difference between two cell levels as its error bar. Against an independent "
                "axisymmetric finite-element solve the cell model agrees within 0.12 % on the suspension example "
                "and 0.23 % on the steel-ball rig (README, Limits); sideways and tilt poses of cores use azimuthal "
                "harmonics of the same solve, with no independent 3-D check yet. Hysteresis and eddy currents are "
                "not modelled.</p>")
    return ["<h2>Numerical accuracy</h2>" + table(["estimate", "value"], acc) + iron]


def stiffness_unit(i: int, j: int) -> str:
    """Unit of the stiffness entry K[i][j] (rows force/torque, columns displacement/rotation)."""
    return ("N/m", "N/rad", "N m/m", "N m/rad")[2 * (i >= 3) + (j >= 3)]


def _files_and_inputs(out: Path, input_lines, geometry_text: str | None) -> list[str]:
    """The files written (each a link with one line on what it holds), the inputs as read, the
    geometry file."""
    S: list[str] = []
    files = sorted(p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file() and p.name != "report.html"
                   and not p.name.startswith("."))
    items = []
    for f in files:
        notes = ()
        if f.endswith(".csv"):
            try:
                notes = tuple((read_csv_meta(out / f) or {}).get("notes", ()))
            except ValueError:  # an unreadable sidecar: fall back to the generic line
                notes = ()
        items.append(f'<li><a href="{esc(f)}"><code>{esc(f)}</code></a> <small>{esc(file_description(f, notes))}</small></li>')
    S.append("<h2>Files</h2><p>Every file of this run, relative to this page's folder; CSV tables carry their header on "
             "the first line and their notes and units in the <code>.meta.json</code> beside them.</p>"
             '<ul class="files">' + "".join(items) + "</ul>")
    if input_lines is not None:
        S.append("<h2>Inputs (as read, with units)</h2><pre>" + esc("\n".join(input_lines)) + "</pre>")
    if geometry_text:
        S.append("<h3>Geometry file</h3><pre>" + esc(geometry_text) + "</pre>")
    return S


def build_report(design, out: Path, failed: dict, load, geometry_text: str | None,
                 input_lines=None) -> str:
    """The report page: verdict first, then every stage's section, from the JSON files a run wrote.

    Parameters
    ----------
    design : Design
    out : Path
        The run's output folder (figures are embedded from there).
    failed : dict
        Stage name -> why it failed.
    load : callable
        File name -> parsed JSON (None when the file is absent).
    geometry_text : str, optional
        The geometry file as written, shown at the end.
    input_lines : sequence of str, optional
        The design summary lines (inputs as read, with units).
    """
    out = Path(out)
    J = {k: load(k) for k in _FILES}
    S: list[str] = [f"<h1>{esc(design.name)}: design report</h1>",
                    f'<p class="meta">hoverfield {__version__} &middot; input <code>{esc(shown_path(design.source))}</code>'
                    + (" &middot; <b>invented example</b>: the numbers are made up for demonstration" if design.invented else "")
                    + "</p>"]
    if design.description:
        S.append(f"<p>{esc(design.description)}</p>")
    S += _verdict(J, failed) + _key_numbers(J, out)
    for name, section in (("curves.json", _curves), ("stability.json", _stability), ("coil.json", _coil),
                          ("sensors.json", _sensors)):
        if J[name] and not (name == "coil.json" and not J[name].get("coils")):  # no coils: no datasheet
            S += section(J[name], out)
    S += _control(J, out) + _accuracy(J, design)
    S += _files_and_inputs(out, input_lines, geometry_text)
    head = 3 if design.description else 2
    return page(f"{design.name}: hoverfield report", with_contents(S, after=head))
