"""Multi-axis (MIMO) control layer: plant over every free axis, structural checks, regulators,
margins and a nonlinear simulation.

Typical use::

    from fields.control import multiaxis as mx
    plant = mx.multiaxis_plant(design, equilibrium)          # voltage drive, hot coils
    report = mx.check_structure(plant, design)               # modes, PBH, refusal reasons
    reg = mx.design_lqg(plant, report)                       # raises LoopNotClosable if refused
    margins = mx.mimo_margins(plant, report, reg)
    model = mx.force_model(design, plant)
    run = mx.simulate_multiaxis(plant, report, reg, model, design)      # estimator started from measurements
    region = mx.capture_region(plant, report, reg, model, design, ("z", "x"), offsets_z, offsets_x)
"""

from fields.control.multiaxis.capture import CaptureRegion, LargestOffset, capture_region, largest_offset
from fields.control.multiaxis.design import (
                                             Regulator,
                                             SampleRate,
                                             choose_sample_rate,
                                             compensated_output,
                                             design_lqg,
                                             design_mode_pd,
                                             passive_regulator,
                                             zoh,
)
from fields.control.multiaxis.margins import (
                                             ChannelMargins,
                                             DiskMargin,
                                             MimoMargins,
                                             disk_gain_phase,
                                             disk_margins_from_loop,
                                             input_loop,
                                             mimo_margins,
)
from fields.control.multiaxis.outputs import beam_fraction_at_poses, hall_parts, sensor_readings
from fields.control.multiaxis.plant import MultiaxisPlant, SensorModel, coil_resistances, multiaxis_plant
from fields.control.multiaxis.force_model import ForceModel, force_model
from fields.control.multiaxis.simulate import (
                                             MultiaxisSimulation,
                                             default_start,
                                             simulate_multiaxis,
                                             window_samples,
)
from fields.control.multiaxis.structure import (
                                             DesignRefused,
                                             LoopNotClosable,
                                             ModeCheck,
                                             SensorSuggestion,
                                             StructureReport,
                                             check_structure,
)

__all__ = [
                                             "CaptureRegion",
                                             "ChannelMargins",
                                             "DesignRefused",
                                             "DiskMargin",
                                             "ForceModel",
                                             "LargestOffset",
                                             "LoopNotClosable",
                                             "MimoMargins",
                                             "ModeCheck",
                                             "MultiaxisPlant",
                                             "MultiaxisSimulation",
                                             "Regulator",
                                             "SampleRate",
                                             "SensorModel",
                                             "SensorSuggestion",
                                             "StructureReport",
                                             "beam_fraction_at_poses",
                                             "capture_region",
                                             "check_structure",
                                             "choose_sample_rate",
                                             "coil_resistances",
                                             "compensated_output",
                                             "default_start",
                                             "design_lqg",
                                             "design_mode_pd",
                                             "disk_gain_phase",
                                             "disk_margins_from_loop",
                                             "force_model",
                                             "hall_parts",
                                             "input_loop",
                                             "largest_offset",
                                             "mimo_margins",
                                             "multiaxis_plant",
                                             "passive_regulator",
                                             "sensor_readings",
                                             "simulate_multiaxis",
                                             "window_samples",
                                             "zoh",
]
