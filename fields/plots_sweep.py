"""Sweep plots (to be merged into fields/plots.py, which holds all matplotlib).

Functions take arrays, return a Figure; nothing is saved here.
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402


def close(fig) -> None:
    """Release a figure (after it was written)."""
    plt.close(fig)


def front_scatter(values, front, names, senses, best=None, title: str = "", ax=None):
    """Objective-space scatter of the feasible designs with the Pareto front highlighted.

    Parameters
    ----------
    values : ndarray, shape (n, m)
        Objectives of the n feasible designs (m = 2 or 3; with 3, the third is the colour).
    front : ndarray of int
        Row indices of the front.
    names, senses : sequence of str, length m
        Column names (units in them) and "min"/"max".
    best : int, optional
        Row of the top-ranked design (marked with a star).

    Returns
    -------
    matplotlib.figure.Figure
    """
    V = np.asarray(values, float)
    if ax is None:
        fig, ax = plt.subplots(figsize=(7, 5.5))
    else:
        fig = ax.figure
    front = np.asarray(front, int)
    if V.shape[1] == 1:
        ax.hist(V[:, 0], bins=min(40, max(5, len(V) // 5)), color="#8a8f99")
        ax.set_xlabel(names[0])
        ax.set_ylabel("designs")
    else:
        c = V[:, 2] if V.shape[1] > 2 else None
        style = dict(c=c, cmap="viridis") if c is not None else dict(color="#b5b9c2")
        sc = ax.scatter(V[:, 0], V[:, 1], s=14, label="feasible designs", zorder=1, **style)
        if c is not None:
            fig.colorbar(sc, ax=ax, label=f"{names[2]} ({senses[2]})")
        F = V[front]
        o = np.argsort(F[:, 0])
        ax.plot(F[o, 0], F[o, 1], "-", color="#c04a4a", lw=1, alpha=0.6, zorder=2)
        ax.scatter(F[:, 0], F[:, 1], s=46, facecolors="none", edgecolors="#c04a4a", linewidths=1.6,
                   label=f"Pareto front ({len(front)})", zorder=3)
        if best is not None:
            ax.plot(V[best, 0], V[best, 1], "*", color="black", ms=14, label="top ranked", zorder=4)
        ax.set_xlabel(f"{names[0]} ({senses[0]})")
        ax.set_ylabel(f"{names[1]} ({senses[1]})")
        ax.legend(fontsize=8, loc="best")
    ax.grid(True, alpha=0.3)
    ax.set_title(title or "Pareto front")
    fig.tight_layout()
    return fig


def objectives_vs_parameters(parameters: dict, objectives: dict, feasible, front_mask=None, title: str = ""):
    """A grid of panels: each objective (rows) versus each varied parameter (columns).

    Parameters
    ----------
    parameters : dict of str to sequence, each of length n
        Parameter column -> values (numbers in SI, or text for grades and directions).
    objectives : dict of str to ndarray, shape (n,)
    feasible : ndarray of bool, shape (n,)
    front_mask : ndarray of bool, shape (n,), optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    feasible = np.asarray(feasible, bool)
    pn, on = list(parameters), list(objectives)
    fig, axes = plt.subplots(len(on), len(pn), figsize=(3.6 * len(pn) + 0.8, 2.8 * len(on) + 0.8), squeeze=False)
    for j, p in enumerate(pn):
        raw = list(parameters[p])
        try:
            x = np.array(raw, float)
            labels = None
        except (TypeError, ValueError):
            labels = sorted({str(v) for v in raw})
            x = np.array([labels.index(str(v)) for v in raw], float)
        for i, o in enumerate(on):
            ax = axes[i, j]
            y = np.asarray(objectives[o], float)
            ax.scatter(x[~feasible], y[~feasible], s=9, marker="x", color="#bbbbbb", label="rejected")
            ax.scatter(x[feasible], y[feasible], s=10, color="#5b7fbf", label="feasible")
            if front_mask is not None and np.any(front_mask):
                fm = np.asarray(front_mask, bool)
                ax.scatter(x[fm], y[fm], s=30, facecolors="none", edgecolors="#c04a4a", label="Pareto front")
            if labels is not None:
                ax.set_xticks(range(len(labels)))
                ax.set_xticklabels(labels, rotation=30, fontsize=7)
            if i == len(on) - 1:
                ax.set_xlabel(p, fontsize=8)
            if j == 0:
                ax.set_ylabel(o, fontsize=8)
            ax.grid(True, alpha=0.3)
            ax.tick_params(labelsize=7)
    axes[0, 0].legend(fontsize=7, loc="best")
    fig.suptitle(title or "objectives versus parameters", fontsize=11)
    fig.tight_layout()
    return fig
