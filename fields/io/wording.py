"""The sentences hoverfield writes: verdict lines, explanations, notes, warnings, safety text.

Physics and study results carry numbers, flags and names; the words a person reads are built
here from those structured fields, so the report, the JSON summaries and the command line say
the same thing in the same way.
"""

from __future__ import annotations

import math
from typing import Iterable, Sequence

from fields.io.wording_files import OUTPUT_FILES, file_description  # noqa: F401 (re-exported)

#: the safety points every README-facing output shows: (lead, text); lead may be empty
SAFETY_POINTS: tuple[tuple[str, str], ...] = (
    ("Strong magnets", "pinch skin and break fingers when they snap together, shatter into sharp chips, and fly "
                       "towards iron tools. Keep them away from pacemakers and other implants, cards and magnetic media."),
    ("Coils get hot.", "The temperatures are lumped estimates; the hot spot inside a winding is hotter. Check the "
                       "real coil and respect the wire's insulation class."),
    ("Supply currents.", "Fuse every supply; an inductive coil switched off abruptly produces a high voltage, so use "
                         "a flyback diode or a driver that handles it."),
    ("", "These are design estimates, not a safety approval: follow local electrical codes and licensed practice."),
)


def safety_text() -> str:
    """The safety points as one paragraph of plain text (command line, help epilog)."""
    return "Safety: " + " ".join(f"{lead} {text}" if lead else text for lead, text in SAFETY_POINTS)


# ---------------------------------------------------------------------------------------------
# stability


def mode_text(mode, coils: bool = True) -> str:
    """One line for a stability mode (:class:`fields.analysis.Mode`): name, stable or not,
    stiffness with its unit, natural frequency or growth time."""
    from fields.io.numbers import fmt

    name = mode_name(mode)
    if mode.neutral:
        return f"{name}: neutral (no restoring stiffness)"
    k = f"{fmt(mode.stiffness, 3)} {mode.unit}"
    if getattr(mode, "coupled_axes", ()):
        shown = [fmt(d, 3) for d in mode.diagonal_stiffness]
        diag = (" = ".join(f"K[{a},{a}]" for a in mode.axes) + f" {shown[0]}" if len(set(shown)) == 1
                else ", ".join(f"K[{a},{a}] {d}" for a, d in zip(mode.axes, shown)))
        k = (f"modal stiffness {k} (matrix diagonal {diag} {mode.unit}; "
             f"{100 * mode.coupling_share:.0f} % of the motion's energy in the coupled axes)")
    if mode.stable:
        f = f", {mode.frequency_Hz:.3g} Hz" if mode.frequency_Hz else ""
        return f"{name}: stable, {k}{f}"
    why = ("the floater alone at a held current, 1/sqrt(-k/m); the control plant's time constant adds the coil"
           if coils else "1/sqrt(-k/m); the design has no coils to hold it")
    t = f", grows with time constant {mode.growth_time_s * 1e3:.3g} ms ({why})" if mode.growth_time_s else ""
    return f"{name}: unstable, needs feedback, {k}{t}"


def verdict_lines(verdict) -> list[str]:
    """The verdict (:class:`fields.analysis.Verdict`) as lines: every mode, the count of
    axes needing control, the Earnshaw trace check (Earnshaw 1842)."""
    out = [mode_text(m, getattr(verdict, 'coils', True)) for m in verdict.modes]
    out.append(f"axes needing active control: {verdict.unstable_count}")
    why = ("not expected to vanish: induced iron magnetization (cores, a soft-iron floater) follows the pose" if verdict.iron
           else "vanishes for rigid magnets in iron-free fields (Earnshaw)")
    diag = ("; it adds the matrix diagonal K[x,x] + K[y,y] + K[z,z], not the modal stiffnesses of coupled modes"
            if any(getattr(m, "coupled_axes", ()) for m in verdict.modes) else "")
    out.append(f"Earnshaw check: trace of translational stiffness {verdict.earnshaw_trace_N_per_m:.3g} N/m "
               f"({verdict.earnshaw_residual:.2g} of the largest diagonal entry; {why}{diag})")
    return out


