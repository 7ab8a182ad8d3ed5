"""Nonlinear time simulation of one axis: force table, saturations, sampling and delay.

Nothing here prints, plots or touches files.
"""

from __future__ import annotations

import enum
import math
from collections import deque
from dataclasses import dataclass

import control
import numpy as np
from scipy.integrate import solve_ivp

from fields.control.checks import check_choice, check_finite, check_non_negative, check_positive
from fields.control.design import ControllerDesign
from fields.control.plant import (
    DRIVES,
    ForceTable,
    PlantParameters,
    Sensor,
    current_loop_matrices,
    linear_sensor,
    plant_matrices,
)
from fields.errors import ContactError, SolverError
from fields.physics.checks import input_error

#: RK4 stability/accuracy bound on ``h lambda_max`` for the batch integrator
RK4_STEP_BOUND = 0.2


class Outcome(enum.StrEnum):
    """How a run ends: at rest, leaving the force table, or the on/off study's steady states.

    The vertical axis leaves the table by falling (below) or by contact (above); other axes by
    its low or high end. The values are the words a person reads (capture.csv's ``fate`` column,
    the on/off study); :attr:`code` is a short machine name for each.
    """

    CAPTURED = "captured"
    NOT_SETTLED = "not settled"
    FELL = "fell"
    CONTACT = "contact"
    LEFT_TABLE_LOW = "lost on the minus side (left the force table below its range)"
    LEFT_TABLE_HIGH = "lost on the plus side (left the force table above its range)"
    LIMIT_CYCLE = "limit cycle"
    GROWING = "growing"

    @property
    def code(self) -> str:
        """A short machine name (``"lost_minus"``, ``"limit_cycle"``, ...), never shown as text."""
        return {"LEFT_TABLE_LOW": "lost_minus", "LEFT_TABLE_HIGH": "lost_plus"}.get(self.name, self.name.lower())


def exit_outcome(params: PlantParameters, high: bool) -> Outcome:
    """The :class:`Outcome` of leaving the table at its high (``True``) or low end."""
    if params.is_vertical:
        return Outcome.CONTACT if high else Outcome.FELL
    return Outcome.LEFT_TABLE_HIGH if high else Outcome.LEFT_TABLE_LOW


@dataclass(frozen=True)
class Scenario:
    """What happens in one simulation (times in s from the start).

    Attributes
    ----------
    t_end_s : float
    s0_m, v0_m_per_s : float
        Start position and velocity.
    reference_m : float
        Set position from ``reference_step_time_s`` on (0 before): a reference step.
    force_step_N, force_step_time_s : float
        Extra force along ``+s`` from that time on.
    force_impulse_N_s, force_impulse_time_s : float
        Instantaneous impulse (velocity jump ``J/m``).
    payload_kg, payload_time_s : float
        Mass added (or removed, negative) at that time, placed without a velocity change.
    initial_current_A : float or None
        Voltage drive: start current (``None``: hover current, or 0 with the coil off).
    output_step_s : float or None
        Output spacing (``None``: the sample time, or t_end/1000 with the coil off).
    """

    t_end_s: float = 0.5
    s0_m: float = 0.0
    v0_m_per_s: float = 0.0
    reference_m: float = 0.0
    reference_step_time_s: float = 0.0
    force_step_N: float = 0.0
    force_step_time_s: float = 0.0
    force_impulse_N_s: float = 0.0
    force_impulse_time_s: float = 0.0
    payload_kg: float = 0.0
    payload_time_s: float = 0.0
    initial_current_A: float | None = None
    output_step_s: float | None = None

    def __post_init__(self) -> None:
        w = "Scenario"
        check_positive(w, "t_end_s", self.t_end_s)
        for k in self.__dataclass_fields__:
            v = getattr(self, k)
            if v is not None:
                check_finite(w, k, v)
        for k in ("reference_step_time_s", "force_step_time_s", "force_impulse_time_s", "payload_time_s"):
            if getattr(self, k) < 0:
                raise input_error(w, k, "non-negative", getattr(self, k))


@dataclass(frozen=True)
class SimulationEvent:
    """The floater left the force table at ``time_s``, position ``s_m``."""

    time_s: float
    kind: Outcome
    s_m: float


