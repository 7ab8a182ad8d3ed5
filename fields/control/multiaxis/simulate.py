"""Nonlinear closed-loop simulation of the floater in all its free axes.

Force model
    :mod:`fields.control.multiaxis.force_model` (a cubic fit of the force engine and the sensors
    over a pose box around the equilibrium).
Rigid body
    ``M q'' = W(q, i) - W(0, I0)`` on the free axes (the equilibrium balances gravity, so the
    force change drives the motion); rotations are small rotations about world axes through the
    centre of mass integrated as ``theta' = omega`` with the inertia tensor of the equilibrium
    pose, gyroscopic terms neglected (small-angle model). Axes that are not free are held.
Coils
    ``L i' = V - R i - (dW/dI)^T q'`` with the back-EMF from the pose-dependent bases
    (reciprocity), ``L`` constant (the plant's matrix), ``R`` the hot or cold resistance.
    Voltage drive: ``V = clip(V0 + u, +-supply)``, with the driver's current limit (a coil at
    its max current gets the voltage that holds it there). Analog current loop: ``V = clip(R0 i_cmd +
    Kc (i_cmd - i), +-supply)`` with ``i_cmd = clip(I0 + u, +-max current)``. Ideal current
    drive: ``i = clip(I0 + u, +-max current)``.
Digital controller
    Sensors (Hall readings clipped at their range) are sampled every ``T``; the coil cross-talk
    is subtracted with the measured currents; the regulator's output computed from samples up
    to ``t_k`` is applied from ``t_{k+1}`` through a zero-order hold; the LQG predictor is fed
    the applied (saturated) input. Between samples, fixed-step fourth-order Runge-Kutta.
Start
    The floater is released at rest at a pose deviation, the coils at their bias. With
    ``start="measured"`` the controller's state is started from measurements instead of from
    the equilibrium (a predictor started at zero sees the whole offset as a surprise and its
    velocity estimate, and so the command, jumps): the LQG predictor keeps the drive at its
    bias for a short open-loop window of ``N`` samples (the fewest for which the sensor and
    coil-current rows over the window determine its design state, plus one), then takes the
    least-squares state on its own model over the window, predicted one sample ahead
    (deadbeat/least-squares initialisation of an observer; e.g. Franklin, Powell & Workman,
    Digital Control of Dynamic Systems, 3rd ed., 1998, sec. 8.2 and the observability matrix of
    sec. 4.3); the mode-space PD starts bumpless, its filter states as if the first reading had
    always been there (no derivative kick).

Index letters: ``t`` time samples, ``n`` free axes, ``k`` coils, ``s`` sensors, ``p`` poses.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from fields.analysis import AXES
from fields.control.multiaxis.design import Regulator
from fields.control.multiaxis.force_model import ForceModel
from fields.control.multiaxis.plant import MultiaxisPlant, jsonable
from fields.control.multiaxis.structure import StructureReport
from fields.model.design import Design, HallSensor

#: deviations below settle_share of these count as settled whatever the start (0.1 mm, 0.1 deg:
#: a design scale, not physics)
SETTLE_FLOOR_M = 1e-4
SETTLE_FLOOR_RAD = math.radians(0.1)
#: a controlled motion whose last-quarter peak exceeds this multiple of the third quarter's grows
GROWTH_LIMIT = 1.2
#: share of the max current at which the digital current limit of a voltage drive acts
CURRENT_LIMIT_SHARE = 0.98


@dataclass(frozen=True, eq=False)
class MultiaxisSimulation:
    """A nonlinear closed-loop run.

    Attributes
    ----------
    t_s : ndarray, shape (t,)
        Sample instants.
    q : ndarray, shape (t, n)
        Pose deviations of the free axes (m, rad).
    currents_A, voltages_V : ndarray, shape (t, k)
    outputs : ndarray, shape (t, s)
        Sensor outputs in their units (clipped at the range).
    held : bool
        Stayed inside the modelled box and the controlled motion settled or, excited by modes
        left open, stayed bounded without growing (see ``settled``).
    converged_axes : dict
        Per controlled axis (1 % or more of a controlled mode's kinetic energy): the deviation
        over the last 5 % of the run is below ``settle_share`` of its largest value. Axes left
        open are not judged (see ``max_deviation``).
    final_deviation : ndarray, shape (n,)
    max_deviation : ndarray, shape (n,)
    saturated_share : float
        Share of samples with any drive at its voltage or current limit.
    peak_current_A : ndarray, shape (k,)
    events : tuple of str
    force_model_error : dict
    settled : bool
        Held, and the controlled modes and axes decayed below ``settle_share`` of their largest
        excursion (or of 0.1 mm / 0.1 deg) by the end of the run.
    left_box_axes : tuple of str
        The axes on which the floater left the force model's box (the run stops there).
    """

    t_s: np.ndarray
    q: np.ndarray
    currents_A: np.ndarray
    voltages_V: np.ndarray
    outputs: np.ndarray
    held: bool
    converged_axes: dict
    final_deviation: np.ndarray
    max_deviation: np.ndarray
    saturated_share: float
    peak_current_A: np.ndarray
    events: tuple[str, ...] = field(default_factory=tuple)
    force_model_error: dict = field(default_factory=dict)
    settled: bool = False
    left_box_axes: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return jsonable({k: getattr(self, k) for k in self.__dataclass_fields__ if k not in ("q", "currents_A",
                                                                                              "voltages_V", "outputs", "t_s")})

    def rows(self, free_axes, coil_names) -> tuple[list[str], list[list]]:
        """CSV-friendly time series: header and rows."""
        from fields.control.multiaxis.plant import AXIS_UNITS

        head = ["t_s"] + [f"{a}_{AXIS_UNITS[a][0]}" for a in free_axes] + [f"i_{c}_A" for c in coil_names] + \
            [f"V_{c}_V" for c in coil_names]
        return head, [[t, *q, *i, *v] for t, q, i, v in zip(self.t_s, self.q, self.currents_A, self.voltages_V)]


def default_start(plant: MultiaxisPlant, report: StructureReport, regulator: Regulator | None = None,
                  share: float = 0.3, headroom_share: float = 0.5, horizon_s: float = 0.5) -> np.ndarray:
    """A start deviation (n,) inside what the drive can hold.

    Each controlled unstable or neutral mode is displaced by ``share`` of its reference motion;
    with a regulator, the whole start is then scaled so that the linear discrete closed loop from
    it (over ``horizon_s``) needs at most ``headroom_share`` of the voltage or current headroom.
    """
    q0 = np.zeros(plant.n_axes)
    for m in report.modes:
        if m.name in report.controlled and m.kind in ("unstable", "neutral"):
            q0 += share * m.reference_amplitude * m.shape
    if regulator is None or regulator.dt <= 0 or not np.any(q0):
        return q0
    from fields.control.multiaxis.design import compensated_output, zoh

    T = regulator.dt
    Ad, Bd = zoh(plant.A, plant.B, T)
    C, _ = compensated_output(plant)
    n, k = plant.n_axes, plant.n_coils
    x = np.zeros(plant.A.shape[0])
    x[:n] = q0
    xi = np.zeros(regulator.ss.nstates)
    peak_u = np.zeros(k)
    peak_i = np.zeros(k)
    for _ in range(int(horizon_s / T)):
        u = regulator.ss.C @ xi
        peak_u = np.maximum(peak_u, np.abs(u))
        if plant.drive != "current":
            peak_i = np.maximum(peak_i, np.abs(x[2 * n:]))
        else:
            peak_i = np.maximum(peak_i, np.abs(u))
        xi = regulator.ss.A @ xi + regulator.ss.B @ (C @ x)
        x = Ad @ x + Bd @ u
    hi = plant.max_current_A - np.abs(plant.bias_currents_A)
    ratios = [float(np.max(peak_i / hi))]
    if plant.drive == "voltage":
        ratios.append(float(np.max(peak_u / (plant.supply_voltage_V - np.abs(plant.bias_voltages_V)))))
    worst = max(ratios)
    return q0 * min(1.0, headroom_share / worst) if worst > 0 else q0


def window_samples(plant: MultiaxisPlant, regulator: Regulator) -> int:
    """Samples of the open-loop window of the "measured" LQG start (module docstring): the
    fewest for which the stacked sensor and current rows over the window have full rank, at
    least 2, plus one for margin."""
    Ad, _, C = regulator.estimator_model
    k = plant.n_coils
    ne = Ad.shape[0]
    E = np.zeros((k, ne))
    E[:, ne - k:] = np.eye(k) if plant.drive != "current" else np.zeros((k, k))
    rows, P = [], np.eye(ne)
    for m in range(1, 4 * ne + 2):
        rows.append(np.vstack([C, E]) @ P)
        P = Ad @ P
        sv = np.linalg.svd(np.vstack(rows), compute_uv=False)
        if m >= 2 and sv[-1] > 1e-9 * sv[0]:
            return m + 1
    raise ValueError("window_samples: the design model is not observable from the sensors and coil currents")


def _window_estimate(plant: MultiaxisPlant, regulator: Regulator, ys: list, di: list) -> np.ndarray:
    """Least-squares design state at the end of an open-loop window (deviations, no input)."""
    Ad, _, C = regulator.estimator_model
    k = plant.n_coils
    ne = Ad.shape[0]
    E = np.zeros((k, ne))
    if plant.drive != "current":
        E[:, ne - k:] = np.eye(k)
    ws = np.array([1.0 / max(s.full_scale, 1e-300) for s in plant.sensors])
    wi = 1.0 / np.maximum(plant.max_current_A, 1e-300)
    H = np.vstack([ws[:, None] * C, wi[:, None] * E])
    rows, rhs, P = [], [], np.eye(ne)
    for y, i in zip(ys, di):
        rows.append(H @ P)
        rhs.append(np.concatenate([ws * y, wi * i]))
        P = Ad @ P
    z0, *_ = np.linalg.lstsq(np.vstack(rows), np.concatenate(rhs), rcond=None)
    return P @ z0  # P = Ad^N: the prediction for the first closed-loop sample


STARTS = ("measured", "zero")


def simulate_multiaxis(plant: MultiaxisPlant, report: StructureReport, regulator: Regulator, model: ForceModel,
                       design: Design, q0=None, t_end_s: float = 1.0, corner: str = "hot",
                       settle_share: float = 0.02, start: str = "measured") -> MultiaxisSimulation:
    """Run the digital regulator against the nonlinear floater (module docstring).

    ``start`` chooses how the controller's state begins when the floater is released at ``q0``
    (at rest, coils at their bias): "measured" (default) starts it from measurements (see the
    module docstring, Start); "zero" starts it at the equilibrium, as if the floater were there.
    """
    n, k = plant.n_axes, plant.n_coils
    T = regulator.dt
    if T <= 0:
        raise ValueError("simulate_multiaxis: the regulator is not discrete (passive design: nothing to simulate)")
    if start not in STARTS:
        raise ValueError(f"simulate_multiaxis: start must be one of {STARTS}, got {start!r}")
    q0 = default_start(plant, report, regulator) if q0 is None else np.asarray(q0, float).reshape(n)
    M = plant.mass_matrix
    Minv = np.linalg.inv(M)
    I0 = plant.bias_currents_A
    R = plant.resistance_hot_ohm if corner == "hot" else plant.resistance_cold_ohm
    R0 = plant.resistance_hot_ohm
    L = plant.inductance_H
    Linv = np.linalg.inv(L) if k else np.zeros((0, 0))
    Kc = plant.current_loop_gain_V_per_A
    Vs = plant.supply_voltage_V
    imax = plant.max_current_A
    F00, T00, _, _ = model.wrench(np.zeros(n), I0)
    W0 = np.concatenate([F00, T00])
    idx = [AXES.index(a) for a in plant.free_axes]
    drive = plant.drive

    def wrench_free(q, i):
        F, Tq, Fk, Tk = model.wrench(q, i)
        W = np.concatenate([F, Tq]) - W0
        G = np.concatenate([Fk, Tk], axis=1)  # (k, 6)
        return W[idx], G[:, idx]

    def deriv(x, cmd):
        q, v = x[:n], x[n:2 * n]
        i = x[2 * n:] if drive != "current" else cmd
        W, G = wrench_free(q, i)
        dx = np.empty_like(x)
        dx[:n] = v
        dx[n:2 * n] = Minv @ W
        if drive == "voltage":
            dx[2 * n:] = _limited_rate(Linv, cmd - R * i - G @ v, i, imax)
        elif drive == "current_loop":
            V = np.clip(R0 * cmd + Kc * (cmd - i), -Vs, Vs)
            dx[2 * n:] = _limited_rate(Linv, V - R * i - G @ v, i, imax)
        return dx

    lam = np.max(np.abs(np.linalg.eigvals(plant.A))) if plant.A.size else 1.0
    sub = max(1, math.ceil(T * lam / 1.0))
    h = T / sub
    steps = round(t_end_s / T)
    x = np.concatenate([q0, np.zeros(n), I0 if drive != "current" else np.zeros(0)])
    Rg = regulator.ss
    xi = np.zeros(Rg.nstates)
    Di = plant.sensor_current_matrix
    # the reference reading is the model's own at the equilibrium, so that the fit's small
    # offset does not become a position offset
    y0 = _sensor_outputs(model, np.zeros(n), I0, design)
    comp0 = Di @ I0
    ts, qs, cs, vs, ys = [], [], [], [], []
    events = []
    sat = 0
    lost = False
    i_held = I0.copy()  # ideal current drive: the current applied over the last interval
    left_axes: tuple = ()
    lqg_window = start == "measured" and regulator.estimator_model is not None
    n_open = window_samples(plant, regulator) if lqg_window else 0
    win_y, win_i = [], []
    for step in range(steps + 1):
        q = x[:n]
        i_now = x[2 * n:] if drive != "current" else i_held
        if np.any(np.abs(q) > model.span * (1 + 1e-9)):
            left_axes = tuple(a for a, d, s in zip(plant.free_axes, q, model.span) if abs(d) > s)
            events.append(f"t = {step * T:.4g} s: the floater left the modelled box (+-span) on "
                          f"{', '.join(a for a, d, s in zip(plant.free_axes, q, model.span) if abs(d) > s)}: lost")
            lost = True
            break
        y = _sensor_outputs(model, q, np.asarray(i_now, float), design)
        ycomp = (y - Di @ np.asarray(i_now, float)) - (y0 - comp0)
        if step == 0 and start == "measured" and not lqg_window and Rg.nstates:
            # bumpless start: the filter states as if this first reading had always been there
            xi = np.linalg.solve(np.eye(Rg.nstates) - Rg.A, Rg.B @ ycomp)
        if step < n_open:
            win_y.append(ycomp)
            win_i.append(np.asarray(i_now, float) - I0)
        elif lqg_window and step == n_open:
            xi = _window_estimate(plant, regulator, win_y, win_i)
        u_cmd = Rg.C @ xi if step >= n_open else np.zeros(k)
        if drive == "voltage":
            V = np.clip(plant.bias_voltages_V + u_cmd, -Vs, Vs)
            # the driver's current limit, sample by sample: a coil near its limit that the command
            # would push further gets the voltage that holds its current (the predictor is told)
            i_arr = np.asarray(i_now, float)
            near = (np.abs(i_arr) >= CURRENT_LIMIT_SHARE * imax) & (np.sign(V - R0 * i_arr) == np.sign(i_arr))
            V = np.where(near, R0 * i_arr, V)
            applied = V - plant.bias_voltages_V
            cmd = V
            hit = np.any(np.abs(V) >= Vs * (1 - 1e-12)) or np.any(np.abs(i_now) >= imax * (1 - 1e-9))
        else:
            ic = np.clip(I0 + u_cmd, -imax, imax)
            applied = ic - I0
            cmd = ic
            hit = np.any(np.abs(ic) >= imax * (1 - 1e-12))
        sat += int(hit)
        ts.append(step * T)
        qs.append(q.copy())
        cs.append(np.asarray(i_now, float).copy())
        vs.append(cmd.copy() if drive == "voltage" else np.full(k, np.nan))
        ys.append(y)
        if step >= n_open:
            xi = Rg.A @ xi + Rg.B @ ycomp + regulator.antiwindup @ (applied - u_cmd)
        for _ in range(sub):
            x = _rk4(lambda z, c=cmd: deriv(z, c), x, h)
            if drive != "current":  # the limit holds within a step too (a chopping driver)
                x[2 * n:] = np.clip(x[2 * n:], -imax, imax)
        if drive == "current":
            i_held = cmd
        if not np.all(np.isfinite(x)):
            events.append(f"t = {step * T:.4g} s: the state became non-finite: lost")
            lost = True
            break
    q_t = np.array(qs).reshape(-1, n)
    cur = np.array(cs).reshape(-1, k)
    tail = max(1, int(0.05 * len(q_t)))
    final = np.max(np.abs(q_t[-tail:]), axis=0)
    # controlled axes: at least 1 % of the kinetic energy of a controlled unstable or neutral mode
    ctrl = [m for m in report.modes if m.name in report.controlled and m.kind in ("unstable", "neutral")]
    conv = {}
    for j, a in enumerate(plant.free_axes):
        if any(m.shares[a] >= 0.01 for m in ctrl):
            conv[a] = bool(final[j] <= settle_share * max(abs(q0[j]), np.max(np.abs(q_t[:, j]))))
    eta_all = np.abs(np.array([_controlled_coordinates(plant, report, qq) for qq in q_t]).reshape(len(q_t), -1))
    eta_end = np.max(eta_all[-tail:], axis=0) if len(eta_all) else np.zeros(0)
    # settled: below settle_share of the largest excursion, or below settle_share of the floor
    # (a start on a mode left open barely moves the controlled ones, which then need no decay)
    floor = settle_share * _settle_floor(plant, report)
    big = np.max(eta_all, axis=0) if len(eta_all) else np.zeros(0)
    held = (not lost) and bool(np.all(eta_end <= np.maximum(settle_share * big, floor)))
    for j, a in enumerate(plant.free_axes):
        if a in conv and not conv[a]:
            conv[a] = bool(final[j] <= settle_share * (SETTLE_FLOOR_M if a in ("x", "y", "z") else SETTLE_FLOOR_RAD))
    settled = held and all(conv.values())
    # held: not lost and the controlled motion does not grow (the last quarter's peak within
    # GROWTH_LIMIT of the third quarter's, or below 0.1 mm / 0.1 deg) and ends inside half the box; a start that also
    # excites modes left open (undamped in the model) keeps them swinging, and the controlled
    # axes may follow that swing without ever decaying
    q3 = eta_all[len(eta_all) // 2:3 * len(eta_all) // 4]
    q4 = eta_all[3 * len(eta_all) // 4:]
    bounded = (len(q3) > 0 and len(q4) > 0
               and bool(np.all(np.max(q4, axis=0) <= np.maximum(GROWTH_LIMIT * np.max(q3, axis=0), floor / settle_share)))
               and bool(np.all(final <= 0.5 * model.span)))
    held = (not lost) and (settled or bounded)
    if sat:
        events.append(f"a drive was at its limit in {sat} of {len(ts)} samples")
    return MultiaxisSimulation(np.array(ts), q_t, cur, np.array(vs).reshape(-1, k), np.array(ys).reshape(len(ts), -1),
                               held, conv, final, np.max(np.abs(q_t), axis=0), sat / max(len(ts), 1),
                               np.max(np.abs(cur), axis=0) if len(cur) else np.zeros(k), tuple(events),
                               dict(model.relative_error), bool(settled), left_axes)


def _settle_floor(plant: MultiaxisPlant, report: StructureReport) -> np.ndarray:
    """Modal amplitude of SETTLE_FLOOR_M / SETTLE_FLOOR_RAD on each controlled mode's dominant axis."""
    names = [m for m in report.controlled if report.mode(m).kind in ("unstable", "neutral")]
    out = []
    for nm in names:
        m = report.mode(nm)
        j = plant.free_axes.index(m.dominant_axis)
        ref = SETTLE_FLOOR_M if m.dominant_axis in ("x", "y", "z") else SETTLE_FLOOR_RAD
        out.append(ref / max(abs(m.shape[j]), 1e-300))
    return np.array(out)


def _controlled_coordinates(plant: MultiaxisPlant, report: StructureReport, q: np.ndarray) -> np.ndarray:
    names = [m for m in report.controlled if report.mode(m).kind in ("unstable", "neutral")]
    if not names:
        return np.zeros(0)
    Phi = np.array([report.mode(nm).shape for nm in names])
    return Phi @ plant.mass_matrix @ q


def _sensor_outputs(model: ForceModel, q, i, design: Design) -> np.ndarray:
    """Sensor outputs from the fit (Hall clipped at its range, blocked fraction at 0..1)."""
    v = model.evaluate(q.reshape(1, -1))[0]
    out = []
    for s, (c0, w) in zip(design.sensors, model.sensor_columns):
        if isinstance(s, HallSensor):
            B = v[c0] + (v[c0 + 1:c0 + w] @ i if w > 1 else 0.0)
            B = float(np.clip(B, -s.range_T, s.range_T))
            out.append(B * s.sensitivity_V_per_T if s.sensitivity_V_per_T else B)
        else:
            f = float(np.clip(v[c0], 0.0, 1.0))
            out.append(s.output_span_V * (1 - f) if s.output_span_V else f)
    return np.array(out)


def _limited_rate(Linv: np.ndarray, w: np.ndarray, i: np.ndarray, imax: np.ndarray) -> np.ndarray:
    """Coil current rates ``Linv w`` with the driver's current limit: a coil at its limit whose
    current would grow further gets the voltage that holds it there (its rate set to zero, the
    mutual coupling to the other coils kept)."""
    di = Linv @ w
    J = (np.abs(i) >= imax) & (np.sign(di) == np.sign(i))
    if not np.any(J):
        return di
    F = ~J
    w = w.copy()
    w[J] = -np.linalg.solve(Linv[np.ix_(J, J)], Linv[np.ix_(J, F)] @ w[F]) if np.any(F) else 0.0
    di = Linv @ w
    di[J] = 0.0
    return di


def _rk4(f, x, h):
    k1 = f(x)
    k2 = f(x + 0.5 * h * k1)
    k3 = f(x + 0.5 * h * k2)
    k4 = f(x + h * k3)
    return x + h / 6 * (k1 + 2 * k2 + 2 * k3 + k4)
