"""Hall point sensors: the reading vs gap split by source, coil cross-talk and saturation.

The reading is ``B . axis`` at the sensor: the floater's magnets at the floater's pose, the fixed
magnets (a constant offset), each coil per ampere (cross-talk) and, with cores, the core response
(iron-free approximation of :mod:`fields.physics.sources`). Subtracting ``c_k I_k`` with ``c_k`` the
coil's share per ampere leaves the floater's signal (exact in the linear model).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.devices.linearity import (LINEARITY_TOLERANCE, SLOPE_STEP_M, InverseTable, inverse_table, linear_range,
                                      sensor_gaps)
from fields.devices.notices import Notice
from fields.errors import InputError
from fields.model.design import Design, HallSensor

#: a coil whose cross-talk at max current reads like more than this much gap is flagged (m)
CROSSTALK_GAP_LIMIT_M = 1e-3


def unit_axis(v, where: str) -> np.ndarray:
    """``v`` (3,) normalised; InputError naming ``where`` when it is zero or not finite."""
    a = np.asarray(v, dtype=float).reshape(3)
    n = np.linalg.norm(a)
    if not np.isfinite(n) or n == 0:
        raise InputError(f"{where}: axis must be a nonzero vector; got {tuple(a)}.")
    return a / n


def hall_readings_at(design: Design, points_m: np.ndarray, axis: np.ndarray, positions_m: np.ndarray):
    """Field along ``axis`` at points (p, 3) for floater origins (n, 3), split by source.

    The floater keeps the study's orientation. Returns ``(floater_T (n, p), fixed0_T (n, p),
    coils_T_per_A (n, k, p), basis)`` as :func:`hall_readings`.
    """
    from fields.physics import field_basis as sources

    st = design.study
    P = np.asarray(positions_m, dtype=float).reshape(-1, 3)
    n = P.shape[0]
    Rv = np.repeat(np.asarray(st.floater_rotvec_rad, dtype=float)[None], n, axis=0)
    pts = np.broadcast_to(points_m, (n,) + points_m.shape)
    Bf = sources.floater_field_T(design, pts, P, Rv) @ axis
    fb = sources.fixed_field_basis(design, np.ascontiguousarray(pts), P, Rv)
    return Bf, fb.B0_T @ axis, fb.Bk_T_per_A @ axis, fb


def hall_readings(design: Design, points_m: np.ndarray, axis: np.ndarray, gaps: np.ndarray):
    """Field along ``axis`` at points (p, 3) for each gap (g,), split by source.

    Returns
    -------
    floater_T : ndarray, shape (g, p)
        The floater's magnets.
    fixed0_T : ndarray, shape (g, p)
        Fixed magnets plus the core bias at zero current.
    coils_T_per_A : ndarray, shape (g, k, p)
        Each coil per ampere (core response included).
    basis : FieldBasis
        The physics layer's field basis (for diagnosis).
    """
    return hall_readings_at(design, points_m, axis, design.study.floater_origin_m(np.asarray(gaps, dtype=float)))


#: the sideways directions of the floater offset: world x and y (the stiffness axes "x", "y")
LATERAL_AXES = np.eye(3)[:2]


def lateral_sensitivity_T_per_m(design: Design, points_m: np.ndarray, axis: np.ndarray,
                                operating_gap_m: float) -> np.ndarray:
    """d(zero-current reading)/d(floater offset along world x, y) at the operating gap, shape (p, 2).

    Central differences with step :data:`SLOPE_STEP_M` about the operating pose (the coils' share
    does not depend on the floater in the linear model, so the zero-current reading is the one).
    """
    P0 = design.study.floater_origin_m([operating_gap_m])[0]
    h = SLOPE_STEP_M
    P = np.concatenate([P0 + h * LATERAL_AXES, P0 - h * LATERAL_AXES])
    Bf, B0, _, _ = hall_readings_at(design, points_m, axis, P)
    z = Bf + B0  # (4, p)
    return ((z[:2] - z[2:]) / (2 * h)).T


def zero_current_slope_fn(design: Design, points_m: np.ndarray, axis: np.ndarray):
    """``f(gaps (n,)) -> (n, p)``: d(zero-current reading)/d(gap) at any gaps, for the linear-range search."""
    h = SLOPE_STEP_M

    def f(gq):
        gq = np.asarray(gq, dtype=float).reshape(-1)
        Bf, B0, _, _ = hall_readings(design, points_m, axis, np.concatenate([gq - h, gq + h]))
        z = Bf + B0
        return (z[gq.size:] - z[:gq.size]) / (2 * h)
    return f


@dataclass(frozen=True)
class HallResponse:
    """Hall sensor reading vs gap, split by source.

    Attributes
    ----------
    name : str
    gaps_m : ndarray, shape (g,)
    floater_T : ndarray, shape (g,)
        Floater magnets' field along the sensing axis.
    core_bias_T : ndarray, shape (g,)
        Core response to the magnets and floater (0 without cores).
    fixed_magnets_T : float
        Fixed magnets' offset (constant).
    coil_T_per_A : ndarray, shape (g, k)
        Each coil's share per ampere, core response included (cross-talk).
    coil_air_T_per_A : ndarray, shape (k,)
        The coils alone, without cores.
    compensation_T_per_A : ndarray, shape (k,)
        ``c_k`` at the operating gap: subtract ``c_k I_k`` from the reading.
    reading_zero_current_T : ndarray, shape (g,)
    sensitivity_T_per_m : ndarray, shape (g,)
        d(reading)/d(gap) at zero current.
    operating_gap_m, reading_at_operating_T, sensitivity_at_operating_T_per_m : float
        The operating gap, the zero-current reading there and d(reading)/d(gap) there.
    lateral_sensitivity_T_per_m : tuple of float
        d(reading)/d(floater offset) along world x and y at the operating gap, zero current
        (next to the vertical sensitivity: what a sideways wobble reads like).
    linear_range_m : tuple of float
        Edges located between grid points (:func:`fields.devices.linearity.linear_range`);
        ``(nan, nan)`` only when there is none (no sensitivity at the operating gap).
    worst_case_T : float
        Largest ``|reading|`` over the gaps with every coil at ``+-max_current_A`` (worst sign).
    range_T : float
    saturates : bool
    notices : tuple of Notice
        ``"hall_saturates"`` (values ``worst_T``, ``range_T``), ``"no_sensitivity"`` (none),
        ``"coil_crosstalk"`` (``coil``, ``apparent_gap_m``: the gap the coil at max current reads
        like), ``"core_approximate"`` (none).
    """

    name: str
    gaps_m: np.ndarray
    floater_T: np.ndarray
    core_bias_T: np.ndarray
    fixed_magnets_T: float
    coil_T_per_A: np.ndarray
    coil_air_T_per_A: np.ndarray
    compensation_T_per_A: np.ndarray
    reading_zero_current_T: np.ndarray
    sensitivity_T_per_m: np.ndarray
    operating_gap_m: float
    reading_at_operating_T: float
    sensitivity_at_operating_T_per_m: float
    lateral_sensitivity_T_per_m: tuple[float, float]
    linear_range_m: tuple[float, float]
    worst_case_T: float
    range_T: float
    saturates: bool
    notices: tuple[Notice, ...] = ()

    def reading_T(self, currents_A) -> np.ndarray:
        """Reading (g,) at coil currents (k,) or (g, k) in the linear model."""
        I = np.asarray(currents_A, dtype=float)
        I = np.broadcast_to(I, (self.gaps_m.size, self.coil_T_per_A.shape[1]))
        return self.reading_zero_current_T + np.sum(self.coil_T_per_A * I, axis=1)

    def compensated_T(self, readings_T, currents_A) -> np.ndarray:
        """Reading minus ``sum_k c_k I_k`` (the floater's signal plus the constant offsets)."""
        I = np.asarray(currents_A, dtype=float)
        return np.asarray(readings_T, dtype=float) - I @ self.compensation_T_per_A


def hall_response(design: Design, sensor: HallSensor, gaps_m=None, operating_gap_m: float | None = None,
                  linearity_tolerance: float = LINEARITY_TOLERANCE) -> HallResponse:
    """Field a Hall sensor reads vs gap, its cross-talk from each coil and the saturation check.

    Parameters
    ----------
    design : Design
    sensor : HallSensor
    gaps_m : array_like, shape (g,), optional
        Default the study's gap grid.
    operating_gap_m : float, optional
        Default ``study.operating_gap_m``.
    linearity_tolerance : float

    Returns
    -------
    HallResponse
    """
    from fields.physics import field_basis as sources

    ax = unit_axis(sensor.axis, f"sensor {sensor.name}")
    p = np.asarray(sensor.position_m, dtype=float).reshape(1, 3)
    gaps, g0 = sensor_gaps(design, gaps_m, operating_gap_m)
    h = SLOPE_STEP_M
    allg = np.concatenate([gaps, gaps - h, gaps + h, [g0 - h, g0, g0 + h]])
    Bf, B0, Bk, _ = hall_readings(design, p, ax, allg)
    Bf, B0, Bk = Bf[:, 0], B0[:, 0], Bk[:, :, 0]
    fixed = float(sum((sources.magnet_field_T(m, p)[0] @ ax for m in design.magnets), 0.0))
    ng = gaps.size
    zero = Bf + B0
    read = zero[:ng]
    sens = (zero[2 * ng:3 * ng] - zero[ng:2 * ng]) / (2 * h)
    s0 = float((zero[-1] - zero[-3]) / (2 * h))
    slope = zero_current_slope_fn(design, p, ax)
    lr = linear_range(gaps, sens, g0, s0, linearity_tolerance, slope_fn=lambda gq: slope(gq)[:, 0])
    lat = tuple(float(v) for v in lateral_sensitivity_T_per_m(design, p, ax, g0)[0])
    ck = Bk[-2]
    air = np.array([sources.coil_field_per_ampere_T(c, p)[0] @ ax for c in design.coils]).reshape(-1)
    imax = np.array([abs(float(c.max_current_A)) for c in design.coils])
    worst = float(np.max(np.abs(read) + np.abs(Bk[:ng]) @ imax)) if design.coils else float(np.max(np.abs(read)))
    notices = []
    sat = worst > float(sensor.range_T)
    if sat:
        notices.append(Notice("hall_saturates", sensor.name, {"worst_T": worst, "range_T": float(sensor.range_T)}))
    if s0 == 0:
        notices.append(Notice("no_sensitivity", sensor.name))
    else:
        ratio = np.abs(ck) / abs(s0)
        for c, r in zip(design.coils, ratio):
            apparent = float(r * abs(c.max_current_A))
            if apparent > CROSSTALK_GAP_LIMIT_M:
                notices.append(Notice("coil_crosstalk", sensor.name, {"coil": c.name, "apparent_gap_m": apparent}))
    if design.cores:
        notices.append(Notice("core_approximate", sensor.name))
    return HallResponse(sensor.name, gaps, Bf[:ng], B0[:ng] - fixed, fixed, Bk[:ng], air, ck, read, sens, g0, float(zero[-2]), s0, lat,
                        lr, worst, float(sensor.range_T), bool(sat), tuple(notices))


def hall_inverse_table(design: Design, sensor: HallSensor, gaps_m=None) -> InverseTable:
    """gap(reading) of a Hall sensor at zero coil current (readings compensated for the coils)."""
    resp = hall_response(design, sensor, gaps_m)
    return inverse_table(resp.gaps_m, resp.reading_zero_current_T)

