"""Margins of a possibly open-loop-unstable loop, and the pure proportional-feedback study.

Margins, crossovers, the Nyquist count and closed-loop poles come from python-control
(``control.stability_margins``, ``control.nyquist_response``, ``control.feedback``); this module
adds the gain interval an open-loop-unstable loop needs.

Nothing here prints, plots or touches files.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import control
import numpy as np

from fields.control.checks import check_non_negative
from fields.control.design import ControllerDesign
from fields.control.plant import Plant, loop_plant_matrices
from fields.physics.checks import input_error

#: relative distance below which two negative-real-axis crossings count as one
CROSSING_MERGE_RTOL = 1e-7
#: negative-real-axis values below this share of the largest one are round-off of a zero
CROSSING_ROUNDOFF = 1e-12
#: poles within this (relative) distance of the stability boundary count as on it
BOUNDARY_TOL = 1e-9


def loop_transfer(plant: Plant, controller: ControllerDesign, *, sampled: bool | None = None,
                  loop_delay_s: float | None = None, pade_order: int = 6) -> control.StateSpace:
    """The loop transfer ``L = C P`` (python-control object) that the margins are taken of.

    Parameters
    ----------
    plant : Plant
    controller : ControllerDesign
    sampled : bool or None
        ``None``: sampled if the controller has a sample time. Sampled loops are exact at the
        sampling instants: ``P`` is discretised with a zero-order hold, the delay is rounded to
        whole samples (``z^-d``) and the current-drive sensor crosstalk ``G_i`` sees the
        previous sample's current (``G_i z^-1``), as in the nonlinear simulation.
    loop_delay_s : float or None
        ``None``: the controller's budgeted delay. Continuous loops use a Pade approximant of
        order ``pade_order``.

    Returns
    -------
    control.StateSpace
        Continuous (``dt = 0``) or discrete (``dt = T``).
    """
    w = "loop_transfer"
    if plant.drive != controller.drive:
        raise input_error(w, "controller.drive", f"the plant's drive {plant.drive!r}", controller.drive)
    if sampled is None:
        sampled = controller.sample_time_s is not None
    tau = controller.loop_delay_s if loop_delay_s is None else check_non_negative(w, "loop_delay_s", loop_delay_s)
    A, B, C, D = loop_plant_matrices(plant, controller.current_loop_gain_V_per_A)
    if sampled:
        T = controller.sample_time_s
        if T is None:
            raise input_error(w, "controller.sample_time_s", "set for a sampled loop", None)
        Pd = control.c2d(control.ss(A, B, C, np.zeros((1, 1))), T, method="zoh")
        if D[0, 0] != 0:
            Pd = Pd + control.ss(control.tf([float(D[0, 0])], [1.0, 0.0], T))
        L = control.ss(controller.discrete_tf) * Pd
        d = int(round(tau / T))
        if d > 0:
            L = L * control.ss(control.tf([1.0], [1.0] + [0.0] * d, T))
    else:
        L = control.ss(controller.tf) * control.ss(A, B, C, D)
        if tau > 0:
            num, den = control.pade(tau, pade_order)
            L = L * control.ss(control.tf(num, den))
    return L


@dataclass(frozen=True, eq=False)
class Margins:
    """Stability margins of a loop that may be open-loop unstable.

    Attributes
    ----------
    sample_time_s : float or None
        ``None`` for a continuous loop.
    delay_samples : int
        Whole-sample delay of a sampled loop (0 for a continuous one).
    loop_delay_s : float
        The delay the loop was built with (a Pade approximant if continuous).
    gain_interval : tuple of float
        ``(k_low, k_high)``: the closed loop with ``k L`` is stable for ``k_low < k < k_high``
        (``k_high`` may be inf). ``(nan, nan)`` if the nominal loop is unstable.
    lower_gain_margin_dB, upper_gain_margin_dB : float
        ``20 log10`` of the two ends (the lower one is negative).
    phase_margin_deg : float
        Smallest phase margin over the gain crossovers (inf if none).
    gain_crossovers_rad_per_s, phase_margins_deg : ndarray, shape (w,)
    phase_crossovers_rad_per_s : ndarray
        Positive frequencies where ``L`` crosses the negative real axis.
    real_axis_crossings : ndarray
        Distinct values of ``L`` on the negative real axis over ``0 <= w <= inf`` (Nyquist
        frequency for a sampled loop), sorted.
    encirclements_ccw : int
        Counter-clockwise encirclements of -1 by the Nyquist curve of ``L``.
    open_loop_unstable_poles : int
        Poles of ``L`` in the right half plane (outside the unit circle); the loop is stable iff
        ``encirclements_ccw`` equals it.
    peak_sensitivity : float
        ``Ms = max |1/(1 + L)|``; ``1/Ms`` is the distance from -1 to the Nyquist curve.
    peak_sensitivity_rad_per_s : float
    closed_loop_poles : ndarray of complex
        In s (continuous) or z (discrete).
    closed_loop_poles_rad_per_s : ndarray of complex
        ``ln(z)/T`` for discrete loops (same as above for continuous).
    stable : bool
        All closed-loop poles strictly stable.
    loop : control.StateSpace
    """

    sample_time_s: float | None
    delay_samples: int
    loop_delay_s: float
    gain_interval: tuple[float, float]
    lower_gain_margin_dB: float
    upper_gain_margin_dB: float
    phase_margin_deg: float
    gain_crossovers_rad_per_s: np.ndarray
    phase_margins_deg: np.ndarray
    phase_crossovers_rad_per_s: np.ndarray
    real_axis_crossings: np.ndarray
    encirclements_ccw: int
    open_loop_unstable_poles: int
    peak_sensitivity: float
    peak_sensitivity_rad_per_s: float
    closed_loop_poles: np.ndarray
    closed_loop_poles_rad_per_s: np.ndarray
    stable: bool
    loop: control.StateSpace = field(repr=False)


# --------------------------------------------------------------------------------------------
# margin steps
# --------------------------------------------------------------------------------------------


def _is_stable(poles: np.ndarray, dt: float | None) -> bool:
    return bool(np.all(np.abs(poles) < 1)) if dt is not None else bool(np.all(poles.real < 0))


def _closed_loop_poles(L: control.StateSpace, k: float = 1.0) -> np.ndarray:
    """Poles of ``k L / (1 + k L)`` (``control.feedback``)."""
    return np.asarray(control.feedback(k * L, 1).poles(), dtype=complex)


def _open_loop_unstable(L: control.StateSpace, dt: float | None, scale: float) -> int:
    poles = np.asarray(L.poles(), dtype=complex)
    if dt is None:
        tol = BOUNDARY_TOL * max(scale, float(np.max(np.abs(poles))) if poles.size else scale)
        return int(np.sum(poles.real > tol))
    return int(np.sum(np.abs(poles) > 1 + BOUNDARY_TOL))


def _encirclements_ccw(L: control.StateSpace, dt: float | None, n_unstable: int) -> int:
    """Counter-clockwise encirclements of -1 by ``control.nyquist_response`` (``-count``).

    python-control indents its contour to the side given by the exact sign of each pole on the
    stability boundary, so an integrator computed at ``|z| = 1 + 1e-13`` is counted as
    unstable and adds one encirclement. The count is shifted back by those boundary poles, to
    the convention of ``n_unstable`` (poles on the boundary count as stable); the Nyquist
    criterion changes by exactly one per pole moved across the contour.
    """
    count = control.nyquist_response(L, warn_encirclements=False, warn_nyquist=False).count
    poles = np.asarray(L.poles(), dtype=complex)
    strict = int(np.sum(np.abs(poles) > 1)) if dt is not None else int(np.sum(poles.real > 0))
    return -int(count) - (strict - n_unstable)


def _negative_real_crossings(L: control.StateSpace, dt: float | None, gm: np.ndarray) -> np.ndarray:
    """Distinct negative-real-axis values of ``L``: phase crossovers (``-1/gm``) and the ends
    of the frequency axis, where ``L`` is real (``w = 0`` and ``w = inf``, or ``z = +-1``)."""
    xs = [-1.0 / g for g in np.asarray(gm, float) if g > 0 and math.isfinite(g)]
    poles = np.asarray(L.poles(), dtype=complex)
    ends = [0.0] if dt is None else [1.0, -1.0]
    for e in ends:
        if not np.any(np.abs(poles - e) < BOUNDARY_TOL):
            xs.append(float(np.real(np.asarray(L(e)).reshape(-1)[0])))
    if dt is None:
        xs.append(float(np.asarray(L.D, float).reshape(-1)[0]) if np.size(L.D) else 0.0)
    xs = np.array([x for x in xs if math.isfinite(x)])
    big = float(np.max(np.abs(xs))) if xs.size else 0.0
    xs = np.sort(xs[xs < -CROSSING_ROUNDOFF * big])
    distinct: list[float] = []
    for x in xs:
        if not distinct or abs(x - distinct[-1]) > CROSSING_MERGE_RTOL * abs(x):
            distinct.append(float(x))
    return np.array(distinct)


def _gain_interval(L: control.StateSpace, dt: float | None, crossings: np.ndarray) -> tuple[float, float]:
    """Interval of ``k`` around 1 where ``feedback(k L)`` is stable, from closed-loop poles.

    The closed-loop poles can cross the stability boundary only at gains ``k = -1/x`` with
    ``x`` a negative-real-axis value of ``L``; between two such gains stability is tested once.
    """
    if not _is_stable(_closed_loop_poles(L), dt):
        return math.nan, math.nan
    ks = np.sort(-1.0 / crossings) if crossings.size else np.zeros(0)
    edges = np.concatenate([[0.0], ks, [math.inf]])
    if ks.size:
        tests = [ks[0] / 2] + [math.sqrt(a * b) for a, b in zip(ks[:-1], ks[1:])] + [2 * ks[-1]]
    else:
        tests = [1.0]
    stable = [_is_stable(_closed_loop_poles(L, k), dt) for k in tests]
    j = int(np.searchsorted(edges, 1.0) - 1)
    if not stable[j]:
        # the nominal gain sits in a band the test point calls unstable: 1 is next to an edge
        return math.nan, math.nan
    lo = hi = j
    while lo > 0 and stable[lo - 1]:
        lo -= 1
    while hi < len(stable) - 1 and stable[hi + 1]:
        hi += 1
    return float(edges[lo]), float(edges[hi + 1])


def _gain_margin_dB(k: float, low: bool) -> float:
    if k > 0 and math.isfinite(k):
        return 20 * math.log10(k)
    if low and k == 0:
        return -math.inf
    return math.nan


def _sorted_poles(clp: np.ndarray, dt: float | None) -> tuple[np.ndarray, np.ndarray]:
    """Closed-loop poles (z or s) and their s-plane equivalents, each sorted slowest first."""
    if dt is None:
        cls = clp
    else:
        with np.errstate(divide="ignore"):
            cls = np.log(clp.astype(complex)) / dt
    clp = clp[np.argsort(-np.abs(clp) if dt is not None else -clp.real, kind="stable")]
    cls = cls[np.argsort(-cls.real, kind="stable")]
    return clp, cls


def loop_margins(plant: Plant, controller: ControllerDesign, *, sampled: bool | None = None,
                 loop_delay_s: float | None = None) -> Margins:
    """Gain interval, phase margin, Nyquist count and peak sensitivity of ``L = C P``.

    Parameters
    ----------
    plant : Plant
    controller : ControllerDesign
    sampled, loop_delay_s
        See :func:`loop_transfer`.

    Returns
    -------
    Margins

    Notes
    -----
    Nyquist criterion (Nyquist 1932; Franklin, Powell & Emami-Naeini, Feedback Control of
    Dynamic Systems, sec. 6.3): with ``P_ol`` open-loop poles inside the contour, the closed loop
    is stable iff the Nyquist curve encircles -1 counter-clockwise ``P_ol`` times
    (``control.nyquist_response`` counts clockwise: ``N = -count``). Crossovers, phase margins and
    the stability margin are ``control.stability_margins``. An open-loop-unstable loop has a
    *lower* gain margin (below 1) as well as an upper one: the closed-loop poles of ``k L`` can
    reach the stability boundary only where ``k L = -1`` on it, i.e. at ``k = -1/x`` for the
    negative-real-axis values ``x`` of ``L``; the closed-loop poles (``control.feedback``) at one
    gain between each two of them give the stable interval around ``k = 1``.
    """
    L = loop_transfer(plant, controller, sampled=sampled, loop_delay_s=loop_delay_s)
    dt = L.dt if L.isdtime(strict=True) else None
    tau = controller.loop_delay_s if loop_delay_s is None else float(loop_delay_s)
    with warnings.catch_warnings():
        # python-control switches discrete loops to its interpolated frequency-response method
        # and says so; the tests check the result against closed-loop poles and a dense grid
        warnings.filterwarnings("ignore", message="stability_margins: Falling back to 'frd'")
        gm, pm, sm, wpc, wgc, wms = (np.atleast_1d(np.asarray(v, float)) for v in
                                     control.stability_margins(L, returnall=True))
    crossings = _negative_real_crossings(L, dt, gm)
    k_low, k_high = _gain_interval(L, dt, crossings)
    n_unstable = _open_loop_unstable(L, dt, controller.crossover_rad_per_s)
    order = np.argsort(wgc)
    i_ms = int(np.argmin(sm)) if sm.size else -1
    clp, cls = _sorted_poles(_closed_loop_poles(L), dt)
    return Margins(
        sample_time_s=dt, delay_samples=int(round(tau / dt)) if dt is not None else 0, loop_delay_s=tau,
        gain_interval=(k_low, k_high),
        lower_gain_margin_dB=_gain_margin_dB(k_low, True), upper_gain_margin_dB=_gain_margin_dB(k_high, False),
        phase_margin_deg=float(np.min(pm)) if pm.size else math.inf,
        gain_crossovers_rad_per_s=wgc[order], phase_margins_deg=pm[order],
        phase_crossovers_rad_per_s=np.sort(wpc[wpc > 0]), real_axis_crossings=crossings,
        encirclements_ccw=_encirclements_ccw(L, dt, n_unstable), open_loop_unstable_poles=n_unstable,
        peak_sensitivity=1.0 / float(sm[i_ms]) if i_ms >= 0 else 1.0,
        peak_sensitivity_rad_per_s=float(wms[i_ms]) if i_ms >= 0 else math.nan,
        closed_loop_poles=clp, closed_loop_poles_rad_per_s=cls, stable=_is_stable(clp, dt), loop=L,
    )


# --------------------------------------------------------------------------------------------
# Pure proportional feedback
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ProportionalStudy:
    """Closed loop under pure proportional feedback (see :func:`proportional_only`).

    Attributes
    ----------
    drive : str
    critical_gain : float
        Gain that cancels the negative stiffness (A per signal unit for current drive, V per
        signal unit for voltage drive).
    gains : ndarray, shape (b,)
    closed_loop_poles_rad_per_s : ndarray of complex, shape (b, x)
    max_real_part_rad_per_s : ndarray, shape (b,)
        Growth rate of the fastest mode (0 = undamped, > 0 = growing).
    min_damping_ratio : ndarray, shape (b,)
        Damping ratio of the least-damped complex pair (nan if none).
    stabilisable : bool
        Some gain tried gives all poles strictly in the left half plane.
    back_emf_damping_per_s2 : float
        ``b = k_i^2/(m L)`` (voltage drive); a stable window needs it above ``-k_s/m``.
    unstable_stiffness_per_s2 : float
        ``p^2 = -k_s/m``.
    stable_gain_window : tuple of float
        Voltage drive: the Routh-Hurwitz window ``(low, high)`` of gains (V per signal unit);
        ``(nan, nan)`` if there is none or for current drive.
    undamped_frequency_rad_per_s : float
        Current drive: oscillation frequency at the largest gain tried (nan for voltage drive).
    signal_unit : str
    """

    drive: str
    critical_gain: float
    gains: np.ndarray
    closed_loop_poles_rad_per_s: np.ndarray
    max_real_part_rad_per_s: np.ndarray
    min_damping_ratio: np.ndarray
    stabilisable: bool
    back_emf_damping_per_s2: float
    unstable_stiffness_per_s2: float
    stable_gain_window: tuple[float, float]
    undamped_frequency_rad_per_s: float
    signal_unit: str


def _proportional_poles(plant: Plant, gains: np.ndarray, sgn: float):
    """Closed-loop poles, largest real part and smallest damping ratio per gain."""
    A, B, C, D = plant.A, plant.B, plant.C, plant.D
    rows, maxre, zeta = [], [], []
    for K in gains:
        Ks = sgn * K
        ev = np.linalg.eigvals(A - B @ C * Ks / (1.0 + Ks * D[0, 0]))
        ev = ev[np.argsort(-ev.real, kind="stable")]
        rows.append(ev)
        maxre.append(float(np.max(ev.real)))
        cpx = ev[np.abs(ev.imag) > 1e-9 * max(1.0, float(np.max(np.abs(ev))))]
        zeta.append(float(np.min(-cpx.real / np.abs(cpx))) if cpx.size else math.nan)
    return np.array(rows), np.array(maxre), np.array(zeta)


def proportional_only(plant: Plant, gain_multiples=(0.5, 1.0, 1.5, 2.0, 4.0, 10.0)) -> ProportionalStudy:
    """Closed loop with pure proportional feedback ``u = -K y`` at several gains.

    Parameters
    ----------
    plant : Plant
    gain_multiples : sequence of float, shape (b,)
        Gains as multiples of the critical gain ``K_crit`` that cancels the negative stiffness
        (``K_crit = -k_s/(k_i G_s)`` A per unit; times ``R`` for voltage drive).

    Returns
    -------
    ProportionalStudy

    Notes
    -----
    Current drive: ``s^2 + (k_s + K k_i G_s)/m = 0``; above ``K_crit`` the poles sit on the
    imaginary axis (an undamped oscillation), below it one is real and positive: no gain damps.
    Voltage drive (Routh-Hurwitz on ``s^3 + (R/L) s^2 + (b - p^2) s + (K' - (R/L) p^2)``,
    ``b = k_i^2/(m L)``, ``p^2 = -k_s/m``, ``K' = K G_s k_i/(m L)``): stable only if ``b > p^2``
    and ``(R/L) p^2 < K' < (R/L) b``; with ``b < p^2`` every gain gives a growing mode (the
    coil's lag turns the undamped oscillation into a growing one).
    """
    prm = plant.params
    gs, ki, m = prm.sensor_gain_per_m, prm.force_per_ampere_N_per_A, prm.mass_kg
    ks = prm.stiffness_N_per_m
    kcrit = abs(ks / (ki * gs)) if ks != 0 else abs(prm.mass_kg * 1.0 / (ki * gs))
    sgn = float(np.sign(gs * ki))
    if plant.drive == "voltage":
        kcrit *= prm.resistance_ohm
    gains = np.asarray(gain_multiples, dtype=float) * kcrit
    rows, maxre, zeta = _proportional_poles(plant, gains, sgn)
    b_emf = ki**2 / (m * prm.inductance_H)
    p2 = -ks / m
    window = (math.nan, math.nan)
    if plant.drive == "current":
        stabilisable = False
        w_osc = math.sqrt(max(gains.max() * abs(ki * gs) / m - p2, 0.0))
    else:
        a = prm.resistance_ohm / prm.inductance_H
        stabilisable = bool(np.any(maxre < -1e-9 * max(1.0, plant.mechanical_pole_rad_per_s)))
        w_osc = math.nan
        if b_emf > p2:
            window = (a * p2 * m * prm.inductance_H / abs(gs * ki), a * b_emf * m * prm.inductance_H / abs(gs * ki))
    return ProportionalStudy(
        drive=plant.drive, critical_gain=kcrit, gains=gains, closed_loop_poles_rad_per_s=rows,
        max_real_part_rad_per_s=maxre, min_damping_ratio=zeta, stabilisable=stabilisable,
        back_emf_damping_per_s2=b_emf, unstable_stiffness_per_s2=p2, stable_gain_window=window,
        undamped_frequency_rad_per_s=w_osc, signal_unit=prm.sensor_unit,
    )
