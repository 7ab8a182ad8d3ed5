"""Studies of the closed loop beyond the linear model: capture range and on/off control.

Nothing here prints, plots or touches files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.integrate import solve_ivp

from fields.control.checks import check_choice, check_positive
from fields.control.design import ControllerDesign
from fields.control.plant import DRIVES, ForceTable, PlantParameters, Sensor, linear_sensor
from fields.control.simulate import Outcome, Scenario, exit_outcome, run_batch, simulate, table_events
from fields.errors import SolverError
from fields.physics.checks import input_error

#: interior points per band edge and bisection round of the capture band
BAND_POINTS_PER_ROUND = 7
#: output spacing of the on/off runs (s)
RELAY_OUTPUT_STEP_S = 2e-4
#: most switching events one on/off run may take
MAX_SWITCHES = 200_000
#: the oscillation counts as growing if its amplitude in the last quarter exceeds this multiple
#: of the third quarter's
GROWTH_RATIO = 1.5


# --------------------------------------------------------------------------------------------
# Capture range
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class CaptureResult:
    """Which start points the loop brings to rest.

    Attributes
    ----------
    s0_grid_m : ndarray, shape (a,)
    v0_grid_m_per_s : ndarray, shape (b,)
        Always contains 0.
    captured : ndarray of bool, shape (a, b)
    fate : ndarray of str, shape (a, b)
        :class:`Outcome` values: captured, not settled, or how the floater left the table.
    band_m : tuple of float
        ``(min, max)`` start offset captured at zero velocity: the contiguous captured run
        around the equilibrium, edges refined by bisection.
    band_resolution_m : float
        Bracket width left at each edge.
    final_s_m, final_v_m_per_s : ndarray, shape (a, b)
    step_s : float
        RK4 step.
    tolerance_m, tolerance_m_per_s, t_end_s : float
    """

    s0_grid_m: np.ndarray
    v0_grid_m_per_s: np.ndarray
    captured: np.ndarray
    fate: np.ndarray
    band_m: tuple[float, float]
    band_resolution_m: float
    final_s_m: np.ndarray
    final_v_m_per_s: np.ndarray
    step_s: float
    tolerance_m: float
    tolerance_m_per_s: float
    t_end_s: float


def _capture_grids(s0_grid_m, v0_grid_m_per_s, table: ForceTable):
    s0g = np.sort(np.asarray(s0_grid_m, dtype=float).ravel())
    v0g = np.asarray(v0_grid_m_per_s, dtype=float).ravel().copy()
    # a symmetric linspace puts -2.8e-17 where 0 was meant: that is the zero-velocity row, not a
    # second one beside it (rounding of the grid, not a start the user asked for)
    if v0g.size:
        v0g[np.abs(v0g) <= 1e-12 * float(np.max(np.abs(v0g)))] = 0.0
    if not np.any(v0g == 0):
        v0g = np.concatenate([v0g, [0.0]])
    v0g = np.sort(v0g)
    lo, hi = table.range_m
    if s0g.size < 2 or s0g[0] <= lo or s0g[-1] >= hi:
        raise input_error("capture_range", "s0_grid_m", f"at least 2 offsets inside the table ({lo:g}, {hi:g}) m",
                          (float(s0g[0]), float(s0g[-1])) if s0g.size else ())
    return s0g, v0g


def _band_brackets(row: np.ndarray, s0g: np.ndarray):
    """(uncaptured, captured) brackets on each side of the captured run around s = 0; ``None``
    where the grid edge itself is captured."""
    i_eq = int(np.argmin(np.abs(s0g)))
    a = i_eq
    while a > 0 and row[a - 1]:
        a -= 1
    b = i_eq
    while b < row.size - 1 and row[b + 1]:
        b += 1
    lo_br = (s0g[a - 1], s0g[a]) if a > 0 else None
    hi_br = (s0g[b], s0g[b + 1]) if b < row.size - 1 else None
    return lo_br, hi_br


def _width(lo_br, hi_br) -> float:
    return max((lo_br[1] - lo_br[0]) if lo_br else 0.0, (hi_br[1] - hi_br[0]) if hi_br else 0.0)


def _narrow(br, q: np.ndarray, ok: np.ndarray, low_side: bool):
    """New bracket inside ``br`` from the flags ``ok`` at its interior points ``q``."""
    grid = np.concatenate([[br[0]], q, [br[1]]])
    if low_side:
        flags = np.concatenate([[False], ok, [True]])
        idx = len(flags) - 1
        while idx > 0 and flags[idx - 1]:
            idx -= 1
        return grid[idx - 1], grid[idx]
    flags = np.concatenate([[True], ok, [False]])
    idx = 0
    while idx < len(flags) - 1 and flags[idx + 1]:
        idx += 1
    return grid[idx], grid[idx + 1]


def _refine_band(run, lo_br, hi_br, rounds: int):
    """Bisection of both band edges: ``BAND_POINTS_PER_ROUND`` starts per edge per round."""
    for _ in range(rounds):
        brs = [br for br in (lo_br, hi_br) if br is not None]
        if not brs:
            break
        inner = [np.linspace(br[0], br[1], BAND_POINTS_PER_ROUND + 2)[1:-1] for br in brs]
        q = np.concatenate(inner)
        okq = run(q, np.zeros_like(q))[0]
        k = 0
        if lo_br is not None:
            n = inner[0].size
            lo_br = _narrow(lo_br, q[k:k + n], okq[k:k + n], True)
            k += n
        if hi_br is not None:
            n = inner[-1].size
            hi_br = _narrow(hi_br, q[k:k + n], okq[k:k + n], False)
    return lo_br, hi_br


def capture_range(params: PlantParameters, table: ForceTable, controller: ControllerDesign, s0_grid_m,
                  v0_grid_m_per_s=(0.0,), *, t_end_s: float = 0.5, tolerance_m: float | None = None,
                  tolerance_m_per_s: float | None = None, sensor: Sensor | None = None,
                  loop_delay_s: float = 0.0, band_refine_rounds: int = 2) -> CaptureResult:
    """Grid of start offsets and velocities: which ones end at rest at the equilibrium.

    Parameters
    ----------
    params, table, controller
        As for :func:`fields.control.simulate.simulate` (the controller must be sampled).
    s0_grid_m : array_like, shape (a,)
    v0_grid_m_per_s : array_like, shape (b,)
        0 is added if missing (the band is read at zero velocity).
    t_end_s : float
    tolerance_m, tolerance_m_per_s : float or None
        "At rest": ``|s| < tolerance_m`` and ``|v| < tolerance_m_per_s`` at ``t_end_s`` without
        leaving the table. Defaults: 1 % of the table span, and that times the crossover.
    sensor : Sensor or None
    loop_delay_s : float
        Rounded to a whole RK4 step.
    band_refine_rounds : int
        Bisection rounds on each band edge (7 interior points per edge per round).

    Returns
    -------
    CaptureResult

    Notes
    -----
    All starts are integrated at once by classical fixed-step RK4
    (:func:`fields.control.simulate.run_batch`). With a PD and an unbalanced table the rest
    point is offset from 0: use a PID or a larger tolerance.
    """
    w = "capture_range"
    if controller.sample_time_s is None:
        raise input_error(w, "controller.sample_time_s", "set (sampled controller)", None)
    sensor = linear_sensor(params) if sensor is None else sensor
    s0g, v0g = _capture_grids(s0_grid_m, v0_grid_m_per_s, table)
    lo, hi = table.range_m
    tol_s = 0.01 * (hi - lo) if tolerance_m is None else check_positive(w, "tolerance_m", tolerance_m)
    tol_v = tol_s * controller.crossover_rad_per_s if tolerance_m_per_s is None \
        else check_positive(w, "tolerance_m_per_s", tolerance_m_per_s)
    S, Vv = np.meshgrid(s0g, v0g, indexing="ij")

    def run(s0, v0):
        end = run_batch(params, table, controller, sensor, s0, v0, t_end_s, loop_delay_s)
        ok = (end.exit_side == 0) & (np.abs(end.s_m) < tol_s) & (np.abs(end.v_m_per_s) < tol_v)
        return ok, end

    ok, end = run(S.ravel(), Vv.ravel())
    names = np.where(end.exit_side == -1, exit_outcome(params, False).value,
                     np.where(end.exit_side == 1, exit_outcome(params, True).value,
                              np.where(ok, Outcome.CAPTURED.value, Outcome.NOT_SETTLED.value))).reshape(S.shape)
    captured = ok.reshape(S.shape)
    j0 = int(np.flatnonzero(v0g == 0)[0])
    i_eq = int(np.argmin(np.abs(s0g)))
    if not captured[i_eq, j0]:
        raise SolverError(f"{w}: the start nearest the equilibrium (s0 = {s0g[i_eq]:g} m) must be captured; "
                          f"got {names[i_eq, j0]} (the loop does not hold the floater).")
    lo_br, hi_br = _band_brackets(captured[:, j0], s0g)
    res = _width(lo_br, hi_br)
    if int(band_refine_rounds) > 0 and (lo_br or hi_br):
        lo_br, hi_br = _refine_band(run, lo_br, hi_br, int(band_refine_rounds))
        res = _width(lo_br, hi_br)
    band = (float(lo_br[1]) if lo_br else float(s0g[0]), float(hi_br[0]) if hi_br else float(s0g[-1]))
    return CaptureResult(
        s0_grid_m=s0g, v0_grid_m_per_s=v0g, captured=captured, fate=names, band_m=band,
        band_resolution_m=float(res), final_s_m=end.s_m.reshape(S.shape),
        final_v_m_per_s=end.v_m_per_s.reshape(S.shape), step_s=end.step_s, tolerance_m=tol_s,
        tolerance_m_per_s=tol_v, t_end_s=float(t_end_s),
    )


# --------------------------------------------------------------------------------------------
# On/off (hysteresis) control
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class HysteresisStudy:
    """On/off control with a hysteresis band, against the linear controller.

    Attributes
    ----------
    mode : {"current", "voltage"}
    lead_time_s : float
        Switching variable ``sigma = (s - s_set) + lead_time_s * v``.
    band_widths_m : ndarray, shape (b,)
        Full width of the band on ``sigma``.
    status : tuple of Outcome, shape (b,)
        LIMIT_CYCLE, GROWING, or how the floater left the table.
    amplitude_m : ndarray, shape (b,)
        Half peak-to-peak of ``s`` over the second half of the run.
    frequency_Hz : ndarray, shape (b,)
        Switch-on events per second over the second half.
    mean_s_m : ndarray, shape (b,)
    mean_joule_power_W : ndarray, shape (b,)
        ``R <I^2>`` over the second half (exact: integrated as a state).
    mean_supply_power_W : ndarray, shape (b,)
        ``<V I>``; for current mode ``V = R I + Fk v`` (the ``L dI/dt`` spikes of the switched
        current are left out).
    duty : ndarray, shape (b,)
        Fraction of the second half with the coil on.
    peak_current_A : ndarray, shape (b,)
    linear_amplitude_m, linear_mean_joule_power_W : float
        Same measures for the linear controller over the same run.
    hover_joule_power_W : float
        ``R I0^2``.
    end_time_s : ndarray, shape (b,)
    """

    mode: str
    lead_time_s: float
    band_widths_m: np.ndarray
    status: tuple[Outcome, ...]
    amplitude_m: np.ndarray
    frequency_Hz: np.ndarray
    mean_s_m: np.ndarray
    mean_joule_power_W: np.ndarray
    mean_supply_power_W: np.ndarray
    duty: np.ndarray
    peak_current_A: np.ndarray
    linear_amplitude_m: float
    linear_mean_joule_power_W: float
    hover_joule_power_W: float
    end_time_s: np.ndarray


@dataclass(frozen=True)
class _RelayRun:
    """Measures of one on/off run (second half)."""

    status: Outcome
    end: float
    peak: float
    amp: float = math.nan
    freq: float = math.nan
    mean_s: float = math.nan
    pj: float = math.nan
    ps: float = math.nan
    duty: float = math.nan


class _Relay:
    """Right-hand side and switching events of the on/off loop.

    States: s, v, [I], Joule energy, supply energy.
    """

    def __init__(self, params: PlantParameters, table: ForceTable, mode: str, band: float, lead: float,
                 on: float, off: float, s_set: float):
        self.p, self.table, self.band, self.lead = params, table, band, lead
        self.on, self.off, self.s_set = on, off, s_set
        self.volt = mode == "voltage"
        self.up = float(np.sign(params.force_per_ampere_N_per_A))  # "on" pushes along +s if k_i > 0
        lo, hi = table.range_m
        self.iE = 3 if self.volt else 2

        ev_lo, ev_hi = table_events(lo, hi)

        def ev_on(t, x, *a):  # while on: switch off when sigma rises above +band/2
            return self.sigma(x) - band / 2
        ev_on.terminal, ev_on.direction = True, 1

        def ev_off(t, x, *a):  # while off: switch on when sigma falls below -band/2
            return self.sigma(x) + band / 2
        ev_off.terminal, ev_off.direction = True, -1

        self.ev_lo, self.ev_hi, self.ev_on, self.ev_off = ev_lo, ev_hi, ev_on, ev_off

    def sigma(self, x) -> float:
        return self.up * ((x[0] - self.s_set) + self.lead * x[1])

    def rhs(self, t, x, state_on):
        p = self.p
        R, L = p.resistance_ohm, p.inductance_H
        s, v = x[0], x[1]
        I = x[2] if self.volt else (self.on if state_on else self.off)
        fk = float(self.table.force_per_ampere_N_per_A(s, I))
        if self.volt:
            V = self.on if state_on else self.off
            dI = [(V - R * I - fk * v) / L]
        else:
            V = R * I + fk * v
            dI = []
        acc = float(self.table.force_N(s, I)) / p.mass_kg - p.gravity_m_per_s2
        return [v, acc] + dI + [R * I * I, V * I]

    def current(self, state_on: bool) -> float:
        return self.on if state_on else self.off


def _relay_integrate(rl: _Relay, t_end: float, s0: float):
    """Switch by switch until ``t_end`` or an exit. Returns the records and energies."""
    p = rl.p
    x = np.array([s0, 0.0] + ([p.hover_current_A] if rl.volt else []) + [0.0, 0.0])
    state_on = rl.sigma(x) < -rl.band / 2
    t = 0.0
    half = 0.5 * t_end
    rec_t, rec_s, rec_I = [0.0], [s0], [x[2] if rl.volt else rl.current(state_on)]
    on_times: list[float] = []
    on_time_2nd = 0.0
    e_half = None
    status = Outcome.LIMIT_CYCLE
    dt = RELAY_OUTPUT_STEP_S
    for _ in range(MAX_SWITCHES):
        if t >= t_end - 1e-15:
            break
        target = half if t < half else t_end
        grid = np.arange(math.floor(t / dt) + 1, math.floor(target / dt) + 1) * dt
        grid = grid[(grid > t) & (grid < target)]
        sol = solve_ivp(rl.rhs, (t, target), x, args=(state_on,), method="RK45", rtol=1e-8, atol=1e-11,
                        events=(rl.ev_on if state_on else rl.ev_off, rl.ev_lo, rl.ev_hi),
                        t_eval=np.concatenate([grid, [target]]))
        if sol.status < 0:
            raise SolverError(f"hysteresis_study: solve_ivp must succeed; got {sol.message!r}.")
        hit = [e.size > 0 for e in sol.t_events]
        if sol.status == 1:
            j = hit.index(True)
            t_new, x_new = float(sol.t_events[j][0]), np.array(sol.y_events[j][0], float)
        else:
            j, t_new, x_new = -1, float(target), np.asarray(sol.y, float).reshape(x.size, -1)[:, -1].copy()
        st = np.asarray(sol.t, dtype=float)
        sy = np.asarray(sol.y, dtype=float).reshape(x.size, -1)
        keep = st < t_new
        rec_t += st[keep].tolist() + [t_new]
        rec_s += sy[0][keep].tolist() + [x_new[0]]
        rec_I += (sy[2][keep].tolist() + [x_new[2]]) if rl.volt else [rl.current(state_on)] * int(keep.sum() + 1)
        if state_on and t_new > half:
            on_time_2nd += t_new - max(t, half)
        t, x = t_new, x_new
        if e_half is None and t >= half - 1e-15 and j != 0:
            e_half = x[rl.iE:rl.iE + 2].copy()
        if j in (1, 2):
            status = exit_outcome(p, j == 2)
            break
        if j == 0:
            state_on = not state_on
            if state_on:
                on_times.append(t)
    else:
        raise SolverError(f"hysteresis_study: switching must stay below {MAX_SWITCHES} events per run; "
                          "got more (band too narrow).")
    return (np.array(rec_t), np.array(rec_s), np.array(rec_I), on_times, on_time_2nd, e_half,
            x[rl.iE:rl.iE + 2], t, status)


def _relay_run(rl: _Relay, t_end: float, s0: float) -> _RelayRun:
    """One on/off run and its measures over the second half."""
    rec_t, rec_s, rec_I, on_times, on_time_2nd, e_half, e_end, t, status = _relay_integrate(rl, t_end, s0)
    peak = float(np.max(np.abs(rec_I)))
    if status != Outcome.LIMIT_CYCLE or e_half is None:
        return _RelayRun(status=status, end=t, peak=peak)
    half = 0.5 * t_end
    sel = rec_t >= half
    s2 = rec_s[sel]
    r3 = (rec_t >= half) & (rec_t < 0.75 * t_end)
    r4 = rec_t >= 0.75 * t_end
    a3 = 0.5 * (rec_s[r3].max() - rec_s[r3].min())
    a4 = 0.5 * (rec_s[r4].max() - rec_s[r4].min())
    if a4 > GROWTH_RATIO * a3 and a4 > 1e-9:
        status = Outcome.GROWING
    dur = t_end - half
    return _RelayRun(status=status, end=t, peak=peak, amp=float(0.5 * (s2.max() - s2.min())),
                     freq=sum(ti >= half for ti in on_times) / dur,
                     mean_s=float(np.trapezoid(s2, rec_t[sel]) / dur), pj=float((e_end[0] - e_half[0]) / dur),
                     ps=float((e_end[1] - e_half[1]) / dur), duty=on_time_2nd / dur)


def _linear_reference(params, table, controller, s0, set_position_m, t_end_s, band_max):
    """Amplitude and Joule power of the linear loop over the second half of the same run."""
    lin = simulate(params, table, controller, Scenario(t_end_s=t_end_s, s0_m=s0 + 0.5 * band_max,
                                                       reference_m=set_position_m))
    sel = lin.time_s >= 0.5 * t_end_s
    if not sel.any():
        return math.nan, math.nan
    return (float(0.5 * (lin.s_m[sel].max() - lin.s_m[sel].min())),
            float(np.mean(params.resistance_ohm * lin.current_A[sel] ** 2)))


def hysteresis_study(params: PlantParameters, table: ForceTable, controller: ControllerDesign,
                     band_widths_m, *, mode: str = "current", lead_time_s: float | None = None,
                     on_current_A: float | None = None, off_current_A: float = 0.0,
                     off_voltage_V: float = 0.0, set_position_m: float = 0.0, t_end_s: float = 1.0,
                     s0_m: float | None = None) -> HysteresisStudy:
    """Switched (on/off) coil with a hysteresis band, compared with the linear controller.

    Parameters
    ----------
    params, table : PlantParameters, ForceTable
    controller : ControllerDesign
        The linear design to compare with (simulated with
        :func:`fields.control.simulate.simulate`); its derivative time ``Kd/Kp`` is the default
        ``lead_time_s``.
    band_widths_m : array_like, shape (b,)
        Full band widths on the switching variable.
    mode : {"current", "voltage"}
        "current": the coil current switches between ``on_current_A`` (default ``max_current_A``)
        and ``off_current_A``. "voltage": the coil voltage switches between the full supply and
        ``off_voltage_V`` (0 = freewheeling); current follows ``L dI/dt = V - R I - Fk v``.
    lead_time_s : float or None
        Switching variable ``sigma = (s - s_set) + lead_time_s v`` (an ideal comparator on the
        position and velocity; sensor crosstalk ignored). With 0 the oscillation of an unstable
        plant under a hysteresis relay grows (the relay's lag adds energy each cycle).
    set_position_m, t_end_s : float
    s0_m : float or None
        Start position (at rest, coil off); default ``set_position_m``.

    Returns
    -------
    HysteresisStudy

    Notes
    -----
    Switching instants are found exactly as ``solve_ivp`` events. Measures are taken over the
    second half of the run. With current switching between 0 and ``I_on`` at duty ``d``
    (``d I_on ~ I0``), the mean Joule power is ``R d I_on^2 = R I0^2/d``: on/off costs ``1/d``
    times the linear controller's hover power.
    """
    w = "hysteresis_study"
    check_choice(w, "mode", mode, DRIVES)
    bands = np.atleast_1d(np.asarray(band_widths_m, dtype=float))
    if bands.size == 0 or np.any(~np.isfinite(bands)) or np.any(bands <= 0):
        raise input_error(w, "band_widths_m", "positive finite widths", bands.tolist())
    lead = (controller.kd_A_s_per_signal / controller.kp_A_per_signal) if lead_time_s is None \
        else float(lead_time_s)
    if not (math.isfinite(lead) and lead >= 0):
        raise input_error(w, "lead_time_s", "non-negative", lead_time_s)
    if mode == "current":
        on = params.max_current_A if on_current_A is None else float(on_current_A)
        off = float(off_current_A)
    else:
        on = params.supply_voltage_V
        off = float(off_voltage_V)
    s0 = set_position_m if s0_m is None else float(s0_m)
    runs = [_relay_run(_Relay(params, table, mode, b, lead, on, off, set_position_m), t_end_s, s0) for b in bands]
    lin_amp, lin_pj = _linear_reference(params, table, controller, s0, set_position_m, t_end_s, float(bands.max()))

    def col(k):
        return np.array([getattr(r, k) for r in runs], dtype=float)

    return HysteresisStudy(
        mode=mode, lead_time_s=lead, band_widths_m=bands, status=tuple(r.status for r in runs),
        amplitude_m=col("amp"), frequency_Hz=col("freq"), mean_s_m=col("mean_s"),
        mean_joule_power_W=col("pj"), mean_supply_power_W=col("ps"), duty=col("duty"),
        peak_current_A=col("peak"), linear_amplitude_m=lin_amp, linear_mean_joule_power_W=lin_pj,
        hover_joule_power_W=params.resistance_ohm * params.hover_current_A**2, end_time_s=col("end"),
    )
