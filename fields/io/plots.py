"""All matplotlib drawing lives here. Functions take results, return a Figure; nothing is saved here."""

from __future__ import annotations

import matplotlib
import numpy as np

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.patches import Polygon  # noqa: E402

from fields.input.tables import G_STANDARD  # noqa: E402
from fields.io.wording import equilibrium_label  # noqa: E402

#: fill colours by body kind (our own palette)
KIND_COLOURS = {
    "coil": "#d9893b",
    "core": "#8a8f99",
    "magnet": "#5b7fbf",
    "floater": "#c04a4a",
}


def _gravity_arrow(ax, g_dir, plane: str) -> None:
    """Gravity's direction projected on the view's plane ("xz": x right, z up; "xy"), as an arrow
    in the lower left corner; none where gravity is (nearly) normal to the view."""
    i, j = (0, 2) if plane == "xz" else (0, 1)
    v = np.array([g_dir[i], g_dir[j]], float)
    n = float(np.hypot(*v))
    if n < 0.2:
        return
    v = 0.07 * v / n
    c = np.array([0.1, 0.18])
    ax.annotate("", xy=tuple(c + v), xytext=tuple(c - v), xycoords="axes fraction",
                arrowprops=dict(arrowstyle="->", color="#444444"))
    side = np.array([abs(v[1]), abs(v[0])]) / 0.07 * 0.035  # beside the arrow, right of or above it
    ax.text(c[0] + side[0], c[1] + side[1], "g", transform=ax.transAxes, color="#444444", ha="center", va="center")


def design_picture(design, gap_m: float | None = None):
    """To-scale side section (plane y = 0) and top view of a design, floater at ``gap_m``.

    Returns
    -------
    matplotlib.figure.Figure
    """
    from fields.model.outlines import section_outlines

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
            com = design.study.floater_origin_m(gap)[0] + np.asarray(design.floater.centre_of_mass_m)
            ax.plot(com[0] * 1e3, com[2] * 1e3, "x", color="black", ms=8, label="floater centre of mass (payload included)")
            allpts.append(np.array([[com[0] * 1e3, com[2] * 1e3]]))
        else:
            for s in design.sensors:
                if s.kind == "hall":
                    ax.plot(s.position_m[0] * 1e3, s.position_m[1] * 1e3, "k^", ms=7)
        _gravity_arrow(ax, -design.up, plane)
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
    ax1.legend(loc="upper center", bbox_to_anchor=(0.5, -0.2), ncol=3, fontsize=7, frameon=False)
    fig.suptitle(f"{design.name}: floater at gap {gap * 1e3:.3g} mm (to scale)"
                 + ("  [invented example]" if design.invented else ""), fontsize=11)
    fig.tight_layout()
    return fig


