"""Study runners: compute one part of the analysis and write its files (CSV, JSON, PNG).

Each runner takes a Design and an output folder, writes atomically, and returns a JSON-ready
summary dict (numbers with units in their keys, and the list of files written). The CLI and the
report call these; the physics lives in the modules they import.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from fields import analysis
from fields.io.export import header_lines, write_atomic, write_csv, write_json, write_png
from fields.model.design import Design


def _files(out: Path, *names: str) -> list[str]:
    return [str(out / n) for n in names]


def operating_point(design: Design, curves=None) -> dict:
    """The operating point the analyses linearise about.

    Rule: an axially stable equilibrium at zero coil current (a passive, zero-power height, as in
    repulsive bases) is preferred, the one nearest the operating gap; otherwise the floater is
    held at the operating gap by its hover current (suspension levitators). The six-axis
    equilibrium is then found there (free axes of the study).
    """
    from fields.errors import SolverError

    c = curves if curves is not None else analysis.axial_curves(design)
    d = c.pattern
    gop = design.study.operating_gap_m
    one = analysis.axial_curves(design, gaps_m=[gop], currents_A=[0.0])
    ih = float(one.hover_current_A[0])
    limit = c.max_current_A
    eqs = analysis.axial_equilibria(design, 0.0, c)
    stable = [e for e in eqs if e.stable]
    if stable:
        pick = min(stable, key=lambda e: abs(e.gap_m - gop))
        currents = np.zeros(len(design.coils))
        start = pick.gap_m
        how = (f"passive equilibrium at zero current, gap {pick.gap_m * 1e3:.4g} mm (axially stable; "
               f"holding the operating gap {gop * 1e3:.4g} mm instead would take {ih:.4g} A)")
    elif np.isfinite(ih) and abs(ih) <= limit:
        currents = ih * d
        start = gop
        how = f"hover current {ih:.4g} A at the operating gap {gop * 1e3:.4g} mm"
    else:
        raise SolverError(
            f"operating point: the floater cannot hover at the operating gap {gop * 1e3:.4g} mm within "
            f"+-{limit:g} A (needs {ih:.4g} A) and has no stable height at zero current in "
            f"{design.study.gap_min_m * 1e3:.4g}..{design.study.gap_max_m * 1e3:.4g} mm")
    eq = analysis.find_equilibrium(design, currents, start_gap_m=start)
    return {"equilibrium": eq, "currents_A": currents, "how": how, "hover_current_at_operating_gap_A": ih}


def run_curves(design: Design, out: Path) -> dict:
    """Axial force-gap-current curves: curves.csv, curves.json, curves.png."""
    from fields.io import plots

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
    from fields.io import plots

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
        "stiffness_matrix": S.K, "stiffness_error": S.error, "stiffness_error_max": float(np.max(S.error)),
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
        fig = plots.offset_tilt_curves(lat, tilt, eq.gap_m, title=f"{design.name}: sideways and tilt cuts near the equilibrium gap")
        write_png(out / "offset_tilt_curves.png", fig)
        _close(fig)
        summary["passively_centred_fraction_lateral"] = float(lat.passively_centred.mean())
        summary["passively_centred_fraction_tilt"] = float(tilt.passively_centred.mean())
        files += ["map_lateral.csv", "map_tilt.csv", "stiffness_vs_gap.csv", "maps.png", "stiffness_vs_gap.png",
                  "offset_tilt_curves.png"]
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


def run_coil(design: Design, out: Path, curves=None, stability=None) -> dict:
    """Coil datasheets (terminal table + coil.json), drive headroom at the operating point."""
    from fields.devices import coil as coilmod

    out = Path(out)
    c = curves["_curves"] if curves is not None else analysis.axial_curves(design)
    st = stability if stability is not None else run_stability(design, out, curves=c, with_maps=False)
    S = st["_stiffness"]
    ax = analysis.control_axis(design, S)
    # only gaps where the floater can hover within the current limit carry a hover current
    hover = np.where(c.hover_within_limit, c.hover_current_A, np.nan)
    Lmat = coilmod.mutual_inductance_matrix(design) if design.coils else np.zeros((0, 0))
    sheets = []
    warnings: list[str] = []
    for k, coil in enumerate(design.coils):
        hk = hover * c.pattern[k]
        cd = coilmod.coil_datasheet(design, k, hover_currents_A=hk, gaps_m=c.gaps_m)
        d = cd.to_dict()
        eqI = float(st["_equilibrium"].currents_A[k])
        T_op, run_op = coilmod.steady_temperature_C([eqI], cd.resistance_20C_ohm,
                                                    cd.convection_W_per_m2K * cd.surface_area_m2, cd.ambient_temperature_C)
        R_op = float(cd.resistance_ohm(T_op[0])) if np.isfinite(T_op[0]) else float("inf")
        d["at_operating_point"] = {"gap_m": float(st["_equilibrium"].gap_m), "current_A": eqI,
                                   "power_W": eqI * eqI * R_op, "temperature_C": float(T_op[0]),
                                   "temperature_rise_K": float(T_op[0] - cd.ambient_temperature_C),
                                   "runaway": bool(run_op[0])}
        bias = float(ax.bias_currents_A[k]) if len(ax.bias_currents_A) else 0.0
        if ax.pattern[k] != 0 and ax.force_per_ampere_N_per_A != 0:
            hr = coilmod.drive_headroom(cd, bias, ax.force_per_ampere_N_per_A, ax.stiffness_N_per_m,
                                        design.floater.mass_kg, design.study.supply_voltage_V)
            d["drive_headroom"] = hr.to_dict()
            warnings += list(hr.warnings)
        sheets.append(d)
        warnings += [w if w.startswith("coil ") else f"coil {coil.name}: {w}" for w in cd.warnings]
    summary = {"coils": sheets, "inductance_matrix_H": Lmat, "control_axis": ax.name,
               "control_pattern": ax.pattern, "warnings": _group_coil_warnings(list(dict.fromkeys(warnings)), design),
               "files": _files(out, "coil.json", "coil_heat.csv")}
    rows = []
    for i, g in enumerate(c.gaps_m):
        row = [g]
        for d in sheets:
            row += [d["hover_currents_A"][i], d["power_W"][i], d["temperature_C"][i]]
        rows.append(row)
    cols = ["gap_m"]
    for coil in design.coils:
        cols += [f"{coil.name}_hover_current_A", f"{coil.name}_power_W", f"{coil.name}_temperature_C"]
    write_csv(out / "coil_heat.csv", cols, rows, header_lines(design.name, "coil power and steady temperature at the hover current of each gap"))
    write_json(out / "coil.json", summary)
    return summary


def _group_coil_warnings(warnings: list[str], design: Design) -> list[str]:
    """Merge warnings that differ only in the coil's name ("coils a, b: ...")."""
    groups: dict[str, list[str]] = {}
    order = []
    for w in warnings:
        key, who = w, None
        for c in design.coils:
            tag = f"coil {c.name}: "
            if w.startswith(tag):
                key, who = w[len(tag):].replace(f"coil {c.name}", "the coil"), c.name
                break
        if key not in groups:
            groups[key] = []
            order.append(key)
        if who is not None:
            groups[key].append(who)
    out = []
    for key in order:
        names = groups[key]
        if not names:
            out.append(key)
        elif len(names) == 1:
            out.append(f"coil {names[0]}: {key}")
        else:
            out.append("coils " + ", ".join(f"'{n}'" for n in names) + f": {key}")
    return out


