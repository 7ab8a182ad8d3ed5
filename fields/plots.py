"""All matplotlib drawing lives here. Functions take results, return a Figure; nothing is saved here."""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.patches import Polygon  # noqa: E402

#: fill colours by body kind (our own palette)
KIND_COLOURS = {
    "coil": "#d9893b",
    "core": "#8a8f99",
    "magnet": "#5b7fbf",
    "floater": "#c04a4a",
}


def design_picture(design, gap_m: float | None = None):
    """To-scale side section (plane y = 0) and top view of a design, floater at ``gap_m``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from .bodies import section_outlines

    gap = design.study.operating_gap_m if gap_m is None else gap_m
    fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(11, 5.2), gridspec_kw={"width_ratios": [1.15, 1]})
    for ax, plane, title in ((ax1, "xz", "side section (y = 0)"), (ax2, "xy", "top view")):
        outlines = section_outlines(design, plane=plane, gap_m=gap)
        seen = set()
        allpts = []
        for name, kind, poly in outlines:
            poly = np.asarray(poly) * 1e3
            allpts.append(poly)
            label = kind if kind not in seen else None
            seen.add(kind)
            ax.add_patch(Polygon(poly, closed=True, facecolor=KIND_COLOURS.get(kind, "#bbbbbb"),
                                 edgecolor="black", linewidth=0.7, alpha=0.85 if plane == "xz" else 0.55,
                                 label=label))
        if plane == "xz":
            for s in design.sensors:
                if s.kind == "beam":
                    ax.axhspan((s.height_m - s.beam_height_m / 2) * 1e3, (s.height_m + s.beam_height_m / 2) * 1e3,
                               color="#2e9e5b", alpha=0.35, label=f"beam: {s.name}")
                else:
                    ax.plot(s.position_m[0] * 1e3, s.position_m[2] * 1e3, "k^", ms=7, label=f"Hall: {s.name}")
            up = design.up
            com = design.study.floater_origin_m(gap)[0] + np.asarray(design.floater.centre_of_mass_m)
            ax.plot(com[0] * 1e3, com[2] * 1e3, "x", color="black", ms=8, label="floater centre of mass")
            ax.annotate("", xy=(0.06, 0.12), xytext=(0.06, 0.26), xycoords="axes fraction",
                        arrowprops=dict(arrowstyle="->", color="#444444"))
            ax.text(0.075, 0.17, "g", transform=ax.transAxes, color="#444444")
            _ = up
        else:
            for s in design.sensors:
                if s.kind == "hall":
                    ax.plot(s.position_m[0] * 1e3, s.position_m[1] * 1e3, "k^", ms=7)
        if allpts:
            pts = np.concatenate(allpts)
            lo, hi = pts.min(axis=0), pts.max(axis=0)
            pad = 0.08 * (hi - lo).max() + 1.0
            ax.set_xlim(lo[0] - pad, hi[0] + pad)
            ax.set_ylim(lo[1] - pad, hi[1] + pad)
        ax.set_aspect("equal")
        ax.set_xlabel("x (mm)")
        ax.set_ylabel("z (mm)" if plane == "xz" else "y (mm)")
        ax.set_title(title)
        ax.grid(True, alpha=0.25)
    ax1.legend(loc="upper right", fontsize=7, framealpha=0.9)
    fig.suptitle(f"{design.name}: floater at gap {gap * 1e3:.3g} mm (to scale)"
                 + ("  [invented example]" if design.invented else ""), fontsize=11)
    fig.tight_layout()
    return fig
