"""Study runners: compute one part of the analysis and write its files (CSV, JSON, PNG).

Each runner takes a Design and an output folder, writes atomically, and returns a JSON-ready
summary dict (numbers with units in their keys, and the list of files written). The CLI and the
report call these; the physics lives in the modules they import.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from . import analysis
from .export import header_lines, write_csv, write_json, write_png
from .model import Design


def _files(out: Path, *names: str) -> list[str]:
    return [str(out / n) for n in names]


def operating_point(design: Design, curves=None) -> dict:
    """The operating point: hover current at the operating gap (suspension) or the passive axial
    equilibrium at zero current (repulsive designs); full six-axis equilibrium there."""
    c = curves if curves is not None else analysis.axial_curves(design)
    d = c.pattern
    gop = design.study.operating_gap_m
    # exact hover current at the operating gap
    one = analysis.axial_curves(design, gaps_m=[gop], currents_A=[0.0])
    ih = float(one.hover_current_A[0])
    limit = c.max_current_A
    if np.isfinite(ih) and abs(ih) <= limit:
        currents = ih * d
        start = gop
        how = f"hover current {ih:.4g} A at the operating gap {gop * 1e3:.4g} mm"
    else:
        # look for a passive equilibrium at zero current that is axially stable
        eqs = analysis.axial_equilibria(design, 0.0, c)
        stable = [e for e in eqs if e.stable]
        pick = min(stable or eqs, key=lambda e: abs(e.gap_m - gop)) if eqs else None
        if pick is None:
            from .errors import SolverError

            raise SolverError(
                f"operating point: the floater cannot hover at the operating gap {gop * 1e3:.4g} mm within "
                f"+-{limit:g} A (needs {ih:.4g} A) and has no equilibrium at zero current in "
                f"{design.study.gap_min_m * 1e3:.4g}..{design.study.gap_max_m * 1e3:.4g} mm")
        currents = np.zeros(len(design.coils))
        start = pick.gap_m
        how = (f"passive equilibrium at zero current, gap {pick.gap_m * 1e3:.4g} mm "
               f"(the operating gap {gop * 1e3:.4g} mm would need {ih:.4g} A)")
    eq = analysis.find_equilibrium(design, currents, start_gap_m=start)
    return {"equilibrium": eq, "currents_A": currents, "how": how, "hover_current_at_operating_gap_A": ih}


def run_curves(design: Design, out: Path) -> dict:
    """Axial force-gap-current curves: curves.csv, curves.json, curves.png."""
    from . import plots

    c = analysis.axial_curves(design)
    eqs = []
    for I in c.currents_A:
        eqs += analysis.axial_equilibria(design, float(I), c)
    cols = ["gap_m", "height_m"] + [f"Fup_N_at_{I:g}A" for I in c.currents_A] + [
        "F0_N", "ki_N_per_A", "kz0_N_per_m", "kz_at_hover_N_per_m", "hover_current_A", "hover_within_limit",
        "max_total_mass_kg", "min_total_mass_kg", "max_payload_kg", "min_payload_kg", "contact", "error_F_N"]
    rows = []
    kzh = c.kz_at_hover()
    for i in range(len(c.gaps_m)):
        rows.append([c.gaps_m[i], c.heights_m[i], *c.Fup_N[i], c.F0_N[i], c.ki_N_per_A[i], c.kz0_N_per_m[i],
                     kzh[i], c.hover_current_A[i], bool(c.hover_within_limit[i]), c.max_total_mass_kg[i],
                     c.min_total_mass_kg[i], c.max_payload_kg[i], c.min_payload_kg[i], bool(c.contact[i]),
                     c.error_F_N[i]])
    kz_cols = [f"kz_N_per_m_at_{I:g}A" for I in c.currents_A]
    out = Path(out)
    write_csv(out / "curves.csv", cols, rows, header_lines(design.name, "axial force versus gap; F_up is the magnetic force along up (N); "
                                                             "k = -dF/dh (positive restores); drive pattern " + str(c.pattern.tolist())))
    write_csv(out / "kz_table.csv", ["gap_m"] + kz_cols, [[g, *k] for g, k in zip(c.gaps_m, c.kz_N_per_m)],
              header_lines(design.name, "axial stiffness k_z = -dF_up/dh versus gap and current"))
    summary = {
        "weight_N": c.weight_N, "mass_kg": design.floater.mass_kg, "currents_A": c.currents_A,
        "max_current_A": c.max_current_A, "linear_in_current": c.linear_in_current,
        "equilibria": [{"gap_m": e.gap_m, "current_A": e.current_A, "kz_N_per_m": e.kz_N_per_m,
                        "stable": e.stable, "label": e.label} for e in eqs],
        "max_force_error_N": float(np.nanmax(c.error_F_N)) if len(c.error_F_N) else 0.0,
        "contact_gaps": int(c.contact.sum()), "warnings": list(c.warnings),
        "files": _files(out, "curves.csv", "kz_table.csv", "curves.json", "curves.png"),
    }
    gop = design.study.operating_gap_m
    i = int(np.argmin(np.abs(c.gaps_m - gop)))
    summary["at_operating_gap"] = {"gap_m": float(c.gaps_m[i]), "hover_current_A": float(c.hover_current_A[i]),
                                   "ki_N_per_A": float(c.ki_N_per_A[i]), "kz_at_hover_N_per_m": float(kzh[i]),
                                   "F0_N": float(c.F0_N[i])}
    write_json(out / "curves.json", summary)
    fig = plots.curve_family(c, eqs, title=f"{design.name}: upward force versus gap")
    write_png(out / "curves.png", fig)
    _close(fig)
    summary["_curves"] = c
    summary["_equilibria"] = eqs
    return summary


def run_stability(design: Design, out: Path, curves=None, with_maps: bool = True) -> dict:
    """Equilibrium, 6x6 stiffness, verdict, maps: stability.json, stiffness.csv, maps.csv, PNGs."""
    from . import plots

    out = Path(out)
    op = operating_point(design, curves)
    eq = op["equilibrium"]
    S = analysis.stiffness_matrix(design, eq.position_m, eq.rotvec_rad, eq.currents_A)
    v = analysis.stability_verdict(design, S)
    K_rows = [[analysis.AXES[i], *S.K[i], *S.error[i]] for i in range(6)]
    write_csv(out / "stiffness.csv", ["row"] + [f"K_{a}" for a in analysis.AXES] + [f"err_{a}" for a in analysis.AXES], K_rows,
              header_lines(design.name, "6x6 stiffness K = -d(F, T)/d(x, y, z, rx, ry, rz) about the centre of mass; "
                                        "units N/m, N/rad, N m/m, N m/rad; err = Richardson error bar"))
    summary = {
        "operating_point": op["how"],
        "equilibrium": {"gap_m": eq.gap_m, "position_m": eq.position_m, "rotvec_rad": eq.rotvec_rad,
                        "currents_A": eq.currents_A, "residual_force_N": eq.residual_force_N,
                        "residual_torque_Nm": eq.residual_torque_Nm, "free_axes": eq.free_axes},
        "stiffness_matrix": S.K, "stiffness_error": S.error,
        "step_rule": f"central differences, steps {S.step_length_m:g} m and {S.step_angle_rad:g} rad, "
                     "Richardson extrapolation with h and 2h; error bar |R - D_h|",
        "modes": [{"name": m.name, "stable": m.stable, "stiffness": m.stiffness, "unit": m.unit,
                   "frequency_Hz": m.frequency_Hz, "growth_time_s": m.growth_time_s, "text": m.text()} for m in v.modes],
        "verdict_lines": v.lines(), "unstable_count": v.unstable_count,
        "earnshaw_trace_N_per_m": v.earnshaw_trace_N_per_m, "earnshaw_residual": v.earnshaw_residual,
        "earnshaw_note": ("rigid magnets in iron-free static fields: the trace must vanish (Earnshaw 1842)"
                          if not design.cores else
                          "the design has an iron core, whose induced magnetization follows the floater: "
                          "the trace need not vanish"),
        "notes": list(v.notes),
    }
    files = ["stiffness.csv", "stability.json"]
    if len(design.coils) > 1:
        A = analysis.allocation_matrix(design, eq.position_m, eq.rotvec_rad)
        summary["allocation"] = {"G_per_A": A.G, "rows": list(analysis.AXES), "condition_number": A.condition_number,
                                 "rank": A.rank, "axes": list(A.axes), "length_scale_m": A.length_scale_m,
                                 "text": (f"the coils can command {A.rank} independent combinations of the {len(A.axes)} free axes "
                                          f"({', '.join(A.axes)}); condition number {A.condition_number:.3g} "
                                          "(torque rows divided by the floater size)")}
        write_csv(out / "allocation.csv", ["row"] + [f"{c.name}_per_A" for c in design.coils],
                  [[analysis.AXES[i], *A.G[i]] for i in range(6)],
                  header_lines(design.name, "force (N/A) and torque (N m/A) per ampere of each coil at the equilibrium"))
        files.append("allocation.csv")
    if with_maps:
        lat = analysis.pose_map(design, "lateral", currents_A=eq.currents_A)
        tilt = analysis.pose_map(design, "tilt", currents_A=eq.currents_A)
        gs = analysis.stiffness_versus_gap(design)
        _write_map(out / "map_lateral.csv", design, lat)
        _write_map(out / "map_tilt.csv", design, tilt)
        write_csv(out / "stiffness_vs_gap.csv", ["gap_m", "k_lateral_N_per_m", "k_vertical_N_per_m", "k_tilt_Nm_per_rad"],
                  zip(gs.gaps_m, gs.k_lateral_N_per_m, gs.k_vertical_N_per_m, gs.k_tilt_Nm_per_rad),
                  header_lines(design.name, "diagonal stiffness versus gap at the hover current (k = -dF/dq)"))
        fig = plots.pose_maps(lat, tilt, title=f"{design.name}: sideways and tilt maps at currents {np.round(eq.currents_A, 4).tolist()} A")
        write_png(out / "maps.png", fig)
        _close(fig)
        fig = plots.stiffness_vs_gap(gs, title=f"{design.name}: stiffness versus gap at the hover current")
        write_png(out / "stiffness_vs_gap.png", fig)
        _close(fig)
        summary["passively_centred_fraction_lateral"] = float(lat.passively_centred.mean())
        summary["passively_centred_fraction_tilt"] = float(tilt.passively_centred.mean())
        files += ["map_lateral.csv", "map_tilt.csv", "stiffness_vs_gap.csv", "maps.png", "stiffness_vs_gap.png"]
        summary["_maps"] = (lat, tilt, gs)
    summary["files"] = _files(out, *files)
    write_json(out / "stability.json", {k: v for k, v in summary.items() if not k.startswith("_")})
    summary["_verdict"] = v
    summary["_equilibrium"] = eq
    summary["_stiffness"] = S
    return summary


def _write_map(path: Path, design: Design, mp) -> None:
    G, S = mp.restoring.shape
    unit = "m" if mp.kind == "lateral" else "rad"
    name = "offset_x" if mp.kind == "lateral" else "tilt_y"
    rows = []
    for i in range(G):
        for j in range(S):
            rows.append([mp.gaps_m[i], mp.coordinate[j], *mp.force_N[i, j], *mp.torque_Nm[i, j],
                         bool(mp.restoring[i, j]), bool(mp.passively_centred[i, j]), bool(mp.contact[i, j])])
    write_csv(path, ["gap_m", f"{name}_{unit}", "Fx_N", "Fy_N", "Fz_N", "Tx_Nm", "Ty_Nm", "Tz_Nm", "restoring",
                     "passively_centred", "contact"], rows,
              header_lines(design.name, f"{mp.kind} map at currents {np.round(mp.currents_A, 6).tolist()} A; torque about the centre of mass"))


def _close(fig) -> None:
    import matplotlib.pyplot as plt

    plt.close(fig)
