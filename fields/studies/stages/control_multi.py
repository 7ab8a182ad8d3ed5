"""The multi-axis part of the control stage: plant over every free axis, structural checks
first, both controller forms, margins, nonlinear releases and the capture region.

Used by :func:`fields.studies.stages.control.run_control`; writes mimo_plant.csv,
capture_region.csv, mimo_sim_*.csv and their PNGs, and returns the JSON section of control.json.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fields.model.design import Design
from fields.physics.parallel import map_chunks
from fields.studies.stages.common import close_figure, slug

#: capture grid points per axis (odd: the equilibrium is on the grid)
GRID_POINTS = 9
#: run length of each release (s)
RELEASE_S = 0.5
#: force-model box half-widths (a wider box allows larger starts; its fit error is stated)
BOX_LENGTH_M = 3e-3
BOX_ANGLE_RAD = math.radians(3.0)
#: practical starts the releases are tried from (0.5 mm sideways and vertical, 1 degree tilt)
PRACTICAL_LENGTH_M = 0.5e-3
PRACTICAL_ANGLE_RAD = math.radians(1.0)
#: current-loop bandwidth of the mode-space PD's plant, as a multiple of the fastest growth rate
CURRENT_LOOP_MULTIPLE = 20.0


@dataclass(frozen=True, eq=False)
class MultiaxisOutcome:
    """Internal objects of the multi-axis study (JSON: :func:`multiaxis_data`)."""

    plant: object
    report: object
    sample_rate: object = None
    lqg: object = None
    lqg_margins: object = None
    pd_plant: object = None
    pd: object = None
    pd_margins: object = None
    pd_refusal: str | None = None
    model: object = None
    releases: dict | None = None
    largest: dict | None = None
    region: object = None
    refusal: str | None = None


def _practical_starts(plant, report) -> dict:
    """0.5 mm along x and z, 1 degree about the first tilt axis (those that are free)."""
    out = {}
    for a, v, label in (("x", PRACTICAL_LENGTH_M, "sideways x 500 um"), ("z", PRACTICAL_LENGTH_M, "vertical 500 um"),
                        ("ry", PRACTICAL_ANGLE_RAD, "tilt about y 1 deg"), ("rx", PRACTICAL_ANGLE_RAD, "tilt about x 1 deg")):
        if a in plant.free_axes and not (label.startswith("tilt about x") and "ry" in plant.free_axes):
            q = np.zeros(plant.n_axes)
            q[plant.free_axes.index(a)] = v
            out[label] = q
    return out


def _grid(largest, box: float, floor: float) -> np.ndarray:
    """Symmetric grid reaching past the largest held offset (to show the edge), inside the box."""
    reach = box if largest is None or not math.isfinite(largest.lost) else min(box, max(2.0 * largest.held, floor))
    return np.linspace(-reach, reach, GRID_POINTS)


def multiaxis_study(design: Design, equilibrium, inductance_H=None, with_capture: bool = True,
                    stiffness=None) -> MultiaxisOutcome:
    """Plant, structure, both controller forms, margins and (when closable) the releases.
    ``stiffness``: the 6x6 stiffness at the equilibrium when the caller has it (computed once)."""
    from fields.control import multiaxis as mx
    from fields.control.multiaxis.capture import capture_region, largest_offset

    plant = mx.multiaxis_plant(design, equilibrium, inductance_H=inductance_H, stiffness=stiffness)
    report = mx.check_structure(plant, design)
    if report.status == "refused":
        return MultiaxisOutcome(plant, report, refusal="; ".join(report.reasons))
    if report.status == "passive":
        return MultiaxisOutcome(plant, report)
    sr = mx.choose_sample_rate(report)
    lqg = mx.design_lqg(plant, report, sample_rate=sr)
    lm = mx.mimo_margins(plant, report, lqg)
    wc = min(CURRENT_LOOP_MULTIPLE * sr.fastest_growth_rate_per_s, 0.3 * math.pi * sr.rate_Hz)
    pdp = mx.multiaxis_plant(design, equilibrium, drive="current_loop", current_loop_bandwidth_rad_per_s=wc,
                             inductance_H=plant.inductance_H, stiffness=stiffness)
    pd = pm = refusal = None
    try:
        rp = mx.check_structure(pdp, design)
        pd = mx.design_mode_pd(pdp, rp, sample_rate=sr)
        if not (pd.stable and pd.stable_cold):
            raise mx.DesignRefused("mode-space PD: " + "; ".join(n for n in pd.notes if n.startswith("not decoupled"))
                                   + f"; its closed loop is unstable (largest |z| {pd.spectral_radius:.4g} hot, "
                                     f"{pd.spectral_radius_cold:.4g} cold): use the LQG")
        pm = mx.mimo_margins(pdp, rp, pd)
    except mx.DesignRefused as e:
        pd, pm, refusal = None, None, str(e)
    if not with_capture:
        return MultiaxisOutcome(plant, report, sr, lqg, lm, pdp, pd, pm, refusal)
    model = mx.force_model(design, plant, span_length_m=BOX_LENGTH_M, span_angle_rad=BOX_ANGLE_RAD)
    starts = _practical_starts(plant, report)
    vertical = starts.get("vertical 500 um", np.zeros(plant.n_axes))
    tasks = [(k, plant, lqg, q, "measured") for k, q in starts.items()]
    tasks.append(("vertical 500 um, estimator started at zero", plant, lqg, vertical, "zero"))
    if pd is not None:
        tasks.append(("vertical 500 um, mode-space PD", pdp, pd, vertical, "measured"))
    tilt = "ry" if "ry" in plant.free_axes else ("rx" if "rx" in plant.free_axes else None)
    axes = [a for a in ("x", "z", tilt) if a is not None and a in plant.free_axes]
    # the per-axis bisections (a dozen runs each) and the releases (one run each) are independent:
    # one process each (the bisections dominate; the operating system shares the two cores)
    jobs = [("largest", a) for a in axes] + [("releases", None)]

    def run(sl: slice) -> list:
        out = []
        for kind, a in jobs[sl]:
            if kind == "largest":
                out.append(largest_offset(plant, report, lqg, model, design, a, t_end_s=RELEASE_S))
            else:
                out.append([mx.simulate_multiaxis(pl, report, reg, model, design, q0=q, t_end_s=RELEASE_S, start=st)
                            for _, pl, reg, q, st in tasks])
        return out

    done = [r for part in map_chunks(run, len(jobs), workers=len(jobs), min_items_per_worker=1) for r in part]
    releases = {t[0]: r for t, r in zip(tasks, done[-1])}
    largest = dict(zip(axes, done[:-1]))
    region = None
    if "x" in plant.free_axes and "z" in plant.free_axes:
        region = capture_region(plant, report, lqg, model, design, ("z", "x"),
                                _grid(largest.get("z"), 0.9 * BOX_LENGTH_M, 0.2e-3),
                                _grid(largest.get("x"), 0.9 * BOX_LENGTH_M, 0.2e-3), t_end_s=RELEASE_S)
    return MultiaxisOutcome(plant, report, sr, lqg, lm, pdp, pd, pm, refusal, model, releases, largest, region)


# ------------------------------------------------------------------------------------ JSON


def _f(x):
    x = float(x)
    return x if math.isfinite(x) else None


def _mode_rows(report, plant) -> list[dict]:
    rows = []
    imax = float(np.min(plant.max_current_A)) if plant.n_coils else 0.0
    for m in report.modes:
        # the current limit caps how far the mode can be pulled back statically: reference motion
        # (1 mm or 1 degree of the dominant axis) x limit / hold current
        lim = None
        if m.kind == "unstable" and m.controllable and math.isfinite(m.hold_current_A) and m.hold_current_A > 0:
            lim = imax / m.hold_current_A * (1e-3 if m.dominant_axis in ("x", "y", "z") else math.radians(1.0))
        rows.append({
            "name": m.name, "kind": m.kind, "growth_rate_per_s": _f(m.growth_rate_per_s),
            "time_constant_s": _f(1.0 / m.growth_rate_per_s) if m.growth_rate_per_s > 0 else None,
            "frequency_Hz": _f(m.frequency_Hz), "controllable": m.controllable, "observable": m.observable,
            "authority_ratio": _f(m.control_ratio), "visibility_ratio": _f(m.observe_ratio),
            # a mode without authority has no hold current: named, not an absurd number
            "hold_current_per_reference_motion_A": _f(m.hold_current_A) if m.controllable else None,
            "authority": "yes" if m.controllable else "none (phi^T G zero within its error bar)",
            "static_reach_by_current_limit": _f(lim) if lim is not None else None,
            "static_reach_unit": "m" if m.dominant_axis in ("x", "y", "z") else "rad",
            "shares": {a: float(v) for a, v in m.shares.items()},
            "suggested_sensor": None if m.suggestion is None else m.suggestion.text,
            "text": m.text})
    return rows


def _regulator_data(reg, margins, plant) -> dict:
    d = {"kind": reg.kind, "stable_hot": reg.stable, "stable_cold": reg.stable_cold,
         "spectral_radius_hot": reg.spectral_radius, "spectral_radius_cold": reg.spectral_radius_cold,
         "controlled_modes": list(reg.controlled_modes), "notes": list(reg.notes), "drive": plant.drive,
         "sample_time_s": reg.dt}
    g = {k: v for k, v in reg.gains.items()}
    d["gains"] = _jsonable(g)
    d["margins"] = margins.to_dict()
    return d


def _jsonable(v):
    from fields.control.multiaxis.plant import jsonable

    return jsonable(v)


def _release_data(runs: dict, plant) -> dict:
    out = {}
    for k, r in runs.items():
        out[k] = {"held": r.held, "settled": r.settled, "max_deviation": _axis_dict(r.max_deviation, plant),
                  "final_deviation": _axis_dict(r.final_deviation, plant),
                  "peak_current_A": [float(v) for v in r.peak_current_A],
                  "saturated_share": r.saturated_share, "events": list(r.events)}
    return out


def _axis_dict(v, plant) -> dict:
    from fields.control.multiaxis.plant import AXIS_UNITS

    return {f"{a}_{AXIS_UNITS[a][0]}": float(x) for a, x in zip(plant.free_axes, v)}


def multiaxis_data(o: MultiaxisOutcome, coil=None) -> dict:
    """The "multiaxis" section of control.json (no gains or margins when refused)."""
    p, r = o.plant, o.report
    d = {"status": r.status, "free_axes": list(p.free_axes), "drive": p.drive,
         "modes": _mode_rows(r, p), "controlled_modes": list(r.controlled), "left_open": list(r.left_open),
         "structure_notes": list(r.notes), "pbh_tolerance": r.tolerance,
         "coils": [{"name": n, "bias_current_A": float(p.bias_currents_A[k]), "max_current_A": float(p.max_current_A[k]),
                    "temperature_hot_C": float(p.temperature_hot_C[k]), "resistance_hot_ohm": float(p.resistance_hot_ohm[k]),
                    "resistance_cold_ohm": float(p.resistance_cold_ohm[k])} for k, n in enumerate(p.coil_names)],
         "temperature_cold_C": p.temperature_cold_C,
         "sensors": [{"name": s.name, "unit": s.unit, "in_range": s.in_range, "reading": s.reading, "notes": list(s.notes)}
                     for s in p.sensors],
         "plant_notes": list(p.notes)}
    if coil is not None:
        d["coil_stage_temperature_C"] = [c.at_operating_point.temperature_C if c.at_operating_point else None
                                         for c in coil.coils]
    if o.refusal is not None:
        d["refusal"] = o.refusal
        d["fix"] = [m.suggestion.text for m in r.modes if m.suggestion is not None]
        return d
    if r.status == "passive":
        d["note"] = "no unstable mode: the floater needs no active control"
        return d
    d["sample_rate"] = {"rate_Hz": o.sample_rate.rate_Hz, "period_s": o.sample_rate.period_s,
                        "fastest_mode": o.sample_rate.fastest_mode, "rule": o.sample_rate.rule}
    d["lqg"] = _regulator_data(o.lqg, o.lqg_margins, p)
    if o.pd is not None:
        d["mode_pd"] = _regulator_data(o.pd, o.pd_margins, o.pd_plant)
    else:
        d["mode_pd"] = {"status": "not possible with these sensors", "reason": o.pd_refusal}
    if o.model is not None:
        d["force_model"] = {"relative_error": dict(o.model.relative_error), "box_half_width": _axis_dict(o.model.span, p),
                            "samples": o.model.samples, "validation_samples": o.model.validation_samples}
        d["start_rule"] = ("released at rest, coils at bias; the LQG predictor is started from measurements over a short "
                           "open-loop window (least squares on its model), the mode-space PD bumpless")
        d["releases"] = _release_data(o.releases, p)
        d["largest_held_offset"] = {a: {"held": _f(v.held), "lost_above": _f(v.lost), "unit": v.unit,
                                        "searched_up_to": v.limit, "runs": v.runs} for a, v in o.largest.items()}
        if o.region is not None:
            d["capture_region"] = o.region.to_dict()
    return d


# ------------------------------------------------------------------------------------ files


def write_multiaxis_files(design: Design, out: Path, o: MultiaxisOutcome) -> list[str]:
    """mimo_plant.csv always; the releases and the capture region when they were run."""
    from fields.io.export import header_lines, write_csv, write_png
    from fields.io import plots_control

    out = Path(out)
    head, rows = o.plant.matrix_rows()
    write_csv(out / "mimo_plant.csv", head, rows,
              header_lines(design.name, f"multi-axis plant [A B; C D] at the hot corner, drive {o.plant.drive}; "
                                        "SI units, deviations from the equilibrium"))
    names = ["mimo_plant.csv"]
    if o.releases:
        for k, r in o.releases.items():
            h, rr = r.rows(o.plant.free_axes, o.plant.coil_names)
            f = f"mimo_sim_{slug(k)}.csv"
            write_csv(out / f, h, rr, header_lines(design.name, f"nonlinear multi-axis release '{k}'; held: {r.held}"))
            names.append(f)
        fig = plots_control.multiaxis_responses({k: v for k, v in o.releases.items() if "zero" not in k and "PD" not in k},
                                        o.plant.free_axes, o.plant.coil_names,
                                        title=f"{design.name}: nonlinear releases (LQG, hot coils)")
        write_png(out / "mimo_releases.png", fig)
        close_figure(fig)
        names.append("mimo_releases.png")
    if o.region is not None:
        h, rr = o.region.rows()
        write_csv(out / "capture_region.csv", h, rr,
                  header_lines(design.name, f"capture region: release at rest from each start, LQG, {o.region.t_end_s:g} s; "
                                            f"force-model fit error {o.region.force_model_error}"))
        fig = plots_control.capture_region_map(o.region, title=f"{design.name}: capture region (LQG, measured start)")
        write_png(out / "capture_region.png", fig)
        close_figure(fig)
        names += ["capture_region.csv", "capture_region.png"]
    return names
