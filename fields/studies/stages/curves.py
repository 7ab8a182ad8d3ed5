"""Stage "curves": axial force-gap-current curves, equilibria, payload envelope
(curves.csv, kz_table.csv, curves.json, curves.png)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fields import analysis
from fields.model.design import Design
from fields.studies.result_fields import internal
from fields.studies.stages.common import close_figure, file_list


@dataclass(frozen=True)
class AxialEquilibriumRow:
    """An axial equilibrium (force = weight) at one current, as curves.json lists it."""

    gap_m: float
    current_A: float
    kz_N_per_m: float
    stable: bool
    label: str


@dataclass(frozen=True)
class AtOperatingGap:
    """The curves' numbers at the grid gap nearest the operating gap."""

    gap_m: float
    hover_current_A: float
    ki_N_per_A: float
    kz_at_hover_N_per_m: float
    F0_N: float
    saturation_onset_A: float = float("nan")
    max_force_error_at_gap_N: float = float("nan")


@dataclass(frozen=True)
class CurvesResult:
    """What :func:`run_curves` computed and wrote (curves.json is this, serialised)."""

    weight_N: float
    mass_kg: float
    currents_A: np.ndarray
    max_current_A: float
    linear_in_current: bool
    equilibria: tuple[AxialEquilibriumRow, ...]
    max_force_error_N: float
    contact_gaps: int
    warnings: tuple[str, ...]
    files: tuple[str, ...]
    at_operating_gap: AtOperatingGap
    #: the force the axial curves balance: the weight, or 0 where gravity acts across an offset
    #: study's gap direction (``gravity_across_axis``)
    axial_load_N: float = 0.0
    gravity_across_axis: bool = False
    curves: analysis.AxialCurves = internal()
    axial_equilibria: tuple[analysis.Equilibrium1D, ...] = internal(())


def all_equilibria(design: Design, c: analysis.AxialCurves) -> list[analysis.Equilibrium1D]:
    """The axial equilibria at every current of the family."""
    eqs = []
    for current in c.currents_A:
        eqs += analysis.axial_equilibria(design, float(current), c)
    return eqs


def _write_tables(design: Design, c: analysis.AxialCurves, out: Path) -> None:
    from fields.io.export import header_lines, write_csv

    cols = ["gap_m", "height_m"] + [f"Fup_N_at_{I:g}A" for I in c.currents_A] + [
        "F0_N", "ki_N_per_A", "kz0_N_per_m", "kz_at_hover_N_per_m", "hover_current_A", "hover_within_limit",
        "max_total_mass_kg", "min_total_mass_kg", "max_payload_kg", "min_payload_kg", "contact", "error_F_N",
        "saturation_onset_A", "error_kz_at_hover_N_per_m"]
    kzh = c.kz_at_hover()
    ekzh = c.kz_error_at_hover()
    onset = c.saturation_onset_A if c.saturation_onset_A is not None else np.full(len(c.gaps_m), np.nan)
    rows = [[c.gaps_m[i], c.heights_m[i], *c.Fup_N[i], c.F0_N[i], c.ki_N_per_A[i], c.kz0_N_per_m[i], kzh[i],
             c.hover_current_A[i], bool(c.hover_within_limit[i]), c.max_total_mass_kg[i], c.min_total_mass_kg[i],
             c.max_payload_kg[i], c.min_payload_kg[i], bool(c.contact[i]), c.error_F_N[i],
             onset[i], ekzh[i]] for i in range(len(c.gaps_m))]
    write_csv(out / "curves.csv", cols, rows, header_lines(
        design.name, "axial force versus gap; F_up is the magnetic force along up (N); "
                     "k = -dF/dh (positive restores); error_kz_at_hover_N_per_m is the bar of kz_at_hover_N_per_m "
                     + ("(force error over min(gap, floater size))" if design.cores else
                        "(Richardson share of steps h and 2h plus the difference from the next coarser rule level)")
                     + "; drive pattern " + str(c.pattern.tolist())
                     + ("; iron core by the ring-cell solve (B-H curve): error_F_N is |fine - coarse| plus interpolation "
                        "tails, the largest over the family's currents; saturation_onset_A is the |current| from which the "
                        "force departs from affine by more than 0.1 %" if c.core_model == "cells" else "")))
    kz_cols = [f"kz_N_per_m_at_{I:g}A" for I in c.currents_A]
    write_csv(out / "kz_table.csv", ["gap_m"] + kz_cols, [[g, *k] for g, k in zip(c.gaps_m, c.kz_N_per_m)],
              header_lines(design.name, "axial stiffness k_z = -dF_up/dh versus gap and current"))


def _at_operating_gap(design: Design, c: analysis.AxialCurves) -> AtOperatingGap:
    i = int(np.argmin(np.abs(c.gaps_m - design.study.operating_gap_m)))
    ki = c.ki_at_hover_N_per_A if c.ki_at_hover_N_per_A is not None else c.ki_N_per_A
    return AtOperatingGap(gap_m=float(c.gaps_m[i]), hover_current_A=float(c.hover_current_A[i]),
                          ki_N_per_A=float(ki[i]), kz_at_hover_N_per_m=float(c.kz_at_hover()[i]),
                          F0_N=float(c.F0_N[i]),
                          saturation_onset_A=float(c.saturation_onset_A[i]) if c.saturation_onset_A is not None else float("nan"),
                          max_force_error_at_gap_N=float(np.max(c.error_Fup_N[i])) if c.error_Fup_N is not None
                          else float(c.error_F_N[i]))


def run_curves(design: Design, out: Path) -> CurvesResult:
    """Axial force-gap-current curves: curves.csv, kz_table.csv, curves.json, curves.png."""
    from fields.io import plots
    from fields.io.export import write_json, write_png
    from fields.io.wording import curve_warnings, equilibrium_label

    out = Path(out)
    c = analysis.axial_curves(design)
    eqs = all_equilibria(design, c)
    _write_tables(design, c, out)
    result = CurvesResult(
        weight_N=design.weight_N, mass_kg=design.floater.mass_kg, currents_A=c.currents_A, max_current_A=c.max_current_A,
        linear_in_current=c.linear_in_current,
        equilibria=tuple(AxialEquilibriumRow(e.gap_m, e.current_A, e.kz_N_per_m, e.stable, equilibrium_label(e.stable))
                         for e in eqs),
        max_force_error_N=float(np.nanmax(c.error_F_N)) if len(c.error_F_N) else 0.0,
        contact_gaps=int(c.contact.sum()), warnings=curve_warnings(c),
        files=file_list(out, "curves.csv", "kz_table.csv", "curves.json", "curves.png"),
        at_operating_gap=_at_operating_gap(design, c), axial_load_N=c.weight_N,
        gravity_across_axis=design.gravity_across_axial, curves=c, axial_equilibria=tuple(eqs))
    write_json(out / "curves.json", result)
    offset = design.study.gap_mode == "offset"
    fig = plots.curve_family(c, eqs, title=f"{design.name}: " + ("axial force versus offset" if offset else "upward force versus gap"),
                             gap_label="offset along the gap direction (mm)" if offset else "gap (mm)")
    write_png(out / "curves.png", fig)
    close_figure(fig)
    return result