def run_sensors(design: Design, out: Path) -> dict:
    """Sensor curves (sensors.csv, sensors.png), Hall decomposition, placement table."""
    from fields.io import plots
    from fields.devices import sensors

    out = Path(out)
    gaps = design.study.gaps()
    res = {"sensors": [], "warnings": [], "files": []}
    beams, halls = [], []
    for s in design.sensors:
        if s.kind == "beam":
            r = sensors.beam_response(design, s, gaps)
            beams.append(r)
            res["sensors"].append({"name": s.name, "kind": "beam", **r.to_dict()})
        else:
            r = sensors.hall_response(design, s, gaps)
            halls.append(r)
            res["sensors"].append({"name": s.name, "kind": "hall", **r.to_dict()})
        res["warnings"] += [w if w.startswith("sensor ") else f"sensor {s.name}: {w}" for w in r.warnings]
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
    if design.sensors:
        write_csv(out / "sensors.csv", cols, np.column_stack(data),
                  header_lines(design.name, "sensor outputs versus gap (zero coil current unless per A)"))
        res["files"].append(str(out / "sensors.csv"))
    line = design.study.sensor_line
    placement = None
    if line is not None:
        a, b, n = line
        cand = np.linspace(a, b, n)
        axis = next((np.asarray(s.axis) for s in design.sensors if s.kind == "hall"), design.up)
        placement = sensors.placement_table(design, cand, axis, gaps_m=gaps)
        rows = placement.rows()
        write_csv(out / "placement.csv", list(rows[0].keys()) + ["best"],
                  [list(r.values()) + [i == placement.best_index] for i, r in enumerate(rows)],
                  header_lines(design.name, "candidate Hall positions: sensitivity, cross-talk (m of apparent gap per A), linear range"))
        res["placement"] = {"rows": rows, "best_index": placement.best_index,
                            "best_position_m": placement.positions_m[placement.best_index]}
        res["files"].append(str(out / "placement.csv"))
    for h in halls:
        try:
            inv = sensors.hall_inverse_table(design, next(s for s in design.sensors if s.name == h.name), gaps)
            write_csv(out / f"inverse_{_slug(h.name)}.csv", ["reading_T", "gap_m"], zip(inv.reading, inv.gap_m),
                      header_lines(design.name, f"gap from the reading of {h.name} (zero coil current; compensate first)"))
            res["files"].append(str(out / f"inverse_{_slug(h.name)}.csv"))
        except Exception as e:  # noqa: BLE001 - non-monotone readings: report, keep going
            from fields.errors import HoverfieldError

            if not isinstance(e, HoverfieldError):
                raise
            res["warnings"].append(f"{h.name}: no inverse table: {e}")
    if design.sensors:
        fig = plots.sensor_curves(design, beams, halls, placement)
        write_png(out / "sensors.png", fig)
        _close(fig)
        res["files"].append(str(out / "sensors.png"))
    write_json(out / "sensors.json", res)
    res["files"].append(str(out / "sensors.json"))
    res["_beams"], res["_halls"], res["_placement"] = beams, halls, placement
    return res


