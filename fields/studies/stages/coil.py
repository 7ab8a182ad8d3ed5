"""Stage "coil": coil datasheets, heat at the operating point, drive headroom (coil.json,
coil_heat.csv)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fields import analysis
from fields.model.design import Design
from fields.studies.result_fields import flattened, optional
from fields.studies.stages.common import file_list


@dataclass(frozen=True)
class OperatingHeat:
    """A coil at the operating point: current, steady power, winding temperature and hot
    resistance, and whether it runs over its insulation class or into thermal runaway."""

    gap_m: float
    current_A: float
    power_W: float
    temperature_C: float
    temperature_rise_K: float
    runaway: bool
    resistance_hot_ohm: float = float("nan")
    insulation_class_C: float = float("nan")
    over_insulation_class: bool = False


@dataclass(frozen=True)
class CoilSheet:
    """One coil's datasheet (:class:`fields.devices.coil.CoilData`, written flat), its heat at the
    operating point and the driver's headroom on the control axis."""

    datasheet: object = flattened()
    explanations: dict = flattened(default_factory=dict)
    at_operating_point: OperatingHeat | None = None
    drive_headroom: object = optional()
    drive_headroom_notes: dict | None = optional()


@dataclass(frozen=True)
class CoilResult:
    """What :func:`run_coil` computed and wrote (coil.json is this, serialised)."""

    coils: tuple[CoilSheet, ...]
    inductance_matrix_H: np.ndarray
    control_axis: str
    control_pattern: np.ndarray
    warnings: tuple[str, ...]
    files: tuple[str, ...]
    #: one line per coil whose operating point is over its insulation class or runs away (the
    #: verdict says these first: command-line summary and the report's verdict box)
    heat_alerts: tuple[str, ...] = ()


def _heat_at(cd, eq, current_A: float) -> OperatingHeat:
    from fields.devices import winding

    T, run = winding.steady_temperature_C([current_A], cd.resistance_20C_ohm, cd.convection_W_per_m2K * cd.surface_area_m2,
                                          cd.ambient_temperature_C)
    R = float(cd.resistance_ohm(T[0])) if np.isfinite(T[0]) else float("inf")
    return OperatingHeat(gap_m=float(eq.gap_m), current_A=current_A, power_W=current_A * current_A * R,
                         temperature_C=float(T[0]), temperature_rise_K=float(T[0] - cd.ambient_temperature_C),
                         runaway=bool(run[0]), resistance_hot_ohm=R, insulation_class_C=float(cd.insulation_class_C),
                         over_insulation_class=bool(run[0] or T[0] > cd.insulation_class_C))


def _sheet(design: Design, k: int, c: analysis.AxialCurves, eq, ax) -> tuple[CoilSheet, list[str]]:
    from fields.devices import coil as coilmod
    from fields.devices import drive
    from fields.io.wording import coil_prose, headroom_rate_note, notices_text, prefixed

    coil = design.coils[k]
    # only gaps where the floater can hover within the current limit carry a hover current
    hover = np.where(c.hover_within_limit, c.hover_current_A, np.nan)
    cd = coilmod.coil_datasheet(design, k, hover_currents_A=hover * c.pattern[k], gaps_m=c.gaps_m)
    heat = _heat_at(cd, eq, float(eq.currents_A[k]))
    warnings: list[str] = []
    headroom = None
    bias = float(ax.bias_currents_A[k]) if len(ax.bias_currents_A) else 0.0
    if ax.pattern[k] != 0 and ax.force_per_ampere_N_per_A != 0:
        headroom = drive.drive_headroom(cd, bias, ax.force_per_ampere_N_per_A, ax.stiffness_N_per_m,
                                          design.floater.mass_kg, design.study.supply_voltage_V)
        warnings += list(notices_text(headroom.notices))
    warnings += prefixed(notices_text(cd.notices), "coil", coil.name)
    prose = dict(coil_prose(cd), warnings=list(notices_text(cd.notices)))
    hr = None if headroom is None else {"rate_note": headroom_rate_note(headroom),
                                        "warnings": list(notices_text(headroom.notices))}
    return CoilSheet(datasheet=cd, explanations=prose, at_operating_point=heat, drive_headroom=headroom,
                     drive_headroom_notes=hr), warnings


def _write_heat_table(design: Design, c: analysis.AxialCurves, sheets: tuple[CoilSheet, ...], out: Path) -> None:
    from fields.io.export import header_lines, write_csv
    from fields.io.serialize import to_data

    cols = ["gap_m"]
    for coil in design.coils:
        cols += [f"{coil.name}_hover_current_A", f"{coil.name}_power_W", f"{coil.name}_temperature_C"]
    # non-finite values (no hover current, runaway) are left empty, as in coil.json (null)
    cells = [[to_data(np.asarray(getattr(s.datasheet, k))) for k in ("hover_currents_A", "power_W", "temperature_C")]
             for s in sheets]
    rows = [[g] + [col[i] for sheet in cells for col in sheet] for i, g in enumerate(c.gaps_m)]
    write_csv(out / "coil_heat.csv", cols, rows, header_lines(design.name, "coil power and steady temperature at the hover current of each gap"))


def run_coil(design: Design, out: Path, curves=None, stability=None) -> CoilResult:
    """Coil datasheets (coil.json, coil_heat.csv) and drive headroom at the operating point.

    ``curves`` and ``stability`` are the results of :func:`run_curves` and :func:`run_stability`
    when the caller has them; computed (the stability without maps) otherwise."""
    from fields.devices import inductance
    from fields.io.export import write_json
    from fields.io.wording import group_coil_warnings
    from fields.studies.stages.stability import run_stability

    out = Path(out)
    c = curves.curves if curves is not None else analysis.axial_curves(design)
    st = stability if stability is not None else run_stability(design, out, curves=c, with_maps=False)
    ax = analysis.control_axis(design, st.stiffness)
    eq = st.equilibrium_point
    sheets, warnings = [], []
    for k in range(len(design.coils)):
        sheet, w = _sheet(design, k, c, eq, ax)
        sheets.append(sheet)
        warnings += w
    # cores: incremental inductance at the operating point (hover currents, operating gap)
    I_op = np.asarray(eq.currents_A, dtype=float) if (design.cores and eq is not None) else None
    Lmat = (inductance.mutual_inductance_matrix(design, currents_A=I_op, gap_m=eq.gap_m if I_op is not None else None)
            if design.coils else np.zeros((0, 0)))
    from fields.io.wording import operating_heat_alert

    alerts = tuple(a for a in (operating_heat_alert(x.name, sh.at_operating_point) for x, sh in zip(design.coils, sheets)) if a)
    result = CoilResult(heat_alerts=alerts, coils=tuple(sheets), inductance_matrix_H=Lmat, control_axis=ax.name, control_pattern=ax.pattern,
                        warnings=tuple(group_coil_warnings(list(dict.fromkeys(warnings)), [x.name for x in design.coils])),
                        files=file_list(out, "coil.json", "coil_heat.csv"))
    _write_heat_table(design, c, result.coils, out)
    write_json(out / "coil.json", result)
    return result