def earnshaw_note(has_iron: bool) -> str:
    """Why the translational stiffness trace should or need not vanish."""
    if not has_iron:
        return "rigid magnets in iron-free static fields: the trace must vanish (Earnshaw 1842)"
    return ("the design has an iron core, whose induced magnetization follows the floater: "
            "the trace need not vanish")


def step_rule_text(step_length_m: float, step_angle_rad: float) -> str:
    """How the stiffness matrix was differentiated."""
    return (f"central differences, steps {step_length_m:g} m and {step_angle_rad:g} rad, "
            "Richardson extrapolation with h and 2h; error bar |R - D_h| plus the quadrature share "
            "(the difference from the next coarser rule level; with cores the force error estimate over "
            "min(gap, floater size))")


def equilibrium_label(stable: bool) -> str:
    """Label of a 1-D axial equilibrium."""
    return "axially stable" if stable else "axially unstable"


def map_grid_text(lateral, tilt, gap_points: int) -> str:
    """How many gaps and offsets the maps use (their own grid; the curves use gap_points)."""
    return (f"maps on {len(lateral.gaps_m)} gaps x {len(lateral.coordinate)} sideways offsets and "
            f"{len(tilt.gaps_m)} gaps x {len(tilt.coordinate)} tilts (their own grid; the curves use "
            f"gap_points = {gap_points})")


def _vec(v) -> str:
    """A force or torque vector, round-off below 1e-12 (N or N m) shown as 0."""
    from fields.io.numbers import fmt

    return "(" + ", ".join(fmt(x, 3, error=1e-12) for x in v) + ")"


def operating_point_text(op) -> str:
    """How the operating point (:class:`fields.analysis.operating.OperatingPoint`) was chosen."""
    gop = op.operating_gap_m * 1e3
    ih = op.hover_current_at_operating_gap_A
    if getattr(op, "chosen", False):
        eq = op.equilibrium
        return (f"chosen point: gap {eq.gap_m * 1e3:.4g} mm, drive current {op.drive_current_A:.4g} A (hover "
                f"current there {ih:.4g} A); not solved for balance: net force {_vec(eq.residual_force_N)} N, "
                f"torque {_vec(eq.residual_torque_Nm)} N m")
    if op.passive and not getattr(op, "axially_stable", True):
        return (f"zero-current balance at gap {op.axial_gap_m * 1e3:.4g} mm, axially unstable: the design has no coils "
                "to hold it (the verdict says which axes would need control)")
    if op.passive:
        return (f"passive equilibrium at zero current, gap {op.axial_gap_m * 1e3:.4g} mm (axially stable; "
                f"holding the operating gap {gop:.4g} mm instead would take {ih:.4g} A)")
    return f"hover current {ih:.4g} A at the operating gap {gop:.4g} mm"


def allocation_text(allocation) -> str:
    """What the coils can command (:class:`fields.analysis.Allocation`)."""
    a = allocation
    return (f"the coils can command {a.rank} independent combinations of the {len(a.axes)} free axes "
            f"({', '.join(a.axes)}); condition number {a.condition_number:.3g} "
            "(torque rows divided by the floater size)")


# ---------------------------------------------------------------------------------------------
# control


def crosstalk_note(crosstalk_per_A: float) -> str:
    """What the controller assumes about the sensor's view of the coil."""
    if crosstalk_per_A != 0.0:
        return "the controller assumes the coil's share of the reading (c I) is subtracted first"
    return "the sensor does not see the coil"


def plant_note() -> str:
    """The two plant variants written to plant.json."""
    return ("as_wired: the sensor reading includes the coil's own field (cross-talk); "
            "crosstalk_compensated: the reading minus c I, which the controller assumes")


# ---------------------------------------------------------------------------------------------
# warnings


def prefixed(warnings: Iterable[str], kind: str, name: str) -> list[str]:
    """Warnings about one coil or sensor, each starting "<kind> <name>: " once."""
    tag = f"{kind} "
    return [w if w.startswith(tag) else f"{kind} {name}: {w}" for w in warnings]