def _slug(name: str) -> str:
    import re

    return re.sub(r"_+", "_", "".join(ch if ch.isalnum() else "_" for ch in name)).strip("_").lower()


# ---------------------------------------------------------------------------------------------
# control model


def _axis_tables(design: Design, eq, ax, grid_points: int = 81):
    """Force table along the control axis and the positions grid (s measured along ax.direction)."""
    from fields.control.plant import ForceTable

    st = design.study
    if ax.index == 2:
        c = float(design.up @ np.asarray(st.gap_direction))  # d gap / d s
        lo_gap, hi_gap = st.gap_min_m, st.gap_max_m
        s_a = (lo_gap - eq.gap_m) / c
        s_b = (hi_gap - eq.gap_m) / c
        s_lo, s_hi = min(s_a, s_b), max(s_a, s_b)
    else:
        s_lo, s_hi = -st.lateral_span_m, st.lateral_span_m
    s = np.linspace(s_lo, s_hi, grid_points)
    dq = np.zeros((len(s), 6))
    dq[:, :3] = s[:, None] * ax.direction[None, :]
    P, Rv = analysis.displace(design, eq.position_m, eq.rotvec_rad, dq)
    from fields.physics.wrench import wrench_basis

    b = wrench_basis(design, P, Rv)
    p = ax.pattern
    I0 = float(ax.bias_currents_A @ p / (p @ p)) if np.any(p) else 0.0
    Fb = b.force(ax.bias_currents_A) if len(p) else b.F0_N
    Fk = (b.Fk_N_per_A @ ax.direction) @ p if len(p) else np.zeros(len(s))
    F0 = Fb @ ax.direction - I0 * Fk
    ok = ~b.contact
    # keep the contiguous stretch around s = 0 that is clear of contact
    i0 = int(np.argmin(np.abs(s)))
    lo = i0
    while lo > 0 and ok[lo - 1]:
        lo -= 1
    hi = i0
    while hi < len(s) - 1 and ok[hi + 1]:
        hi += 1
    sl = slice(lo, hi + 1)
    return ForceTable(s[sl], F0[sl], Fk[sl]), I0, (P[sl], Rv[sl]), s[sl]


