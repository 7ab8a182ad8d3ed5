"""Stage "sensors": beam-gate and Hall sensor curves, Hall and beam placement, inverse tables
(sensors.csv, sensors_operating.csv, placement.csv, beam_placement_*.csv, inverse_*.csv, sensors.png,
sensors.json)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fields.errors import HoverfieldError
from fields.model.design import Design
from fields.studies.result_fields import flattened, internal, optional
from fields.studies.stages.common import close_figure, slug


@dataclass(frozen=True)
class SensorEntry:
    """One sensor: its name and kind, then its response written flat."""

    name: str
    kind: str
    response: object = flattened()


@dataclass(frozen=True)
class PlacementSummary:
    """The Hall placement study: every candidate's row, the statuses counted and the best one (if any)."""

    rows: tuple[dict, ...]
    counts: dict
    excluded: int
    rule: str
    best_index: int | None = optional()
    best_position_m: np.ndarray | None = optional()


@dataclass(frozen=True)
class BeamPlacementSummary:
    """The placement study of one beam gate: candidate heights, statuses counted, the best height (if any)."""

    sensor: str
    rows: tuple[dict, ...]
    counts: dict
    rule: str
    best_index: int | None = optional()
    best_height_m: float | None = optional()


@dataclass(frozen=True)
class SensorsResult:
    """What :func:`run_sensors` computed and wrote (sensors.json is this, serialised)."""

    sensors: tuple[SensorEntry, ...]
    warnings: tuple[str, ...]
    files: tuple[str, ...]
    placement: PlacementSummary | None = optional()
    beam_placement: tuple[BeamPlacementSummary, ...] = ()
    beams: tuple = internal(())
    halls: tuple = internal(())
    placement_table: object = internal()
    beam_placement_tables: tuple = internal(())


def _responses(design: Design, gaps):
    from fields.devices import beam, hall
    from fields.io.wording import notices_text, prefixed

    entries, beams, halls, warnings = [], [], [], []
    for s in design.sensors:
        if s.kind == "beam":
            r = beam.beam_response(design, s, gaps)
            beams.append(r)
        else:
            r = hall.hall_response(design, s, gaps)
            halls.append(r)
        entries.append(SensorEntry(s.name, "beam" if s.kind == "beam" else "hall", r))
        warnings += prefixed(notices_text(r.notices), "sensor", s.name)
    return entries, beams, halls, warnings


def _write_curves(design: Design, gaps, beams, halls, out: Path) -> None:
    from fields.io.export import header_lines, write_csv

    cols = ["gap_m"]
    data = [gaps]
    for b in beams:
        cols += [f"{b.name}_blocked_fraction", f"{b.name}_slope_per_m"]
        data += [b.blocked_fraction, b.slope_per_m]
    for h in halls:
        cols += [f"{h.name}_reading_zero_current_T", f"{h.name}_floater_T", f"{h.name}_core_bias_T"]
        data += [h.reading_zero_current_T, h.floater_T, h.core_bias_T]
        for k, coil in enumerate(design.coils):
            cols.append(f"{h.name}_{coil.name}_T_per_A")
            data.append(h.coil_T_per_A[:, k])
    write_csv(out / "sensors.csv", cols, np.column_stack(data),
              header_lines(design.name, "sensor outputs versus gap (zero coil current unless per A)"))


def _operating_rows(beams, halls) -> list[list]:
    """One row per sensor at the operating gap: output, vertical and sideways slopes, linear range."""
    rows = []
    for b in beams:
        rows.append([b.name, "beam", b.fraction_at_operating, b.gain_per_mm * 1e3, *b.lateral_slope_per_m,
                     *b.linear_range_m])
    for h in halls:
        rows.append([h.name, "hall", h.reading_at_operating_T, h.sensitivity_at_operating_T_per_m,
                     *h.lateral_sensitivity_T_per_m, *h.linear_range_m])
    return rows


def _placement(design: Design, gaps, out: Path):
    from fields.devices import placement
    from fields.io.export import header_lines, write_csv
    from fields.io.wording import HALL_PLACEMENT_RULE, placement_text

    a, b, n = design.study.sensor_line
    hall = next((s for s in design.sensors if s.kind == "hall"), None)
    axis = np.asarray(hall.axis) if hall is not None else design.axial
    table = placement.placement_table(design, np.linspace(a, b, n), axis, gaps_m=gaps,
                                      range_T=None if hall is None else hall.range_T)
    rows = table.rows()
    write_csv(out / "placement.csv", list(rows[0].keys()) + ["best"],
              [list(r.values()) + [i == table.best_index] for i, r in enumerate(rows)],
              header_lines(design.name, "candidate Hall positions: status, sensitivity (vertical, sideways), "
                           "cross-talk (m of apparent gap per A), linear range, distances to bodies and to the "
                           f"floater's travel; best: {HALL_PLACEMENT_RULE}"))
    counts = table.counts()
    best = table.best_index
    summary = PlacementSummary(tuple(rows), counts, sum(counts[c] for c in ("inside_body", "floater_travel")),
                               HALL_PLACEMENT_RULE, best, None if best is None else table.positions_m[best])
    text = placement_text("Hall placement", counts, best is not None, design.study.lateral_span_m)
    return table, summary, [text] if text else []