def group_coil_warnings(warnings: Sequence[str], coil_names: Sequence[str]) -> list[str]:
    """Merge warnings that differ only in the coil's name ("coils 'a', 'b': ...").

    Examples
    --------
    >>> group_coil_warnings(["coil a: hot", "coil b: hot", "other"], ["a", "b"])
    ["coils 'a', 'b': hot", 'other']
    """
    groups: dict[str, list[str]] = {}
    order = []
    for w in warnings:
        key, who = w, None
        for c in coil_names:
            tag = f"coil {c}: "
            if w.startswith(tag):
                key, who = w[len(tag):].replace(f"coil {c}", "the coil"), c
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


# ---------------------------------------------------------------------------------------------
# stability modes and curves (structured fields of fields.analysis results -> words)


def mode_name(mode) -> str:
    """Name of a stability mode from its kind and axes ("sideways x/y", "tilt about y", ...);
    a coupled mode names the axes it mixes with ("sideways x coupled with tilt about y")."""
    from fields.analysis.verdict import MODE_KIND

    vertical = getattr(mode, "z_vertical", True)
    base = _axes_name(mode.kind, mode.axes, vertical)
    coupled = getattr(mode, "coupled_axes", ())
    if not coupled:
        return base
    return f"{base} coupled with {_axes_name(MODE_KIND[coupled[0]], coupled, vertical)}"


def _axes_name(kind, axes, z_vertical: bool = True) -> str:
    """Names about the z axis; with gravity along z (``z_vertical``) it is "vertical", else "axial"."""
    from fields.analysis.verdict import ModeKind

    if kind is ModeKind.SIDEWAYS:
        return ("sideways " if z_vertical else "radial ") + "/".join(axes)
    if kind is ModeKind.TILT:
        return "tilt about " + "/".join(a.lstrip("r") for a in axes)
    if kind is ModeKind.VERTICAL:
        return "vertical" if z_vertical else "axial z"
    return "spin about vertical" if z_vertical else "spin about z"


def verdict_notes(verdict, ball: bool = False) -> tuple[str, ...]:
    """Warnings about neutral modes of a verdict that a reader must act on.

    The spin about the vertical is neutral for every round (axisymmetric) design, by symmetry,
    and harmless: the verdict lines say so, and it is no warning. A neutral sideways, tilt or
    vertical mode is: nothing holds the floater along it. For a soft-iron ball (``ball``) every
    rotation turns it into itself: its neutral tilt is no warning either.
    """
    from fields.analysis.verdict import ModeKind

    skip = (ModeKind.SPIN, ModeKind.TILT) if ball else (ModeKind.SPIN,)
    return tuple(f"{mode_name(m)}: neutral (no restoring stiffness; it may drift slowly)"
                 for m in verdict.modes if m.neutral and m.kind not in skip)


def saturation_sentences(curves) -> list[str]:
    """Where the force of a curve family stops being affine in current (saturable iron)."""
    import numpy as np

    if curves.linear_in_current:
        return []
    onset = getattr(curves, "saturation_onset_A", None)
    if onset is None or not np.any(np.isfinite(onset)):
        return ["a core saturates at some gaps: the force is no longer affine in current there"]
    fin = np.isfinite(onset)
    i_lo = int(np.nanargmin(np.where(fin, onset, np.nan)))
    return [f"the iron's B-H curve bends the force away from the linear-iron force (affine in current for a magnet "
            f"floater, quadratic for a soft-iron one; by more than 0.1 %) from "
            f"{float(np.nanmin(onset)):.3g} A (at a {curves.gaps_m[i_lo] * 1e3:.3g} mm gap) at {int(fin.sum())} of "
            f"{len(curves.gaps_m)} gaps; the curves there come from the saturable solve at each current"]


def curve_warnings(curves) -> tuple[str, ...]:
    """Warnings about an axial curve family (:class:`fields.analysis.AxialCurves`)."""
    w = []
    w.extend(saturation_sentences(curves))
    if curves.contact.any():
        w.append(f"{int(curves.contact.sum())} of {len(curves.gaps_m)} gaps put the floater in contact with a body; "
                 "they are marked contact and excluded from equilibria")
    return tuple(w)


