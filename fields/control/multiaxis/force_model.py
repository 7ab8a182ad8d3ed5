"""The force model of the multi-axis simulation: the force engine and the sensors, fitted.

Force model
    The force and torque bases ``F0, T0`` (zero current) and ``Fk, Tk`` (per ampere) of
    :func:`fields.physics.wrench.wrench_basis` are tabulated once at scattered poses inside a box
    around the equilibrium (Latin hypercube, ``+-span`` on every free axis) and fitted by a
    cubic polynomial in the pose deviations (least squares); so are the Hall sensors'
    zero-current and per-ampere fields and the beam gates' blocked fractions (clipped to 0..1; a
    beam narrower than the box is the least accurate column). The fit is checked
    on further poses evaluated directly: :class:`ForceModel` reports the largest error of each
    quantity relative to its largest value over the box. The wrench is exactly affine in the
    currents (no cores, or unsaturated cores), so only the pose needs fitting.
Cores
    Every sample pose needs its own iron response, so with cores the samples use the fast rule
    and the coarse cells (about 0.3 % from the fine level), and the fit is then given the plant's
    linearization at the centre: the per-ampere constants are the plant's allocation and the
    pose derivatives of the wrench and of the Hall readings at the bias currents are the plant's
    (``-K`` and the sensor gains, fine level, saturable iron). The coarse samples supply only the
    curvature; the reported error includes validation poses evaluated at the fine level.

Index letters: ``n`` free axes, ``k`` coils, ``p`` poses, ``f`` polynomial features.
"""

from __future__ import annotations

import functools
import itertools
import math
from dataclasses import dataclass

import numpy as np

from fields.analysis import AXES, displace
from fields.control.multiaxis.outputs import beam_fraction_at_poses, hall_parts
from fields.control.multiaxis.plant import MultiaxisPlant
from fields.model.design import Design, HallSensor
from fields.physics.wrench import IRON_LEVELS, concat_bases, wrench_basis

#: default box half-widths of the force model
SPAN_LENGTH_M = 2e-3
SPAN_ANGLE_RAD = math.radians(2.0)
#: a fitted column whose data stay below this share of its group's largest value is zero
SYMMETRY_ZERO = 1e-9
#: validation poses evaluated at the fine level when the samples use the coarse cells
FINE_CHECKS = 6


@functools.lru_cache(maxsize=8)
def _monomials(n: int) -> tuple[np.ndarray, ...]:
    """Index arrays of the degree-1, 2 and 3 monomials of n variables."""
    return tuple(np.array(list(itertools.combinations_with_replacement(range(n), d)), int).reshape(-1, d)
                 for d in (1, 2, 3))


def _features(X: np.ndarray) -> np.ndarray:
    """Monomials up to degree 3 of the columns of X (p, n) -> (p, f)."""
    p, n = X.shape
    m1, m2, m3 = _monomials(n)
    return np.concatenate([np.ones((p, 1)), X[:, m1[:, 0]], X[:, m2[:, 0]] * X[:, m2[:, 1]],
                           X[:, m3[:, 0]] * X[:, m3[:, 1]] * X[:, m3[:, 2]]], axis=1)


@dataclass(frozen=True, eq=False)
class ForceModel:
    """Cubic fits of the wrench bases and sensor fields over a pose box (module docstring).

    Attributes
    ----------
    free_axes : tuple of str
    span : ndarray, shape (n,)
        Box half-widths (m or rad) per free axis.
    coefficients : ndarray, shape (f, c)
        Columns: F0 (3), T0 (3), Fk (3k), Tk (3k), then per sensor its zero-current value and
        (Hall) its k per-ampere values, in the sensor's raw unit (T or blocked fraction).
    relative_error : dict
        Largest validation error / largest value, for "force", "torque", each sensor.
    samples, validation_samples : int
    """

    free_axes: tuple[str, ...]
    span: np.ndarray
    coefficients: np.ndarray
    relative_error: dict
    samples: int
    validation_samples: int
    n_coils: int
    sensor_columns: tuple[tuple[int, int], ...]

    def evaluate(self, dq: np.ndarray) -> np.ndarray:
        """Fitted columns (p, c) at pose deviations dq (p, n)."""
        return _features(np.atleast_2d(dq) / self.span) @ self.coefficients

    def wrench(self, dq: np.ndarray, currents_A: np.ndarray):
        """Force (3,), torque (3,) and the bases Fk (k, 3), Tk (k, 3) at one pose deviation."""
        v = self.evaluate(dq.reshape(1, -1))[0]
        k = self.n_coils
        Fk = v[6:6 + 3 * k].reshape(k, 3)
        Tk = v[6 + 3 * k:6 + 6 * k].reshape(k, 3)
        return v[0:3] + currents_A @ Fk, v[3:6] + currents_A @ Tk, Fk, Tk


