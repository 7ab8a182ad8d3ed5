"""The files of ``hoverfield size``: one geometry file per short-listed design, ``size.csv`` and
``size.json``, all written atomically through :mod:`fields.io.export`."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

#: the columns of size.csv after rank, name, file, magnet, feasible (units in the names)
NUMBER_COLUMNS = ("magnet_diameter_m", "magnet_height_m", "grade", "wire_gauge", "turns", "inner_radius_m",
                  "outer_radius_m", "height_m", "coil_bottom_height_m", "core", "hover_current_A", "max_current_A",
                  "coil_voltage_V", "coil_power_W", "coil_temperature_C", "worst_gap_temperature_C",
                  "current_density_A_per_m2", "voltage_headroom_V", "driver_dissipation_W", "resistance_20C_ohm",
                  "kz_N_per_m", "ki_N_per_A", "unstable_pole_1_per_s", "sample_rate_Hz", "floater_mass_kg",
                  "total_mass_kg", "magnet_volume_m3")


def write_size(res, out: Path):
    """Write the short list of a :class:`fields.studies.size.SizeResult` into ``out``; returns the
    result with every design's file and the files written."""
    from fields.io.export import write_atomic, write_csv, write_json
    from fields.io.wording import safety_text
    from fields.studies.size import result_dict

    out.mkdir(parents=True, exist_ok=True)
    designs = []
    files: dict[str, str] = {}
    for d in res.designs:
        p = write_atomic(out / f"{d.name}.toml", d.text)
        designs.append(replace(d, file=p.name))
        files[p.name] = str(p)
    res = replace(res, designs=tuple(designs))
    cols = ["rank", "name", "file", "magnet", "feasible", "failed_limits", *NUMBER_COLUMNS]
    rows = [[d.rank, d.name, d.file, d.magnet_label, d.feasible, "; ".join(d.failed_limits),
             *[d.numbers[c] for c in NUMBER_COLUMNS]] for d in res.designs]
    notes = [f"# short list of hoverfield size for {res.requirement.file} (objective {res.requirement.objective}); "
             "numbers from evaluate_design on each written geometry file (generated designs, invented)",
             *[f"# constraint: {c}" for c in res.constraints], *[f"# {n}" for n in res.notes],
             f"# {safety_text()}"]
    if res.binding:
        notes.append(f"# no design meets the requirement; binding limit {res.binding}")
    files["size.csv"] = str(write_csv(out / "size.csv", cols, rows, notes))
    files["size.json"] = str(out / "size.json")
    res = replace(res, files=files)
    body = result_dict(res)
    body["safety"] = safety_text()
    write_json(out / "size.json", body)
    return res