# ---------------------------------------------------------------------------------------------
# device notices (fields.devices.notices.Notice -> words)

_CURRENTS = {True: "hover current from the equilibrium analysis", False: "nominal current (no hover currents given)"}


def notice_text(n) -> str:
    """One sentence for a coil, drive or sensor notice (:class:`fields.devices.notices.Notice`)."""
    from fields.devices.winding import CURRENT_DENSITY_SOURCE

    v, s, c = n.values, n.subject, n.code
    mm = 1e3
    texts = {
        "wire_inferred": lambda: f"coil {s}: no wire given; bare diameter {v['diameter_m'] * mm:.3g} mm inferred from "
                                 f"{v['turns']:g} turns at "
                                 + (f"the given copper fill {v['fill']:g}" if v.get("fill_given", v["fill"] != _default_fill())
                                    else f"an assumed copper fill {v['fill']:g} (no fill_factor given; typical of "
                                         "machine-wound enamelled round wire, common practice, no source; give "
                                         "fill_factor or the wire to change it)"),
        "high_fill": lambda: f"coil {s}: copper fill factor {v['fill']:.2f} is above {v['limit']} and hard to wind with "
                             "enamelled round wire (common practice, no source)",
        "fill_mismatch": lambda: f"coil {s}: given fill factor {v['given_fill']:g} differs from the {v['implied_fill']:.3f} "
                                 "implied by the turns and wire; the implied value is used",
        "thermal_runaway": lambda: f"coil {s}: thermal runaway (no steady temperature: I^2 R20 alpha >= h A) at "
                                   + (f"gaps {gap_runs_text(v['runs_m'])} ({v['count']} of {v['of']} gaps)" + _operating_in(v)
                                      if "runs_m" in v
                                      else f"{v['count']} of {v['of']} gaps, e.g. gap {v['first_gap_m'] * mm:.3g} mm"),
        "runaway_at_operating": lambda: f"coil {s}: runaway at the operating current; the hot resistance is quoted at "
                                        f"{v['quoted_temperature_C']:g} C",
        "insulation_class_assumed": lambda: f"coil {s}: no insulation class given; class {v['class_C']:g} C (IEC 60085) assumed",
        "above_thermal_class": lambda: f"coil {s}: over the insulation class {v['class_C']:g} C "
                                       + ((f"at gaps {gap_runs_text(v['runs_m'])}" if "runs_m" in v else
                                           f"at gaps {v['gap_lo_m'] * mm:.3g}-{v['gap_hi_m'] * mm:.3g} mm")
                                          + f" ({v['count']} of {v['of']} gaps)" if v['of'] > 1 else "at this current")
                                       + " if held there continuously (IEC 60085 / IEC 60317)" + _operating_in(v),
        "near_thermal_class": lambda: f"coil {s}: average winding temperature {v['temperature_C']:.0f} C is within the "
                                      f"{v['allowance_K']:g} K hot-spot allowance of the thermal class {v['class_C']:g} C "
                                      "(IEC 60085; allowance as in IEC 60034-1, from memory): the hot spot may exceed it",
        "current_density_high": lambda: f"coil {s}: current density up to {v['max_A_per_mm2']:.2f} A/mm^2 at the "
                                        f"{_CURRENTS[v['currents_from_hover']]} exceeds {v['limit_A_per_mm2']} A/mm^2 "
                                        f"({CURRENT_DENSITY_SOURCE})",
        "max_current_density_high": lambda: f"coil {s}: max current gives {v['value_A_per_mm2']:.2f} A/mm^2, above the "
                                            f"continuous-duty band; short duty only ({CURRENT_DENSITY_SOURCE})",
        "core_saturates": lambda: f"coil {s}: a core saturates at {v['count']} of {v['of']} gaps; the core's incremental "
                                  "inductance drops there",
        "supply_short": lambda: f"coil {s}: the supply {v['supply_V']:g} V is short of the {v['required_V']:.3g} V needed "
                                f"(R I_peak {v['resistive_V']:.3g} V + L dI/dt {v['inductive_V']:.3g} V) to correct "
                                f"{v['displacement_m'] * mm:g} mm at {v['rate_per_s']:.3g} 1/s",
        "low_headroom": lambda: f"coil {s}: headroom {v['headroom_V']:.3g} V is under 20 % of the supply",
        "cannot_hold_hover": lambda: f"coil {s}: the supply cannot even hold the hover current ({v['needed_V']:.3g} V needed)",
        "peak_over_max": lambda: f"coil {s}: the peak current {v['peak_A']:.3g} A exceeds the coil's max current",
        "flat_output": lambda: f"sensor {s}: the output does not change at the operating gap ("
                               + {"fully_blocked": "fully blocked", "not_intercepted": "not intercepted", "flat": "flat"}[v["state"]]
                               + "); move the beam",
        "approximate_silhouette": lambda: f"sensor {s}: an oblique or mesh silhouette is outlined by a polygon (approximate)",
        "hall_saturates": lambda: f"sensor {s}: the reading reaches {v['worst_T'] * 1e3:.3g} mT with all coils at max current, "
                                  f"beyond the {v['range_T'] * 1e3:.3g} mT range",
        "no_sensitivity": lambda: f"sensor {s}: its reading does not change with the gap at the operating gap (it may "
                                  "still sense sideways or tilt motion: see the control section); no inverse gap table",
        "coil_crosstalk": lambda: f"sensor {s}: coil {v['coil']} at max current reads like {v['apparent_gap_m'] * mm:.3g} mm of "
                                  "gap; compensate it (subtract c_k I_k)",
        "core_approximate": lambda: f"sensor {s}: core response from the ring-cell iron solve with linear iron (initial "
                                    "susceptibility): the readings leave out the B-H curve's bending at high currents",
    }
    if c not in texts:  # a notice without its own sentence yet: its name and values in words
        shown = ", ".join(f"{k.replace('_', ' ')} {x:.4g}" if isinstance(x, float) else f"{k.replace('_', ' ')} {x}"
                          for k, x in v.items())
        return f"{s}: {c.replace('_', ' ')}" + (f" ({shown})" if shown else "")
    return texts[c]()