def _basis_parts(design: Design, P, Rv, order: str):
    """The wrench basis at independent sample poses; with cores split over the cores
    (:func:`fields.physics.parallel.map_chunks`)."""
    from fields.physics.parallel import map_chunks

    if not design.cores:
        return wrench_basis(design, P, Rv, order=order, estimate_error=False)
    parts = map_chunks(lambda sl: wrench_basis(design, P[sl], Rv[sl], order=order, estimate_error=False), len(P))
    return concat_bases(parts)


def _hall_parts_split(design: Design, sensor, P, Rv, iron_level: str):
    """:func:`hall_parts` at independent poses; with cores (an iron response per pose) split over the cores."""
    from fields.physics.parallel import map_chunks

    if not design.cores:
        return hall_parts(design, sensor, P, Rv)
    parts = map_chunks(lambda sl: hall_parts(design, sensor, P[sl], Rv[sl], iron_level), len(P))
    return np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])


def _raw_columns(design: Design, P, Rv, order: str = "standard"):
    b = _basis_parts(design, P, Rv, order)
    k = len(design.coils)
    cols = [b.F0_N, b.T0_Nm, b.Fk_N_per_A.reshape(len(P), 3 * k), b.Tk_Nm_per_A.reshape(len(P), 3 * k)]
    spans = []
    c0 = 6 + 6 * k
    for s in design.sensors:
        if isinstance(s, HallSensor):
            z, per_A = _hall_parts_split(design, s, P, Rv, IRON_LEVELS[order])
            cols += [z[:, None], per_A]
            spans.append((c0, 1 + k))
            c0 += 1 + k
        else:
            cols.append(beam_fraction_at_poses(design, s, P, Rv)[:, None])
            spans.append((c0, 1))
            c0 += 1
    return np.concatenate(cols, axis=1), tuple(spans), bool(np.any(b.contact))


def _anchor(coef: np.ndarray, plant: MultiaxisPlant, design: Design, span: np.ndarray, sensor_columns, keep) -> None:
    """Give the fit the plant's linearization at the centre (in place): the per-ampere columns'
    constants are the plant's allocation, and the pose derivatives at the bias currents of the
    wrench and of each Hall reading are the plant's (``-K`` and the sensor pose gains). The fit
    itself (tabulated with the coarse cells) then supplies only the curvature. ``keep``: columns
    not fixed at zero by symmetry."""
    k = plant.n_coils
    idx = [AXES.index(a) for a in plant.free_axes]
    I0 = plant.bias_currents_A
    G6 = plant.allocation_all_axes  # (6, k)

    def per_A_col(c: int, j: int) -> int:  # column of wrench component c (0..5), coil j
        return 6 + 3 * j + c if c < 3 else 6 + 3 * k + 3 * j + (c - 3)

    for c in range(6):
        for j in range(k):
            if keep[per_A_col(c, j)]:
                coef[0, per_A_col(c, j)] = G6[c, j]
    for a, c in enumerate(idx):
        if not keep[c]:
            continue
        for b in range(len(idx)):
            slope = coef[1 + b, c] + sum(I0[j] * coef[1 + b, per_A_col(c, j)] for j in range(k))
            coef[1 + b, c] += -plant.stiffness[a, b] * span[b] - slope
    for s, sm, (c0, w) in zip(design.sensors, plant.sensors, sensor_columns):
        if not isinstance(s, HallSensor):
            continue
        scale = float(s.sensitivity_V_per_T) if s.sensitivity_V_per_T else 1.0
        coef[0, c0 + 1:c0 + w] = np.asarray(sm.current_gain, float) / scale
        for b in range(len(idx)):
            slope = coef[1 + b, c0] + coef[1 + b, c0 + 1:c0 + w] @ I0
            coef[1 + b, c0] += np.asarray(sm.pose_gain, float)[b] / scale * span[b] - slope


