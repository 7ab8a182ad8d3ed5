"""Control model of one axis of a levitated floater.

Modules, along the data flow: :mod:`~fields.control.plant` (parameters, linear plant, force
table, sensor), :mod:`~fields.control.design` (PD/PID starting design, discretisation),
:mod:`~fields.control.circuits` (op-amp realisation, E-series), :mod:`~fields.control.margins`
(loop transfer, margins, pure proportional feedback), :mod:`~fields.control.simulate` (nonlinear
simulation) and :mod:`~fields.control.studies` (capture range, on/off control). The names below
are re-exported for convenience.
"""

from fields.control.circuits import (
                                     E_SERIES,
                                     OpAmpLeadNetwork,
                                     SecondStage,
                                     analog_lead_network,
                                     e_series,
                                     snap_to_e_series,
)
from fields.control.design import ControllerDesign, Discretisation, PhaseBudget, design_controller
from fields.control.margins import Margins, ProportionalStudy, loop_margins, loop_transfer, proportional_only
from fields.control.plant import ForceTable, Plant, PlantParameters, Sensor, linear_plant, linear_sensor
from fields.control.simulate import Outcome, Scenario, SimulationEvent, SimulationResult, simulate
from fields.control.studies import CaptureResult, HysteresisStudy, capture_range, hysteresis_study

__all__ = [
                                     "E_SERIES",
                                     "CaptureResult",
                                     "ControllerDesign",
                                     "Discretisation",
                                     "ForceTable",
                                     "HysteresisStudy",
                                     "Margins",
                                     "OpAmpLeadNetwork",
                                     "Outcome",
                                     "PhaseBudget",
                                     "Plant",
                                     "PlantParameters",
                                     "ProportionalStudy",
                                     "Scenario",
                                     "SecondStage",
                                     "Sensor",
                                     "SimulationEvent",
                                     "SimulationResult",
                                     "analog_lead_network",
                                     "capture_range",
                                     "design_controller",
                                     "e_series",
                                     "hysteresis_study",
                                     "linear_plant",
                                     "linear_sensor",
                                     "loop_margins",
                                     "loop_transfer",
                                     "proportional_only",
                                     "simulate",
                                     "snap_to_e_series",
]
