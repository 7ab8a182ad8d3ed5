"""Hall sensor placement: candidate positions ranked by linear range and cross-talk.

Candidates inside a body or inside the floater's travel are excluded first
(:mod:`fields.devices.keepout`); a candidate is usable when it is not excluded, reads the gap (a
finite, nonzero sensitivity at the operating gap, hence a linear range) and, given a sensor
range, does not saturate with the coils at max current. The best usable candidate has the widest
linear half-width, ties (within 1 %) broken by the least worst cross-talk (a stated rule, not an
optimum). With no usable candidate there is no best one (``best_index`` is None), and each
candidate's ``status`` says why.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.devices.hall import hall_readings, lateral_sensitivity_T_per_m, unit_axis, zero_current_slope_fn
from fields.devices.keepout import keepout
from fields.devices.linearity import LINEARITY_TOLERANCE, SLOPE_STEP_M, linear_range, sensor_gaps
from fields.errors import InputError
from fields.model.design import Design

#: candidate status codes, in the order they are tested
PLACEMENT_STATUS = ("usable", "inside_body", "floater_travel", "no_sensitivity", "saturates")


def rank_by_range(half_width_m, tie_break, usable, tie_rel: float = 0.01) -> int | None:
    """Index with the widest half-width among ``usable``, ties within ``tie_rel`` by the least ``tie_break``."""
    ok = np.asarray(usable, dtype=bool) & np.isfinite(half_width_m)
    if not np.any(ok):
        return None
    hw = np.where(ok, half_width_m, -np.inf)
    top = float(hw.max())
    cand = np.nonzero(ok & (hw >= top - tie_rel * abs(top)))[0]
    return int(cand[np.argmin(np.asarray(tie_break)[cand])])


@dataclass(frozen=True)
class PlacementTable:
    """Candidate Hall positions rated for gap sensing.

    Attributes
    ----------
    positions_m : ndarray, shape (p, 3)
    axis : ndarray, shape (3,)
    operating_gap_m : float
    reading_T : ndarray, shape (p,)
        Zero-current reading at the operating gap.
    sensitivity_T_per_m : ndarray, shape (p,)
        d(reading)/d(gap) at the operating gap.
    lateral_sensitivity_T_per_m : ndarray, shape (p, 2)
        d(reading)/d(floater offset along world x, y) at the operating gap.
    crosstalk_T_per_A : ndarray, shape (p, k)
    crosstalk_gap_m_per_A : ndarray, shape (p, k)
        ``crosstalk / |sensitivity|``: metres of apparent gap per ampere (smaller is better).
    worst_crosstalk_gap_m_per_A : ndarray, shape (p,)
    linear_lo_m, linear_hi_m, linear_half_width_m : ndarray, shape (p,)
        Linear range (edges between grid points) and its distance from the operating gap (the
        smaller side); NaN where there is none.
    worst_case_T : ndarray, shape (p,)
        Largest |reading| over the gaps with coils at +-max current.
    body_distance_m, travel_distance_m : ndarray, shape (p,)
        Signed distances to the nearest fixed body and to the floater's travel.
    nearest_body : tuple of str
    status : tuple of str
        One of :data:`PLACEMENT_STATUS` per candidate (the first that applies).
    best_index : int or None
        The best usable candidate by the module's rule; None when no candidate is usable.
    range_T : float or None
        The sensor range the saturation test used (None: not tested).
    """

    positions_m: np.ndarray
    axis: np.ndarray
    operating_gap_m: float
    reading_T: np.ndarray
    sensitivity_T_per_m: np.ndarray
    lateral_sensitivity_T_per_m: np.ndarray
    crosstalk_T_per_A: np.ndarray
    crosstalk_gap_m_per_A: np.ndarray
    worst_crosstalk_gap_m_per_A: np.ndarray
    linear_lo_m: np.ndarray
    linear_hi_m: np.ndarray
    linear_half_width_m: np.ndarray
    worst_case_T: np.ndarray
    body_distance_m: np.ndarray
    travel_distance_m: np.ndarray
    nearest_body: tuple[str, ...]
    status: tuple[str, ...]
    best_index: int | None
    range_T: float | None = None

    def counts(self) -> dict[str, int]:
        """How many candidates have each status (every code of :data:`PLACEMENT_STATUS`)."""
        return {c: sum(1 for s in self.status if s == c) for c in PLACEMENT_STATUS}

    def rows(self) -> list[dict]:
        """One dict per candidate with units in the keys (for CSV export)."""
        out = []
        for i in range(self.positions_m.shape[0]):
            out.append({
                "x_m": float(self.positions_m[i, 0]), "y_m": float(self.positions_m[i, 1]),
                "z_m": float(self.positions_m[i, 2]), "status": self.status[i], "reading_T": float(self.reading_T[i]),
                "sensitivity_T_per_m": float(self.sensitivity_T_per_m[i]),
                "sensitivity_x_T_per_m": float(self.lateral_sensitivity_T_per_m[i, 0]),
                "sensitivity_y_T_per_m": float(self.lateral_sensitivity_T_per_m[i, 1]),
                "worst_crosstalk_gap_m_per_A": float(self.worst_crosstalk_gap_m_per_A[i]),
                "linear_lo_m": float(self.linear_lo_m[i]), "linear_hi_m": float(self.linear_hi_m[i]),
                "linear_half_width_m": float(self.linear_half_width_m[i]), "worst_case_T": float(self.worst_case_T[i]),
                "body_distance_m": float(self.body_distance_m[i]), "nearest_body": self.nearest_body[i],
                "travel_distance_m": float(self.travel_distance_m[i]),
            })
        return out


def placement_table(design: Design, candidates_m, axis, operating_gap_m: float | None = None, gaps_m=None,
                    linearity_tolerance: float = LINEARITY_TOLERANCE, range_T: float | None = None,
                    lateral_span_m: float | None = None) -> PlacementTable:
    """Compare candidate Hall positions: exclusions, sensitivity, coil cross-talk and linear range.

    Parameters
    ----------
    design : Design
    candidates_m : array_like, shape (p, 3)
        Candidate positions, world frame (m).
    axis : array_like, shape (3,)
        Sensing axis.
    operating_gap_m : float, optional
    gaps_m : array_like, shape (g,), optional
        Gap grid for the linear range; default the study's.
    linearity_tolerance : float
    range_T : float, optional
        Sensor full scale: candidates whose worst reading exceeds it are not usable.
    lateral_span_m : float, optional
        Sideways half-span of the floater's travel (default the study's).

    Returns
    -------
    PlacementTable
    """
    ax = unit_axis(axis, "placement_table")
    C = np.asarray(candidates_m, dtype=float).reshape(-1, 3)
    if C.shape[0] == 0:
        raise InputError(f"placement_table: candidates_m must hold at least one position; got shape {C.shape}.")
    gaps, g0 = sensor_gaps(design, gaps_m, operating_gap_m)
    h = SLOPE_STEP_M
    ng = gaps.size
    allg = np.concatenate([gaps - h, gaps + h, gaps, [g0 - h, g0, g0 + h]])
    Bf, B0, Bk, _ = hall_readings(design, C, ax, allg)
    zero = Bf + B0  # (n, p)
    sens_grid = (zero[ng:2 * ng] - zero[:ng]) / (2 * h)
    s0 = (zero[-1] - zero[-3]) / (2 * h)
    ck = Bk[-2].T  # (p, k)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(s0[:, None] != 0, np.abs(ck) / np.abs(s0)[:, None], np.inf)
    worst_ratio = ratio.max(axis=1) if ratio.shape[1] else np.zeros(C.shape[0])
    lo = np.empty(C.shape[0])
    hi = np.empty(C.shape[0])
    for i in range(C.shape[0]):
        f = zero_current_slope_fn(design, C[i:i + 1], ax)
        lo[i], hi[i] = linear_range(gaps, sens_grid[:, i], g0, s0[i], linearity_tolerance,
                                    slope_fn=lambda gq, f=f: f(gq)[:, 0])
    half = np.fmin(g0 - lo, hi - g0)
    imax = np.array([abs(float(c.max_current_A)) for c in design.coils])
    rd = zero[2 * ng:3 * ng]  # (g, p)
    worst = np.max(np.abs(rd) + (np.abs(Bk[2 * ng:3 * ng]).transpose(0, 2, 1) @ imax if imax.size else 0.0), axis=0)
    keep = keepout(design, C, lateral_span_m)
    status = []
    for i in range(C.shape[0]):
        if keep.reason[i]:
            status.append(keep.reason[i])
        elif not (np.isfinite(s0[i]) and s0[i] != 0 and np.isfinite(half[i])):
            status.append("no_sensitivity")
        elif range_T is not None and worst[i] > range_T:
            status.append("saturates")
        else:
            status.append("usable")
    best = rank_by_range(half, worst_ratio, [s == "usable" for s in status])
    lat = lateral_sensitivity_T_per_m(design, C, ax, g0)
    return PlacementTable(C, ax, g0, zero[-2], s0, lat, ck, ratio, worst_ratio, lo, hi, half, worst,
                          keep.body_distance_m, keep.travel_distance_m, keep.nearest_body, tuple(status), best,
                          None if range_T is None else float(range_T))