def _beam_placements(design: Design, gaps, out: Path):
    from fields.devices.beam_placement import beam_placement_table
    from fields.io.export import header_lines, write_csv
    from fields.io.wording import BEAM_PLACEMENT_RULE, placement_text

    tables, summaries, files, warnings = [], [], [], []
    for s in design.sensors:
        if s.kind != "beam":
            continue
        t = beam_placement_table(design, s, gaps_m=gaps)
        rows = t.rows()
        name = f"beam_placement_{slug(s.name)}.csv"
        write_csv(out / name, list(rows[0].keys()) + ["best"],
                  [list(r.values()) + [i == t.best_index] for i, r in enumerate(rows)],
                  header_lines(design.name, f"candidate beam heights for {s.name} (same beam size and direction): "
                               f"blocked fraction, gain, sideways slopes, linear range; best: {BEAM_PLACEMENT_RULE}"))
        files.append(str(out / name))
        tables.append(t)
        best = t.best_index
        summaries.append(BeamPlacementSummary(s.name, tuple(rows), t.counts(), BEAM_PLACEMENT_RULE, best,
                                              None if best is None else float(t.heights_m[best])))
        text = placement_text(f"beam placement for {s.name}", t.counts(), best is not None)
        if text and best is None:  # heights outside the floater's reach are expected to be flat: warn only when none works
            warnings.append(text)
    return tables, summaries, files, warnings


def _inverse_tables(design: Design, gaps, halls, out: Path) -> tuple[list[str], list[str]]:
    from fields.devices import hall
    from fields.io.export import header_lines, write_csv

    files, warnings = [], []
    for h in halls:
        if any(n.code == "no_sensitivity" for n in h.notices):
            continue  # a sensor that does not see the gap (sideways or tilt) has no gap table to invert
        try:
            inv = hall.hall_inverse_table(design, next(s for s in design.sensors if s.name == h.name), gaps)
        except HoverfieldError as e:  # non-monotone readings: report, keep going
            why = str(e).split(": ", 1)[-1]  # the rule without the function's name
            warnings.append(f"{h.name}: no inverse table: {why}")
            continue
        name = f"inverse_{slug(h.name)}.csv"
        write_csv(out / name, ["reading_T", "gap_m"], zip(inv.reading, inv.gap_m),
                  header_lines(design.name, f"gap from the reading of {h.name} (zero coil current; compensate first)"))
        files.append(str(out / name))
    return files, warnings


def run_sensors(design: Design, out: Path) -> SensorsResult:
    """Sensor curves (sensors.csv, sensors.png), Hall decomposition, placement table."""
    from fields.io import plots
    from fields.io.export import header_lines, write_csv, write_json, write_png

    out = Path(out)
    gaps = design.study.gaps()
    entries, beams, halls, warnings = _responses(design, gaps)
    files = []
    if design.sensors:
        _write_curves(design, gaps, beams, halls, out)
        files.append(str(out / "sensors.csv"))
        write_csv(out / "sensors_operating.csv",
                  ["sensor", "kind", "output_at_operating", "d_output_d_gap_per_m", "d_output_d_x_per_m",
                   "d_output_d_y_per_m", "linear_lo_m", "linear_hi_m"], _operating_rows(beams, halls),
                  header_lines(design.name, "each sensor at the operating gap, zero coil current: output (T for Hall, "
                               "blocked fraction for beam gates) and its derivatives with respect to the gap and to "
                               "the floater's sideways offset along world x and y, per m"))
        files.append(str(out / "sensors_operating.csv"))
    table = summary = None
    if design.study.sensor_line is not None:
        table, summary, pw = _placement(design, gaps, out)
        files.append(str(out / "placement.csv"))
        warnings += pw
    btables, bsummaries, bfiles, bw = _beam_placements(design, gaps, out)
    files += bfiles
    warnings += bw
    inv_files, inv_warnings = _inverse_tables(design, gaps, halls, out)
    files += inv_files
    warnings += inv_warnings
    if design.sensors:
        fig = plots.sensor_curves(design, beams, halls, table)
        write_png(out / "sensors.png", fig)
        close_figure(fig)
        files.append(str(out / "sensors.png"))
    files.append(str(out / "sensors.json"))
    result = SensorsResult(sensors=tuple(entries), warnings=tuple(warnings), files=tuple(files), placement=summary,
                           beam_placement=tuple(bsummaries), beams=tuple(beams), halls=tuple(halls),
                           placement_table=table, beam_placement_tables=tuple(btables))
    write_json(out / "sensors.json", result)
    return result
