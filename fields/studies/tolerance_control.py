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

Nonlinear capture (:func:`capture_of_row`): each sample's own axial force curve along the gap
range (:func:`fields.analysis.axial_curves`, affine in current: ``F0(s) + I k_i(s)``) is a
:class:`fields.control.plant.ForceTable`; the floater is released at rest at
:data:`CAPTURE_STARTS_M` from its operating point and simulated with the nominal controller
(sampled, zero-order hold, voltage and current limits, the coil's R-L; fixed-step RK4 for all
starts at once, :func:`fields.control.simulate.run_batch`); captured: every start ends at rest
within 1 % of the table's span (the capture-range rule of :mod:`fields.control.studies`). The
drive's bias is the sample's own hover current (a bias trimmed on the bench, as the linear check
assumes).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fields.errors import HoverfieldError
from fields.input.tables import COPPER_ALPHA_20C_PER_K
from fields.model.design import Design

#: release offsets of the per-sample capture check (m, from the operating point along up), at rest
CAPTURE_STARTS_M = (-0.5e-3, 0.5e-3)
#: simulated time of each release (s)
CAPTURE_T_END_S = 0.5
#: positions of the per-sample force table across the study's gap range
CAPTURE_TABLE_POINTS = 41

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


@dataclass(frozen=True)
class CaptureCheck:
    """One sample's releases with the nominal controller on its own nonlinear force curve."""

    captured: bool
    reason: str


def vertical_table(design: Design, operating_gap_m: float, points: int = CAPTURE_TABLE_POINTS):
    """The force table along the axial direction (``s`` from the operating gap, along
    :attr:`fields.model.design.Design.axial`) across the study's gap range, from the axial curves."""
    from fields import analysis
    from fields.control.plant import ForceTable

    st = design.study
    c = float(design.axial @ np.asarray(st.gap_direction, float))  # d gap / d s
    gaps = np.linspace(st.gap_min_m, st.gap_max_m, int(points))
    cur = analysis.axial_curves(design, gaps_m=gaps, currents_A=[0.0], estimate_error=False)
    s = (gaps - operating_gap_m) / c
    o = np.argsort(s)
    ok = ~cur.contact[o]
    s, F0, fk = s[o][ok], cur.F0_N[o][ok], cur.ki_N_per_A[o][ok]
    return ForceTable(s, F0, fk)


def capture_of_row(row: dict, design: Design, drive: DriveModel, controller) -> CaptureCheck:
    """Release the sample at :data:`CAPTURE_STARTS_M` (module notes) and say whether it is held."""
    from fields.control.plant import linear_sensor
    from fields.control.simulate import run_batch

    if row.get("failure") or row.get("no_equilibrium"):
        return CaptureCheck(False, "no operating point")
    try:
        plant = plant_of_row(row, drive)
        table = vertical_table(design, float(row["operating_gap_m"]))
    except HoverfieldError as e:
        return CaptureCheck(False, str(e).replace("\n", " "))
    lo, hi = table.range_m
    starts = np.clip(np.asarray(CAPTURE_STARTS_M, float), 0.9 * lo, 0.9 * hi)
    end = run_batch(plant.params, table, controller, linear_sensor(plant.params), starts, np.zeros(starts.size),
                    CAPTURE_T_END_S, 0.0)
    tol_s = 0.01 * (hi - lo)
    tol_v = tol_s * controller.crossover_rad_per_s
    ok = (end.exit_side == 0) & (np.abs(end.s_m) < tol_s) & (np.abs(end.v_m_per_s) < tol_v)
    if bool(np.all(ok)):
        return CaptureCheck(True, "")
    bad = [f"{a * 1e3:+g} mm: " + ("fell" if e < 0 else "contact" if e > 0 else "not settled")
           for a, e, k in zip(starts, end.exit_side, ok) if not k]
    return CaptureCheck(False, "release " + "; ".join(bad))