def curve_family(curves, equilibria=(), title: str = "", gap_label: str = "gap (mm)"):
    """F_up versus gap for each current, the weight line, equilibria (filled: stable, open: unstable)."""
    fig, (ax, ax2) = plt.subplots(2, 1, figsize=(8, 7.5), sharex=True, gridspec_kw={"height_ratios": [2.2, 1]})
    g = curves.gaps_m * 1e3
    cmap = plt.get_cmap("viridis")
    n = len(curves.currents_A)
    for j, I in enumerate(curves.currents_A):
        F = np.where(curves.contact, np.nan, curves.Fup_N[:, j])
        ax.plot(g, F, color=cmap(j / max(n - 1, 1)), lw=1.6, label=f"I = {I:g} A")
    across = curves.weight_N == 0.0  # an offset study with gravity across its gap direction
    ax.axhline(curves.weight_N, color="#b22222", ls="--", lw=1.3,
               label="balance: zero axial force (gravity acts across the gap direction)" if across
               else f"weight {curves.weight_N:.3g} N")
    if curves.max_current_A > 0 and not across:
        ax.fill_between(g, np.where(curves.contact, np.nan, curves.min_total_mass_kg * G_STANDARD),
                        np.where(curves.contact, np.nan, curves.max_total_mass_kg * G_STANDARD), color="#999999", alpha=0.15,
                        label=f"reach within +-{curves.max_current_A:g} A")
    for e in equilibria:
        ax.plot(e.gap_m * 1e3, curves.weight_N, "o", ms=8, mfc="black" if e.stable else "white", mec="black",
                label=f"{equilibrium_label(e.stable)} at {e.gap_m * 1e3:.3g} mm, {e.current_A:g} A")
    lo = np.nanmin(np.where(curves.contact[:, None], np.nan, curves.Fup_N))
    hi = np.nanmax(np.where(curves.contact[:, None], np.nan, curves.Fup_N))
    if across:
        span = max(hi - lo, 1e-12)
        ax.set_ylim(min(lo, 0) - 0.05 * span, max(hi, 0) + 0.05 * span)
        ax.set_ylabel("magnetic force along the gap direction (N)")
    else:
        span = max(hi, curves.weight_N * 3) - min(lo, 0)
        ax.set_ylim(min(lo, 0) - 0.05 * span, min(hi, curves.weight_N * 6) + 0.05 * span)
        ax.set_ylabel("upward magnetic force F_up (N)")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=7.5, loc="best", ncol=2)
    ax.set_title(title or "axial force versus gap")
    ih = np.where(curves.contact, np.nan, curves.hover_current_A)
    ax2.plot(g, ih, color="#1f4e9c", lw=1.6, label="hover current")
    ax2.axhline(curves.max_current_A, color="#b22222", ls=":", lw=1, label="current limit")
    ax2.axhline(-curves.max_current_A, color="#b22222", ls=":", lw=1)
    ax2.set_ylabel("hover current (A)")
    ax2.set_xlabel(gap_label)
    if curves.max_current_A <= 0:
        ax2.text(0.5, 0.5, "no coils: no hover current", transform=ax2.transAxes, ha="center", va="center", color="#555555")
    ax2.grid(True, alpha=0.3)
    ax2.legend(fontsize=7.5)
    fin = ih[np.isfinite(ih)]
    if fin.size:
        # show the current limit clearly: at most three times the limit
        m = min(max(np.max(np.abs(fin)), curves.max_current_A), 3 * curves.max_current_A)
        ax2.set_ylim(-1.3 * m, 1.3 * m) if np.min(fin) < 0 else ax2.set_ylim(-0.1 * m, 1.3 * m)
    fig.tight_layout()
    return fig


def pose_maps(lateral_map, tilt_map, title: str = ""):
    """Sideways force over gap x offset and tilt torque over gap x tilt; the passively centred
    region is shaded green, the region that pushes away red, contact grey."""
    from matplotlib.colors import ListedColormap

    fig, axes = plt.subplots(1, 2, figsize=(12, 5.2))
    for ax, mp in zip(axes, (lateral_map, tilt_map)):
        if mp is None:
            ax.set_visible(False)
            continue
        if mp.kind == "lateral":
            x = mp.coordinate * 1e3
            val = mp.force_N[..., 0] * 1e3
            lab = "sideways force F_x (mN)"
            xl = "sideways offset x (mm)"
        else:
            x = np.degrees(mp.coordinate)
            val = mp.torque_Nm[..., 1] * 1e3
            lab = "tilt torque T_y (mN m)"
            xl = "tilt about y (deg)"
        y = mp.gaps_m * 1e3
        state = np.where(mp.contact, 2, np.where(mp.passively_centred, 0, np.where(mp.restoring, 3, 1)))
        cmap = ListedColormap(["#9fd8a4", "#f3a6a0", "#bbbbbb", "#d8ecd9"])
        ax.pcolormesh(x, y, state, cmap=cmap, vmin=-0.5, vmax=3.5, shading="nearest")
        v = np.where(mp.contact, np.nan, val)
        lim = np.nanpercentile(np.abs(v), 95) if np.any(np.isfinite(v)) else 1.0
        levels = np.linspace(-lim, lim, 13)
        cs = ax.contour(x, y, v, levels=levels, colors="k", linewidths=0.6)
        ax.clabel(cs, fontsize=6.5, fmt=lambda val, lim=lim: "0" if abs(val) < 1e-9 * lim else f"{val:.3g}")
        ax.set_xlabel(xl)
        ax.set_ylabel("gap (mm)")
        ax.set_title(f"contours: {lab}", fontsize=9)
    from matplotlib.patches import Patch

    handles = [Patch(color="#9fd8a4", label="passively centred (pushed back; the coil can hold the weight)"),
               Patch(color="#d8ecd9", label="pushed back, but the weight cannot be held at this gap"),
               Patch(color="#f3a6a0", label="pushed away from the centre (needs active control)"),
               Patch(color="#bbbbbb", label="contact with a body")]
    fig.legend(handles=handles, loc="lower center", ncol=2, fontsize=8, frameon=False)
    fig.suptitle(title or "sideways and tilt maps", fontsize=11)
    fig.tight_layout(rect=(0, 0.08, 1, 1))
    return fig


