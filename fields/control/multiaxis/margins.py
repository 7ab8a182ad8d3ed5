"""Stability margins of the multi-axis loop, broken at the plant inputs (the coil drives).

Loop at the plant inputs: ``L(z) = -Kr(z) P(z)`` (negative-feedback convention), ``P`` the
ZOH-discretised plant with the cross-talk compensated, ``Kr`` the regulator; the input
sensitivity ``S = (I + L)^-1``.

Loop-at-a-time (one channel broken, the others closed): the channel's loop is
``l_j = (1 - S_jj) / S_jj``, since ``T_jj = 1 - S_jj`` is its complementary sensitivity.

- Gain interval: the range of a gain ``kappa`` on channel j alone for which the closed-loop poles
  stay inside the unit circle, found from the poles themselves (a scan over ``kappa`` in
  1e-4..1e4 and bisection on the edges), not from a Bode plot: the loops are open-loop
  unstable, so a crossover reading would mislead.
- Phase margin: the smallest ``180 deg - |arg l_j|`` where ``|l_j| = 1`` (valid whatever the
  open-loop poles: a phase change moves the unit-gain points along the unit circle and the
  encirclement count changes only when one reaches -1).

Disk margins (Seiler, Packard & Gahinet, "An Introduction to Disk Margins", IEEE Control
Systems Magazine 40(5), 2020): for skew ``sigma`` the disk margin is
``alpha = 1 / sup_w |S + (sigma - 1)/2|``; ``sigma = 0`` is the balanced (symmetric) disk,
``1/||(S - T)/2||``, and ``sigma = 1`` the sensitivity disk ``1/||S||``. A disk of size alpha and
skew sigma contains the gains ``[(2 - alpha (1 - sigma)) / (2 + alpha (1 + sigma)),
(2 + alpha (1 - sigma)) / (2 - alpha (1 + sigma))]`` and the phases ``+-theta`` with
``cos theta = (1 + g_min g_max) / (g_min + g_max)``. Loop-at-a-time uses ``S_jj``; the multiloop
margin (independent, simultaneous perturbations in every channel) uses the structured singular
value of ``S + (sigma - 1)/2 I`` with a diagonal complex perturbation, bounded above by
``inf_D sigma_max(D X D^-1)`` over positive diagonal ``D`` (Doyle, IEE Proc. D 129(6), 1982);
the reported multiloop alpha is therefore a lower bound (conservative). All suprema are taken
on a frequency grid (log-spaced up to the Nyquist frequency).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import minimize

from fields.control.multiaxis.design import (
    Regulator,
    compensated_output,
    left_open_eigenvalues,
    spectral_radius_outside,
    zoh,
)
from fields.control.multiaxis.plant import MultiaxisPlant, jsonable
from fields.control.multiaxis.structure import StructureReport

#: frequency grid points for the margins
GRID_POINTS = 1200
#: gain scan for the loop-at-a-time gain interval
GAIN_SCAN = np.logspace(-4, 4, 161)


@dataclass(frozen=True)
class DiskMargin:
    """A disk margin: size ``alpha``, skew, the gain interval and phase it guarantees, and the
    grid frequency (rad/s) where it is smallest."""

    alpha: float
    skew: float
    gain_interval: tuple[float, float]
    phase_deg: float
    frequency_rad_per_s: float


@dataclass(frozen=True)
class ChannelMargins:
    """Loop-at-a-time margins of one input channel (the others closed)."""

    channel: str
    gain_interval: tuple[float, float]
    gain_margin_note: str
    phase_margin_deg: float
    phase_crossover_rad_per_s: float
    disk_balanced: DiskMargin
    disk_sensitivity: DiskMargin


@dataclass(frozen=True)
class MimoMargins:
    """Margins of the loop broken at the plant inputs (module docstring)."""

    channels: tuple[ChannelMargins, ...]
    multiloop_balanced: DiskMargin
    multiloop_sensitivity: DiskMargin
    frequencies_rad_per_s: np.ndarray
    peak_sensitivity: float
    notes: tuple[str, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict:
        def dm(d):
            return {k: getattr(d, k) for k in d.__dataclass_fields__}

        return jsonable({
            "channels": [{k: (dm(getattr(c, k)) if isinstance(getattr(c, k), DiskMargin) else getattr(c, k))
                          for k in c.__dataclass_fields__} for c in self.channels],
            "multiloop_balanced": dm(self.multiloop_balanced),
            "multiloop_sensitivity": dm(self.multiloop_sensitivity),
            "peak_sensitivity": self.peak_sensitivity, "notes": self.notes,
            "frequency_grid_rad_per_s": [float(self.frequencies_rad_per_s[0]), float(self.frequencies_rad_per_s[-1]),
                                         int(self.frequencies_rad_per_s.size)]})


# ------------------------------------------------------------------------- disk arithmetic


def disk_gain_phase(alpha: float, skew: float = 0.0) -> tuple[tuple[float, float], float]:
    """Gain interval and phase (deg) inside the disk of size ``alpha`` and skew ``sigma``.

    Examples
    --------
    >>> g, ph = disk_gain_phase(0.5)
    >>> round(g[1], 4), round(ph, 2)
    (1.6667, 28.07)
    """
    a, s = float(alpha), float(skew)
    lo = (2 - a * (1 - s)) / (2 + a * (1 + s))
    den = 2 - a * (1 + s)
    hi = (2 + a * (1 - s)) / den if den > 0 else math.inf
    lo = max(lo, 0.0)
    if math.isinf(hi):
        c = lo
    else:
        c = (1 + lo * hi) / (lo + hi) if lo + hi > 0 else -1.0
    return (lo, hi), math.degrees(math.acos(min(1.0, max(-1.0, c))))


def _mu_upper(X: np.ndarray) -> float:
    """``inf_D sigma_max(D X D^-1)`` over positive diagonal D (upper bound of mu, complex diagonal)."""
    m = X.shape[0]
    s0 = float(np.linalg.norm(X, 2))
    if m == 1:
        return float(abs(X[0, 0]))
    # Osborne-like balancing of |X| as a start, then a local polish of log d
    A = np.abs(X) + 1e-300
    d = np.ones(m)
    for _ in range(20):
        for i in range(m):
            r = np.sum(A[i] / d) * d[i] - A[i, i]
            c = np.sum(A[:, i] * d) / d[i] - A[i, i]
            if r > 0 and c > 0:
                d[i] *= math.sqrt(c / r)

    def f(x):
        dd = np.exp(np.concatenate([[0.0], x]))
        return float(np.linalg.norm((dd[:, None] * X) / dd[None, :], 2))

    x0 = np.log(d[1:] / d[0])
    res = minimize(f, x0, method="Nelder-Mead", options={"xatol": 1e-6, "fatol": 1e-10, "maxiter": 400})
    return min(float(res.fun), f(x0), s0)


def disk_margins_from_loop(L: np.ndarray, omegas, skew: float = 0.0) -> tuple[list[DiskMargin], DiskMargin]:
    """Loop-at-a-time and multiloop disk margins from loop samples.

    Parameters
    ----------
    L : ndarray, shape (w, m, m)
        Loop transfer matrix ``L(jw)`` (or ``L(e^{jwT})``) on a frequency grid, negative feedback.
    omegas : array_like, shape (w,)
    skew : float

    Returns
    -------
    per_loop : list of DiskMargin (m)
    multiloop : DiskMargin
        From the D-scaled upper bound of mu: a lower bound of the true multiloop margin.
    """
    L = np.asarray(L, complex)
    w = np.asarray(omegas, float)
    m = L.shape[1]
    I = np.eye(m)
    S = np.linalg.inv(I[None] + L)
    shift = (skew - 1) / 2
    per = []
    for j in range(m):
        v = np.abs(S[:, j, j] + shift)
        i = int(np.argmax(v))
        a = 1.0 / v[i] if v[i] > 0 else math.inf
        g, ph = disk_gain_phase(a, skew)
        per.append(DiskMargin(a, skew, g, ph, float(w[i])))
    X = S + shift * I[None]
    sig = np.linalg.norm(X, ord=2, axis=(1, 2))
    order = np.argsort(-sig)
    best, wbest = 0.0, float(w[order[0]])
    for i in order:
        if sig[i] <= best:
            break
        mu = _mu_upper(X[i])
        if mu > best:
            best, wbest = mu, float(w[i])
    a = 1.0 / best if best > 0 else math.inf
    g, ph = disk_gain_phase(a, skew)
    return per, DiskMargin(a, skew, g, ph, wbest)


# --------------------------------------------------------------------------- the loop


def _freq_response(A, B, C, z) -> np.ndarray:
    n = A.shape[0]
    out = np.empty((z.size, C.shape[0], B.shape[1]), complex)
    I = np.eye(n)
    for i, zi in enumerate(z):
        out[i] = C @ np.linalg.solve(zi * I - A, B) if n else np.zeros((C.shape[0], B.shape[1]))
    return out


def input_loop(plant: MultiaxisPlant, regulator: Regulator, omegas) -> np.ndarray:
    """``L(e^{jwT}) = -Kr P`` at the plant inputs, shape (w, k, k)."""
    T = regulator.dt
    C, _ = compensated_output(plant)
    Ad, Bd = zoh(plant.A, plant.B, T)
    z = np.exp(1j * np.asarray(omegas, float) * T)
    P = _freq_response(Ad, Bd, C, z)
    R = regulator.ss
    Kz = _freq_response(R.A, R.B, R.C, z)
    return -np.einsum("wij,wjk->wik", Kz, P)


def _gain_interval(plant, report, regulator, j) -> tuple[tuple[float, float], str]:
    T = regulator.dt
    C, _ = compensated_output(plant)
    Ad, Bd = zoh(plant.A, plant.B, T)
    R = regulator.ss
    oe = left_open_eigenvalues(plant, report, T)

    def stable(kappa):
        D = np.ones(plant.n_coils)
        D[j] = kappa
        top = np.hstack([Ad, Bd @ np.diag(D) @ R.C])
        bot = np.hstack([R.B @ C, R.A])
        return spectral_radius_outside(np.linalg.eigvals(np.vstack([top, bot])), oe) < 1 - 1e-9

    if not stable(1.0):
        return (math.nan, math.nan), "the nominal loop is unstable"
    ok = np.array([stable(k) for k in GAIN_SCAN])
    i1 = int(np.argmin(np.abs(GAIN_SCAN - 1.0)))
    lo_i, hi_i = i1, i1
    while lo_i > 0 and ok[lo_i - 1]:
        lo_i -= 1
    while hi_i < len(ok) - 1 and ok[hi_i + 1]:
        hi_i += 1

    def edge(a, b):  # a stable, b unstable
        la, lb = math.log(a), math.log(b)
        for _ in range(40):
            mid = 0.5 * (la + lb)
            if stable(math.exp(mid)):
                la = mid
            else:
                lb = mid
        return math.exp(la)

    lo = 0.0 if lo_i == 0 else edge(GAIN_SCAN[lo_i], GAIN_SCAN[lo_i - 1])
    hi = math.inf if hi_i == len(ok) - 1 else edge(GAIN_SCAN[hi_i], GAIN_SCAN[hi_i + 1])
    note = "from closed-loop poles (scan 1e-4..1e4, bisection)"
    if lo == 0.0:
        note += "; stable down to the smallest scanned gain"
    if math.isinf(hi):
        note += "; stable up to the largest scanned gain"
    return (lo, hi), note


def mimo_margins(plant: MultiaxisPlant, report: StructureReport, regulator: Regulator,
                 grid_points: int = GRID_POINTS) -> MimoMargins:
    """Loop-at-a-time gain intervals and phase margins, disk margins per loop and multiloop."""
    T = regulator.dt
    if regulator.kind == "none" or T <= 0:
        raise ValueError("mimo_margins: the regulator has no loop to break (passive design)")
    p_min = min((m.growth_rate_per_s for m in report.unstable), default=1.0)
    w = np.logspace(math.log10(1e-3 * p_min), math.log10(0.999 * math.pi / T), grid_points)
    L = input_loop(plant, regulator, w)
    k = plant.n_coils
    S = np.linalg.inv(np.eye(k)[None] + L)
    per0, mm0 = disk_margins_from_loop(L, w, 0.0)
    per1, mm1 = disk_margins_from_loop(L, w, 1.0)
    chans = []
    for j in range(k):
        sjj = S[:, j, j]
        with np.errstate(divide="ignore", invalid="ignore"):
            lj = (1 - sjj) / sjj
        mag = np.abs(lj)
        pm, wc = math.inf, math.nan
        cross = np.flatnonzero(np.diff(np.sign(mag - 1.0)) != 0)
        for c in cross:
            # linear interpolation in log frequency between the two grid points
            a, b = mag[c] - 1, mag[c + 1] - 1
            t = a / (a - b) if a != b else 0.0
            ph = np.angle(lj[c]) + t * (np.angle(lj[c + 1] * np.conj(lj[c])))
            m = 180.0 - abs(math.degrees(math.atan2(math.sin(ph), math.cos(ph))))
            if m < pm:
                pm, wc = m, float(w[c] * (w[c + 1] / w[c]) ** t)
        gi, note = _gain_interval(plant, report, regulator, j)
        chans.append(ChannelMargins(plant.input_names[j], gi, note, pm, wc, per0[j], per1[j]))
    notes = (("loop broken at the plant inputs, one channel at a time with the others closed; "
             "multiloop disk margins are lower bounds (D-scaled upper bound of mu)"),
             f"frequency grid: {grid_points} log-spaced points from {w[0]:.3g} to {w[-1]:.4g} rad/s (Nyquist)")
    return MimoMargins(tuple(chans), mm0, mm1, w, float(np.max(np.linalg.norm(S, ord=2, axis=(1, 2)))), notes)