@dataclass(frozen=True, eq=False)
class SimulationResult:
    """Time series of one simulation, shapes (t,).

    Attributes
    ----------
    time_s, s_m, v_m_per_s, current_A, voltage_V, signal, command_A : ndarray
        ``voltage_V`` is the applied coil voltage for voltage drive; for current drive it is
        ``R I + Fk(s) v`` (the ``L dI/dt`` spikes of a stepped current are left out).
        ``signal`` is in ``signal_unit``. ``command_A`` is the held current command.
    events : tuple of SimulationEvent
    signal_unit : str
    drive : str
    """

    time_s: np.ndarray
    s_m: np.ndarray
    v_m_per_s: np.ndarray
    current_A: np.ndarray
    voltage_V: np.ndarray
    signal: np.ndarray
    command_A: np.ndarray
    events: tuple[SimulationEvent, ...]
    signal_unit: str
    drive: str


# --------------------------------------------------------------------------------------------
# Shared pieces: right-hand side, digital controller
# --------------------------------------------------------------------------------------------


class AxisDynamics:
    """Vectorised right-hand side of one axis (n starts at once; n = 1 for :func:`simulate`).

    States ``(s, v)`` (current drive) or ``(s, v, I)`` (voltage drive), shape (x, n).
    Current drive: ``I = clip(I_cmd, +-I_max)``. Voltage drive: the analog current loop
    ``V = clip(R i_ref + K_c (i_ref - I), +-V_supply)``, ``i_ref = clip(I_cmd, +-I_max)``,
    ``L dI/dt = V - R I - Fk(s) v``. With the coil off: ``I = 0`` (current) or ``V = 0``.
    """

    def __init__(self, params: PlantParameters, table: ForceTable, drive: str, kc: float, coil_on: bool):
        self.p = params
        self.table = table
        self.drive = drive
        self.kc = kc
        self.coil_on = coil_on
        self.imax = params.max_current_A
        self.vs = params.supply_voltage_V

    def current_and_voltage(self, X, held):
        """Coil current, applied voltage and ``Fk(s)`` for states X (x, n), held command (n,)."""
        p = self.p
        s, v = X[0], X[1]
        if self.drive == "current":
            I = np.clip(held, -self.imax, self.imax) if self.coil_on else np.zeros_like(s)
            fk = self.table.force_per_ampere_N_per_A(s, I)
            V = p.resistance_ohm * I + fk * v
        else:
            I = X[2]
            fk = self.table.force_per_ampere_N_per_A(s, I)
            if self.coil_on:
                iref = np.clip(held, -self.imax, self.imax)
                V = np.clip(p.resistance_ohm * iref + self.kc * (iref - I), -self.vs, self.vs)
            else:
                V = np.zeros_like(s)
        return I, V, fk

    def rhs(self, X, held, mass, f_ext):
        """Time derivative of X (x, n)."""
        p = self.p
        I, V, fk = self.current_and_voltage(X, held)
        s, v = X[0], X[1]
        acc = (self.table.force_N(s, I) + f_ext) / mass - p.gravity_m_per_s2
        if self.drive == "current":
            return np.stack([v, acc])
        dI = (V - p.resistance_ohm * I - fk * v) / p.inductance_H
        return np.stack([v, acc, dI])


class DigitalController:
    """Discrete controller state space, vectorised over n starts: ``u = C x + D e``,
    ``x+ = A x + B e``."""

    def __init__(self, controller: ControllerDesign, n: int):
        sysd = control.ss(controller.discrete_tf)
        self.A, self.B, self.C, self.D = (np.asarray(m, float) for m in (sysd.A, sysd.B, sysd.C, sysd.D))
        self.x = np.zeros((self.A.shape[0], n))

    def step(self, e):
        """Output for error e (n,), then advance the state."""
        u = (self.C @ self.x)[0] + self.D[0, 0] * e
        self.x = self.A @ self.x + self.B @ e[None, :]
        return u


# --------------------------------------------------------------------------------------------
# simulate: schedule, actions, hold intervals
# --------------------------------------------------------------------------------------------


def _schedule(sc: Scenario, T: float | None, tau: float) -> tuple[list[tuple[float, list[str]]], float]:
    """Scenario actions, samples and delayed command applications grouped by time."""
    t_end = sc.t_end_s
    acts = []
    for name, t in (("reference", sc.reference_step_time_s), ("force", sc.force_step_time_s),
                    ("impulse", sc.force_impulse_time_s), ("payload", sc.payload_time_s)):
        if 0 <= t <= t_end:
            acts.append((t, 0, name))
    if T is not None:
        nk = int(math.floor(t_end / T + 1e-9))
        acts += [(k * T, 1, "sample") for k in range(nk + 1)]
        acts += [(k * T + tau, 2, "apply") for k in range(nk + 1) if k * T + tau <= t_end]
    acts.sort()
    tol_t = 1e-12 * max(t_end, 1.0)
    groups: list[tuple[float, list[str]]] = []
    for t, _, kind in acts:
        if groups and abs(t - groups[-1][0]) <= tol_t:
            groups[-1][1].append(kind)
        else:
            groups.append((t, [kind]))
    if not groups or groups[0][0] > tol_t:
        groups.insert(0, (0.0, []))
    return groups, tol_t