def stiffness_vs_gap(gs, title: str = ""):
    """Lateral, vertical and tilt stiffness versus gap (at the hover current); k_x and k_y (and
    the two tilts) are drawn apart unless they agree at every gap (:meth:`GapStiffness.same_xy`)."""
    fig, (a1, a2) = plt.subplots(2, 1, figsize=(8, 6), sharex=True)
    g = gs.gaps_m * 1e3
    xy, rxy = gs.same_xy()
    if xy:
        a1.plot(g, gs.k_x_N_per_m, label="sideways k_x = k_y", color="#2e7d32")
    else:  # not round (e.g. a bar magnet): each sideways axis on its own
        a1.plot(g, gs.k_x_N_per_m, label="sideways k_x", color="#2e7d32")
        a1.plot(g, gs.k_y_N_per_m, label="sideways k_y", color="#9e9d24", ls="--")
    a1.plot(g, gs.k_vertical_N_per_m, label="vertical k_z", color="#1f4e9c")
    a1.axhline(0, color="k", lw=0.8)
    a1.set_ylabel("stiffness (N/m)\n> 0 restores")
    a1.legend(fontsize=8)
    a1.grid(True, alpha=0.3)
    if rxy:
        a2.plot(g, gs.k_rx_Nm_per_rad * 1e3, color="#8e24aa", label="tilt k_rx = k_ry")
    else:
        a2.plot(g, gs.k_rx_Nm_per_rad * 1e3, color="#8e24aa", label="tilt k_rx (about x)")
        a2.plot(g, gs.k_ry_Nm_per_rad * 1e3, color="#c2185b", ls="--", label="tilt k_ry (about y)")
    a2.axhline(0, color="k", lw=0.8)
    a2.set_ylabel("tilt stiffness (mN m/rad)")
    a2.set_xlabel("gap (mm)")
    a2.legend(fontsize=8)
    a2.grid(True, alpha=0.3)
    a1.set_title(title or "stiffness versus gap at the hover current")
    fig.tight_layout()
    return fig