def _axis_sensor(design: Design, eq, ax, s_grid, poses, I0):
    """(name, Sensor, gain per m, crosstalk per A, unit) for the control axis: the beam gate for a
    vertical axis when there is one, else the first Hall sensor, else an ideal position sensor."""
    from scipy.interpolate import CubicSpline

    from fields.devices import beam as sensmod
    from fields.control.plant import Sensor
    from fields.physics.field_basis import fixed_field_basis
    from fields.physics.magnets import floater_field_T

    st = design.study
    beams = [s for s in design.sensors if s.kind == "beam"]
    halls = [s for s in design.sensors if s.kind == "hall"]
    P, Rv = poses
    if ax.index == 2 and beams:
        sen = beams[0]
        gaps = np.asarray([(p - np.asarray(st.gap_origin_m)) @ np.asarray(st.gap_direction) for p in P])
        y = sensmod.beam_blocked_fraction(design, sen, gaps)
        if sen.output_span_V:
            # receiver voltage: proportional to the light that gets through
            y = sen.output_span_V * (1.0 - y)
            unit, rng = "V", (0.0, sen.output_span_V)
        else:
            unit, rng = "fraction", (0.0, 1.0)
        spl = CubicSpline(s_grid, y)
        return sen.name, Sensor(lambda s, i: spl(s), rng, unit), float(spl(0.0, 1)), 0.0, unit
    if halls:
        sen = halls[0]
        pt = np.asarray(sen.position_m, float)[None, :]
        axis = np.asarray(sen.axis, float)
        y = np.array([float(np.ravel(np.asarray(floater_field_T(design, pt, p[None, :], r[None, :])).reshape(-1, 3)[0] @ axis)[0])
                      for p, r in zip(P, Rv)])
        fb = fixed_field_basis(design, np.broadcast_to(pt, (len(P), 1, 3)).copy(), P, Rv)
        y = y + fb.field_T(ax.bias_currents_A)[:, 0, :] @ axis if len(ax.pattern) else y + fb.B0_T[:, 0, :] @ axis
        i0 = int(np.argmin(np.abs(s_grid)))
        xt = float((fb.Bk_T_per_A[i0, :, 0, :] @ axis) @ ax.pattern) if len(ax.pattern) else 0.0
        rng = (-sen.range_T, sen.range_T)
        unit = "T"
        if sen.sensitivity_V_per_T:
            g = sen.sensitivity_V_per_T
            y, xt, rng, unit = y * g, xt * g, (-sen.range_T * g, sen.range_T * g), "V"
        spl = CubicSpline(s_grid, y)
        return sen.name, Sensor(lambda s, i: spl(s) + xt * (np.asarray(i) - I0), rng, unit), float(spl(0.0, 1)), xt, unit
    return "ideal position sensor", Sensor(lambda s, i: np.asarray(s, float), (-np.inf, np.inf), "m"), 1.0, 0.0, "m"


def _write_plant_csv(path: Path, design: Design, raw_plant, plant) -> None:
    """State-space matrices and transfer-function coefficients, one matrix entry per row."""
    rows = []
    for label, pl in (("as_wired", raw_plant), ("crosstalk_compensated", plant)):
        A, B, C, D = (np.atleast_2d(np.asarray(m, float)) for m in (pl.ss.A, pl.ss.B, pl.ss.C, pl.ss.D))
        for name, M in (("A", A), ("B", B), ("C", C), ("D", D)):
            for i in range(M.shape[0]):
                for j in range(M.shape[1]):
                    rows.append([label, name, i, j, M[i, j]])
        for k, v in enumerate(np.atleast_1d(pl.numerator)):
            rows.append([label, "tf_numerator", k, 0, v])
        for k, v in enumerate(np.atleast_1d(pl.denominator)):
            rows.append([label, "tf_denominator", k, 0, v])
    states = ", ".join(plant.state_names)
    write_csv(path, ["variant", "matrix", "row", "col", "value_SI"], rows,
              header_lines(design.name, f"linear plant, states ({states}) in SI units, input {plant.input_name}, "
                                        f"output {plant.output_name}; tf coefficients in descending powers of s"))


def _nice_sample_time(min_rate_Hz: float) -> float:
    for f in (500.0, 1e3, 2e3, 5e3, 1e4, 2e4, 5e4, 1e5):
        if f >= 2.0 * min_rate_Hz:
            return 1.0 / f
    return 1.0 / 1e5