class _Run:
    """Mutable state of one :func:`simulate` run (private to it)."""

    def __init__(self, params, sc, dyn, ctrl, sensor, X, held):
        self.params, self.sc, self.dyn, self.ctrl, self.sensor = params, sc, dyn, ctrl, sensor
        self.X, self.held = X, held
        self.mass = params.mass_kg
        self.f_ext = 0.0
        self.s_ref = 0.0
        self.queue: deque = deque()
        self.rec_t: list[float] = []
        self.rec_X: list[np.ndarray] = []
        self.rec_held: list[float] = []
        self.events: list[SimulationEvent] = []

    def act(self, kind: str) -> None:
        sc, i0 = self.sc, self.params.hover_current_A
        if kind == "reference":
            self.s_ref = sc.reference_m
        elif kind == "force":
            self.f_ext = sc.force_step_N
        elif kind == "impulse":
            self.X[1] += sc.force_impulse_N_s / self.mass
        elif kind == "payload":
            self.mass = self.params.mass_kg + sc.payload_kg
            if self.mass <= 0:
                raise input_error("simulate", "mass_kg + scenario.payload_kg", "positive", self.mass)
        elif kind == "sample":
            I, _, _ = self.dyn.current_and_voltage(self.X[:, None], self.held)
            y = self.sensor(np.array([self.X[0]]), I)
            y_ref = self.sensor(np.array([self.s_ref]), np.array([i0]))
            self.queue.append(i0 - self.ctrl.step(y - y_ref))
        elif kind == "apply":
            self.held = self.queue.popleft()

    def record(self, t: float, X: np.ndarray) -> None:
        self.rec_t.append(t)
        self.rec_X.append(X.copy())
        self.rec_held.append(float(self.held[0]))


def table_events(lo: float, hi: float):
    """Terminal ``solve_ivp`` events for leaving the force table ``lo..hi`` (m) below and above."""

    def ev_low(t, x, *a):
        return x[0] - lo
    ev_low.terminal, ev_low.direction = True, -1

    def ev_high(t, x, *a):
        return x[0] - hi
    ev_high.terminal, ev_high.direction = True, 1
    return ev_low, ev_high


def _hold_interval(run: _Run, tg: float, t_next: float, times_out, tol_t, events, atol, rtol) -> bool:
    """Integrate one hold interval; record outputs. ``True`` if the floater left the table."""
    inner = times_out[(times_out > tg + tol_t) & (times_out < t_next - tol_t)]
    held, mass, f_ext = run.held, run.mass, run.f_ext
    sol = solve_ivp(lambda t, x: run.dyn.rhs(x[:, None], held, mass, f_ext)[:, 0], (tg, t_next), run.X,
                    method="RK45", t_eval=inner if inner.size else None, events=events,
                    rtol=rtol, atol=atol, dense_output=False)
    if inner.size:
        run.rec_t.extend(sol.t.tolist())
        run.rec_X.extend(sol.y.T.copy())
        run.rec_held.extend([float(held[0])] * sol.t.size)
    if sol.status == 1:
        for j, high in ((0, False), (1, True)):
            if sol.t_events[j].size:
                te = float(sol.t_events[j][0])
                xe = sol.y_events[j][0]
                run.events.append(SimulationEvent(te, exit_outcome(run.params, high), float(xe[0])))
                run.record(te, xe)
        return True
    if sol.status < 0:
        raise SolverError(f"simulate: solve_ivp must succeed; got {sol.message!r} at t = {tg:g} s.")
    run.X = sol.y[:, -1].copy()
    return False