def sensor_curves(design, beams, halls, placement=None):
    """Beam-gate blocked fraction and Hall readings versus gap; placement panel when given."""
    n = (1 if beams else 0) + (1 if halls else 0) + (1 if placement is not None else 0)
    fig, axes = plt.subplots(max(n, 1), 1, figsize=(8, 3.2 * max(n, 1) + 0.6))
    axes = list(np.atleast_1d(axes))
    gop = design.study.operating_gap_m * 1e3
    if not beams:
        axes.insert(0, None)
    ax = axes[0]
    for b in beams:
        ax.plot(b.gaps_m * 1e3, b.blocked_fraction, lw=1.6, label=f"{b.name}: blocked fraction")
        lo, hi = b.linear_range_m
        if np.isfinite(lo) and np.isfinite(hi):
            ax.axvspan(lo * 1e3, hi * 1e3, color="#2e9e5b", alpha=0.15, label=f"{b.name}: linear range")
        ax.text(0.01, 0.04, f"gain {b.gain_per_mm:.3g} per mm at the operating gap", transform=ax.transAxes, fontsize=8)
    if beams:
        ax.axvline(gop, color="k", ls=":", lw=1, label="operating gap")
        ax.set_ylabel("beam blocked (fraction)")
        ax.set_xlabel("gap (mm)")
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize=7.5)
    i = 1
    if halls:
        ax = axes[i]
        i += 1
        for h in halls:
            ax.plot(h.gaps_m * 1e3, h.reading_zero_current_T * 1e3, lw=1.6, label=f"{h.name}: reading at 0 A")
            for k, c in enumerate(design.coils):
                ax.plot(h.gaps_m * 1e3, h.coil_T_per_A[:, k] * c.max_current_A * 1e3, ls="--", lw=1,
                        label=f"{h.name}: {c.name} at max current (cross-talk)")
            ax.axhline(h.range_T * 1e3, color="#b22222", ls=":", lw=1)
            ax.axhline(-h.range_T * 1e3, color="#b22222", ls=":", lw=1, label=f"{h.name}: sensor range")
        ax.axvline(gop, color="k", ls=":", lw=1)
        ax.set_ylabel("field along sensing axis (mT)")
        ax.set_xlabel("gap (mm)")
        ax.grid(True, alpha=0.3)
        ax.legend(fontsize=7)
    if placement is not None:
        ax = axes[i]
        d = np.asarray(placement.positions_m) @ design.axial * 1e3
        ax.plot(d, placement.linear_half_width_m * 1e3, "o-", label="linear half-width (mm)")
        ax2 = ax.twinx()
        ax2.semilogy(d, np.maximum(placement.worst_crosstalk_gap_m_per_A * 1e3, 1e-6), "s--", color="#b22222",
                     label="cross-talk (mm of gap per A)")
        bad = np.array([st != "usable" for st in placement.status])
        if np.any(bad):
            ax.plot(d[bad], np.nan_to_num(placement.linear_half_width_m[bad] * 1e3), "x", color="#777777", ms=8,
                    label="not usable (see placement.csv)")
        if placement.best_index is not None:
            ax.axvline(d[placement.best_index], color="#2e9e5b", lw=2, alpha=0.5, label="chosen position")
        else:
            ax.text(0.5, 0.9, "no candidate is usable", transform=ax.transAxes, ha="center", fontsize=9)
        ax.set_xlabel("candidate sensor height (mm)")
        ax.set_ylabel("linear half-width (mm)")
        ax2.set_ylabel("cross-talk (mm per A)")
        h1, l1 = ax.get_legend_handles_labels()
        h2, l2 = ax2.get_legend_handles_labels()
        ax.legend(h1 + h2, l1 + l2, fontsize=7)
        ax.grid(True, alpha=0.3)
        ax.set_title("Hall sensor placement along the study's candidate line", fontsize=9)
    fig.suptitle(f"{design.name}: sensors", fontsize=11)
    fig.tight_layout()
    return fig


def _loop_response(margins, n: int = 2000):
    """Frequencies (rad/s) and complex loop gain L(j w) of a margins result's loop."""
    loop = margins.loop
    dt = loop.dt if loop.dt not in (None, 0, True) else None
    wc = float(np.max(margins.gain_crossovers_rad_per_s)) if len(margins.gain_crossovers_rad_per_s) else 100.0
    w_hi = (np.pi / dt) * 0.999 if dt else wc * 1e3
    w = np.logspace(np.log10(wc / 1e3), np.log10(w_hi), n)
    resp = loop(np.exp(1j * w * dt)) if dt else loop(1j * w)
    return w, np.asarray(resp).reshape(-1)


def bode(margins, title: str = ""):
    """Bode plot of the loop gain with crossover and phase margin marked; the frequency axis is
    in rad/s, as the poles and crossovers in the report."""
    w, L = _loop_response(margins)
    fig, (a1, a2) = plt.subplots(2, 1, figsize=(8, 6), sharex=True)
    f = w  # rad/s, the unit the report quotes the plant's poles and the crossover in
    a1.semilogx(f, 20 * np.log10(np.abs(L)), color="#1f4e9c")
    a1.axhline(0, color="k", lw=0.8)
    a1.set_ylabel("loop gain |L| (dB)")
    a1.grid(True, which="both", alpha=0.3)
    ph = np.degrees(np.unwrap(np.angle(L)))
    a2.semilogx(f, ph, color="#8e24aa")
    a2.axhline(-180, color="k", lw=0.8)
    a2.set_ylabel("phase (deg)")
    a2.set_xlabel("angular frequency omega (rad/s), the unit of the poles quoted in the report")
    a2.grid(True, which="both", alpha=0.3)
    for wc in margins.gain_crossovers_rad_per_s:
        for a in (a1, a2):
            a.axvline(wc, color="#2e9e5b", ls="--", lw=1)
    lo, hi = margins.gain_interval
    a1.set_title(title + f"\nphase margin {margins.phase_margin_deg:.3g} deg; stable for loop gain x "
                 f"{lo:.3g} .. {hi:.3g} (open loop unstable: gain interval)", fontsize=9)
    fig.tight_layout()
    return fig


