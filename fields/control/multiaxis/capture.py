"""Capture region of a multi-axis loop: which start offsets the nonlinear loop brings back.

Each start is a release at rest from a pose deviation (the coils at their bias), simulated by
:func:`fields.control.multiaxis.simulate.simulate_multiaxis` (force model, sampling, one-sample
delay, voltage and current limits, coil dynamics). A start is *held* when the run says so (not
lost, the controlled modes settled).

- :func:`capture_region`: a grid over two free axes (e.g. vertical offset x sideways offset).
- :func:`largest_offset`: along one direction, the largest offset held, by bisection between a
  held and a lost start (the region is assumed connected along the ray; the grid shows whether
  it is).

Nothing here prints, plots or touches files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fields.control.multiaxis.design import Regulator
from fields.control.multiaxis.plant import MultiaxisPlant, jsonable
from fields.control.multiaxis.force_model import ForceModel
from fields.control.multiaxis.simulate import simulate_multiaxis
from fields.control.multiaxis.structure import StructureReport
from fields.model.design import Design
from fields.physics.parallel import map_chunks

#: bisection rounds of :func:`largest_offset` (the bracket shrinks by 2^-rounds)
BISECTION_ROUNDS = 6


@dataclass(frozen=True)
class CaptureRegion:
    """Held / lost over a grid of start offsets along two free axes.

    Attributes
    ----------
    axes : tuple of str
        The two free axes (first: rows, second: columns).
    offsets_a, offsets_b : ndarray
        Start deviations (m or rad) along each axis.
    held : ndarray of bool, shape (a, b)
    peak_current_A : ndarray, shape (a, b)
        Largest coil current of each run.
    saturated_share : ndarray, shape (a, b)
        Share of samples with a drive at a limit.
    fate : ndarray of str, shape (a, b)
        "held", "lost", "open swing" or "not settled" (see :func:`_fate`).
    t_end_s : float
    start : str
        How the controller state began (see :func:`simulate_multiaxis`).
    force_model_error : dict
    """

    axes: tuple[str, str]
    offsets_a: np.ndarray
    offsets_b: np.ndarray
    held: np.ndarray
    peak_current_A: np.ndarray
    saturated_share: np.ndarray
    fate: np.ndarray
    t_end_s: float
    start: str
    force_model_error: dict

    @property
    def held_fraction(self) -> float:
        return float(np.mean(self.held)) if self.held.size else 0.0

    @property
    def judged_fraction(self) -> float:
        """Share of the grid that was judged (not an open swing out of the model box)."""
        return float(np.mean(self.fate != "open swing")) if self.fate.size else 0.0

    def rows(self) -> tuple[list[str], list[list]]:
        """CSV-friendly: one row per start."""
        ua, ub = (_unit(a) for a in self.axes)
        head = [f"{self.axes[0]}0_{ua}", f"{self.axes[1]}0_{ub}", "held", "peak_current_A", "saturated_share", "fate"]
        rows = [[float(a), float(b), bool(self.held[i, j]), float(self.peak_current_A[i, j]),
                 float(self.saturated_share[i, j]), str(self.fate[i, j])]
                for i, a in enumerate(self.offsets_a) for j, b in enumerate(self.offsets_b)]
        return head, rows

    def to_dict(self) -> dict:
        return jsonable({"axes": list(self.axes), "offsets_a": self.offsets_a, "offsets_b": self.offsets_b,
                         "held_fraction": self.held_fraction, "judged_fraction": self.judged_fraction,
                         "fates": {f: int(np.sum(self.fate == f)) for f in ("held", "lost", "open swing", "not settled")},
                         "t_end_s": self.t_end_s, "start": self.start,
                         "force_model_error": self.force_model_error})


@dataclass(frozen=True)
class LargestOffset:
    """The largest start offset held along one direction.

    ``held_m`` (or rad) is the largest start found held, ``lost_m`` the smallest found lost
    above it (inf when even ``limit`` was held: the search stopped at the force model's box).
    """

    direction: str
    unit: str
    held: float
    lost: float
    limit: float
    runs: int


def _unit(axis: str) -> str:
    return "m" if axis in ("x", "y", "z") else "rad"


def _fate(run) -> str:
    """"held", "lost", "open swing" (left the model box only on axes no loop acts on: a stable
    or neutral mode left open keeps swinging in the undamped model; not judged) or "not settled"."""
    if run.held:
        return "held"
    if run.left_box_axes:
        return "open swing" if not set(run.left_box_axes) & set(run.converged_axes) else "lost"
    return "not settled"


def capture_region(plant: MultiaxisPlant, report: StructureReport, regulator: Regulator, model: ForceModel,
                   design: Design, axes: tuple[str, str], offsets_a, offsets_b, t_end_s: float = 0.5,
                   start: str = "measured") -> CaptureRegion:
    """Simulate a release from every grid start (rest) and record held or lost."""
    ja, jb = (plant.free_axes.index(a) for a in axes)
    oa = np.asarray(offsets_a, float)
    ob = np.asarray(offsets_b, float)
    starts = [(a, b) for a in oa for b in ob]

    def runs(sl: slice) -> list:
        out = []
        for a, b in starts[sl]:
            q0 = np.zeros(plant.n_axes)
            q0[ja], q0[jb] = a, b
            run = simulate_multiaxis(plant, report, regulator, model, design, q0=q0, t_end_s=t_end_s, start=start)
            out.append((run.held, float(np.max(run.peak_current_A)) if run.peak_current_A.size else 0.0,
                        run.saturated_share, _fate(run)))
        return out

    # the starts are independent: both cores (each run costs a fraction of a second)
    rows = [r for part in map_chunks(runs, len(starts), min_items_per_worker=4) for r in part]
    shape = (oa.size, ob.size)
    held = np.array([r[0] for r in rows], bool).reshape(shape)
    peak = np.array([r[1] for r in rows], float).reshape(shape)
    satu = np.array([r[2] for r in rows], float).reshape(shape)
    fate = np.array([r[3] for r in rows], object).reshape(shape)
    return CaptureRegion(tuple(axes), oa, ob, held, peak, satu, fate.astype(str), float(t_end_s), start,
                         dict(model.relative_error))


def largest_offset(plant: MultiaxisPlant, report: StructureReport, regulator: Regulator, model: ForceModel,
                   design: Design, axis: str, limit: float | None = None, t_end_s: float = 0.5,
                   start: str = "measured", rounds: int = BISECTION_ROUNDS) -> LargestOffset:
    """Largest positive start offset along ``axis`` that is held (bisection; module docstring).

    ``limit`` defaults to 90 % of the force model's half-width on that axis.
    """
    j = plant.free_axes.index(axis)
    lim = 0.9 * float(model.span[j]) if limit is None else float(limit)
    runs = 0

    def ok(a: float) -> bool:
        nonlocal runs
        runs += 1
        q0 = np.zeros(plant.n_axes)
        q0[j] = a
        return simulate_multiaxis(plant, report, regulator, model, design, q0=q0, t_end_s=t_end_s, start=start).held

    if ok(lim):
        return LargestOffset(axis, _unit(axis), lim, math.inf, lim, runs)
    lo, hi = 0.0, lim
    # geometric steps down first: the held edge may be far below the box
    a = lim
    while a > lim * 1e-3:
        a *= 0.25
        if ok(a):
            lo = a
            break
        hi = a
    else:
        return LargestOffset(axis, _unit(axis), 0.0, hi, lim, runs)
    for _ in range(rounds):
        mid = 0.5 * (lo + hi)
        if ok(mid):
            lo = mid
        else:
            hi = mid
    return LargestOffset(axis, _unit(axis), lo, hi, lim, runs)