def run_control(design: Design, out: Path, stability=None, coil=None) -> dict:
    """Linear plant, controller starting point, margins, simulations, capture range and on/off
    study along the axis that needs control; control.json, plant.json, CSVs and PNGs.

    ``stability`` and ``coil`` are the summaries of :func:`run_stability` and :func:`run_coil`
    when the caller has them (the report does): their equilibrium and inductance matrix are
    reused instead of computed again."""
    from fields.devices import coil as coilmod
    from fields import control as dyn
    from fields.io import plots

    out = Path(out)
    st = stability if stability is not None else run_stability(design, out, with_maps=False)
    eq = st["_equilibrium"]
    S = st["_stiffness"]
    ax = analysis.control_axis(design, S)
    if not design.coils or ax.force_per_ampere_N_per_A == 0:
        from fields.errors import SolverError

        raise SolverError(f"control: the coils exert no force along the {ax.name} axis at the equilibrium; "
                          "there is nothing to build a plant from")
    p = ax.pattern
    active = np.flatnonzero(p)
    # coils in the pattern carry i * p_k: series resistance sum p_k^2 R_k, inductance p^T L p
    R = float(sum(p[k] ** 2 * coilmod.resistance_and_cooling(design, int(k))[0] for k in active))
    Lm = (np.asarray(coil["inductance_matrix_H"], float) if coil is not None
          else coilmod.mutual_inductance_matrix(design))
    L = float(p @ Lm @ p)
    imax = float(min(design.coils[k].max_current_A / abs(p[k]) for k in active))
    table, I0, poses, s_grid = _axis_tables(design, eq, ax)
    sen_name, sensor, gs, gi, unit = _axis_sensor(design, eq, ax, s_grid, poses, I0)
    common = dict(axis_name=ax.name, mass_kg=design.floater.mass_kg, stiffness_N_per_m=ax.stiffness_N_per_m,
                  force_per_ampere_N_per_A=ax.force_per_ampere_N_per_A, resistance_ohm=R, inductance_H=L,
                  hover_current_A=I0, max_current_A=imax, supply_voltage_V=design.study.supply_voltage_V,
                  sensor_gain_per_m=gs, sensor_unit=unit,
                  gravity_m_per_s2=design.gravity_magnitude if ax.index == 2 else 0.0)
    # the plant as wired (the sensor sees the coil too) is exported; the controller is designed for
    # the usual practice of subtracting the coil's share (c I) from the reading before the loop
    raw_params = dyn.PlantParameters(sensor_crosstalk_per_A=gi, **common)
    params = dyn.PlantParameters(sensor_crosstalk_per_A=0.0, **common)
    raw_plant = dyn.linear_plant(raw_params, drive="voltage")
    plant = dyn.linear_plant(params, drive="voltage")
    if gi != 0.0:
        sensor = dyn.Sensor(lambda s_, i_, f=sensor.function, c=gi: f(s_, i_) - c * (np.asarray(i_) - I0),
                            sensor.range_signal, sensor.unit)
    T = _nice_sample_time(plant.min_sample_rate_Hz)
    pd = dyn.design_controller(plant, sample_time_s=T, kind="pd")
    pid = dyn.design_controller(plant, sample_time_s=T, kind="pid")
    m_pd = dyn.loop_margins(plant, pd)
    m_pid = dyn.loop_margins(plant, pid)
    prop = dyn.proportional_only(plant)
    span = float(min(-s_grid[0], s_grid[-1]))
    # a reference step well inside the sensor's useful range: 0.2 mm, or 5 % of the table span
    step = float(min(0.2e-3, 0.05 * span))
    sims = {
        f"reference step {step * 1e3:+.2g} mm": dyn.simulate(params, table, pd, dyn.Scenario(t_end_s=0.4, reference_m=step, reference_step_time_s=0.05), sensor=sensor),
        "force impulse": dyn.simulate(params, table, pd, dyn.Scenario(
            t_end_s=0.4, force_impulse_N_s=0.2 * design.floater.mass_kg * step * plant.unstable_pole_rad_per_s,
            force_impulse_time_s=0.05), sensor=sensor),
        "payload +10 % (PD)": dyn.simulate(params, table, pd, dyn.Scenario(t_end_s=0.6, payload_kg=0.1 * design.floater.mass_kg,
                                                                   payload_time_s=0.05), sensor=sensor),
        "payload +10 % (PID)": dyn.simulate(params, table, pid, dyn.Scenario(t_end_s=0.6, payload_kg=0.1 * design.floater.mass_kg,
                                                                     payload_time_s=0.05), sensor=sensor),
    }
    s0 = np.linspace(s_grid[0] * 0.95, s_grid[-1] * 0.95, 41)
    vmax = 0.5 * span * plant.unstable_pole_rad_per_s
    v0 = np.linspace(-vmax, vmax, 15)
    cap = dyn.capture_range(params, table, pd, s0, v0, t_end_s=0.5, sensor=sensor)
    bands = np.array([0.02, 0.05, 0.1, 0.2]) * span
    if ax.index == 2:
        # suspension-type vertical axis: the coil switches between full and zero current
        hyst = dyn.hysteresis_study(params, table, pd, bands, mode="current", t_end_s=0.6)
    else:
        # a sideways axis with no bias current: bang-bang between +max and -max, starting off-centre
        hyst = dyn.hysteresis_study(params, table, pd, bands, mode="current", t_end_s=0.6,
                                    on_current_A=imax, off_current_A=-imax, s0_m=0.5 * bands[-1])
    # files
    write_json(out / "plant.json", {"design": design.name, "axis": ax.name, "pattern": p, "sensor": sen_name,
                                    "drive": "voltage", "as_wired": raw_plant.to_dict(),
                                    "crosstalk_compensated": plant.to_dict(),
                                    "note": "as_wired: the sensor reading includes the coil's own field (cross-talk); "
                                            "crosstalk_compensated: the reading minus c I, which the controller assumes"})
    _write_plant_csv(out / "plant.csv", design, raw_plant, plant)
    summary = {
        "axis": ax.name, "pattern": p, "sensor": sen_name, "sensor_gain_per_m": gs, "sensor_crosstalk_per_A": gi,
        "crosstalk_note": ("the controller assumes the coil's share of the reading (c I) is subtracted first"
                           if gi != 0.0 else "the sensor does not see the coil"),
        "sensor_unit": unit, "resistance_ohm": R, "inductance_H": L, "bias_current_A": I0, "max_current_A": imax,
        "unstable_pole_rad_per_s": plant.unstable_pole_rad_per_s, "unstable_time_constant_s": plant.unstable_time_constant_s,
        "electrical_pole_rad_per_s": plant.electrical_pole_rad_per_s, "min_sample_rate_Hz": plant.min_sample_rate_Hz,
        "max_loop_delay_s": plant.max_loop_delay_s, "rules": list(plant.rules), "sample_time_s": T,
        "controller_pd": pd.to_dict(), "controller_pid": pid.to_dict(),
        "margins_pd": m_pd.to_dict(), "margins_pid": m_pid.to_dict(), "proportional_only": prop.to_dict(),
        "capture": {"band_m": cap.band_m, "band_resolution_m": cap.band_resolution_m,
                    "captured_fraction": float(np.mean(cap.captured))},
        "hysteresis": hyst.to_dict(),
        "simulations": {k: {"events": [e.__dict__ for e in v.events], "final_s_m": float(v.s_m[-1]),
                            "peak_current_A": float(np.max(np.abs(v.current_A)))} for k, v in sims.items()},
    }
    sim_files = {k: f"sim_{_slug(k)}.csv" for k in sims}
    for k, v in sims.items():
        rows = v.to_csv_rows()
        write_csv(out / sim_files[k], rows[0], rows[1:], header_lines(design.name, f"nonlinear simulation '{k}' along {ax.name}; s from the equilibrium"))
    rows = []
    for i, a in enumerate(s0):
        for j, b in enumerate(v0):
            rows.append([a, b, bool(cap.captured[i, j]), str(cap.fate[i, j])])
    write_csv(out / "capture.csv", ["s0_m", "v0_m_per_s", "captured", "fate"], rows,
              header_lines(design.name, f"capture map along {ax.name} with the PD starting controller"))
    write_csv(out / "hysteresis.csv", ["band_m", "status", "amplitude_m", "frequency_Hz", "mean_joule_power_W", "duty"],
              zip(hyst.band_widths_m, hyst.status, hyst.amplitude_m, hyst.frequency_Hz, hyst.mean_joule_power_W, hyst.duty),
              header_lines(design.name, "on/off control with a hysteresis band; compare linear_amplitude in control.json"))
    write_json(out / "control.json", summary)
    for name, fig in (("control_bode.png", plots.bode(m_pd, title=f"{design.name}: loop with the PD starting design")),
                      ("control_nyquist.png", plots.nyquist(m_pd, title=f"{design.name}: Nyquist plot (PD)")),
                      ("control_step.png", plots.time_responses(sims, title=f"{design.name}: nonlinear responses along {ax.name}")),
                      ("capture.png", plots.capture_map(cap, s0, v0, title=f"{design.name}: capture range (PD)"))):
        write_png(out / name, fig)
        _close(fig)
    summary["files"] = _files(out, "control.json", "plant.json", "plant.csv", "capture.csv", "hysteresis.csv",
                              *sim_files.values(), "control_bode.png", "control_nyquist.png",
                              "control_step.png", "capture.png")
    summary["_plant"], summary["_pd"], summary["_pid"], summary["_margins"] = plant, pd, pid, m_pd
    summary["_raw_plant"] = raw_plant
    summary["_table"], summary["_params"], summary["_sims"], summary["_capture"] = table, params, sims, cap
    summary["_hyst"], summary["_prop"] = hyst, prop
    return summary


