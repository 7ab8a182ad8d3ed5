"""On/off control through a real switch: the coil's R and L, a supply, a switch stage and a
hysteresis band (comparator) on the sensor signal.

Switch stages (``kind``)
    "low_side": a transistor from the coil to ground, a flyback diode across the coil. On: the
    coil sees ``+V_s``; off: the current freewheels through the diode, the coil sees
    ``-V_d``, until it reaches zero, where the diode blocks and the current stays zero. The
    current is never negative; the supply delivers ``V_s i`` only while on.
    "h_bridge": four switches (with their body diodes). On: ``+V_s``; off: ``-V_s`` (the
    current may reverse; energy flows back to the supply while ``V i < 0``).
Comparator
    ``sigma = g ((y - y_set) + t_lead dy/dt)`` with ``g = +-1`` chosen so that switching on
    makes ``sigma`` grow; the switch turns off when ``sigma > +h`` and on when ``sigma < -h``
    (full band ``2h``). ``t_lead`` is an analog lead (differentiator) before the comparator;
    without it the oscillation of an unstable plant under a hysteresis relay grows.
Axis
    One coordinate ``s`` with ``m s'' = F(s, i) - F(0, I0)`` (the equilibrium balances gravity
    and any other load), ``L i' = V - R i - k(s) s'`` (back-EMF ``k = dF/di``, reciprocity), a
    sensor ``y(s, i)``. A pure R-L load is the case ``F = 0``.

Switching instants are ``solve_ivp`` events (exact up to the integration tolerance). Measures are
taken over the second half of the run.

Limit-cycle estimates
    :func:`rl_relay_frequency`: exact first-order analysis of an R-L load whose *current* is kept
    in a band ``[i_lo, i_hi]`` (exponential charge towards ``V_on / R``, discharge towards
    ``V_off / R``; e.g. Atherton, Nonlinear Control Engineering, 1975, ch. 4, relay systems;
    the same exponentials as any first-order circuit). :func:`describing_function_cycle`: the
    describing function of a relay with hysteresis, ``N(A) = 4M/(pi A) (sqrt(1 - (h/A)^2) -
    j h/A)`` (Atherton 1975; Slotine & Li, Applied Nonlinear Control, 1991, sec. 5.3), and the
    harmonic balance ``G(jw) = -1/N(A)``: ``Im G = -pi h / (4M)``, ``A = sqrt(h^2 + (4M Re G /
    pi)^2)`` - an estimate for a low-pass loop, not exact.

Nothing here prints, plots or touches files.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.integrate import solve_ivp

from fields.control.simulate import table_events
from fields.errors import SolverError
from fields.physics.checks import input_error

SWITCH_KINDS = ("low_side", "h_bridge")
#: forward drop of the flyback diode (a silicon rectifier; common practice, no source)
DIODE_DROP_V = 0.7
#: most switching events one run may take
MAX_EVENTS = 100_000
#: the oscillation counts as growing if its amplitude in the last quarter exceeds this multiple
#: of the third quarter's
GROWTH_RATIO = 1.5


@dataclass(frozen=True)
class SwitchStage:
    """The power stage between the supply and the coil (module docstring).

    ``current_limit_A``: a cycle-by-cycle current limit (the stage chops to keep ``|i|`` at the
    limit), modelled by its average: at the limit the current is held there (the mean voltage
    ``R i + k v``) until the comparator switches the other way. None: no limit.
    """

    kind: str
    supply_voltage_V: float
    diode_drop_V: float = DIODE_DROP_V
    current_limit_A: float | None = None

    def __post_init__(self) -> None:
        if self.kind not in SWITCH_KINDS:
            raise input_error("switch stage", "kind", f"one of {', '.join(SWITCH_KINDS)}", self.kind)
        if not (math.isfinite(self.supply_voltage_V) and self.supply_voltage_V > 0):
            raise input_error("switch stage", "supply_voltage_V", "positive", self.supply_voltage_V)

    @property
    def on_voltage_V(self) -> float:
        return float(self.supply_voltage_V)

    @property
    def off_voltage_V(self) -> float:
        return -float(self.diode_drop_V) if self.kind == "low_side" else -float(self.supply_voltage_V)


@dataclass(frozen=True)
class SwitchedAxis:
    """One axis driven through a switch (module docstring).

    ``force_N(s, i)`` and ``force_per_ampere_N_per_A(s, i)`` (dF/dI, also the back-EMF coefficient) along
    the axis; ``sensor(s, i)`` the
    reading and ``sensor_slope(s)`` its d/ds (for the lead term); ``range_m`` the stretch the
    force model covers (leaving it ends the run).
    """

    mass_kg: float
    resistance_ohm: float
    inductance_H: float
    bias_current_A: float
    force_N: Callable
    force_per_ampere_N_per_A: Callable
    sensor: Callable
    sensor_slope: Callable
    range_m: tuple[float, float]


@dataclass(frozen=True)
class SwitchedRun:
    """Measures of one on/off run over its second half.

    ``status``: "limit cycle", "growing", "lost (left the force table ...)" or "stuck" (never
    switched in the second half). Amplitude is half the peak-to-peak of ``s``; frequency is the
    mean rate of switch-on events (their count less one over the time between the first and last); ripple is the current's peak-to-peak; ``joule_power_W = R <i^2>``,
    ``supply_power_W`` the mean power drawn from the supply (negative when returned).
    """

    band: float
    status: str
    amplitude_m: float
    frequency_Hz: float
    mean_current_A: float
    ripple_current_A: float
    joule_power_W: float
    supply_power_W: float
    duty: float
    peak_current_A: float
    end_time_s: float
    t_s: np.ndarray
    s_m: np.ndarray
    current_A: np.ndarray


def rl_relay_frequency(resistance_ohm: float, inductance_H: float, on_voltage_V: float, off_voltage_V: float,
                       low_current_A: float, high_current_A: float) -> tuple[float, float, float]:
    """(t_on, t_off, frequency) of an R-L load kept in a current band by a relay (exact, first order).

    On, ``i`` rises from ``i_lo`` towards ``V_on / R``; off, it falls from ``i_hi`` towards
    ``V_off / R``; ``t = tau ln((i_inf - i_start) / (i_inf - i_end))`` with ``tau = L / R``.
    Infinite times when a band edge lies beyond the asymptote (the relay never switches).
    """
    tau = inductance_H / resistance_ohm
    a_on, a_off = on_voltage_V / resistance_ohm, off_voltage_V / resistance_ohm

    def t(i_inf, i0, i1):
        # reaches i1 only if the asymptote lies beyond it: (i_inf - i0) / (i_inf - i1) > 1
        num, den = i_inf - i0, i_inf - i1
        if den == 0 or num / den <= 1:
            return math.inf
        return tau * math.log(num / den)

    t_on = t(a_on, low_current_A, high_current_A)
    t_off = t(a_off, high_current_A, low_current_A)
    return t_on, t_off, 1.0 / (t_on + t_off) if math.isfinite(t_on + t_off) else 0.0


@dataclass(frozen=True)
class DescribingFunctionCycle:
    """Harmonic-balance estimate of the relay limit cycle: frequency (Hz) and amplitude of
    ``sigma`` (its unit); ``found`` False when ``Im G`` never reaches ``-pi h / 4M`` with
    ``Re G < 0`` on the grid."""

    found: bool
    frequency_Hz: float
    amplitude: float
    relay_half_swing: float
    half_band: float


def describing_function_cycle(loop: Callable, half_swing: float, half_band: float,
                              omegas_rad_per_s) -> DescribingFunctionCycle:
    """Solve ``G(jw) = -1/N(A)`` for a relay of output ``+-M`` and hysteresis ``+-h``.

    ``loop(s)`` is the linear part ``G`` from the relay output (deviation from its mean) to
    ``sigma``; the relay closes the loop with negative feedback, ``u = -M`` above ``+h`` and
    ``+M`` below ``-h`` (it switches on when ``sigma`` is low), so harmonic balance reads
    ``1 + N(A) G(jw) = 0``. Returns the highest-frequency crossing.
    """
    w = np.asarray(omegas_rad_per_s, float)
    G = np.array([complex(loop(1j * x)) for x in w])
    target = -math.pi * half_band / (4.0 * half_swing)
    d = G.imag - target
    idx = np.flatnonzero(np.sign(d[:-1]) != np.sign(d[1:]))
    best = None
    for i in idx[::-1]:
        t = d[i] / (d[i] - d[i + 1])
        wc = w[i] * (w[i + 1] / w[i]) ** t
        re = G[i].real + t * (G[i + 1].real - G[i].real)
        if re < 0:
            best = (wc, re)
            break
    if best is None:
        return DescribingFunctionCycle(False, math.nan, math.nan, half_swing, half_band)
    wc, re = best
    A = math.hypot(half_band, 4.0 * half_swing * re / math.pi)
    return DescribingFunctionCycle(True, wc / (2 * math.pi), A, half_swing, half_band)


class _Loop:
    """Right-hand side and events of the switched axis. States: s, v, i, E_joule, E_supply."""

    def __init__(self, ax: SwitchedAxis, st: SwitchStage, h: float, lead: float, y_set: float, orient: float):
        self.ax, self.st, self.h, self.lead, self.y_set, self.g = ax, st, h, lead, y_set, orient
        self.F0 = float(ax.force_N(0.0, ax.bias_current_A))

    def sigma(self, x) -> float:
        s, v, i = x[0], x[1], x[2]
        y = float(self.ax.sensor(s, i))
        return self.g * ((y - self.y_set) + self.lead * float(self.ax.sensor_slope(s)) * v)

    def rhs(self, t, x, mode):
        ax, st = self.ax, self.st
        s, v, i = x[0], x[1], x[2]
        k = float(ax.force_per_ampere_N_per_A(s, i))
        if mode in ("clamp_on", "clamp_off"):  # held at the current limit by chopping (average)
            V = ax.resistance_ohm * i + k * v
            acc = (float(ax.force_N(s, i)) - self.F0) / ax.mass_kg if math.isfinite(ax.mass_kg) else 0.0
            return [v, acc, 0.0, ax.resistance_ohm * i * i, V * i]
        if mode == "on":
            V, Isup = st.on_voltage_V, i
        elif mode == "off":
            V = st.off_voltage_V
            Isup = 0.0 if st.kind == "low_side" else -i
        else:  # "blocked": low-side switch open, diode off, no current
            V, Isup = k * v, 0.0
        di = 0.0 if mode == "blocked" else (V - ax.resistance_ohm * i - k * v) / ax.inductance_H
        acc = (float(ax.force_N(s, i)) - self.F0) / ax.mass_kg if math.isfinite(ax.mass_kg) else 0.0
        return [v, acc, di, ax.resistance_ohm * i * i, st.supply_voltage_V * Isup]


def simulate_switched(axis: SwitchedAxis, stage: SwitchStage, half_band: float, lead_time_s: float = 0.0,
                      t_end_s: float = 0.5, s0_m: float = 0.0, y_set: float | None = None,
                      orientation: float | None = None, max_step_s: float | None = None) -> SwitchedRun:
    """One on/off run from rest at ``s0_m`` with the coil at its bias current (module docstring).

    ``y_set`` defaults to the reading at the equilibrium; ``orientation`` (+-1) to the sign that
    makes switching on raise ``sigma`` (from the sensor slope and the force per ampere, or +1
    for a pure R-L load).
    """
    if not (math.isfinite(half_band) and half_band > 0):
        raise input_error("simulate_switched", "half_band", "positive", half_band)
    ax = axis
    I0 = float(ax.bias_current_A)
    ys = float(ax.sensor(0.0, I0)) if y_set is None else float(y_set)
    if orientation is None:
        k, g = float(ax.force_per_ampere_N_per_A(0.0, I0)), float(ax.sensor_slope(0.0))
        orientation = float(np.sign(k * g)) if math.isfinite(ax.mass_kg) and k * g != 0 else 1.0
    lp = _Loop(ax, stage, half_band, float(lead_time_s), ys, float(orientation))
    lo, hi = ax.range_m

    ev_lo, ev_hi = table_events(lo, hi)

    def ev_off(t, x, *a):  # while on: switch off above +h
        return lp.sigma(x) - half_band
    ev_off.terminal, ev_off.direction = True, 1

    def ev_on(t, x, *a):  # while off or blocked: switch on below -h
        return lp.sigma(x) + half_band
    ev_on.terminal, ev_on.direction = True, -1

    def ev_zero(t, x, *a):  # low-side, off: the diode stops at zero current
        return x[2]
    ev_zero.terminal, ev_zero.direction = True, -1

    ilim = stage.current_limit_A if stage.current_limit_A is not None else math.inf

    def ev_lim_hi(t, x, *a):  # on: the current reaches +limit
        return x[2] - ilim
    ev_lim_hi.terminal, ev_lim_hi.direction = True, 1

    def ev_lim_lo(t, x, *a):  # H-bridge off: the current reaches -limit
        return x[2] + ilim
    ev_lim_lo.terminal, ev_lim_lo.direction = True, -1

    x = np.array([s0_m, 0.0, I0, 0.0, 0.0])
    sg = lp.sigma(x)
    mode = "on" if sg < 0 else "off"
    if mode == "off" and stage.kind == "low_side" and x[2] <= 0:
        mode = "blocked"
    t = 0.0
    half = 0.5 * t_end_s
    rec_t, rec_s, rec_i = [0.0], [s0_m], [I0]
    on_times: list[float] = []
    on_time_2nd = 0.0
    e_half = None
    status = "limit cycle"
    tau_e = ax.inductance_H / ax.resistance_ohm
    mstep = max_step_s if max_step_s is not None else min(tau_e, t_end_s) / 20.0
    for _ in range(MAX_EVENTS):
        if t >= t_end_s - 1e-15:
            break
        target = half if t < half - 1e-15 else t_end_s
        if mode in ("on", "clamp_on"):
            evs = [ev_off] + ([ev_lim_hi] if mode == "on" and math.isfinite(ilim) else [])
        else:
            evs = [ev_on] + ([ev_zero] if mode == "off" and stage.kind == "low_side" else []) \
                + ([ev_lim_lo] if mode == "off" and stage.kind == "h_bridge" and math.isfinite(ilim) else [])
        sol = solve_ivp(lp.rhs, (t, target), x, args=(mode,), method="RK45", rtol=1e-8, atol=1e-12,
                        events=evs + [ev_lo, ev_hi], max_step=mstep, dense_output=False)
        if sol.status < 0:
            raise SolverError(f"simulate_switched: the integrator failed ({sol.message})")
        hit = [e.size > 0 for e in sol.t_events]
        if sol.status == 1:
            j = hit.index(True)
            t_new, x_new = float(sol.t_events[j][0]), np.array(sol.y_events[j][0], float)
        else:
            j, t_new, x_new = -1, float(target), np.asarray(sol.y, float)[:, -1].copy()
        keep = sol.t < t_new
        rec_t += sol.t[keep].tolist() + [t_new]
        rec_s += sol.y[0][keep].tolist() + [x_new[0]]
        rec_i += sol.y[2][keep].tolist() + [x_new[2]]
        if mode in ("on", "clamp_on") and t_new > half:
            on_time_2nd += t_new - max(t, half)
        t, x = t_new, x_new
        if e_half is None and t >= half - 1e-15:
            e_half = (t, x[3:5].copy())
        name = (evs + [ev_lo, ev_hi])[j] if j >= 0 else None
        if name is ev_lo or name is ev_hi:
            status = f"lost (left the force table at s = {x[0] * 1e3:.3g} mm)"
            break
        if name is ev_off:
            mode = "off"
        elif name is ev_on:
            mode = "on"
            on_times.append(t)
        elif name is ev_zero:
            x[2] = 0.0
            mode = "blocked"
        elif name is ev_lim_hi:
            x[2] = ilim
            mode = "clamp_on"
        elif name is ev_lim_lo:
            x[2] = -ilim
            mode = "clamp_off"
    else:
        raise SolverError(f"simulate_switched: more than {MAX_EVENTS} switching events (band too narrow)")
    T, S, Ic = np.array(rec_t), np.array(rec_s), np.array(rec_i)
    peak = float(np.max(np.abs(Ic)))
    nan = math.nan
    if not status.startswith("limit") or e_half is None:
        return SwitchedRun(half_band, status, nan, nan, nan, nan, nan, nan, nan, peak, t, T, S, Ic)
    sel = T >= half
    dur = t_end_s - e_half[0]
    s2, i2 = S[sel], Ic[sel]
    r3 = sel & (T < 0.75 * t_end_s)
    r4 = T >= 0.75 * t_end_s
    a3 = 0.5 * np.ptp(S[r3]) if np.any(r3) else 0.0
    a4 = 0.5 * np.ptp(S[r4]) if np.any(r4) else 0.0
    n_on = sum(ti >= half for ti in on_times)
    if n_on == 0:
        status = "stuck (no switching in the second half)"
    elif a4 > GROWTH_RATIO * a3 and a4 > 1e-9:
        status = "growing"
    ons = [ti for ti in on_times if ti >= half]
    freq = (len(ons) - 1) / (ons[-1] - ons[0]) if len(ons) >= 2 else n_on / dur
    return SwitchedRun(half_band, status, float(0.5 * np.ptp(s2)), freq, float(np.trapezoid(i2, T[sel]) / dur),
                       float(np.ptp(i2)), float((x[3] - e_half[1][0]) / dur), float((x[4] - e_half[1][1]) / dur),
                       on_time_2nd / dur, peak, t, T, S, Ic)