def _operating_in(v: dict) -> str:
    """Whether the operating gap lies in a notice's gap runs, in words ("" when not known)."""
    if "operating_gap_m" not in v or "runs_m" not in v:
        return ""
    g = v["operating_gap_m"]
    inside = any(lo <= g <= hi for lo, hi in v["runs_m"])
    return f"; the operating gap {g * 1e3:.3g} mm is {'one of them' if inside else 'outside them'}"


def gap_runs_text(runs_m) -> str:
    """Contiguous gap runs (m) as ``"4-9.5, 12 mm"`` (a lone gap as one number).

    >>> gap_runs_text([(0.004, 0.0095), (0.012, 0.012)])
    '4-9.5, 12 mm'
    """
    parts = [f"{lo * 1e3:.3g}" if lo == hi else f"{lo * 1e3:.3g}-{hi * 1e3:.3g}" for lo, hi in runs_m]
    return ", ".join(parts) + " mm"


def operating_heat_alert(name: str, heat) -> str:
    """The verdict's first line when the coil's operating point is too hot
    (:class:`fields.studies.stages.coil.OperatingHeat`); "" when it is not."""
    where = f"at the operating gap {heat.gap_m * 1e3:.3g} mm ({heat.current_A:.3g} A)"
    if heat.runaway:
        return (f"HEAT: coil {name} runs into thermal runaway {where}: no steady temperature; it will not "
                "survive continuous operation there")
    if heat.over_insulation_class:
        return (f"HEAT: coil {name} runs at {heat.temperature_C:.0f} C {where}, over its insulation class "
                f"{heat.insulation_class_C:g} C; it will not survive continuous operation there")
    return ""


def _default_fill() -> float:
    from fields.devices.winding import DEFAULT_FILL_FACTOR

    return DEFAULT_FILL_FACTOR


def notices_text(notices) -> tuple[str, ...]:
    """Sentences for several notices, in order."""
    return tuple(notice_text(n) for n in notices)