# ---------------------------------------------------------------------------------------------
# exports for other tools


def run_exports(design: Design, out: Path, curves_summary: dict, control_summary: dict | None) -> dict:
    """Force/stiffness tables (CSV + C header), inverse table, SPICE subcircuit, meshes (STL, GLB)."""
    import trimesh

    from fields.model import meshes as bodies
    from fields.io import formats

    out = Path(out)
    exp = out / "exports"
    c = curves_summary["_curves"]
    files = []
    imax = c.max_current_A
    I = np.linspace(-imax, imax, 13)
    ok = ~c.contact
    g = c.gaps_m[ok]
    F0, f = c.F0_N[ok], c.ki_N_per_A[ok]
    kz0, dki = c.kz0_N_per_m[ok], c.dki_dh_N_per_A_m[ok]
    Fz = F0[:, None] + f[:, None] * I[None, :]
    kz = kz0[:, None] - dki[:, None] * I[None, :]
    ki = np.repeat(f[:, None], len(I), axis=1)
    W = design.weight_N
    Fgrid = np.linspace(0.0, 3.0 * W, 13)
    with np.errstate(divide="ignore", invalid="ignore"):
        Iinv = (Fgrid[None, :] - F0[:, None]) / f[:, None]
    hdr = header_lines(design.name, "affine in current (iron-free or unsaturated core): F_up(g, I) = F0(g) + I ki(g); "
                                    "k = -dF_up/dh; drive pattern " + str(c.pattern.tolist()))
    def grid_csv(name, vals, what, colfmt, colvals):
        cols = ["gap_m"] + [colfmt.format(v) for v in colvals]
        write_csv(exp / name, cols, [[gi, *row] for gi, row in zip(g, vals)], hdr + [f"# {what}"])
        files.append(str(exp / name))
    grid_csv("table_Fz.csv", Fz, "upward magnetic force Fz_N at gap (rows) and current (columns)", "Fz_N_at_{:.6g}A", I)
    grid_csv("table_kz.csv", kz, "axial stiffness kz_N_per_m", "kz_N_per_m_at_{:.6g}A", I)
    grid_csv("table_ki.csv", ki, "force per ampere ki_N_per_A", "ki_N_per_A_at_{:.6g}A", I)
    grid_csv("table_I_of_F.csv", Iinv, "current I_A that gives force F (columns) at each gap; beyond +-max current the "
             "coil cannot do it", "I_A_at_{:.6g}N", Fgrid)
    arrays = {"gap_m": g, "current_A": I, "force_N": Fgrid, "Fz_N": Fz, "kz_N_per_m": kz, "ki_N_per_A": ki,
              "I_of_F_A": Iinv}
    units = {"gap_m": "m", "current_A": "A", "force_N": "N (columns of I_of_F_A)", "Fz_N": "N, [gap][current]",
             "kz_N_per_m": "N/m, [gap][current]", "ki_N_per_A": "N/A, [gap][current]", "I_of_F_A": "A, [gap][force]"}
    notes = ["Interpolation: bilinear in (gap, current) on these grids is accurate to the grid spacing squared;",
             "force is exactly affine in current here, so interpolate along current linearly without loss.",
             f"Weight of the floater: {W!r} N; max current {imax!r} A."]
    write_atomic(exp / "tables.h", formats.c_header(design.name, arrays, units, notes))
    files.append(str(exp / "tables.h"))
    if control_summary is not None:
        t = control_summary["_table"]
        prm = control_summary["_params"]
        sp = formats.spice_subcircuit(design.name, "hf_plant", t.positions_m, t.F0_N, t.Fk_N_per_A,
                                      prm.resistance_ohm, prm.inductance_H, prm.mass_kg,
                                      prm.gravity_m_per_s2 or 0.0, prm.axis_name)
        write_atomic(exp / "plant.sub", sp)
        files.append(str(exp / "plant.sub"))
    meshes = bodies.body_meshes(design)
    scene = trimesh.Scene()
    for name, m in meshes.items():
        scene.add_geometry(m, node_name=name, geom_name=name)
    whole = trimesh.util.concatenate(list(meshes.values()))
    write_atomic(exp / "geometry.stl", whole.export(file_type="stl"))
    write_atomic(exp / "geometry.glb", scene.export(file_type="glb"))
    files += [str(exp / "geometry.stl"), str(exp / "geometry.glb")]
    summary = {"files": files, "mesh_volume_m3": float(whole.volume), "mesh_watertight": bool(whole.is_watertight)}
    write_json(exp / "exports.json", summary)
    return summary


