"""Beam-gate placement: candidate beam heights across the floater's travel, rated like the Hall ones.

The candidates are beam centre heights (``up`` coordinate) spread over the heights the floater's
magnets occupy between ``gap_min`` and ``gap_max``. Each keeps the gate's beam size and direction.
A height is excluded when a fixed body crosses the beam (its extents along ``up`` and across the
beam both overlap the beam's cross-section: a bounding test, so it may exclude a height whose beam
would slip past a body's hole or corner). A candidate is usable when it is not excluded and its
output changes at the operating gap (nonzero slope, hence a linear range). The best usable height
has the widest linear half-width around the operating gap (the same machinery as the Hall
placement, :func:`fields.devices.linearity.linear_range`), ties (within 1 %) broken by the larger
gain; with none usable ``best_index`` is None and ``status`` says why.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from fields.devices.beam import beam_response
from fields.devices.linearity import LINEARITY_TOLERANCE, sensor_gaps
from fields.devices.placement import rank_by_range
from fields.errors import InputError
from fields.model.design import BeamGate, Design
from fields.model.solids import design_solids, floater_pose, world_placement

#: default number of candidate beam heights
BEAM_CANDIDATES = 25
#: beam candidate status codes
BEAM_STATUS = ("usable", "blocked_by_body", "flat_output")


def floater_height_span_m(design: Design) -> tuple[float, float]:
    """Lowest and highest ``up`` coordinate the floater's magnets reach between gap_min and gap_max (m).

    Exact extents (support functions, :meth:`fields.model.solids.Solid.extent_along`); the floater
    moves rigidly along the gap axis, so the extremes are at the two ends of the travel.
    """
    up = design.axial
    lo, hi = np.inf, -np.inf
    floater = [s for s in design_solids(design) if s.on_floater]
    for g in (design.study.gap_min_m, design.study.gap_max_m):
        R, P = floater_pose(design, g)
        for s in floater:
            Rw, Pw = world_placement(s, R, P)
            a, b = s.extent_along(Rw, Pw, up)
            lo, hi = min(lo, a), max(hi, b)
    return float(lo), float(hi)


def _blocking_body(design: Design, gate: BeamGate) -> str:
    """Name of the first fixed body whose bounding extents cross the beam's cross-section, or ""."""
    up = design.axial
    d = np.asarray(gate.direction, dtype=float)
    d = d / np.linalg.norm(d)
    across = np.cross(up, d)
    across /= np.linalg.norm(across)
    xc = float(np.asarray(design.study.gap_origin_m, dtype=float) @ across)
    for s in design_solids(design):
        if s.on_floater:
            continue
        a, b = s.extent_along(s.rotation, s.position_m, up)
        c, e = s.extent_along(s.rotation, s.position_m, across)
        if (b > gate.height_m - gate.beam_height_m / 2 and a < gate.height_m + gate.beam_height_m / 2
                and e > xc - gate.beam_width_m / 2 and c < xc + gate.beam_width_m / 2):
            return s.name
    return ""


@dataclass(frozen=True)
class BeamPlacementTable:
    """Candidate beam heights rated for gap sensing.

    Attributes
    ----------
    sensor : str
        The gate whose beam size and direction the candidates keep.
    heights_m : ndarray, shape (p,)
        Beam centre heights (``up`` coordinate).
    operating_gap_m : float
    fraction_at_operating, gain_per_mm : ndarray, shape (p,)
    lateral_slope_per_m : ndarray, shape (p, 2)
        d(fraction)/d(floater offset along world x, y) at the operating gap.
    linear_lo_m, linear_hi_m, linear_half_width_m : ndarray, shape (p,)
    blocking_body : tuple of str
    status : tuple of str
        One of :data:`BEAM_STATUS` per candidate.
    best_index : int or None
    """

    sensor: str
    heights_m: np.ndarray
    operating_gap_m: float
    fraction_at_operating: np.ndarray
    gain_per_mm: np.ndarray
    lateral_slope_per_m: np.ndarray
    linear_lo_m: np.ndarray
    linear_hi_m: np.ndarray
    linear_half_width_m: np.ndarray
    blocking_body: tuple[str, ...]
    status: tuple[str, ...]
    best_index: int | None

    def counts(self) -> dict[str, int]:
        """How many candidates have each status."""
        return {c: sum(1 for s in self.status if s == c) for c in BEAM_STATUS}

    def rows(self) -> list[dict]:
        """One dict per candidate with units in the keys (for CSV export)."""
        return [{"height_m": float(self.heights_m[i]), "status": self.status[i],
                 "blocked_fraction": float(self.fraction_at_operating[i]), "gain_per_mm": float(self.gain_per_mm[i]),
                 "slope_x_per_m": float(self.lateral_slope_per_m[i, 0]),
                 "slope_y_per_m": float(self.lateral_slope_per_m[i, 1]),
                 "linear_lo_m": float(self.linear_lo_m[i]), "linear_hi_m": float(self.linear_hi_m[i]),
                 "linear_half_width_m": float(self.linear_half_width_m[i]), "blocking_body": self.blocking_body[i]}
                for i in range(self.heights_m.size)]


def beam_placement_table(design: Design, gate: BeamGate, heights_m=None, operating_gap_m: float | None = None,
                         gaps_m=None, linearity_tolerance: float = LINEARITY_TOLERANCE,
                         candidates: int = BEAM_CANDIDATES) -> BeamPlacementTable:
    """Rate beam heights for a gate: linear range of the blocked fraction around the operating gap and gain.

    Parameters
    ----------
    design : Design
    gate : BeamGate
        Beam size and direction kept by every candidate (its own height is ignored).
    heights_m : array_like, shape (p,), optional
        Default: ``candidates`` heights evenly over :func:`floater_height_span_m`.
    operating_gap_m, gaps_m, linearity_tolerance
        As :func:`fields.devices.beam.beam_response`.
    candidates : int

    Returns
    -------
    BeamPlacementTable
    """
    if heights_m is None:
        if candidates < 1:
            raise InputError(f"beam_placement_table: candidates must be at least 1; got {candidates!r}.")
        lo, hi = floater_height_span_m(design)
        H = np.linspace(lo, hi, candidates)
    else:
        H = np.atleast_1d(np.asarray(heights_m, dtype=float)).reshape(-1)
        if H.size == 0 or not np.all(np.isfinite(H)):
            raise InputError(f"beam_placement_table: heights_m must be finite and not empty; got {H!r}.")
    gaps, g0 = sensor_gaps(design, gaps_m, operating_gap_m)
    n = H.size
    frac, gain, lat = np.empty(n), np.empty(n), np.empty((n, 2))
    lo_, hi_ = np.empty(n), np.empty(n)
    block, status = [], []
    for i, y in enumerate(H):
        g = dataclasses.replace(gate, height_m=float(y))
        r = beam_response(design, g, gaps, g0, linearity_tolerance)
        frac[i], gain[i], lat[i] = r.fraction_at_operating, r.gain_per_mm, r.lateral_slope_per_m
        lo_[i], hi_[i] = r.linear_range_m
        block.append(_blocking_body(design, g))
        status.append("blocked_by_body" if block[-1] else "flat_output" if not (gain[i] != 0 and np.isfinite(lo_[i]))
                      else "usable")
    half = np.fmin(g0 - lo_, hi_ - g0)
    best = rank_by_range(half, -np.abs(gain), [s == "usable" for s in status])
    return BeamPlacementTable(gate.name, H, g0, frac, gain, lat, lo_, hi_, half, tuple(block), tuple(status), best)
