"""Does the nominal design's controller still hold each sample of a tolerance study?

The vertical single-axis plant (:func:`fields.control.linear_plant`, voltage drive) is built from
each sample's evaluated row (mass, k_z, k_i, operating current, hot coil resistance); the PD
starting controller (:func:`fields.control.design_controller`) is designed once, on the nominal
design's plant, and the loop of each sample's plant with that controller is judged by its
closed-loop poles and margins (:func:`fields.control.loop_margins`).

Approximations (stated in the study's JSON): the position sensor is ideal and the same for every
sample (1 signal unit per metre; the sensors' own tolerances are not part of the study); the
inductance is the nominal design's (exact for iron-free designs: a rigid magnet does not change
the inductance of an air coil; with cores it changes with the permeability and is kept nominal);
the drive resistance is the nominal pattern's 20 C resistance at the sample's hottest coil
temperature (copper's coefficient, IEC 60028).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fields.errors import HoverfieldError
from fields.input.tables import COPPER_ALPHA_20C_PER_K
from fields.model.design import Design

#: sample rates the controller is discretised at (Hz): the first at least twice the plant's
#: minimum rate (the control stage's rule, fields.studies.stages.control)
_RATES_HZ = (500.0, 1e3, 2e3, 5e3, 1e4, 2e4, 5e4, 1e5)


@dataclass(frozen=True)
class DriveModel:
    """The nominal drive the plants share: pattern resistance at 20 C, inductance, current limit."""

    resistance_20C_ohm: float
    inductance_H: float
    max_current_A: float
    supply_voltage_V: float
    gravity_m_per_s2: float


@dataclass(frozen=True)
class LoopCheck:
    """One sample's loop with the nominal controller."""

    stabilised: bool
    phase_margin_deg: float
    lower_gain_margin_dB: float
    upper_gain_margin_dB: float
    reason: str


def drive_model(design: Design) -> DriveModel:
    """Series resistance ``sum d_k^2 R_k`` (20 C), inductance ``d^T L d`` and limit of the drive pattern."""
    from fields import analysis
    from fields.devices import inductance, winding

    d = np.asarray(analysis.drive_pattern(design), float)
    R = sum(d[i] ** 2 * winding.resistance_and_cooling(design, i)[0] for i in range(len(design.coils)))
    L = float(d @ inductance.mutual_inductance_matrix(design) @ d)
    imax = min(c.max_current_A / abs(d[i]) for i, c in enumerate(design.coils) if d[i] != 0)
    return DriveModel(float(R), L, float(imax), float(design.study.supply_voltage_V), float(design.gravity_magnitude))


def plant_of_row(row: dict, drive: DriveModel):
    """The vertical plant of one evaluated row (raises HoverfieldError when it has none)."""
    from fields import control as dyn

    T = float(row["coil_temperature_C"])
    R = drive.resistance_20C_ohm * (1.0 + COPPER_ALPHA_20C_PER_K * (T - 20.0))
    p = dyn.PlantParameters(axis_name="vertical", mass_kg=float(row["mass_kg"]), stiffness_N_per_m=float(row["kz_N_per_m"]),
                            force_per_ampere_N_per_A=float(row["ki_N_per_A"]), resistance_ohm=R,
                            inductance_H=drive.inductance_H, hover_current_A=float(row["operating_current_A"]),
                            max_current_A=drive.max_current_A, supply_voltage_V=drive.supply_voltage_V,
                            sensor_gain_per_m=1.0, sensor_unit="signal", gravity_m_per_s2=drive.gravity_m_per_s2)
    return dyn.linear_plant(p, drive="voltage")


def nominal_controller(plant):
    """The PD starting design on the nominal plant, digital at the control stage's sample rate."""
    from fields import control as dyn

    rate = next((f for f in _RATES_HZ if f >= 2.0 * plant.min_sample_rate_Hz), _RATES_HZ[-1])
    return dyn.design_controller(plant, sample_time_s=1.0 / rate, kind="pd")


def check_row(row: dict, drive: DriveModel, controller) -> LoopCheck:
    """The loop of this row's plant with ``controller``: stable closed-loop poles and its margins."""
    from fields import control as dyn

    nan = math.nan
    if row.get("failure"):
        return LoopCheck(False, nan, nan, nan, "the sample could not be evaluated")
    if row.get("no_equilibrium"):
        return LoopCheck(False, nan, nan, nan, "no operating point")
    try:
        plant = plant_of_row(row, drive)
        m = dyn.loop_margins(plant, controller)
    except HoverfieldError as e:
        return LoopCheck(False, nan, nan, nan, str(e).replace("\n", " "))
    return LoopCheck(bool(m.stable), float(m.phase_margin_deg), float(m.lower_gain_margin_dB),
                     float(m.upper_gain_margin_dB), "" if m.stable else "closed loop unstable")
