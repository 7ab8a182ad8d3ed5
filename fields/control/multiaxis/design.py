"""Digital controller starting points for the multi-axis plant.

Both designs act on the modes a :class:`~fields.control.multiaxis.structure.StructureReport`
lists as controlled (controllable and observable); the others stay open-loop. They refuse
(:class:`~fields.control.multiaxis.structure.LoopNotClosable`) when an unstable mode cannot be
controlled or observed.

Sample rate
    ``f_s >= SAMPLES_PER_TIME_CONSTANT x p_max`` with ``p_max`` (1/s) the fastest unstable
    modal growth rate: 30 samples per growth time constant (inside the 20-40 common in practice,
    no source), rounded up to 1, 2 or 5 x 10^n Hz. With a crossover near 3 p this keeps the
    phase lost to one sample of computation delay plus the zero-order hold (1.5 samples) below
    about 9 degrees.

Timing
    Sensors are sampled at ``t_k``; the command computed from them is applied, through a
    zero-order hold, from ``t_{k+1}`` (one sample of computation delay). Both regulators are
    therefore strictly proper discrete systems ``y -> u``.

(a) Mode-space PD
    Sensor readings -> modal coordinates by least squares over the observed modes
    (``eta = pinv(Cq Phi) y``); each unstable or neutral controlled mode gets a PD with a
    first-order derivative filter, ``f = -(kp eta + kd s / (1 + s / w_f) eta)`` discretised by
    Tustin's rule, placing the modal poles at ``w_n = 3 p`` with damping 0.7
    (``kp = w_n^2 + lambda``, ``kd = 2 zeta w_n``); modal forces -> coil currents through the
    pseudo-inverse of the modal authority ``Phi^T G``. The currents are commands: the design
    needs a current-driven plant (ideal or analog current loop). The design is refused
    (:class:`~fields.control.multiaxis.structure.DesignRefused`) when the sensors cannot separate
    the PD modes (``rank(Cq Phi)`` below their number). When fewer independent current
    combinations act on the PD modes than there are modes the loops cannot be decoupled; the
    result says so and its closed-loop poles tell whether it still holds.
(b) LQR with a Kalman predictor (LQG)
    On the Galerkin projection of the plant onto the controlled modes (plus the coil currents):
    ZOH discretisation, ``control.dlqr`` with Bryson's rule weights (1 mm or 1 degree of each
    mode's dominant axis against the available voltage or current headroom), and
    ``control.dlqe`` for the predictor ``xh[k+1] = Ad xh + Bd u + L (y - C xh)``; the command
    ``u[k] = -K xh[k]`` uses the estimate predicted from the samples up to ``k-1``, which is the
    one-sample delay (Franklin, Powell & Workman, Digital Control of Dynamic Systems, 3rd ed.,
    1998, sec. 8.2, prediction estimator; separation principle: the closed-loop poles are those
    of ``Ad - Bd K`` and ``Ad - L C``).

The coil cross-talk in Hall readings is assumed subtracted (``y - Di i``, the coil currents
being measured by the drive), so the regulators see the compensated outputs ``Cq q``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import control
import numpy as np
from scipy.linalg import expm

from fields.control.multiaxis.plant import MultiaxisPlant, jsonable
from fields.control.multiaxis.structure import DesignRefused, LoopNotClosable, StructureReport
from fields.physics.checks import input_error

#: samples per growth time constant of the fastest unstable mode (see the module docstring)
SAMPLES_PER_TIME_CONSTANT = 30.0
#: modal PD: closed-loop natural frequency as a multiple of the growth rate, and its damping
PD_FREQUENCY_MULTIPLE = 3.0
PD_DAMPING = 0.7
#: derivative filter pole as a multiple of the modal natural frequency (capped below Nyquist)
PD_FILTER_MULTIPLE = 10.0
#: sensor noise for the Kalman predictor: this share of each sensor's full scale (a 10-bit
#: equivalent; common practice, no source)
SENSOR_NOISE_SHARE = 1e-3


@dataclass(frozen=True)
class SampleRate:
    """Chosen sample rate and the rule behind it."""

    rate_Hz: float
    period_s: float
    fastest_mode: str
    fastest_growth_rate_per_s: float
    rule: str


def choose_sample_rate(report: StructureReport, samples_per_time_constant: float = SAMPLES_PER_TIME_CONSTANT) -> SampleRate:
    """``f_s >= N p_max`` rounded up to 1, 2 or 5 x 10^n Hz (module docstring)."""
    if not report.unstable:
        raise input_error("choose_sample_rate", "report", "a plant with an unstable mode (a passive design needs "
                          "no sampling)", report.status)
    m = max(report.unstable, key=lambda x: x.growth_rate_per_s)
    need = samples_per_time_constant * m.growth_rate_per_s
    e = math.floor(math.log10(need))
    for mant in (1.0, 2.0, 5.0, 10.0):
        if mant * 10**e >= need * (1 - 1e-12):
            fs = mant * 10**e
            break
    rule = (f"f_s >= {samples_per_time_constant:g} x p_max = {need:.4g} Hz, p_max = {m.growth_rate_per_s:.4g} 1/s "
            f"({m.name}, time constant {1e3 / m.growth_rate_per_s:.3g} ms); rounded up to {fs:g} Hz "
            "(20-40 samples per growth time constant: common practice, no source)")
    return SampleRate(fs, 1.0 / fs, m.name, m.growth_rate_per_s, rule)


def zoh(A: np.ndarray, B: np.ndarray, T: float) -> tuple[np.ndarray, np.ndarray]:
    """Zero-order-hold discretisation ``(e^{AT}, int_0^T e^{As} ds B)`` by the block exponential."""
    n, m = B.shape
    E = expm(np.block([[A, B], [np.zeros((m, n + m))]]) * T)
    return E[:n, :n], E[:n, n:]


@dataclass(frozen=True, eq=False)
class Regulator:
    """A discrete regulator ``y -> u`` (strictly proper, one-sample delay built in).

    Attributes
    ----------
    kind : {"mode_pd", "lqg", "none"}
    ss : control.StateSpace or None
        ``xi[k+1] = Ac xi + Bc y``, ``u = Cc xi`` with sample time ``dt``; ``y`` the compensated
        sensor deviations, ``u`` the plant input deviations. A passive design gets a zero static
        gain (None without coils or sensors).
    antiwindup : ndarray, shape (r, k)
        ``xi[k+1] += antiwindup (u_applied - u_commanded)`` when the drive saturates (the LQG
        predictor uses the applied input; zero for the PD).
    sample_rate : SampleRate or None
    controlled_modes : tuple of str
    closed_loop_poles : ndarray of complex
        Discrete poles of the loop with the full plant (hot corner).
    closed_loop_poles_cold : ndarray of complex
    spectral_radius, spectral_radius_cold : float
        Largest ``|z|`` among the closed-loop poles that do not belong to modes left open.
    stable, stable_cold : bool
    gains : dict
        Design numbers (JSON-ready arrays).
    notes : tuple of str
    estimator_model : tuple or None
        LQG only: ``(Ad, Bd, C)`` of the design model the predictor runs on (states: the
        controlled modal coordinates, their rates, the coil currents), for starting the
        estimate from measurements (:func:`fields.control.multiaxis.simulate.simulate_multiaxis`).
    """

    kind: str
    ss: control.StateSpace | None
    antiwindup: np.ndarray
    sample_rate: SampleRate | None
    controlled_modes: tuple[str, ...]
    closed_loop_poles: np.ndarray
    closed_loop_poles_cold: np.ndarray
    spectral_radius: float
    spectral_radius_cold: float
    stable: bool
    stable_cold: bool
    gains: dict
    notes: tuple[str, ...] = field(default_factory=tuple)
    estimator_model: tuple | None = None

    @property
    def dt(self) -> float:
        return float(self.ss.dt) if self.ss is not None and self.ss.dt not in (None, True) else 0.0

    def to_dict(self) -> dict:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__ if k not in ("ss", "sample_rate", "estimator_model")}
        if self.ss is not None:
            d["A"], d["B"], d["C"], d["D"] = self.ss.A, self.ss.B, self.ss.C, self.ss.D
        d["sample_rate"] = None if self.sample_rate is None else {
            k: getattr(self.sample_rate, k) for k in self.sample_rate.__dataclass_fields__}
        return jsonable(d)


# --------------------------------------------------------------------------------- helpers


def compensated_output(plant: MultiaxisPlant) -> tuple[np.ndarray, np.ndarray]:
    """(C, D) of the plant with the coil cross-talk subtracted (the outputs a regulator sees)."""
    n = plant.n_axes
    C = plant.C.copy()
    C[:, 2 * n:] = 0.0
    return C, np.zeros_like(plant.D)


def _mode_basis(plant: MultiaxisPlant, report: StructureReport, names) -> np.ndarray:
    return np.array([report.mode(nm).shape for nm in names]).T.reshape(plant.n_axes, len(names))


def _projection(plant: MultiaxisPlant, Phi: np.ndarray, A: np.ndarray, B: np.ndarray):
    """Galerkin projection of (A, B, compensated C) onto modal coordinates [eta, eta', i]."""
    n = plant.n_axes
    ne = A.shape[0] - 2 * n
    r = Phi.shape[1]
    M = plant.mass_matrix
    T = np.zeros((A.shape[0], 2 * r + ne))
    T[:n, :r] = Phi
    T[n:2 * n, r:2 * r] = Phi
    T[2 * n:, 2 * r:] = np.eye(ne)
    Tl = np.zeros((2 * r + ne, A.shape[0]))
    Tl[:r, :n] = Phi.T @ M
    Tl[r:2 * r, n:2 * n] = Phi.T @ M
    Tl[2 * r:, 2 * n:] = np.eye(ne)
    C, _ = compensated_output(plant)
    return Tl @ A @ T, Tl @ B, C @ T


def left_open_eigenvalues(plant: MultiaxisPlant, report: StructureReport, T: float) -> np.ndarray:
    """Discrete eigenvalues ``exp(+-sqrt(-lambda) T)`` of the modes the regulators leave open."""
    z = []
    for nm in report.left_open:
        m = report.mode(nm)
        s = np.sqrt(complex(-m.eigenvalue_per_s2))
        z += [np.exp(s * T), np.exp(-s * T)]
    return np.array(z, complex)


def _closed_loop(Ad, Bd, C, reg: control.StateSpace) -> np.ndarray:
    Ac, Bc, Cc = reg.A, reg.B, reg.C
    top = np.hstack([Ad, Bd @ Cc])
    bot = np.hstack([Bc @ C, Ac])
    return np.linalg.eigvals(np.vstack([top, bot]))


def spectral_radius_outside(poles: np.ndarray, open_eigs: np.ndarray) -> float:
    """Largest |z| among ``poles`` after removing one match (within 1e-6) per open-loop eigenvalue."""
    keep = np.ones(poles.size, bool)
    used = np.zeros(open_eigs.size, bool)
    for j, z in enumerate(open_eigs):
        d = np.abs(poles - z)
        d[~keep] = np.inf
        i = int(np.argmin(d)) if d.size else -1
        if i >= 0 and d[i] < 1e-6 and not used[j]:
            keep[i] = False
            used[j] = True
    return float(np.max(np.abs(poles[keep]))) if np.any(keep) else 0.0


def _evaluate(plant, report, reg, T, kind, aw, sr, names, gains, notes, model=None) -> Regulator:
    C, _ = compensated_output(plant)
    Ad, Bd = zoh(plant.A, plant.B, T)
    Ad2, Bd2 = zoh(plant.A_cold, plant.B_cold, T)
    p = _closed_loop(Ad, Bd, C, reg)
    p2 = _closed_loop(Ad2, Bd2, C, reg)
    oe = left_open_eigenvalues(plant, report, T)
    r1, r2 = spectral_radius_outside(p, oe), spectral_radius_outside(p2, oe)
    tol = 1e-9
    return Regulator(kind, reg, aw, sr, tuple(names), p, p2, r1, r2, bool(r1 < 1 - tol), bool(r2 < 1 - tol),
                     gains, tuple(notes), model)


def _require(report: StructureReport) -> None:
    if report.status == "refused":
        raise LoopNotClosable(report)


def passive_regulator(plant: MultiaxisPlant, report: StructureReport) -> Regulator:
    """The 'no control' result of a passive design: zero gain, open-loop poles (not a failure)."""
    k, s = plant.n_coils, len(plant.sensors)
    reg = control.ss(np.zeros((0, 0)), np.zeros((0, s)), np.zeros((k, 0)), np.zeros((k, s)), True) if k and s else None
    poles = plant.poles_rad_per_s
    return Regulator("none", reg, np.zeros((0, k)), None, (), poles, np.linalg.eigvals(plant.A_cold), 0.0, 0.0,
                     True, True, {}, ("passive design: every mode is stable or neutral; no control is needed",))


# ------------------------------------------------------------------------------- (a) mode PD


def design_mode_pd(plant: MultiaxisPlant, report: StructureReport, sample_rate: SampleRate | None = None,
                   frequency_multiple: float = PD_FREQUENCY_MULTIPLE, damping: float = PD_DAMPING) -> Regulator:
    """Decoupled per-mode PD through the allocation matrix (module docstring, (a))."""
    _require(report)
    if report.status == "passive":
        return passive_regulator(plant, report)
    if plant.drive == "voltage":
        raise input_error("design_mode_pd", "plant.drive", "'current' or 'current_loop' (the mode-space PD "
                          "commands coil currents)", plant.drive)
    sr = sample_rate or choose_sample_rate(report)
    T = sr.period_s
    pd_modes = [m for m in report.modes if m.name in report.controlled and m.kind in ("unstable", "neutral")]
    obs_modes = [m for m in report.modes if m.observable]
    names = [m.name for m in pd_modes]
    Phi_pd = _mode_basis(plant, report, names)
    Cq = plant.sensor_pose_matrix
    notes = []
    # modal estimate: least squares over every observed mode if the sensors separate them
    Phi_obs = _mode_basis(plant, report, [m.name for m in obs_modes])
    def rank(X):
        sv = np.linalg.svd(X, compute_uv=False)
        return int(np.sum(sv > 1e-9 * sv[0])) if sv.size and sv[0] > 0 else 0

    if rank(Cq @ Phi_obs) == len(obs_modes):
        E = np.linalg.pinv(Cq @ Phi_obs)[[obs_modes.index(m) for m in pd_modes]]
    elif rank(Cq @ Phi_pd) == len(pd_modes):
        E = np.linalg.pinv(Cq @ Phi_pd)
        notes.append("the sensors cannot separate every observed mode; the modal estimate uses the PD modes only")
    else:
        raise DesignRefused(
            f"mode-space PD: the {Cq.shape[0]} sensor signal(s) cannot separate the {len(pd_modes)} modes that need "
            f"a PD ({', '.join(names)}; rank {rank(Cq @ Phi_pd)}): a static modal estimate is impossible; use "
            "design_lqg (its observer reconstructs the modes from the dynamics) or add sensors")
    Bm = Phi_pd.T @ plant.allocation  # (r, k) modal acceleration per ampere
    arank = rank(Bm)
    decoupled = arank == len(pd_modes)
    if not decoupled:
        notes.append(f"not decoupled: the coils give {arank} independent modal force combinations for "
                     f"{len(pd_modes)} PD modes; the pseudo-inverse couples them (see the closed-loop poles)")
    Alloc = np.linalg.pinv(Bm)
    rates = [m.growth_rate_per_s for m in pd_modes if m.kind == "unstable"]
    wmin = frequency_multiple * min(rates)
    blocks = []
    kp_l, kd_l, wn_l, wf_l = [], [], [], []
    for m in pd_modes:
        wn = frequency_multiple * m.growth_rate_per_s if m.kind == "unstable" else wmin
        kp = wn * wn + m.eigenvalue_per_s2
        kd = 2 * damping * wn
        wf = min(PD_FILTER_MULTIPLE * wn, 0.5 * math.pi / T)
        c = control.c2d(control.tf([kd + kp / wf, kp], [1 / wf, 1]), T, method="tustin")
        blocks.append(control.ss(c))
        kp_l.append(kp)
        kd_l.append(kd)
        wn_l.append(wn)
        wf_l.append(wf)
    pd = blocks[0]
    for b in blocks[1:]:
        pd = control.append(pd, b)
    # y -> eta (static E) -> PD -> modal force -> currents (-Alloc) -> one-sample delay
    core = control.ss(pd.A, pd.B @ E, -Alloc @ pd.C, -Alloc @ pd.D @ E, T)
    k = plant.n_coils
    delay = control.ss(np.zeros((k, k)), np.eye(k), np.eye(k), np.zeros((k, k)), T)
    reg = control.series(core, delay)
    reg = control.ss(reg.A, reg.B, reg.C, np.zeros_like(reg.D), T)
    gains = {"modes": names, "kp_per_s2": kp_l, "kd_per_s": kd_l, "natural_frequency_rad_per_s": wn_l,
             "derivative_filter_rad_per_s": wf_l, "modal_estimator": E, "allocation_A_per_modal_force": -Alloc,
             "modal_authority": Bm, "decoupled": decoupled, "authority_rank": arank}
    notes.append(f"modal poles at {frequency_multiple:g} x the growth rate, damping {damping:g}; derivative filter "
                 f"at {PD_FILTER_MULTIPLE:g} x (capped at a quarter of the sample rate)")
    return _evaluate(plant, report, reg, T, "mode_pd", np.zeros((reg.nstates, k)), sr, names, gains, notes)


# ---------------------------------------------------------------------------------- (b) LQG


def _headroom(plant: MultiaxisPlant) -> np.ndarray:
    if plant.drive == "voltage":
        h = plant.supply_voltage_V - np.abs(plant.bias_voltages_V)
    else:
        h = plant.max_current_A - np.abs(plant.bias_currents_A)
    if np.any(h <= 0):
        bad = int(np.flatnonzero(h <= 0)[0])
        raise input_error("design_lqg", f"coil {plant.coil_names[bad]}", "left with drive headroom at the "
                          "equilibrium (bias below the limit)", float(h[bad]))
    return h


def design_lqg(plant: MultiaxisPlant, report: StructureReport, sample_rate: SampleRate | None = None,
               control_weight: float = 1.0, observer_noise_share: float = SENSOR_NOISE_SHARE,
               current_weight: float = 0.0) -> Regulator:
    """LQR on the controlled modes with a Kalman predictor (module docstring, (b)).

    Parameters
    ----------
    plant : MultiaxisPlant
    report : StructureReport
    sample_rate : SampleRate, optional
        Default :func:`choose_sample_rate`.
    control_weight : float
        Multiplies the input weight of Bryson's rule (larger: gentler, slower).
    current_weight : float
        Multiplies Bryson's weight ``1/(current headroom)^2`` on the coil-current states of a
        voltage-driven plant (default 0: currents free as long as the voltage allows; a weight
        trades stability margin for gentler currents without extending the capture, since the
        drive's current limit is simulated anyway).
    observer_noise_share : float
        Sensor noise standard deviation as a share of each sensor's full scale.
    """
    _require(report)
    if report.status == "passive":
        return passive_regulator(plant, report)
    sr = sample_rate or choose_sample_rate(report)
    T = sr.period_s
    names = list(report.controlled)
    modes = [report.mode(nm) for nm in names]
    Phi = _mode_basis(plant, report, names)
    Ar, Br, Cr = _projection(plant, Phi, plant.A, plant.B)
    Ad, Bd = zoh(Ar, Br, T)
    r = len(names)
    ne = Ar.shape[0] - 2 * r
    qd = np.zeros(Ar.shape[0])
    qd[:r] = [1.0 / m.reference_amplitude**2 for m in modes]
    if ne:  # coil currents are states (voltage drive): Bryson's weight on their headroom too
        qd[2 * r:] = current_weight / np.maximum(plant.max_current_A - np.abs(plant.bias_currents_A), 1e-300) ** 2
    Q = np.diag(qd)
    R = np.diag(control_weight / _headroom(plant) ** 2)
    K, _, _ = control.dlqr(Ad, Bd, Q, R)
    # process noise: a modal force of the size of the fastest mode's instability at each mode's reference motion,
    # entering on the modal velocities; sensor noise: a share of each sensor's full scale
    Gw = np.zeros((Ar.shape[0], r))
    Gw[r:2 * r] = np.eye(r) * T
    pmax = sr.fastest_growth_rate_per_s
    w = np.array([max(abs(m.eigenvalue_per_s2), pmax**2) * m.reference_amplitude for m in modes])
    QN = np.diag(w**2)
    RN = np.diag([(observer_noise_share * s.full_scale) ** 2 for s in plant.sensors])
    L, _, _ = control.dlqe(Ad, Gw, Cr, QN, RN)
    Ac = Ad - Bd @ K - L @ Cr
    reg = control.ss(Ac, L, -K, np.zeros((plant.n_coils, len(plant.sensors))), T)
    sep = np.concatenate([np.linalg.eigvals(Ad - Bd @ K), np.linalg.eigvals(Ad - L @ Cr)])
    gains = {"modes": names, "K": K, "L": L, "Q_diagonal": qd, "R_diagonal": np.diag(R), "process_noise_diagonal": w**2,
             "sensor_noise_diagonal": np.diag(RN), "regulator_poles": np.linalg.eigvals(Ad - Bd @ K),
             "estimator_poles": np.linalg.eigvals(Ad - L @ Cr), "separation_poles": sep,
             "design_states": 2 * r + ne}
    notes = [(f"LQR weights (Bryson): 1/(reference motion)^2 on each controlled mode (1 mm or 1 degree of its dominant "
             f"axis), 1/(headroom)^2 x {control_weight:g} on each input"
             + (f", 1/(current headroom)^2 x {current_weight:g} on each coil current" if ne and current_weight else "")),
             (f"Kalman predictor: sensor noise {observer_noise_share:g} of full scale; modal force noise p_max^2 x (reference "
             "motion) on each controlled mode")]
    return _evaluate(plant, report, reg, T, "lqg", Bd.copy(), sr, names, gains, notes, (Ad, Bd, Cr))
