"""Stage "sensors": beam-gate and Hall sensor curves, Hall placement, inverse tables
(sensors.csv, placement.csv, inverse_*.csv, sensors.png, sensors.json)."""

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
    rows: tuple[dict, ...]
    best_index: int
    best_position_m: np.ndarray


@dataclass(frozen=True)
class SensorsResult:
    """What :func:`run_sensors` computed and wrote (sensors.json is this, serialised)."""

    sensors: tuple[SensorEntry, ...]
    warnings: tuple[str, ...]
    files: tuple[str, ...]
    placement: PlacementSummary | None = optional()
    beams: tuple = internal(())
    halls: tuple = internal(())
    placement_table: object = internal()


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


def _placement(design: Design, gaps, out: Path):
    from fields.devices import placement
    from fields.io.export import header_lines, write_csv

    a, b, n = design.study.sensor_line
    axis = next((np.asarray(s.axis) for s in design.sensors if s.kind == "hall"), design.up)
    table = placement.placement_table(design, np.linspace(a, b, n), axis, gaps_m=gaps)
    rows = table.rows()
    write_csv(out / "placement.csv", list(rows[0].keys()) + ["best"],
              [list(r.values()) + [i == table.best_index] for i, r in enumerate(rows)],
              header_lines(design.name, "candidate Hall positions: sensitivity, cross-talk (m of apparent gap per A), linear range"))
    return table, PlacementSummary(tuple(rows), table.best_index, table.positions_m[table.best_index])


def _inverse_tables(design: Design, gaps, halls, out: Path) -> tuple[list[str], list[str]]:
    from fields.devices import hall
    from fields.io.export import header_lines, write_csv

    files, warnings = [], []
    for h in halls:
        try:
            inv = hall.hall_inverse_table(design, next(s for s in design.sensors if s.name == h.name), gaps)
        except HoverfieldError as e:  # non-monotone readings: report, keep going
            warnings.append(f"{h.name}: no inverse table: {e}")
            continue
        name = f"inverse_{slug(h.name)}.csv"
        write_csv(out / name, ["reading_T", "gap_m"], zip(inv.reading, inv.gap_m),
                  header_lines(design.name, f"gap from the reading of {h.name} (zero coil current; compensate first)"))
        files.append(str(out / name))
    return files, warnings


def run_sensors(design: Design, out: Path) -> SensorsResult:
    """Sensor curves (sensors.csv, sensors.png), Hall decomposition, placement table."""
    from fields.io import plots
    from fields.io.export import write_json, write_png

    out = Path(out)
    gaps = design.study.gaps()
    entries, beams, halls, warnings = _responses(design, gaps)
    files = []
    if design.sensors:
        _write_curves(design, gaps, beams, halls, out)
        files.append(str(out / "sensors.csv"))
    table = summary = None
    if design.study.sensor_line is not None:
        table, summary = _placement(design, gaps, out)
        files.append(str(out / "placement.csv"))
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
                           beams=tuple(beams), halls=tuple(halls), placement_table=table)
    write_json(out / "sensors.json", result)
    return result