def nyquist(margins, title: str = ""):
    """Nyquist plot of the loop gain (positive and negative frequencies) with the -1 point."""
    w, L = _loop_response(margins, 4000)
    fig, ax = plt.subplots(figsize=(6.4, 6))
    ax.plot(L.real, L.imag, color="#1f4e9c", lw=1.4, label="L(jw), w > 0")
    ax.plot(L.real, -L.imag, color="#1f4e9c", lw=1.0, ls="--", label="w < 0")
    ax.plot([-1], [0], "r+", ms=14, mew=2, label="-1")
    t = np.linspace(0, 2 * np.pi, 200)
    ax.plot(np.cos(t), np.sin(t), color="#999999", lw=0.8)
    r = 3.0
    ax.set_xlim(-r, r)
    ax.set_ylim(-r, r)
    ax.set_aspect("equal")
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8, loc="lower right")
    ax.set_title(title + f"\nencirclements of -1 (counter-clockwise): {margins.encirclements_ccw}; "
                 f"unstable open-loop poles: {margins.open_loop_unstable_poles}; Ms {margins.peak_sensitivity:.3g}",
                 fontsize=9)
    ax.set_xlabel("Re L")
    ax.set_ylabel("Im L")
    fig.tight_layout()
    return fig


def time_responses(sims: dict, title: str = ""):
    """Position and current versus time for each named simulation."""
    fig, (a1, a2) = plt.subplots(2, 1, figsize=(8, 6.2), sharex=True)
    for name, r in sims.items():
        lab = name
        if r.events:
            lab += f" ({r.events[0].kind} at {r.events[0].time_s * 1e3:.3g} ms)"
        a1.plot(r.time_s * 1e3, r.s_m * 1e3, lw=1.3, label=lab)
        a2.plot(r.time_s * 1e3, r.current_A, lw=1.1, label=name)
    a1.set_ylabel("position s from equilibrium (mm)")
    a2.set_ylabel("coil current (A)")
    a2.set_xlabel("time (ms)")
    for a in (a1, a2):
        a.grid(True, alpha=0.3)
        a.legend(fontsize=7.5)
    a1.set_title(title, fontsize=10)
    fig.tight_layout()
    return fig


def capture_map(cap, title: str = ""):
    """Start positions and velocities from which the loop brings the floater to rest, drawn on
    the result's own grids (one source for the picture and capture.csv)."""
    from matplotlib.colors import ListedColormap

    s0, v0 = cap.s0_grid_m, cap.v0_grid_m_per_s
    fig, ax = plt.subplots(figsize=(7.5, 4.8))
    ax.pcolormesh(np.asarray(s0) * 1e3, np.asarray(v0) * 1e3, np.asarray(cap.captured, float).T,
                  cmap=ListedColormap(["#f3a6a0", "#9fd8a4"]), vmin=0, vmax=1, shading="nearest")
    lo, hi = cap.band_m
    ax.axvline(lo * 1e3, color="k", ls="--", lw=1)
    ax.axvline(hi * 1e3, color="k", ls="--", lw=1)
    ax.set_xlabel("start position s0 from equilibrium (mm)")
    ax.set_ylabel("start velocity (mm/s)")
    ax.set_title(title + f"\ngreen: brought to rest; red: lost. At rest start: {lo * 1e3:.3g} .. {hi * 1e3:.3g} mm",
                 fontsize=9)
    fig.tight_layout()
    return fig


# ---------------------------------------------------------------------------------------------
# sweeps


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
    return objectives_vs_categories(parameters, objectives, feasible, None, front_mask, title)