#: the rows of a coil datasheet as the command line and the report show it:
#: (label, CoilData attribute, unit shown, scale from SI)
COIL_SHEET_ROWS: tuple[tuple[str, str, str, float], ...] = (
    ("turns", "turns", "", 1.0), ("bare wire diameter", "wire_diameter_m", "mm", 1e3),
    ("copper fill factor", "copper_fill_factor", "", 1.0), ("mean turn length", "mean_turn_length_m", "mm", 1e3),
    ("wire length", "wire_length_m", "m", 1.0), ("copper mass", "copper_mass_kg", "g", 1e3),
    ("resistance at 20 C", "resistance_20C_ohm", "ohm", 1.0),
    ("self-inductance (core included)", "inductance_H", "mH", 1e3), ("L/R at 20 C", "time_constant_20C_s", "ms", 1e3),
    ("current density at nominal current", "current_density_nominal_A_per_mm2", "A/mm^2", 1.0),
    ("current density at max current", "current_density_max_A_per_mm2", "A/mm^2", 1.0),
    ("cooling surface", "surface_area_m2", "cm^2", 1e4), ("convection coefficient", "convection_W_per_m2K", "W/m^2K", 1.0),
)


def _iron_inductance_note(cd) -> str:
    """Numbers behind L(gap) of a coil with a soft-iron core."""
    import numpy as np

    if cd.inductance_model != "iron_cells" or not len(cd.gaps_m):
        return ""
    o = np.argsort(cd.gaps_m)
    g = float(np.clip(cd.operating_gap_m if hasattr(cd, "operating_gap_m") else np.median(cd.gaps_m),
                      cd.gaps_m[o][0], cd.gaps_m[o][-1]))
    dL = float(np.interp(g, cd.gaps_m[o], cd.dL_dgap_H_per_m[o]))
    lo, hi = float(np.min(cd.inductance_vs_gap_H)), float(np.max(cd.inductance_vs_gap_H))
    return (f"iron core solved by ring cells at each gap's current: incremental L = {cd.inductance_H * 1e3:.4g} mH at "
            f"the operating gap ({cd.inductance_core_H * 1e3:.4g} mH of it from the core, air coil "
            f"{cd.inductance_air_H * 1e3:.4g} mH); over the gap range L runs from {lo * 1e3:.4g} to {hi * 1e3:.4g} mH, "
            f"dL/dgap about {dL:.3g} H/m mid-range (the floater and the bias current move the iron along its B-H "
            "curve); L(gap) is interpolated from the cell solve at Chebyshev gaps")


def coil_prose(cd) -> dict:
    """The explanatory fields of a coil datasheet (:class:`fields.devices.coil.CoilData`)."""
    from fields.devices.winding import CONVECTION_SOURCE, CURRENT_DENSITY_SOURCE
    from fields.input import tables

    origin = {"gauge": f"{cd.wire_gauge} (ASTM B258 formula)", "given": "given bare diameter",
              "inferred": f"inferred from turns and copper fill {cd.assumed_fill_factor:g}"
              if cd.assumed_fill_factor else ""}[cd.wire_source]
    dl = {
        "iron_cells": _iron_inductance_note(cd),
        "air": "air coil and a rigid permanent-magnet floater of mu_r about 1: the floater does not change L in a "
               "linear model, dL/dgap = 0 (a real magnet's mu_r of about 1.05 gives a small, unmodelled change)",
    }.get(cd.inductance_model, cd.inductance_model)
    return {
        "wire_origin": origin,
        "dL_dgap_note": dl,
        "surface_note": ("outer cylinder + both end annuli + open bore" if cd.bore_cooled
                         else "outer cylinder + both end annuli (bore filled by a core, not counted)"),
        "sources": {
            "wire": tables.AWG_SOURCE if cd.wire_gauge else origin,
            "copper": tables.COPPER_SOURCE + ": resistivity 1/58 ohm mm^2/m, alpha 0.00393 /K, density 8890 kg/m^3",
            "convection": CONVECTION_SOURCE if abs(cd.convection_W_per_m2K - 10.0) < 1e-12 else "study.convection_W_per_m2K",
            "current_density_band": CURRENT_DENSITY_SOURCE,
            "insulation": tables.THERMAL_CLASS_SOURCE,
            "inductance": "Maxwell filament mutual inductance integrated over the cross-section, exact self term",
            "currents": _CURRENTS[cd.currents_from_hover],
        },
    }