# ---------------------------------------------------------------------------------------------
# the whole job


STAGES = ("check", "curves", "stability", "coil", "sensors", "control", "exports")


def run_report(design: Design, out: Path, progress: bool = True, geometry_text: str | None = None) -> dict:
    """Run every analysis, write every file, then the HTML report. A stage that fails is
    recorded (and later stages that need it are skipped); the report says what failed."""
    import json
    import traceback

    from tqdm import tqdm

    from fields.io import plots
    from fields.errors import HoverfieldError
    from fields.io.summary import design_summary

    out = Path(out)
    done: dict[str, dict] = {}
    failed: dict[str, str] = {}
    bar = tqdm(total=len(STAGES), desc=design.name, unit="stage", disable=not progress, leave=False)

    def stage(name, func, needs=()):
        bar.set_postfix_str(name)
        missing = [n for n in needs if n not in done]
        if missing:
            failed[name] = f"skipped: needs {', '.join(missing)}, which failed"
        else:
            try:
                done[name] = func()
            except HoverfieldError as e:
                failed[name] = str(e)
            except Exception as e:  # noqa: BLE001 - a report keeps what it finished and says what failed
                failed[name] = f"internal error {type(e).__name__}: {e} ({traceback.format_exc(limit=2).splitlines()[-1]})"
        bar.update(1)

    def check():
        lines, data = design_summary(design)
        fig = plots.design_picture(design)
        write_png(out / "design.png", fig)
        _close(fig)
        write_json(out / "design.json", data)
        return {"lines": lines}

    stage("check", check)
    stage("curves", lambda: run_curves(design, out))
    stage("stability", lambda: run_stability(design, out, curves=done["curves"]["_curves"]), needs=("curves",))
    stage("coil", lambda: run_coil(design, out, curves=done["curves"], stability=done["stability"]), needs=("curves", "stability"))
    stage("sensors", lambda: run_sensors(design, out))
    stage("control", lambda: run_control(design, out, stability=done["stability"], coil=done.get("coil")),
          needs=("stability",))
    stage("exports", lambda: run_exports(design, out, done["curves"], done.get("control")), needs=("curves",))
    bar.close()

    def load(name):
        p = out / name
        return json.loads(p.read_text(encoding="utf-8")) if p.is_file() else None

    from fields.io.report_builder import build_report

    html_text = build_report(design, out, done, failed, load, geometry_text)
    write_atomic(out / "report.html", html_text)
    status = {"stages_done": [s for s in STAGES if s in done], "stages_failed": failed,
              "report": str(out / "report.html")}
    write_json(out / "run_status.json", status)
    status["_done"] = done
    return status