def offset_tilt_curves(lateral_map, tilt_map, gap_m: float, title: str = ""):
    """1-D cuts of the maps at one gap: sideways force versus offset, tilt torque versus tilt."""
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(11, 4))
    for ax, mp in ((a1, lateral_map), (a2, tilt_map)):
        i = int(np.argmin(np.abs(mp.gaps_m - gap_m)))
        ok = ~mp.contact[i]
        if mp.kind == "lateral":
            x, y = mp.coordinate * 1e3, mp.force_N[i, :, 0] * 1e3
            ax.set_xlabel("sideways offset x (mm)")
            ax.set_ylabel("sideways force F_x (mN)")
        else:
            x, y = np.degrees(mp.coordinate), mp.torque_Nm[i, :, 1] * 1e3
            ax.set_xlabel("tilt about y (deg)")
            ax.set_ylabel("tilt torque T_y about the centre of mass (mN m)")
        ax.plot(x[ok], y[ok], "o-", ms=3, color="#1f4e9c")
        ax.axhline(0, color="k", lw=0.8)
        ax.axvline(0, color="k", lw=0.8)
        ax.grid(True, alpha=0.3)
        ax.set_title(f"at gap {mp.gaps_m[i] * 1e3:.3g} mm: a falling line restores", fontsize=9)
    fig.suptitle(title or "sideways force and tilt torque", fontsize=11)
    fig.tight_layout()
    return fig


def objectives_vs_categories(parameters: dict, objectives: dict, feasible, categories: dict | None = None,
                             front_mask=None, title: str = ""):
    """Like :func:`objectives_vs_parameters`, with text-valued parameters (grades, wire gauges,
    directions) on categorical axes.

    A text parameter gets one tick per category, in the order of ``categories`` (the sweep
    file's order; default first seen), and its designs are spread a little sideways inside the
    category (a strip plot) so that coincident points stay visible. Numeric parameters are
    plotted against their values as before.

    Parameters
    ----------
    parameters : dict of str to sequence, each of length n
        Parameter column -> values (SI numbers, or text).
    objectives : dict of str to ndarray, shape (n,)
    feasible : ndarray of bool, shape (n,)
    categories : dict of str to sequence of str, optional
        Parameter column -> its categories in display order.
    front_mask : ndarray of bool, shape (n,), optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    feasible = np.asarray(feasible, bool)
    categories = categories or {}
    pn, on = list(parameters), list(objectives)
    fig, axes = plt.subplots(len(on), len(pn), figsize=(3.6 * len(pn) + 0.8, 2.8 * len(on) + 0.8), squeeze=False)
    fm = np.asarray(front_mask, bool) if front_mask is not None else np.zeros(len(feasible), bool)
    for j, p in enumerate(pn):
        raw = list(parameters[p])
        labels = None
        if p in categories or any(isinstance(v, str) for v in raw):
            labels = [str(c) for c in categories.get(p, ())]
            for v in raw:
                if str(v) not in labels:
                    labels.append(str(v))
            pos = np.array([labels.index(str(v)) for v in raw], float)
            # deterministic spread inside a category: -0.25 .. 0.25 by the order within it
            seen: dict[str, int] = {}
            counts = {lab: sum(1 for v in raw if str(v) == lab) for lab in labels}
            x = pos.copy()
            for k, v in enumerate(raw):
                c = seen.get(str(v), 0)
                seen[str(v)] = c + 1
                n_c = counts[str(v)]
                x[k] += 0.0 if n_c == 1 else -0.25 + 0.5 * c / (n_c - 1)
        else:
            x = np.array(raw, float)
        for i, o in enumerate(on):
            ax = axes[i, j]
            y = np.asarray(objectives[o], float)
            ax.scatter(x[~feasible], y[~feasible], s=9, marker="x", color="#bbbbbb", label="rejected")
            ax.scatter(x[feasible], y[feasible], s=10, color="#5b7fbf", label="feasible")
            if np.any(fm):
                ax.scatter(x[fm], y[fm], s=30, facecolors="none", edgecolors="#c04a4a", label="Pareto front")
            if labels is not None:
                ax.set_xticks(range(len(labels)))
                ax.set_xticklabels(labels, rotation=30, fontsize=7)
                ax.set_xlim(-0.6, len(labels) - 0.4)
            if i == len(on) - 1:
                ax.set_xlabel(p + (" (category)" if labels is not None else ""), fontsize=8)
            if j == 0:
                ax.set_ylabel(o, fontsize=8)
            ax.grid(True, alpha=0.3)
            ax.tick_params(labelsize=7)
    axes[0, 0].legend(fontsize=7, loc="best")
    fig.suptitle(title or "objectives versus parameters", fontsize=11)
    fig.tight_layout()
    return fig