def headroom_rate_note(hr) -> str:
    """What the rate in the drive-headroom estimate is (:class:`fields.devices.drive.DriveHeadroom`)."""
    p = hr.rate_per_s
    if hr.unstable:
        return f"p = sqrt(-k/m) = {p:.4g} 1/s: the unstable pole (restoring stiffness k = -dF/dx < 0)"
    return f"p = sqrt(k/m) = {p:.4g} 1/s: the natural frequency (k = -dF/dx >= 0, a stable axis)"


# ---------------------------------------------------------------------------------------------
# control (fields.control results -> words)


def design_rules() -> tuple[str, ...]:
    """The rules behind the plant's crossover, sample rate and delay budget, with sources."""
    from fields.control.plant import (DELAY_SHARE_OF_PHASE_MARGIN, NOMINAL_CROSSOVER_MULTIPLE,
                                      NOMINAL_PHASE_MARGIN_DEG, SAMPLES_PER_CROSSOVER_PERIOD)

    return (
        f"Crossover: omega_c = {NOMINAL_CROSSOVER_MULTIPLE:g} x the unstable pole p (an open-loop-unstable "
        "loop needs omega_c above about 2p; Skogestad & Postlethwaite, Multivariable Feedback Control, "
        "2nd ed. 2005, sec. 5.8, recalled from memory; the factor 3 is common practice, no source).",
        f"Sample rate: f_s >= {SAMPLES_PER_CROSSOVER_PERIOD:g} x f_c, f_c = omega_c/(2 pi) (rule of thumb "
        "10-20x: Franklin, Powell & Workman, Digital Control of Dynamic Systems, 3rd ed. 1998, ch. 11; "
        "Astrom & Wittenmark, Computer-Controlled Systems, 3rd ed. 1997, omega_c h = 0.15-0.5; "
        "recalled from memory).",
        f"Delay: the total loop delay tau (sensor + computation + half a sample of zero-order hold) "
        f"costs omega_c tau of phase at crossover; keep it <= {DELAY_SHARE_OF_PHASE_MARGIN:.3g} of the "
        f"phase margin ({NOMINAL_PHASE_MARGIN_DEG:g} deg nominal): tau_max = "
        f"{DELAY_SHARE_OF_PHASE_MARGIN:.3g} PM / omega_c (common practice, no source).",
    )


def discretisation_text(cd) -> str:
    """How a controller design (:class:`fields.control.design.ControllerDesign`) was discretised."""
    if cd.sample_time_s is None or str(cd.discretisation) == "analog":
        return "analog (no discretisation)"
    return (f"Tustin (bilinear) with pre-warping at omega_c = {cd.prewarp_frequency_rad_per_s:.6g} rad/s via "
            f"control.c2d, T = {cd.sample_time_s:g} s")


def circuit_text(net) -> str:
    """The op-amp realisation (:class:`fields.control.circuits.OpAmpLeadNetwork`) in words."""
    second = ("inverting PI, input Ra, feedback Rb + Cb in series, zero 1/(Rb Cb)"
              if str(net.second_stage) == "pi" else "unity inverting buffer")
    return ("stage 1: inverting op-amp, input R3 in series with (R1 || C1), feedback R2; "
            "zero 1/(R1 C1), pole (R1+R3)/(R1 R3 C1), DC gain R2/(R1+R3); stage 2: " + second
            + "; output to the current driver")


def margins_domain_text(m) -> str:
    """Continuous or discrete, with sample time and delay (:class:`fields.control.margins.Margins`)."""
    if m.sample_time_s is None:
        return "continuous"
    return f"discrete, T = {m.sample_time_s:g} s, delay {m.delay_samples} samples"


