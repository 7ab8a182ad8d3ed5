"""Stage "stability": operating point, 6x6 stiffness, verdict, current allocation, sideways
and tilt maps (stability.json, stiffness.csv, allocation.csv, map_*.csv, stiffness_vs_gap.csv, PNGs)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fields import analysis
from fields.analysis.operating import OperatingPoint, operating_point
from fields.model.design import Design
from fields.studies.result_fields import internal, optional
from fields.studies.stages.common import close_figure, file_list


@dataclass(frozen=True)
class EquilibriumSummary:
    gap_m: float
    position_m: np.ndarray
    rotvec_rad: np.ndarray
    currents_A: np.ndarray
    residual_force_N: np.ndarray
    residual_torque_Nm: np.ndarray
    free_axes: tuple[str, ...]


@dataclass(frozen=True)
class ModeRow:
    name: str
    stable: bool
    stiffness: float
    unit: str
    frequency_Hz: float | None
    growth_time_s: float | None
    text: str


@dataclass(frozen=True)
class AllocationSummary:
    G_per_A: np.ndarray
    rows: tuple[str, ...]
    condition_number: float
    rank: int
    axes: tuple[str, ...]
    length_scale_m: float
    text: str


@dataclass(frozen=True)
class PoseMaps:
    lateral: analysis.PoseMap
    tilt: analysis.PoseMap
    versus_gap: analysis.GapStiffness


@dataclass(frozen=True)
class StabilityResult:
    """What :func:`run_stability` computed and wrote (stability.json is this, serialised)."""

    operating_point: str
    equilibrium: EquilibriumSummary
    stiffness_matrix: np.ndarray
    stiffness_error: np.ndarray
    stiffness_error_max: float
    step_rule: str
    modes: tuple[ModeRow, ...]
    verdict_lines: tuple[str, ...]
    unstable_count: int
    earnshaw_trace_N_per_m: float
    earnshaw_residual: float
    earnshaw_note: str
    notes: tuple[str, ...]
    allocation: AllocationSummary | None = optional()
    passively_centred_fraction_lateral: float | None = optional()
    passively_centred_fraction_tilt: float | None = optional()
    map_grid: str | None = optional()
    chosen_point: bool = False
    files: tuple[str, ...] = ()
    operating: OperatingPoint = internal()
    verdict: analysis.Verdict = internal()
    stiffness: analysis.Stiffness = internal()
    maps: PoseMaps | None = internal()

    @property
    def equilibrium_point(self) -> analysis.Equilibrium:
        """The six-axis equilibrium object."""
        return self.operating.equilibrium


def _write_stiffness(design: Design, S: analysis.Stiffness, out: Path) -> None:
    from fields.io.export import header_lines, write_csv

    rows = [[analysis.AXES[i], *S.K[i], *S.error[i]] for i in range(6)]
    write_csv(out / "stiffness.csv", ["row"] + [f"K_{a}" for a in analysis.AXES] + [f"err_{a}" for a in analysis.AXES], rows,
              header_lines(design.name, "6x6 stiffness K = -d(F, T)/d(x, y, z, rx, ry, rz) about the centre of mass; "
                                        "units N/m, N/rad, N m/m, N m/rad; err = error bar (Richardson share plus "
                                        "quadrature share, see step_rule in stability.json)"))


def _allocation(design: Design, eq: analysis.Equilibrium, out: Path) -> AllocationSummary:
    from fields.io.export import header_lines, write_csv
    from fields.io.wording import allocation_text

    A = analysis.allocation_matrix(design, eq.position_m, eq.rotvec_rad)
    write_csv(out / "allocation.csv", ["row"] + [f"{c.name}_per_A" for c in design.coils],
              [[analysis.AXES[i], *A.G[i]] for i in range(6)],
              header_lines(design.name, "force (N/A) and torque (N m/A) per ampere of each coil at the equilibrium"))
    return AllocationSummary(G_per_A=A.G, rows=tuple(analysis.AXES), condition_number=A.condition_number, rank=A.rank,
                             axes=tuple(A.axes), length_scale_m=A.length_scale_m, text=allocation_text(A))


def write_map(path: Path, design: Design, mp: analysis.PoseMap) -> None:
    """One pose map (gap x offset or tilt) as CSV: force, torque, restoring, passively centred, contact."""
    from fields.io.export import header_lines, write_csv

    G, S = mp.restoring.shape
    unit = "m" if mp.kind == "lateral" else "rad"
    name = "offset_x" if mp.kind == "lateral" else "tilt_y"
    rows = [[mp.gaps_m[i], mp.coordinate[j], *mp.force_N[i, j], *mp.torque_Nm[i, j], bool(mp.restoring[i, j]),
             bool(mp.passively_centred[i, j]), bool(mp.contact[i, j])] for i in range(G) for j in range(S)]
    write_csv(path, ["gap_m", f"{name}_{unit}", "Fx_N", "Fy_N", "Fz_N", "Tx_Nm", "Ty_Nm", "Tz_Nm", "restoring",
                     "passively_centred", "contact"], rows,
              header_lines(design.name, f"{mp.kind} map at currents {np.round(mp.currents_A, 6).tolist()} A; torque about the centre of mass"))


MAP_FILES = ("map_lateral.csv", "map_tilt.csv", "stiffness_vs_gap.csv", "maps.png", "stiffness_vs_gap.png",
             "offset_tilt_curves.png")


def _maps(design: Design, eq: analysis.Equilibrium, out: Path) -> PoseMaps:
    from fields.io import plots
    from fields.io.export import header_lines, write_csv, write_png

    from fields.analysis.maps import holding_curves, map_gaps

    gaps = map_gaps(design)
    hold = holding_curves(design, gaps) if design.coils else None  # both maps judge the same gaps
    lat = analysis.pose_map(design, "lateral", gaps_m=gaps, currents_A=eq.currents_A, hold_curves=hold)
    tilt = analysis.pose_map(design, "tilt", gaps_m=gaps, currents_A=eq.currents_A, hold_curves=hold)
    gs = analysis.stiffness_versus_gap(design)
    write_map(out / "map_lateral.csv", design, lat)
    write_map(out / "map_tilt.csv", design, tilt)
    write_csv(out / "stiffness_vs_gap.csv", ["gap_m", "k_x_N_per_m", "k_y_N_per_m", "k_vertical_N_per_m", "k_rx_Nm_per_rad",
                                             "k_ry_Nm_per_rad", "k_lateral_N_per_m", "k_tilt_Nm_per_rad"],
              zip(gs.gaps_m, gs.k_x_N_per_m, gs.k_y_N_per_m, gs.k_vertical_N_per_m, gs.k_rx_Nm_per_rad, gs.k_ry_Nm_per_rad,
                  gs.k_lateral_N_per_m, gs.k_tilt_Nm_per_rad),
              header_lines(design.name, "diagonal stiffness versus gap at the hover current (k = -dF/dq); "
                                        "k_lateral and k_tilt are the means of the x and y entries; an overview "
                                        "without per-entry error bars: central differences (steps 1e-6 m, 1e-4 rad) "
                                        "of the plain cap rule"
                                        + (", fast rule and coarse cells (about 0.5 % from the fine level)"
                                           if design.cores else " (about 1e-3 within a few mm of a source edge)")
                                        + "; the stiffness at the operating point (stiffness.csv) carries error bars"))
    figures = (
        ("maps.png", plots.pose_maps(lat, tilt, title=f"{design.name}: sideways and tilt maps at currents "
                                                      f"{np.round(eq.currents_A, 4).tolist()} A")),
        ("stiffness_vs_gap.png", plots.stiffness_vs_gap(gs, title=f"{design.name}: stiffness versus gap at the hover current")),
        ("offset_tilt_curves.png", plots.offset_tilt_curves(lat, tilt, eq.gap_m, title=f"{design.name}: sideways and "
                                                                                       "tilt cuts near the equilibrium gap")),
    )
    for name, fig in figures:
        write_png(out / name, fig)
        close_figure(fig)
    return PoseMaps(lat, tilt, gs)


def run_stability(design: Design, out: Path, curves: analysis.AxialCurves | None = None,
                  with_maps: bool = True, at_gap_m: float | None = None,
                  at_current_A: float | None = None) -> StabilityResult:
    """Equilibrium, 6x6 stiffness, verdict, maps: stability.json, stiffness.csv, maps, PNGs.

    ``curves`` are the axial curves when the caller has them (the report does). With
    ``at_gap_m`` the analysis is at that gap and the drive current ``at_current_A`` (default the
    hover current there) instead of the operating point (:func:`fields.analysis.operating.chosen_point`):
    the stiffness and verdict then describe that pose, which need not be in balance; the maps
    are at its currents."""
    from fields.analysis.operating import chosen_point
    from fields.io import wording, wording_files
    from fields.io.export import write_json
    from fields.physics.parallel import background

    out = Path(out)
    if at_gap_m is None and at_current_A is not None:
        from fields.errors import InputError

        raise InputError("stability: a current for the chosen point needs its gap as well")
    op = operating_point(design, curves) if at_gap_m is None else chosen_point(design, at_gap_m, at_current_A)
    eq = op.equilibrium
    # the maps need only the equilibrium's currents: a second process draws them meanwhile
    with_maps = with_maps and not design.floater.soft_iron  # off-axis poses: not modelled for soft-iron floaters
    pending = background(lambda: _maps(design, eq, out)) if with_maps else None
    S = analysis.stiffness_matrix(design, eq.position_m, eq.rotvec_rad, eq.currents_A)
    v = analysis.stability_verdict(design, S)
    _write_stiffness(design, S, out)
    files = ["stiffness.csv", "stability.json"]
    alloc = None
    if len(design.coils) > 1:
        alloc = _allocation(design, eq, out)
        files.append("allocation.csv")
    maps = None
    if pending is not None:
        maps = pending.get()
        files += list(MAP_FILES)
    result = StabilityResult(
        operating_point=wording.operating_point_text(op),
        equilibrium=EquilibriumSummary(eq.gap_m if abs(eq.gap_m) >= 1e-15 else 0.0, eq.position_m, eq.rotvec_rad, eq.currents_A, eq.residual_force_N,
                                       eq.residual_torque_Nm, tuple(eq.free_axes)),
        stiffness_matrix=S.K, stiffness_error=S.error, stiffness_error_max=float(np.max(S.error)),
        step_rule=wording.step_rule_text(S.step_length_m, S.step_angle_rad),
        modes=tuple(ModeRow(wording.mode_name(m), m.stable, m.stiffness, m.unit, m.frequency_Hz, m.growth_time_s, wording.mode_text(m, v.coils))
                    for m in v.modes),
        verdict_lines=tuple(wording.verdict_lines(v)), unstable_count=v.unstable_count,
        earnshaw_trace_N_per_m=v.earnshaw_trace_N_per_m, earnshaw_residual=v.earnshaw_residual,
        earnshaw_note=(wording_files.soft_iron_earnshaw_note() if design.floater.soft_iron
                       else wording.earnshaw_note(bool(design.cores))),
        notes=(tuple(wording.verdict_notes(v, ball=bool(design.floater.soft_iron)))
               + (wording_files.soft_iron_notes() if design.floater.soft_iron else ())),
        allocation=alloc,
        passively_centred_fraction_lateral=float(maps.lateral.passively_centred.mean()) if maps else None,
        passively_centred_fraction_tilt=float(maps.tilt.passively_centred.mean()) if maps else None,
        map_grid=wording.map_grid_text(maps.lateral, maps.tilt, design.study.gap_points) if maps else None,
        chosen_point=bool(op.chosen),
        files=file_list(out, *files), operating=op, verdict=v, stiffness=S, maps=maps)
    write_json(out / "stability.json", result)
    return result