def _check_simulate(controller, drive, loop_delay_s, table, sc) -> tuple[str, float]:
    w = "simulate"
    if controller is not None:
        if controller.sample_time_s is None:
            raise input_error(w, "controller.sample_time_s", "set (the simulation runs the sampled "
                              "controller; use a short sample time to stand in for an analog build)", None)
        drive = controller.drive if drive is None else drive
        if drive != controller.drive:
            raise input_error(w, "drive", f"the controller's drive {controller.drive!r}", drive)
    drive = check_choice(w, "drive", "current" if drive is None else drive, DRIVES)
    tau = check_non_negative(w, "loop_delay_s", loop_delay_s)
    lo, hi = table.range_m
    if not lo < sc.s0_m < hi:
        raise ContactError(f"{w}: scenario.s0_m must be inside the force table ({lo:g}, {hi:g}) m; "
                           f"got {sc.s0_m:g}.")
    return drive, tau


def simulate(params: PlantParameters, table: ForceTable, controller: ControllerDesign | None,
             scenario: Scenario = Scenario(), *, drive: str | None = None, sensor: Sensor | None = None,
             loop_delay_s: float = 0.0, rtol: float = 1e-9) -> SimulationResult:
    """Nonlinear time simulation with the force table, saturations, sampling and delay.

    Parameters
    ----------
    params : PlantParameters
    table : ForceTable
        The real force ``F0(s) + I Fk(s)``; gravity ``-m g`` is added here.
    controller : ControllerDesign or None
        A sampled design (``sample_time_s`` set): the controller runs at its sample time with a
        zero-order hold. ``None``: the coil is off (zero current, or zero voltage).
    scenario : Scenario
    drive : {"voltage", "current"} or None
        Defaults to the controller's drive ("current" with the coil off).
    sensor : Sensor or None
        Defaults to :func:`fields.control.plant.linear_sensor` without a range clip.
    loop_delay_s : float
        The command computed at sample ``t_k`` is applied at ``t_k + loop_delay_s`` (exact).
    rtol : float
        ``solve_ivp`` relative tolerance (RK45).

    Returns
    -------
    SimulationResult

    Notes
    -----
    Each hold interval is integrated by ``scipy.integrate.solve_ivp`` with terminal events at the
    table ends; the dynamics are :class:`AxisDynamics`. The sensor sees the current just before
    each sample (the new command is not yet applied). No anti-windup.
    """
    sc = scenario
    drive, tau = _check_simulate(controller, drive, loop_delay_s, table, sc)
    sensor = linear_sensor(params) if sensor is None else sensor
    coil_on = controller is not None
    dyn = AxisDynamics(params, table, drive, controller.current_loop_gain_V_per_A if coil_on else 0.0, coil_on)
    i0 = params.hover_current_A
    T = controller.sample_time_s if coil_on else None
    t_end = sc.t_end_s
    dt_out = sc.output_step_s if sc.output_step_s is not None else (T if T is not None else t_end / 1000)
    groups, tol_t = _schedule(sc, T, tau)
    times_out = np.arange(0.0, t_end + 0.5 * dt_out, dt_out)
    ic = sc.initial_current_A
    if ic is None:
        ic = i0 if coil_on else 0.0
    X = np.array([sc.s0_m, sc.v0_m_per_s] + ([ic] if drive == "voltage" else []), dtype=float)
    run = _Run(params, sc, dyn, DigitalController(controller, 1) if coil_on else None, sensor, X,
               np.array([i0 if coil_on else 0.0]))
    events = table_events(*table.range_m)
    atol = np.array([1e-12, 1e-10] + ([1e-10] if drive == "voltage" else []))
    for gi, (tg, kinds) in enumerate(groups):
        for kind in kinds:
            run.act(kind)
        t_next = groups[gi + 1][0] if gi + 1 < len(groups) else t_end
        run.record(tg, run.X)
        if t_next <= tg + tol_t:
            continue
        if _hold_interval(run, tg, t_next, times_out, tol_t, events, atol, rtol):
            break
    else:
        run.record(t_end, run.X)
    return _result(run, dyn, sensor, drive)


def _result(run: _Run, dyn: AxisDynamics, sensor: Sensor, drive: str) -> SimulationResult:
    t_arr = np.array(run.rec_t)
    Xa = np.array(run.rec_X).T
    held_a = np.array(run.rec_held)
    order = np.argsort(t_arr, kind="stable")
    t_arr, Xa, held_a = t_arr[order], Xa[:, order], held_a[order]
    I, V, _ = dyn.current_and_voltage(Xa, held_a)
    y = sensor(Xa[0], I)
    return SimulationResult(time_s=t_arr, s_m=Xa[0], v_m_per_s=Xa[1], current_A=np.asarray(I, float),
                            voltage_V=np.asarray(V, float), signal=np.asarray(y, float), command_A=held_a,
                            events=tuple(run.events), signal_unit=sensor.unit, drive=drive)