def proportional_text(study, mechanical_pole_rad_per_s: float) -> str:
    """Why pure proportional feedback does or does not hold the floater
    (:class:`fields.control.margins.ProportionalStudy`)."""
    import numpy as np

    u = study.signal_unit
    maxre = np.asarray(study.max_real_part_rad_per_s)
    gains = np.asarray(study.gains)
    kcrit = study.critical_gain
    if study.drive == "current":
        above = np.abs(maxre[gains > kcrit])
        return (f"Current drive, proportional only: s^2 + (k_s + K k_i G_s)/m = 0. Below the critical "
                f"gain {kcrit:.4g} A/{u} a real pole is positive (the floater runs away, "
                f"rate up to {mechanical_pole_rad_per_s:.4g} 1/s); above it both poles sit on the "
                f"imaginary axis (max real part {np.max(above) if above.size else 0:.2g} "
                f"1/s, numerically zero): an undamped oscillation, e.g. {study.undamped_frequency_rad_per_s:.4g} rad/s at "
                f"{gains.max() / kcrit:g} x critical. No gain adds damping; a derivative (lead) term is needed.")
    lo, hi = study.stable_gain_window
    window = ("no gain is stable" if not (np.isfinite(lo) and np.isfinite(hi))
              else f"a stable window exists for {lo:.4g} < K < {hi:.4g} V/{u} (weakly damped)")
    return (f"Voltage drive, proportional only: Routh-Hurwitz on s^3 + (R/L) s^2 + (b - p^2) s + "
            f"(K' - (R/L) p^2) needs b = k_i^2/(m L) = {study.back_emf_damping_per_s2:.4g} 1/s^2 above p^2 = -k_s/m = "
            f"{study.unstable_stiffness_per_s2:.4g} 1/s^2: {window}. Across the gains tried the fastest mode grows at "
            f"{maxre.min():.4g} to {maxre.max():.4g} 1/s (positive = growing): the coil's electrical "
            f"lag turns the undamped oscillation of current drive into a growing one.")


# ---------------------------------------------------------------------------------------------
# sensor linear ranges and placement studies

#: what a missing linear range means (the only case: no slope at the operating gap)
NO_LINEAR_RANGE = "none: the output does not change with the gap at the operating gap"

#: candidate statuses of the Hall and beam placement studies, in words
PLACEMENT_STATUS_TEXT = {
    "usable": "usable", "inside_body": "inside a body", "floater_travel": "inside the floater's travel",
    "no_sensitivity": "without sensitivity to the gap", "saturates": "saturating the sensor with the coils at max current",
    "blocked_by_body": "with the beam crossed by a fixed body",
    "flat_output": "with a flat output at the operating gap (beam fully blocked or not reached)",
}

#: the ranking rules as stated to the user
HALL_PLACEMENT_RULE = "widest linear range around the operating gap, ties by least coil cross-talk"
BEAM_PLACEMENT_RULE = "widest linear range of the blocked fraction around the operating gap, ties by larger gain"


def linear_range_text(lo_m, hi_m) -> str:
    """``"lo .. hi mm"``, or :data:`NO_LINEAR_RANGE` when there is none (NaN or None edges)."""
    ok = lo_m is not None and hi_m is not None and math.isfinite(lo_m) and math.isfinite(hi_m)
    return f"{lo_m * 1e3:.4g} .. {hi_m * 1e3:.4g} mm" if ok else NO_LINEAR_RANGE


def placement_text(what: str, counts: dict, best_found: bool, lateral_span_m: float | None = None) -> str:
    """One sentence on a placement study: what was set aside and why, or why no candidate is usable
    ("" when every candidate is usable)."""
    total = sum(counts.values())
    others = [f"{n} {PLACEMENT_STATUS_TEXT[c]}" for c, n in counts.items() if c != "usable" and n]
    travel = ("" if lateral_span_m is None or not counts.get("floater_travel")
              else f" (the travel: gap_min to gap_max, sideways up to {lateral_span_m * 1e3:g} mm in x and y)")
    if not best_found:
        return (f"{what}: no candidate is usable of {total}: " + ", ".join(others) + travel
                + "; move or widen the candidates (or use a sensor with a wider range)")
    if not others:
        return ""
    return f"{what}: {total - counts.get('usable', 0)} of {total} candidates set aside: " + ", ".join(others) + travel
