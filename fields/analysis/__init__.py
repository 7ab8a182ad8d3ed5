"""Analysis of the floater on top of the force model (:mod:`fields.physics.wrench`).

Modules: :mod:`~fields.analysis.poses` (gap axis, displacements, drive patterns, sign
conventions), :mod:`~fields.analysis.stencil` (finite differences), :mod:`~fields.analysis.curves`
(force-gap-current curves), :mod:`~fields.analysis.equilibrium`, :mod:`~fields.analysis.stiffness`,
:mod:`~fields.analysis.verdict` (modes), :mod:`~fields.analysis.maps` (offset and tilt maps),
:mod:`~fields.analysis.allocation` (current-to-wrench matrix, control axis). The public names
are re-exported here: ``import fields.analysis as analysis``.
"""

from fields.analysis.allocation import Allocation, ControlAxis, allocation_matrix, control_axis
from fields.analysis.curves import AxialCurves, axial_curves, family_currents
from fields.analysis.equilibrium import Equilibrium, Equilibrium1D, axial_equilibria, find_equilibrium
from fields.analysis.maps import MAP_KINDS, PoseMap, pose_map
from fields.analysis.poses import AXES, com_world, displace, drive_pattern, floater_size_m, pose_at_gap
from fields.analysis.stencil import STEP_ANGLE_RAD, STEP_LENGTH_M
from fields.analysis.stiffness import (
    GapStiffness,
    Stiffness,
    stiffness_matrix,
    stiffness_stencil,
    stiffness_versus_gap,
)
from fields.analysis.verdict import MODE_KIND, Mode, ModeKind, Verdict, mass_matrix, stability_verdict

__all__ = [
    "AXES", "MAP_KINDS", "MODE_KIND", "STEP_ANGLE_RAD", "STEP_LENGTH_M",
    "Allocation", "AxialCurves", "ControlAxis", "Equilibrium", "Equilibrium1D", "GapStiffness", "Mode", "ModeKind",
    "PoseMap", "Stiffness", "Verdict",
    "allocation_matrix", "axial_curves", "axial_equilibria", "com_world", "control_axis", "displace", "drive_pattern",
    "family_currents", "find_equilibrium", "floater_size_m", "mass_matrix", "pose_at_gap", "pose_map",
    "stability_verdict", "stiffness_matrix", "stiffness_stencil", "stiffness_versus_gap",
]
