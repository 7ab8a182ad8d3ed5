"""The sentences hoverfield writes: verdict lines, explanations, notes, warnings, safety text.

Physics and study results carry numbers, flags and names; the words a person reads are built
here from those structured fields, so the report, the JSON summaries and the command line say
the same thing in the same way.
"""

from __future__ import annotations

from typing import Iterable, Sequence

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


def mode_text(mode) -> str:
    """One line for a stability mode (:class:`fields.analysis.Mode`): name, stable or not,
    stiffness with its unit, natural frequency or growth time."""
    if mode.neutral:
        return f"{mode.name}: neutral (no restoring stiffness)"
    if mode.stable:
        f = f", {mode.frequency_Hz:.3g} Hz" if mode.frequency_Hz else ""
        return f"{mode.name}: stable, {mode.stiffness:.3g} {mode.unit}{f}"
    t = f", grows with time constant {mode.growth_time_s * 1e3:.3g} ms" if mode.growth_time_s else ""
    return f"{mode.name}: unstable, needs feedback, {mode.stiffness:.3g} {mode.unit}{t}"


def verdict_lines(verdict) -> list[str]:
    """The verdict (:class:`fields.analysis.Verdict`) as lines: every mode, the count of
    axes needing control, the Earnshaw trace check (Earnshaw 1842)."""
    out = [mode_text(m) for m in verdict.modes]
    out.append(f"axes needing active control: {verdict.unstable_count}")
    why = ("not expected to vanish: the iron core's magnetization follows the floater" if verdict.iron
           else "vanishes for rigid magnets in iron-free fields (Earnshaw)")
    out.append(f"Earnshaw check: trace of translational stiffness {verdict.earnshaw_trace_N_per_m:.3g} N/m "
               f"({verdict.earnshaw_residual:.2g} of the largest diagonal entry; {why})")
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
            "Richardson extrapolation with h and 2h; error bar |R - D_h|")


def equilibrium_label(stable: bool) -> str:
    """Label of a 1-D axial equilibrium."""
    return "axially stable" if stable else "axially unstable"


def operating_point_text(op) -> str:
    """How the operating point (:class:`fields.analysis.operating.OperatingPoint`) was chosen."""
    gop = op.operating_gap_m * 1e3
    ih = op.hover_current_at_operating_gap_A
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


def proportional_only_text(study) -> str:
    """Why pure proportional feedback does or does not hold the floater
    (:class:`fields.control.margins.ProportionalStudy`)."""
    return study.explanation


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
