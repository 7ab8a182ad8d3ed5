"""Drawings of the multi-axis control results (capture regions, responses, switched runs).

Part of the plotting layer: with :mod:`fields.io.plots`, the only modules that import matplotlib."""

from __future__ import annotations

import matplotlib
import numpy as np

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

# ---------------------------------------------------------------------------------------------
# multi-axis control


def _axis_scale(axis: str) -> tuple[float, str]:
    """Display scale and unit of a free axis: mm for translations, degrees for rotations."""
    return (1e3, "mm") if axis in ("x", "y", "z") else (180.0 / np.pi, "deg")


def capture_region_map(region, title: str = ""):
    """Held (green) and lost (red) release points over two free axes, with the peak current."""
    from matplotlib.colors import ListedColormap

    (a, b) = region.axes
    sa, ua = _axis_scale(a)
    sb, ub = _axis_scale(b)
    fig, (ax, ax2) = plt.subplots(1, 2, figsize=(11, 4.6))
    code = {"lost": 0, "not settled": 1, "open swing": 2, "held": 3}
    val = np.vectorize(lambda f: code.get(str(f), 0))(np.asarray(region.fate)).astype(float)
    ax.pcolormesh(np.asarray(region.offsets_b) * sb, np.asarray(region.offsets_a) * sa, val,
                  cmap=ListedColormap(["#f3a6a0", "#f7d59c", "#cccccc", "#9fd8a4"]), vmin=-0.5, vmax=3.5,
                  shading="nearest")
    ax.plot([0], [0], "k+", ms=10)
    ax.set_xlabel(f"start offset {b} ({ub})")
    ax.set_ylabel(f"start offset {a} ({ua})")
    ax.set_title(f"green: held ({100 * region.held_fraction:.0f} %), red: lost, orange: not settled,\n"
                 "grey: a mode no loop acts on swung out of the force model (not judged)", fontsize=9)
    pk = np.where(region.held, region.peak_current_A, np.nan)
    m = ax2.pcolormesh(np.asarray(region.offsets_b) * sb, np.asarray(region.offsets_a) * sa, pk, cmap="viridis",
                       shading="nearest")
    fig.colorbar(m, ax=ax2, label="peak coil current (A), held starts only")
    ax2.set_xlabel(f"start offset {b} ({ub})")
    ax2.set_ylabel(f"start offset {a} ({ua})")
    ax2.set_title("peak current of the held releases", fontsize=9)
    fig.suptitle(title, fontsize=10)
    fig.tight_layout()
    return fig


def multiaxis_responses(runs: dict, free_axes, coil_names, title: str = ""):
    """Pose deviations (mm, deg) and coil currents of nonlinear multi-axis releases."""
    n = len(runs)
    fig, axes = plt.subplots(2, max(n, 1), figsize=(4.2 * max(n, 1), 6.2), squeeze=False, sharex="col")
    for c, (name, r) in enumerate(runs.items()):
        ax, axi = axes[0, c], axes[1, c]
        for j, a in enumerate(free_axes):
            s, u = _axis_scale(a)
            ax.plot(r.t_s * 1e3, r.q[:, j] * s, label=f"{a} ({u})", lw=1)
        for k, cn in enumerate(coil_names):
            axi.plot(r.t_s * 1e3, r.currents_A[:, k], label=cn, lw=1)
        ax.set_title(f"{name}: {'held' if r.held else 'lost'}", fontsize=9)
        ax.legend(fontsize=7)
        axi.legend(fontsize=7)
        axi.set_xlabel("time (ms)")
        ax.grid(alpha=0.3)
        axi.grid(alpha=0.3)
    axes[0, 0].set_ylabel("deviation (mm or deg)")
    axes[1, 0].set_ylabel("coil current (A)")
    fig.suptitle(title, fontsize=10)
    fig.tight_layout()
    return fig


def switched_runs(runs, linear=None, title: str = "", labels=None):
    """On/off runs through a real switch: position and coil current versus time, per band
    (``labels``: one legend text per run, default the band in the sensor's unit)."""
    fig, (ax, axi) = plt.subplots(2, 1, figsize=(8, 6), sharex=True)
    for n, r in enumerate(runs):
        if r.t_s.size < 2:
            continue
        lab = (labels[n] if labels is not None else f"band +-{r.band:.3g}") + f": {r.status}"
        ax.plot(r.t_s * 1e3, r.s_m * 1e3, lw=0.8, label=lab)
        axi.plot(r.t_s * 1e3, r.current_A, lw=0.8)
    if linear is not None:
        t, s, i = linear
        ax.plot(t * 1e3, s * 1e3, "k--", lw=1, label="linear controller")
        axi.plot(t * 1e3, i, "k--", lw=1)
    ax.set_ylabel("position along the axis (mm)")
    axi.set_ylabel("coil current (A)")
    axi.set_xlabel("time (ms)")
    ax.legend(fontsize=7)
    ax.grid(alpha=0.3)
    axi.grid(alpha=0.3)
    ax.set_title(title, fontsize=10)
    fig.tight_layout()
    return fig
