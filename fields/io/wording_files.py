"""One line on each file a run writes (the report's file list); re-exported by
:mod:`fields.io.wording`."""

from __future__ import annotations

from typing import Sequence

#: one line per output file name; names that vary (per sensor, per simulation) by their prefix
OUTPUT_FILES: dict[str, str] = {
    "design.json": "the design as read (SI units), with its summary",
    "design.png": "the design drawn to scale",
    "curves.csv": "axial force versus gap for each current, hover current, payload envelope",
    "curves.json": "summary of the axial curves: equilibria, operating gap, warnings",
    "curves.png": "figure: force versus gap for each current",
    "kz_table.csv": "axial stiffness k_z versus gap and current",
    "stability.json": "equilibrium, 6x6 stiffness with error bars, verdict mode by mode",
    "stiffness.csv": "the 6x6 stiffness matrix and its error bars",
    "allocation.csv": "force and torque per ampere of each coil at the equilibrium",
    "map_lateral.csv": "force and torque versus sideways offset and gap",
    "map_tilt.csv": "force and torque versus tilt and gap",
    "maps.png": "figure: sideways and tilt maps",
    "offset_tilt_curves.png": "figure: sideways force and tilt torque at the operating gap",
    "stiffness_vs_gap.csv": "diagonal stiffness versus gap at the hover current",
    "stiffness_vs_gap.png": "figure: stiffness versus gap",
    "coil.json": "coil datasheet: winding, resistance, inductance, heat, drive headroom",
    "coil_heat.csv": "coil power and steady temperature at the hover current of each gap",
    "sensors.json": "sensor curves, gains, linear ranges, cross-talk, placement",
    "sensors.csv": "sensor outputs versus gap",
    "sensors.png": "figure: sensor curves",
    "placement.csv": "candidate Hall sensor positions, exclusions and how they rate",
    "sensors_operating.csv": "each sensor at the operating gap: output, vertical and sideways sensitivity, linear range",
    "control.json": "control model: plant, controller starting point, margins, simulations",
    "plant.json": "linear plant: state space and transfer function",
    "plant.csv": "linear plant matrices, one entry per row",
    "capture.csv": "capture map: starting offset and speed, captured or not",
    "capture.png": "figure: capture range",
    "hysteresis.csv": "on/off control with a hysteresis band: outcome per band",
    "control_bode.png": "figure: Bode plot of the loop",
    "control_nyquist.png": "figure: Nyquist plot of the loop",
    "control_step.png": "figure: nonlinear responses",
    "run_status.json": "which stages finished and which failed",
    "exports/exports.json": "what the exports stage wrote",
    "exports/tables.h": "C header for firmware: force, stiffness and inverse tables with lookup functions",
    "exports/plant.sub": "SPICE subcircuit of the electromechanical plant",
    "exports/geometry.stl": "the bodies joined in one triangle mesh (STL, coordinates in metres)",
    "exports/geometry_mm.stl": "the bodies as STL in millimetres, one named solid per body",
    "exports/geometry.glb": "the bodies as a glTF scene of named meshes",
    "sim_": "nonlinear simulation: time, position, speed, current",
    "inverse_": "gap from a sensor reading (inverse table)",
    "beam_placement_": "candidate beam heights for a beam gate and how they rate",
    "table_": "force table for other tools",
}

_BY_SUFFIX = {".png": "figure", ".csv": "table (header on the first line)", ".json": "data (JSON)",
              ".stl": "triangle mesh", ".glb": "glTF scene", ".h": "C header", ".sub": "SPICE subcircuit"}


def file_description(rel: str, csv_notes: Sequence[str] = ()) -> str:
    """One line on what an output file holds.

    ``rel`` is its path inside the output folder; ``csv_notes`` the notes of a CSV's sidecar
    (its last note says what the table holds, and wins over the generic line).

    >>> file_description("curves.png"), file_description("x/table.meta.json")
    ('figure: force versus gap for each current', 'what table.csv holds: notes and the unit of every column')
    """
    name = rel.rsplit("/", 1)[-1]
    if name.endswith(".meta.json"):
        return f"what {name[:-len('.meta.json')]}.csv holds: notes and the unit of every column"
    if csv_notes:
        return str(csv_notes[-1])
    if rel in OUTPUT_FILES:
        return OUTPUT_FILES[rel]
    if name in OUTPUT_FILES:
        return OUTPUT_FILES[name]
    for prefix, text in OUTPUT_FILES.items():
        if prefix.endswith("_") and name.startswith(prefix):
            return text
    dot = name.rfind(".")
    return _BY_SUFFIX.get(name[dot:] if dot >= 0 else "", "output file")


def soft_iron_notes() -> tuple[str, ...]:
    """What the stability numbers of a soft-iron (ball) floater are."""
    return ("soft-iron ball: its polarization is induced by the coils and cores (solved with them on the axis); "
            "a ball turns into itself under rotation, so tilt and spin are neutral by symmetry (no torque)",
            "sideways stiffness of the soft-iron ball: the value with the ball's and the cores' polarization held "
            "at their on-axis solution; for linear iron it is an upper bound (the polarization following the "
            "offset lowers it), so a negative value means the ball is surely pushed off the axis",
            "sideways and tilt maps: not computed for soft-iron floaters (only poses on the axis are modelled)")


def soft_iron_earnshaw_note() -> str:
    return ("the floater is soft iron, whose magnetization is induced (and follows the pose): the trace need not "
            "vanish")