def force_model(design: Design, plant: MultiaxisPlant, span_length_m: float = SPAN_LENGTH_M,
                span_angle_rad: float = SPAN_ANGLE_RAD, samples_per_term: float = 3.0, seed: int = 0) -> ForceModel:
    """Tabulate and fit the force engine and the sensors around the plant's equilibrium.

    With cores the samples use the fast rule and the coarse cells (an iron response per pose;
    about 0.3 % from the fine level), and the fit is given the plant's linearization at the centre
    (:func:`_anchor`); its reported error is then the larger of the coarse validation poses' and
    that of :data:`FINE_CHECKS` validation poses evaluated at the fine level.
    """
    free = plant.free_axes
    n = len(free)
    idx = [AXES.index(a) for a in free]
    span = np.array([span_length_m if a in ("x", "y", "z") else span_angle_rad for a in free])
    nf = _features(np.zeros((1, n))).shape[1]
    m = math.ceil(samples_per_term * nf)
    mv = max(20, m // 4)
    rng = np.random.default_rng(seed)
    # Latin hypercube in [-1, 1]^n, plus the box corners along each axis
    u = (np.stack([rng.permutation(m) for _ in range(n)], axis=1) + rng.random((m, n))) / m * 2 - 1
    u = np.vstack([u, np.eye(n), -np.eye(n), np.zeros((1, n))])
    v = rng.uniform(-0.9, 0.9, (mv, n))
    X = np.vstack([u, v]) * span
    dq = np.zeros((len(X), 6))
    dq[:, idx] = X
    P, Rv = displace(design, plant.position_m, plant.rotvec_rad, dq)
    order = "fast" if design.cores else "standard"
    Y, spans, contact = _raw_columns(design, P, Rv, order)
    if contact:
        raise ValueError(f"force_model: the pose box (+-{span_length_m * 1e3:g} mm, +-{math.degrees(span_angle_rad):g} deg) "
                         "reaches contact with a body; choose a smaller span")
    fit = len(u)
    coef, *_ = np.linalg.lstsq(_features(X[:fit] / span), Y[:fit], rcond=None)
    # columns that vanish by symmetry (e.g. the spin torque of an axisymmetric design) stay zero:
    # a fit of rounding noise would invent a torque
    k = len(design.coils)
    groups = [list(range(3)) + list(range(6, 6 + 3 * k)), list(range(3, 6)) + list(range(6 + 3 * k, 6 + 6 * k))]
    keep = np.ones(Y.shape[1], bool)
    for grp in groups:
        big = float(np.max(np.abs(Y[:, grp]))) if grp else 0.0
        for c in grp:
            if np.max(np.abs(Y[:, c])) <= SYMMETRY_ZERO * big:
                coef[:, c] = 0.0
                keep[c] = False
    if order != "standard":
        _anchor(coef, plant, design, span, spans, keep)
    err = np.abs(_features(X[fit:] / span) @ coef - Y[fit:])
    if order != "standard":
        chk = slice(fit, fit + FINE_CHECKS)
        Yf, _, _ = _raw_columns(design, P[chk], Rv[chk], "standard")
        err = np.vstack([err, np.abs(_features(X[chk] / span) @ coef - Yf)])

    def rel(cols):
        big = float(np.max(np.abs(Y[:, cols]))) if len(cols) else 0.0
        return float(np.max(err[:, cols]) / big) if big > 0 else 0.0

    relerr = {"force": rel(list(range(3)) + list(range(6, 6 + 3 * k))),
              "torque": rel(list(range(3, 6)) + list(range(6 + 3 * k, 6 + 6 * k)))}
    for s, (c0, w) in zip(design.sensors, spans):
        relerr[s.name] = rel(list(range(c0, c0 + w)))
    return ForceModel(free, span, coef, relerr, fit, len(v), k, spans)