# ---------------------------------------------------------------------------------------------
# the README's pictures


def make_figures(out_dir: Path, work_dir: Path, progress: bool = False) -> list[str]:
    """Run the report on both examples and collect the README's pictures into ``out_dir``:
    the suspension example's drawing, curve family, maps and control pictures, the repulsive
    base's maps, and a screenshot of the suspension report (needs Chromium; skipped with a note
    when absent)."""
    import shutil
    import subprocess

    from fields.input.geometry import load

    root = Path(__file__).resolve().parents[2]
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    picks = {
        "suspension.toml": [("design.png", "suspension_design.png"), ("curves.png", "suspension_curves.png"),
                            ("maps.png", "suspension_maps.png"), ("control_step.png", "suspension_control_step.png"),
                            ("capture.png", "suspension_capture.png")],
        "repulsive_base.toml": [("design.png", "repulsive_design.png"), ("maps.png", "repulsive_maps.png"),
                                ("curves.png", "repulsive_curves.png")],
    }
    for name, files in picks.items():
        d = load(root / "geometries" / name)
        o = Path(work_dir) / d.name
        run_report(d, o, progress=progress, geometry_text=(root / "geometries" / name).read_text(encoding="utf-8"))
        for src, dst in files:
            if (o / src).is_file():
                write_atomic(out_dir / dst, (o / src).read_bytes())
                written.append(str(out_dir / dst))
    browser = shutil.which("chromium") or shutil.which("chromium-browser")
    if browser:
        shot = Path(work_dir) / "report_screenshot.png"
        report = Path(work_dir) / "suspension-demo" / "report.html"
        subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                        "--disable-background-networking", "--disable-component-update", "--disable-sync",
                        f"--user-data-dir={Path(work_dir) / 'browser-profile'}", "--hide-scrollbars",
                        "--window-size=1100,1500", f"--screenshot={shot}", report.as_uri()],
                       capture_output=True, timeout=120, check=False)
        if shot.is_file():
            write_atomic(out_dir / "report_screenshot.png", shot.read_bytes())
            written.append(str(out_dir / "report_screenshot.png"))
    return written
