"""Hall sensor placement: candidate positions ranked by sensitivity, cross-talk and linear range."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.devices.hall import hall_readings, unit_axis
from fields.devices.linearity import LINEARITY_TOLERANCE, SLOPE_STEP_M, linear_range, sensor_gaps
from fields.errors import InputError
from fields.model.design import Design


@dataclass(frozen=True)
class PlacementTable:
    """Candidate Hall positions ranked for gap sensing.

    Attributes
    ----------
    positions_m : ndarray, shape (p, 3)
    axis : ndarray, shape (3,)
    operating_gap_m : float
    reading_T : ndarray, shape (p,)
        Zero-current reading at the operating gap.
    sensitivity_T_per_m : ndarray, shape (p,)
        d(reading)/d(gap) at the operating gap.
    crosstalk_T_per_A : ndarray, shape (p, k)
    crosstalk_gap_m_per_A : ndarray, shape (p, k)
        ``crosstalk / |sensitivity|``: metres of apparent gap per ampere (smaller is better).
    worst_crosstalk_gap_m_per_A : ndarray, shape (p,)
    linear_lo_m, linear_hi_m, linear_half_width_m : ndarray, shape (p,)
        Linear range and its distance from the operating gap (the smaller side).
    worst_case_T : ndarray, shape (p,)
        Largest |reading| over the gaps with coils at +-max current.
    best_index : int
        The candidate with the widest linear half-width among those with nonzero sensitivity,
        ties (within 1 %) broken by the smaller worst cross-talk (a stated rule, not an optimum).
    """

    positions_m: np.ndarray
    axis: np.ndarray
    operating_gap_m: float
    reading_T: np.ndarray
    sensitivity_T_per_m: np.ndarray
    crosstalk_T_per_A: np.ndarray
    crosstalk_gap_m_per_A: np.ndarray
    worst_crosstalk_gap_m_per_A: np.ndarray
    linear_lo_m: np.ndarray
    linear_hi_m: np.ndarray
    linear_half_width_m: np.ndarray
    worst_case_T: np.ndarray
    best_index: int

    def rows(self) -> list[dict]:
        """One dict per candidate with units in the keys (for CSV export)."""
        out = []
        for i in range(self.positions_m.shape[0]):
            out.append({
                "x_m": float(self.positions_m[i, 0]), "y_m": float(self.positions_m[i, 1]),
                "z_m": float(self.positions_m[i, 2]), "reading_T": float(self.reading_T[i]),
                "sensitivity_T_per_m": float(self.sensitivity_T_per_m[i]),
                "worst_crosstalk_gap_m_per_A": float(self.worst_crosstalk_gap_m_per_A[i]),
                "linear_lo_m": float(self.linear_lo_m[i]), "linear_hi_m": float(self.linear_hi_m[i]),
                "linear_half_width_m": float(self.linear_half_width_m[i]), "worst_case_T": float(self.worst_case_T[i]),
            })
        return out


def placement_table(design: Design, candidates_m, axis, operating_gap_m: float | None = None, gaps_m=None,
                    linearity_tolerance: float = LINEARITY_TOLERANCE) -> PlacementTable:
    """Compare candidate Hall positions: sensitivity, coil cross-talk and linear range.

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
        lo[i], hi[i] = linear_range(gaps, sens_grid[:, i], g0, s0[i], linearity_tolerance)
    half = np.fmin(g0 - lo, hi - g0)
    imax = np.array([abs(float(c.max_current_A)) for c in design.coils])
    rd = zero[2 * ng:3 * ng]  # (g, p)
    worst = np.max(np.abs(rd) + (np.abs(Bk[2 * ng:3 * ng]).transpose(0, 2, 1) @ imax if imax.size else 0.0), axis=0)
    score = np.where(np.isfinite(half) & (s0 != 0), half, -1.0)
    top = score.max()
    cand = np.nonzero(score >= top - 0.01 * abs(top))[0]
    best = int(cand[np.argmin(worst_ratio[cand])])
    return PlacementTable(C, ax, g0, zero[-2], s0, ck, ratio, worst_ratio, lo, hi, half, worst, best)