# --------------------------------------------------------------------------------------------
# Batch integration (many starts at once, fixed-step RK4)
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class BatchEnd:
    """End states of a batch of runs.

    Attributes
    ----------
    s_m, v_m_per_s : ndarray, shape (n,)
        Final position and velocity (at the exit for runs that left the table).
    exit_side : ndarray of int, shape (n,)
        0 stayed on the table, -1 left at the low end, +1 at the high end.
    step_s : float
        RK4 step.
    """

    s_m: np.ndarray
    v_m_per_s: np.ndarray
    exit_side: np.ndarray
    step_s: float


def rk4_substeps(params: PlantParameters, table: ForceTable, controller: ControllerDesign,
                 drive: str) -> tuple[int, float]:
    """RK4 sub-steps per sample ``M`` and step ``h = T/M``: ``h lambda_max <= 0.2``, ``M >= 2``.

    ``lambda_max`` is the largest plant eigenvalue magnitude (current loop included), or
    ``sqrt(max|k_s|/m)`` over the table, whichever is larger.
    """
    T = controller.sample_time_s
    A = (current_loop_matrices(params, controller.current_loop_gain_V_per_A)[0]
         if drive == "voltage" else plant_matrices(params, "current")[0])
    lam = float(np.max(np.abs(np.linalg.eigvals(A))))
    s = np.linspace(*table.range_m, 201)
    kmax = float(np.max(np.abs(table.stiffness_N_per_m(s, params.max_current_A)))
                 + np.max(np.abs(table.stiffness_N_per_m(s, 0.0))))
    lam = max(lam, math.sqrt(kmax / params.mass_kg))
    m = max(2, int(math.ceil(T * lam / RK4_STEP_BOUND)))
    return m, T / m


def run_batch(params: PlantParameters, table: ForceTable, controller: ControllerDesign, sensor: Sensor,
              s0_m: np.ndarray, v0_m_per_s: np.ndarray, t_end_s: float, loop_delay_s: float) -> BatchEnd:
    """Closed-loop runs from n starts at once by classical fixed-step RK4 (vectorised).

    The sampled controller runs at its period ``T`` with :func:`rk4_substeps` steps per
    sample; the delay is rounded to whole steps; a run stops where it leaves the table.
    """
    drive = controller.drive
    n = s0_m.size
    dyn = AxisDynamics(params, table, drive, controller.current_loop_gain_V_per_A, True)
    i0 = params.hover_current_A
    M, h = rk4_substeps(params, table, controller, drive)
    nsamp = int(math.ceil(t_end_s / controller.sample_time_s - 1e-9))
    d_sub = int(round(loop_delay_s / h))
    X = np.vstack([s0_m, v0_m_per_s] + ([np.full(n, i0)] if drive == "voltage" else []))
    alive = np.ones(n, dtype=bool)
    side = np.zeros(n, dtype=int)
    held = np.full(n, i0)
    ctrl = DigitalController(controller, n)
    y_ref = sensor(np.zeros(n), np.full(n, i0))
    queue: deque = deque()
    lo, hi = table.range_m
    mass = params.mass_kg
    step = 0
    for _ in range(nsamp):
        I, _, _ = dyn.current_and_voltage(X, held)
        queue.append((step + d_sub, i0 - ctrl.step(sensor(X[0], I) - y_ref)))
        for _ in range(M):
            while queue and queue[0][0] <= step:
                held = queue.popleft()[1]
            k1 = dyn.rhs(X, held, mass, 0.0)
            k2 = dyn.rhs(X + 0.5 * h * k1, held, mass, 0.0)
            k3 = dyn.rhs(X + 0.5 * h * k2, held, mass, 0.0)
            k4 = dyn.rhs(X + h * k3, held, mass, 0.0)
            X = np.where(alive[None, :], X + (h / 6.0) * (k1 + 2 * k2 + 2 * k3 + k4), X)
            out_lo = alive & (X[0] <= lo)
            out_hi = alive & (X[0] >= hi)
            side[out_lo] = -1
            side[out_hi] = 1
            alive &= ~(out_lo | out_hi)
            step += 1
        if not alive.any():
            break
    return BatchEnd(s_m=X[0], v_m_per_s=X[1], exit_side=side, step_s=h)
