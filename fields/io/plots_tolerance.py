"""Drawings of the tolerance study (output histograms) and of the design comparison (axial force
curves overlaid).

Part of the plotting layer: with :mod:`fields.io.plots` and :mod:`fields.io.plots_control`, the
only modules that import matplotlib."""

from __future__ import annotations

import math

import matplotlib
import numpy as np

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402


def output_histograms(samples: dict, nominal: dict, labels: dict, title: str = ""):
    """One histogram per output (``samples[name]``: values; ``nominal[name]``: the nominal design's
    value, drawn as a line; ``labels[name]``: (axis label, display scale))."""
    names = list(samples)
    cols = 2 if len(names) > 1 else 1
    rows = max(1, math.ceil(len(names) / cols))
    fig, axes = plt.subplots(rows, cols, figsize=(5.2 * cols, 3.4 * rows), squeeze=False)
    for ax, name in zip(axes.flat, names):
        label, scale = labels.get(name, (name, 1.0))
        v = np.asarray(samples[name], float)
        v = v[np.isfinite(v)] * scale
        if v.size:
            ax.hist(v, bins=min(30, max(5, int(np.sqrt(v.size)) + 1)), color="#7aa6d6", edgecolor="#2f5d8a")
            for p, ls in ((5, ":"), (95, ":")):
                ax.axvline(np.percentile(v, p), color="#555555", ls=ls, lw=1)
        else:
            ax.text(0.5, 0.5, "no finite values", ha="center", va="center", transform=ax.transAxes)
        nom = nominal.get(name)
        if nom is not None and math.isfinite(nom):
            ax.axvline(nom * scale, color="#b00020", lw=1.5, label="nominal design")
            ax.legend(fontsize=8)
        ax.set_xlabel(label)
        ax.set_ylabel("samples")
    for ax in list(axes.flat)[len(names):]:
        ax.set_visible(False)
    fig.suptitle(title + "\n(dotted: 5th and 95th percentiles)", fontsize=10)
    fig.tight_layout()
    return fig


def force_curves_overlay(curves: list, names: list[str], title: str = ""):
    """The axial curves of several designs overlaid (``curves``: AxialCurves): the zero-current
    force against gap with each design's weight dashed in its colour, and the force per ampere."""
    fig, (ax, ax2) = plt.subplots(1, 2, figsize=(11, 4.4))
    for i, (c, name) in enumerate(zip(curves, names)):
        colour = f"C{i % 10}"
        g = np.asarray(c.gaps_m, float) * 1e3
        ax.plot(g, np.asarray(c.F0_N, float), color=colour, lw=1.6, label=name)
        ax.axhline(c.weight_N, color=colour, ls="--", lw=0.9)
        ax2.plot(g, np.asarray(c.ki_N_per_A, float), color=colour, lw=1.6, label=name)
    ax.set_xlabel("gap (mm)")
    ax.set_ylabel("upward magnetic force at zero current (N)")
    ax.set_title("force at zero current (dashed: weight)", fontsize=9)
    ax2.set_xlabel("gap (mm)")
    ax2.set_ylabel("force per ampere k_i (N/A)")
    ax2.set_title("force per ampere of the drive pattern", fontsize=9)
    for a_ in (ax, ax2):
        a_.grid(alpha=0.3)
        a_.legend(fontsize=8)
    fig.suptitle(title, fontsize=10)
    fig.tight_layout()
    return fig


def close(fig) -> None:
    plt.close(fig)
