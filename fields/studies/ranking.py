"""Ranking of sweep designs: feasibility, the Pareto front and the ranking rules.

``ranking = "weighted"`` (default): each objective is scaled over the feasible designs to 0 (best)
.. 1 (worst) by min-max normalisation, and the score is the weighted mean (weights from the
sweep file, default 1); lower is better, ties go to the lower design index.
``ranking = "lexicographic"``: sort by the first objective, ties by the second, and so on
(exact comparison of the computed values).
"""

from __future__ import annotations

import math

import numpy as np

from fields.errors import InputError
from fields.input.sweepfile import SweepSpec


def rejection_reasons(spec: SweepSpec, row: dict) -> list[str]:
    """Why a design row is infeasible (empty: feasible): failed, a reject flag, a limit, a
    non-finite objective."""
    if row["failure"]:
        return ["failed"]
    why = [f for f in spec.reject_flags if row[f]]
    for lim in spec.limits:
        v = row[lim.column]
        if not math.isfinite(v) or (lim.minimum is not None and v < lim.minimum) or (lim.maximum is not None and v > lim.maximum):
            why.append(f"{lim.column} outside {lim.text}")
    for o in spec.objectives:
        if not math.isfinite(row[o.column]):
            why.append(f"{o.column} not finite")
    return why


def ranking_text(spec: SweepSpec) -> str:
    """The ranking rule in words."""
    return ("weighted mean of min-max scaled objectives, 0 best" if spec.ranking == "weighted"
            else "lexicographic: first objective, ties by the next")


def pareto_front(values, senses) -> np.ndarray:
    """Indices of the non-dominated rows.

    Parameters
    ----------
    values : array_like, shape (n, m)
        Objective values of n designs; rows with a NaN take no part.
    senses : sequence of str, length m
        ``"min"`` or ``"max"`` per column.

    Returns
    -------
    ndarray of int
        Sorted row indices of the designs no other design dominates (at least as good in every
        objective and better in one). Equal rows do not dominate each other.

    Examples
    --------
    >>> pareto_front([[1, 5], [2, 2], [3, 3], [5, 1]], ["min", "min"]).tolist()
    [0, 1, 3]
    """
    V = np.asarray(values, float)
    if V.ndim != 2 or V.shape[1] != len(senses):
        raise InputError(f"pareto_front: values must be an array of shape (n, {len(senses)}); got {V.shape}.")
    for s in senses:
        if s not in ("min", "max"):
            raise InputError(f"pareto_front: each sense must be \"min\" or \"max\"; got {s!r}.")
    sign = np.array([1.0 if s == "min" else -1.0 for s in senses])
    ok = np.flatnonzero(np.all(np.isfinite(V), axis=1))
    X = V[ok] * sign
    keep = np.ones(len(X), bool)
    block = 512
    for a in range(0, len(X), block):
        A = X[a:a + block]
        le = np.all(X[None, :, :] <= A[:, None, :], axis=2)  # (block, n): row j at least as good
        lt = np.any(X[None, :, :] < A[:, None, :], axis=2)
        keep[a:a + block] = ~np.any(le & lt, axis=1)
    return ok[keep]


def rank(values, senses, weights=None, method: str = "weighted") -> tuple[np.ndarray, np.ndarray]:
    """Order of rows by the objectives (best first) and each row's score.

    Parameters
    ----------
    values : array_like, shape (n, m)
    senses : sequence of "min"/"max", length m
    weights : sequence of float, length m, optional (weighted only; default equal)
    method : "weighted" or "lexicographic"

    Returns
    -------
    order : ndarray of int, shape (n,)
    score : ndarray, shape (n,)
        Weighted: mean of the min-max scaled objectives (0 best, 1 worst). Lexicographic: the
        position in the order (0 best).
    """
    V = np.asarray(values, float)
    n, m = V.shape
    sign = np.array([1.0 if s == "min" else -1.0 for s in senses])
    X = V * sign
    if method == "lexicographic":
        order = np.lexsort(tuple([np.arange(n)] + [X[:, j] for j in reversed(range(m))]))
        score = np.empty(n)
        score[order] = np.arange(n, dtype=float)
        return order, score
    if method != "weighted":
        raise InputError(f"rank: method must be \"weighted\" or \"lexicographic\"; got {method!r}.")
    w = np.ones(m) if weights is None else np.asarray(weights, float)
    lo, hi = X.min(axis=0) if n else np.zeros(m), X.max(axis=0) if n else np.ones(m)
    span = np.where(hi > lo, hi - lo, 1.0)
    score = ((X - lo) / span) @ w / w.sum()
    order = np.lexsort((np.arange(n), score))
    return order, score
