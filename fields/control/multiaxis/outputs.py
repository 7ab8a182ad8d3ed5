"""What each sensor of a design reads at any floater pose and coil currents.

Hall sensor: ``B . axis`` at the sensor's position from the floater's magnets at its pose, the
fixed magnets, the coils (per ampere) and the cores' response (iron-free approximation of
:mod:`fields.physics.sources`); in volts when the file gives a sensitivity, else in tesla.

Beam gate: the fraction of the beam the floater's silhouette blocks
(:func:`fields.devices.sensors.beam_blocked_fraction`), in volts (``output_span_V`` times the
open fraction) when the file gives an output span, else as the blocked fraction. The public beam
function takes gaps; a pose is passed to it by giving it a study whose gap line runs from the
beam's own centre line to the pose (the beam's cross-section position depends only on the gap
line's origin across the beam, which is kept).

Index letters: ``n`` poses, ``k`` coils.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from fields.devices.beam import beam_blocked_fraction
from fields.model.design import BeamGate, Design, HallSensor
from fields.physics.checks import input_error
from fields.physics.field_basis import FIELD_IRON_LEVEL, fixed_field_basis, floater_field_T


def sensor_unit(sensor) -> str:
    """Unit of the sensor's output: "V", "T" (Hall without sensitivity) or "1" (blocked fraction)."""
    if isinstance(sensor, HallSensor):
        return "V" if sensor.sensitivity_V_per_T else "T"
    if isinstance(sensor, BeamGate):
        return "V" if sensor.output_span_V else "1"
    raise input_error(f"sensor {getattr(sensor, 'name', '?')}", "type", "hall or beam", type(sensor).__name__)


def sensor_label(sensor) -> str:
    """Output name with unit, e.g. ``hall x_V`` or ``beam gate_blocked_fraction``."""
    u = sensor_unit(sensor)
    return f"{sensor.name}_blocked_fraction" if u == "1" else f"{sensor.name}_{u}"


def _axis(sensor: HallSensor) -> np.ndarray:
    a = np.asarray(sensor.axis, float).reshape(3)
    n = float(np.linalg.norm(a))
    if not np.isfinite(n) or n == 0:
        raise input_error(f"sensor {sensor.name}", "axis", "a nonzero vector", tuple(a))
    return a / n


def hall_parts(design: Design, sensor: HallSensor, positions_m, rotvecs_rad, iron_level: str = FIELD_IRON_LEVEL):
    """Field along the Hall axis split by linearity in the currents (``iron_level``: the cores'
    cell level, see :func:`fields.physics.field_basis.fixed_field_basis`).

    Returns
    -------
    zero_T : ndarray, shape (n,)
        Floater magnets + fixed magnets + cores' response to both, at zero current (T).
    per_A_T : ndarray, shape (n, k)
        Each coil per ampere, core response included (T/A).
    """
    P = np.atleast_2d(np.asarray(positions_m, float))
    Rv = np.atleast_2d(np.asarray(rotvecs_rad, float))
    ax = _axis(sensor)
    p = np.asarray(sensor.position_m, float).reshape(1, 3)
    pts = np.ascontiguousarray(np.broadcast_to(p, (P.shape[0], 1, 3)))
    Bf = floater_field_T(design, pts, P, Rv)[:, 0, :] @ ax
    fb = fixed_field_basis(design, pts, P, Rv, iron_level=iron_level)
    zero = Bf + fb.B0_T[:, 0, :] @ ax
    per_A = fb.Bk_T_per_A[:, :, 0, :] @ ax
    return zero, per_A


def beam_fraction_at_poses(design: Design, sensor: BeamGate, positions_m, rotvecs_rad) -> np.ndarray:
    """Blocked fraction (n,) of a beam gate at arbitrary floater poses (frame origins, rotation vectors)."""
    P = np.atleast_2d(np.asarray(positions_m, float))
    Rv = np.atleast_2d(np.asarray(rotvecs_rad, float))
    up = design.axial  # the beam height runs along the axial direction
    d = np.asarray(sensor.direction, float)
    d = d / np.linalg.norm(d)
    across = np.cross(up, d)
    across = across / np.linalg.norm(across)
    o = np.asarray(design.study.gap_origin_m, float)
    out = np.empty(P.shape[0])
    for i in range(P.shape[0]):
        # a gap line from (the beam's across position, the pose's along-beam and up coordinates)
        # to the pose: gap 1 puts the floater at the pose, the beam stays where it is
        start = P[i] - ((P[i] - o) @ across) * across
        st = dataclasses.replace(design.study, gap_origin_m=tuple(start), gap_direction=tuple(P[i] - start),
                                 floater_rotvec_rad=tuple(Rv[i]))
        out[i] = beam_blocked_fraction(dataclasses.replace(design, study=st), sensor, [1.0])[0]
    return out


def sensor_readings(design: Design, sensor, positions_m, rotvecs_rad, currents_A) -> np.ndarray:
    """Output (n,) of one sensor at n poses and currents (k,) or (n, k), in :func:`sensor_unit`."""
    P = np.atleast_2d(np.asarray(positions_m, float))
    if isinstance(sensor, HallSensor):
        zero, per_A = hall_parts(design, sensor, P, rotvecs_rad)
        I = np.broadcast_to(np.asarray(currents_A, float), per_A.shape) if per_A.shape[1] else per_A
        B = zero + np.sum(per_A * I, axis=1)
        return B * sensor.sensitivity_V_per_T if sensor.sensitivity_V_per_T else B
    if isinstance(sensor, BeamGate):
        f = beam_fraction_at_poses(design, sensor, P, rotvecs_rad)
        return sensor.output_span_V * (1.0 - f) if sensor.output_span_V else f
    raise input_error(f"sensor {getattr(sensor, 'name', '?')}", "type", "hall or beam", type(sensor).__name__)


def sensor_scale(sensor) -> float:
    """The output that spans the sensor's range, in its unit (Hall: the range; beam: the span or 1)."""
    if isinstance(sensor, HallSensor):
        return float(sensor.range_T) * (sensor.sensitivity_V_per_T or 1.0)
    return float(sensor.output_span_V or 1.0)
