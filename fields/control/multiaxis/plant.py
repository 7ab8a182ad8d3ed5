"""Linear plant of a levitated floater over all its free axes, linearised at an equilibrium.

Model (n free axes, k coils, s sensors; SI; deviations from the equilibrium)::

    M q'' = -K q + G i                       rigid body, q = displacements of the centre of mass
                                             and rotations about it (world axes)
    L i'  = u - R i - G^T q'                 voltage drive (u = coil voltage deviation)
    L i'  = (R0 + Kc) u - (R + Kc) i - G^T q'   analog current loop, u = current command
    i     = u                                ideal current drive
    y     = Cq q + Di i                      sensors

- ``M``: mass on the translations, the inertia tensor about the centre of mass on the rotations
  (:func:`fields.analysis.mass_matrix`); ``K = -d(F, T)/dq`` at the bias currents
  (:func:`fields.analysis.stiffness_matrix`); ``G = d(F, T)/dI`` at the pose
  (:func:`fields.analysis.allocation_matrix`), rows of the free axes.
- Back-EMF by reciprocity: with the co-energy ``W'(q, I)``, ``F = dW'/dq`` and the flux linkage
  ``lambda = dW'/dI``, so ``d lambda_k / d q_j = dF_j / dI_k = G[j, k]`` and the motional EMF is
  ``G^T q'`` (Woodson & Melcher, Electromechanical Dynamics, Part I, 1968, ch. 3). It contains the
  ``I0 dL/dq`` term of a gap-dependent inductance.
- ``L``: the inductance matrix with mutual terms (air-core formulas of
  :mod:`fields.devices.coil`; a core adds its unsaturated share at the operating gap, an
  approximation: real iron raises ``L`` and makes it depend on gap and current).
- ``R``: the hot resistance at the coil's steady temperature for its bias current (and an
  optional r.m.s. control current) from the lumped heat model of :mod:`fields.devices.coil`;
  the cold corner uses ``min(20 C, ambient)``. The analog current loop of bandwidth ``w_c`` has
  per-coil proportional gain ``Kc_k = w_c L_kk - R0_k`` and feed-forward ``R0`` (the hot value),
  so at the hot corner its DC gain is one (common practice, no source).
- Sensors are linearised in pose by central differences (steps h and 2h, Richardson
  extrapolation; the error bar is ``|R - D_h|``) and exactly in the currents (linear field).

Index letters: ``n`` free axes, ``k`` coils, ``s`` sensors, ``x`` states.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import control
import numpy as np

from fields.analysis import (
    AXES,
    STEP_ANGLE_RAD,
    STEP_LENGTH_M,
    allocation_matrix,
    displace,
    mass_matrix,
    stiffness_matrix,
)
from fields.control.multiaxis.outputs import (
    hall_parts,
    sensor_label,
    sensor_readings,
    sensor_scale,
    sensor_unit,
)
from fields.devices.inductance import mutual_inductance_matrix
from fields.devices.winding import resistance_and_cooling, steady_temperature_C
from fields.errors import SolverError
from fields.input.tables import COPPER_ALPHA_20C_PER_K
from fields.model.design import Design, HallSensor
from fields.physics.checks import input_error
from fields.physics.wrench import wrench_basis

DRIVES = ("voltage", "current_loop", "current")

#: units of a generalized coordinate, its velocity and its force, per axis
AXIS_UNITS = {a: ("m", "m_per_s", "N") if a in ("x", "y", "z") else ("rad", "rad_per_s", "Nm") for a in AXES}


def jsonable(v):
    """Arrays to lists, non-finite floats to None, complex to [re, im] (JSON-ready)."""
    if isinstance(v, np.ndarray):
        return jsonable(v.tolist())
    if isinstance(v, (list, tuple)):
        return [jsonable(x) for x in v]
    if isinstance(v, dict):
        return {str(k): jsonable(x) for k, x in v.items()}
    if isinstance(v, (complex, np.complexfloating)):
        return [jsonable(float(v.real)), jsonable(float(v.imag))]
    if isinstance(v, (float, np.floating)):
        return float(v) if math.isfinite(v) else None
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, np.bool_):
        return bool(v)
    return v


@dataclass(frozen=True)
class SensorModel:
    """One sensor linearised at the equilibrium.

    Attributes
    ----------
    name, kind, unit, label : str
        ``label`` is the output name with unit.
    reading : float
        Output at the equilibrium (unit).
    pose_gain : ndarray, shape (n,)
        d(output)/dq per free axis (unit per m or per rad).
    pose_gain_error : ndarray, shape (n,)
        Richardson error bar of ``pose_gain``.
    current_gain : ndarray, shape (k,)
        d(output)/dI per coil (cross-talk; zero for a beam gate).
    full_scale : float
        Output spanning the sensor's range (unit).
    worst_reading : float
        Largest |output| at the equilibrium pose with every coil at +-max current (worst sign).
    in_range : bool
        The equilibrium reading is inside the range (a sensor outside it gives no signal).
    notes : tuple of str
    """

    name: str
    kind: str
    unit: str
    label: str
    reading: float
    pose_gain: np.ndarray
    pose_gain_error: np.ndarray
    current_gain: np.ndarray
    full_scale: float
    worst_reading: float
    in_range: bool
    notes: tuple[str, ...] = ()


@dataclass(frozen=True, eq=False)
class MultiaxisPlant:
    """Linear plant over the free axes (see the module docstring for the model).

    Attributes
    ----------
    design_name : str
    free_axes : tuple of str
    drive : {"voltage", "current_loop", "current"}
    current_loop_bandwidth_rad_per_s : float or None
    position_m, rotvec_rad : ndarray, shape (3,)
        Equilibrium pose of the floater frame.
    bias_currents_A, bias_voltages_V : ndarray, shape (k,)
        Currents at the equilibrium and ``R_hot I0``.
    coil_names : tuple of str
    max_current_A : ndarray, shape (k,)
    supply_voltage_V : float
    mass_matrix : ndarray, shape (n, n)
    stiffness : ndarray, shape (n, n)
    stiffness_error : ndarray, shape (n, n)
    allocation : ndarray, shape (n, k)
        ``G``: force (N/A) / torque (N m/A) per ampere on the free axes.
    allocation_error : ndarray, shape (n, k)
        ``|G_standard - G_high|`` (two quadrature levels).
    allocation_all_axes : ndarray, shape (6, k)
    inductance_H : ndarray, shape (k, k)
    resistance_hot_ohm, resistance_cold_ohm, temperature_hot_C : ndarray, shape (k,)
    temperature_cold_C : float
    current_loop_gain_V_per_A : ndarray, shape (k,)
        ``Kc`` of the analog current loop (empty unless ``drive == "current_loop"``).
    sensors : tuple of SensorModel
    A, B, C, D : ndarray
        At the hot corner; ``A_cold``, ``B_cold`` at the cold corner (``C``, ``D`` do not change).
    state_names, input_names, output_names : tuple of str
    ss, ss_cold : control.StateSpace or None
        None without coils or sensors (python-control holds no system without inputs/outputs).
    poles_rad_per_s : ndarray of complex
        Of ``A``, sorted by decreasing real part.
    notes : tuple of str
    """

    design_name: str
    free_axes: tuple[str, ...]
    drive: str
    current_loop_bandwidth_rad_per_s: float | None
    position_m: np.ndarray
    rotvec_rad: np.ndarray
    bias_currents_A: np.ndarray
    bias_voltages_V: np.ndarray
    coil_names: tuple[str, ...]
    max_current_A: np.ndarray
    supply_voltage_V: float
    mass_matrix: np.ndarray
    stiffness: np.ndarray
    stiffness_error: np.ndarray
    allocation: np.ndarray
    allocation_error: np.ndarray
    allocation_all_axes: np.ndarray
    inductance_H: np.ndarray
    resistance_hot_ohm: np.ndarray
    resistance_cold_ohm: np.ndarray
    temperature_hot_C: np.ndarray
    temperature_cold_C: float
    current_loop_gain_V_per_A: np.ndarray
    sensors: tuple[SensorModel, ...]
    A: np.ndarray
    B: np.ndarray
    C: np.ndarray
    D: np.ndarray
    A_cold: np.ndarray
    B_cold: np.ndarray
    state_names: tuple[str, ...]
    input_names: tuple[str, ...]
    output_names: tuple[str, ...]
    ss: control.StateSpace | None
    ss_cold: control.StateSpace | None
    poles_rad_per_s: np.ndarray
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def n_axes(self) -> int:
        return len(self.free_axes)

    @property
    def n_coils(self) -> int:
        return len(self.coil_names)

    @property
    def sensor_pose_matrix(self) -> np.ndarray:
        """``Cq`` (s, n): sensor outputs per unit pose deviation."""
        return np.array([s.pose_gain for s in self.sensors]).reshape(len(self.sensors), self.n_axes)

    @property
    def sensor_current_matrix(self) -> np.ndarray:
        """``Di`` (s, k): sensor outputs per ampere (cross-talk)."""
        return np.array([s.current_gain for s in self.sensors]).reshape(len(self.sensors), self.n_coils)

    def to_dict(self) -> dict:
        """JSON-ready dict (units in keys, arrays as nested lists)."""
        out = {}
        for k in self.__dataclass_fields__:
            v = getattr(self, k)
            if isinstance(v, control.StateSpace) or v is None and k.startswith("ss"):
                continue
            if k == "sensors":
                v = [{kk: getattr(s, kk) for kk in s.__dataclass_fields__} for s in v]
            out[k] = v
        return jsonable(out)

    def matrix_rows(self) -> tuple[list[str], list[list]]:
        """CSV-friendly ``[A B; C D]`` at the hot corner: header and rows, first column the row name."""
        header = ["row"] + list(self.state_names) + list(self.input_names)
        rows = [[n, *self.A[i], *self.B[i]] for i, n in enumerate(self.state_names)]
        rows += [[n, *self.C[i], *self.D[i]] for i, n in enumerate(self.output_names)]
        return header, rows


# ------------------------------------------------------------------------------------ pieces


def _names(free, coils, drive, sensors):
    qn = [f"{a}_{AXIS_UNITS[a][0]}" for a in free]
    vn = [f"v{a}_{AXIS_UNITS[a][1]}" for a in free]
    states = qn + vn
    if drive != "current":
        states += [f"i_{c}_A" for c in coils]
    inputs = {"voltage": [f"V_{c}_V" for c in coils], "current_loop": [f"icmd_{c}_A" for c in coils],
              "current": [f"i_{c}_A" for c in coils]}[drive]
    return tuple(states), tuple(inputs), tuple(sensor_label(s) for s in sensors)


def _allocation_with_error(design: Design, position_m, rotvec_rad):
    """G (6, k) at the standard rule and |G_standard - G_high| as its error bar."""
    P = np.atleast_2d(position_m)
    Rv = np.atleast_2d(rotvec_rad)
    G = allocation_matrix(design, position_m, rotvec_rad).G
    hi = wrench_basis(design, P, Rv, order="high", estimate_error=False)
    Gh = np.concatenate([hi.Fk_N_per_A[0].T, hi.Tk_Nm_per_A[0].T], axis=0)
    return G, np.abs(G - Gh)


def _pose_stencil(design: Design, position_m, rotvec_rad, idx):
    """Poses at +-h, +-2h along each free axis (4 per axis) and the centre last."""
    steps = np.array([STEP_LENGTH_M] * 3 + [STEP_ANGLE_RAD] * 3)
    dq = []
    for j in idx:
        for s in (1.0, -1.0, 2.0, -2.0):
            e = np.zeros(6)
            e[j] = s * steps[j]
            dq.append(e)
    dq.append(np.zeros(6))
    P, Rv = displace(design, position_m, rotvec_rad, np.array(dq))
    return P, Rv, steps


def _richardson(vals, idx, steps):
    """(gain (n,), error (n,)) from readings at the stencil of :func:`_pose_stencil`."""
    g = np.zeros(len(idx))
    e = np.zeros(len(idx))
    for a, j in enumerate(idx):
        p1, m1, p2, m2 = vals[4 * a:4 * a + 4]
        d1 = (p1 - m1) / (2 * steps[j])
        d2 = (p2 - m2) / (4 * steps[j])
        r = (4 * d1 - d2) / 3
        g[a], e[a] = r, abs(r - d1)
    return g, e


def _sensor_models(design: Design, position_m, rotvec_rad, currents_A, idx) -> tuple[SensorModel, ...]:
    P, Rv, steps = _pose_stencil(design, position_m, rotvec_rad, idx)
    imax = np.array([abs(c.max_current_A) for c in design.coils])
    out = []
    for s in design.sensors:
        notes = []
        vals = sensor_readings(design, s, P, Rv, currents_A)
        g, e = _richardson(vals, idx, steps)
        y0 = float(vals[-1])
        scale = sensor_scale(s)
        if isinstance(s, HallSensor):
            _, per_A = hall_parts(design, s, P[-1:], Rv[-1:])
            ci = per_A[0] * (s.sensitivity_V_per_T or 1.0)
            zero = y0 - float(ci @ currents_A) if len(ci) else y0
            worst = abs(zero) + float(np.abs(ci) @ imax) if len(ci) else abs(y0)
            in_range = abs(y0) < scale
            if not in_range:
                notes.append(f"reads {y0:.4g} {sensor_unit(s)} at the equilibrium, outside its range "
                             f"+-{scale:.4g} {sensor_unit(s)}: it gives no usable signal there")
            elif worst > scale:
                notes.append(f"reaches {worst:.4g} {sensor_unit(s)} with the coils at max current, beyond its "
                             f"range {scale:.4g} {sensor_unit(s)}: large control currents saturate it")
            kind = "hall"
        else:
            ci = np.zeros(len(design.coils))
            worst = abs(y0)
            frac = y0 / scale if s.output_span_V is None else 1.0 - y0 / scale
            in_range = 1e-9 < frac < 1.0 - 1e-9
            if not in_range:
                notes.append(f"the beam is {'fully blocked' if frac >= 0.5 else 'fully open'} at the equilibrium: "
                             "no signal for small motions")
            kind = "beam"
        if not in_range:
            g = np.zeros_like(g)
        out.append(SensorModel(s.name, kind, sensor_unit(s), sensor_label(s), y0, g, e, np.asarray(ci, float),
                               scale, worst, bool(in_range), tuple(notes)))
    return tuple(out)


def coil_resistances(design: Design, bias_currents_A, control_rms_current_A=0.0):
    """Hot and cold coil resistances (ohm) and the temperatures behind them (C).

    Hot: the self-consistent steady temperature of the lumped heat model
    (:func:`fields.devices.coil.steady_temperature_C`) at the r.m.s. current
    ``sqrt(I0^2 + i_rms^2)``; cold: ``min(20 C, ambient)``. Raises SolverError when a coil runs
    away thermally.
    """
    amb = float(design.study.ambient_temperature_C)
    Tc = min(20.0, amb)
    hot, cold, temps = [], [], []
    rms = np.broadcast_to(np.asarray(control_rms_current_A, float), (len(design.coils),))
    for k, c in enumerate(design.coils):
        R20, Gth = resistance_and_cooling(design, k)
        I = math.hypot(float(bias_currents_A[k]), float(rms[k]))
        T, run = steady_temperature_C([I], R20, Gth, amb)
        if run[0] or not np.isfinite(T[0]):
            raise SolverError(f"plant: coil {c.name} has no steady temperature at {I:.4g} A r.m.s. "
                              f"(lumped heat model, ambient {amb:g} C): it runs away thermally")
        temps.append(float(T[0]))
        hot.append(R20 * (1 + COPPER_ALPHA_20C_PER_K * (T[0] - 20.0)))
        cold.append(R20 * (1 + COPPER_ALPHA_20C_PER_K * (Tc - 20.0)))
    return np.array(hot), np.array(cold), np.array(temps), Tc


def _matrices(M, K, G, L, R, R0, Cq, Di, drive, wc):
    n, k = G.shape
    Minv = np.linalg.inv(M)
    Z = np.zeros
    top = np.hstack([Z((n, n)), np.eye(n)])
    if drive == "current":
        A = np.vstack([top, np.hstack([-Minv @ K, Z((n, n))])])
        B = np.vstack([Z((n, k)), Minv @ G])
        C = np.hstack([Cq, Z((Cq.shape[0], n))])
        return A, B, C, Di.copy(), np.zeros(0)
    Linv = np.linalg.inv(L)
    if drive == "voltage":
        Kc = np.zeros(k)
        Bi = Linv
        Ri = R
    else:
        Kc = np.maximum(wc * np.diag(L) - R0, 0.0)
        Bi = Linv @ np.diag(R0 + Kc)
        Ri = R + Kc
    A = np.vstack([np.hstack([Z((n, n)), np.eye(n), Z((n, k))]),
                   np.hstack([-Minv @ K, Z((n, n)), Minv @ G]),
                   np.hstack([Z((k, n)), -Linv @ G.T, -Linv @ np.diag(Ri)])])
    B = np.vstack([Z((2 * n, k)), Bi])
    C = np.hstack([Cq, Z((Cq.shape[0], n)), Di])
    return A, B, C, np.zeros((Cq.shape[0], k)), Kc


def multiaxis_plant(design: Design, equilibrium, drive: str = "voltage",
                    current_loop_bandwidth_rad_per_s: float | None = None, control_rms_current_A=0.0,
                    inductance_H=None, free_axes=None, stiffness=None) -> MultiaxisPlant:
    """Linear plant of the floater over its free axes at an equilibrium.

    Parameters
    ----------
    design : Design
    equilibrium : fields.analysis.Equilibrium
        Pose and bias currents (e.g. from :func:`fields.analysis.find_equilibrium`).
    drive : {"voltage", "current_loop", "current"}
        Coil voltages as inputs, current commands to per-coil analog current loops, or ideal
        current sources.
    current_loop_bandwidth_rad_per_s : float, optional
        Needed for ``drive="current_loop"``.
    control_rms_current_A : float or array_like, shape (k,)
        Expected r.m.s. control current per coil, added to the bias for the hot resistance.
    inductance_H : array_like, shape (k, k), optional
        A precomputed inductance matrix (default :func:`fields.devices.inductance.mutual_inductance_matrix`).
    free_axes : tuple of str, optional
        Default the study's free axes.
    stiffness : Stiffness, optional
        The 6x6 stiffness at this equilibrium when the caller has it (the stability stage's); used
        only if its pose and currents are the equilibrium's, else recomputed.

    Returns
    -------
    MultiaxisPlant
    """
    if drive not in DRIVES:
        raise input_error("multiaxis_plant", "drive", f"one of {', '.join(DRIVES)}", drive)
    if drive == "current_loop" and not (current_loop_bandwidth_rad_per_s and current_loop_bandwidth_rad_per_s > 0):
        raise input_error("multiaxis_plant", "current_loop_bandwidth_rad_per_s", "positive for a current-loop drive",
                          current_loop_bandwidth_rad_per_s)
    free = tuple(design.study.free_axes if free_axes is None else free_axes)
    idx = [AXES.index(a) for a in free]
    k = len(design.coils)
    pos = np.asarray(equilibrium.position_m, float)
    rot = np.asarray(equilibrium.rotvec_rad, float)
    I0 = np.asarray(equilibrium.currents_A, float).reshape(k)
    notes = []
    same = (stiffness is not None and np.array_equal(np.asarray(stiffness.position_m, float), pos)
            and np.array_equal(np.asarray(stiffness.rotvec_rad, float), rot)
            and np.array_equal(np.asarray(stiffness.currents_A, float).reshape(k), I0))
    S = stiffness if same else stiffness_matrix(design, pos, rot, I0)
    M6 = mass_matrix(design, rot)
    M = M6[np.ix_(idx, idx)]
    K = S.K[np.ix_(idx, idx)]
    Kerr = S.error[np.ix_(idx, idx)]
    if k:
        G6, Gerr6 = _allocation_with_error(design, pos, rot)
        L = np.asarray(inductance_H, float) if inductance_H is not None else mutual_inductance_matrix(design)
        if L.shape != (k, k):
            raise input_error("multiaxis_plant", "inductance_H", f"a ({k}, {k}) matrix", L.shape)
        Rh, Rc, Th, Tc = coil_resistances(design, I0, control_rms_current_A)
        if design.cores:
            notes.append("inductance: air-core formulas plus the cores' unsaturated share at the operating gap "
                         "(iron-free approximation); real iron raises L and makes it depend on gap and current")
        else:
            notes.append("inductance: air-core self and mutual inductances (no iron)")
    else:
        G6, Gerr6 = np.zeros((6, 0)), np.zeros((6, 0))
        L = np.zeros((0, 0))
        Rh = Rc = Th = np.zeros(0)
        Tc = min(20.0, float(design.study.ambient_temperature_C))
        notes.append("no coils: the plant has no inputs (a passive design)")
        if drive != "current":
            drive = "current"
    G = G6[idx]
    sensors = _sensor_models(design, pos, rot, I0, idx)
    Cq = np.array([s.pose_gain for s in sensors]).reshape(len(sensors), len(idx))
    Di = np.array([s.current_gain for s in sensors]).reshape(len(sensors), k)
    wc = current_loop_bandwidth_rad_per_s
    A, B, C, D, Kc = _matrices(M, K, G, L, Rh, Rh, Cq, Di, drive, wc)
    A2, B2, _, _, _ = _matrices(M, K, G, L, Rc, Rh, Cq, Di, drive, wc)
    states, inputs, outputs = _names(free, [c.name for c in design.coils], drive, design.sensors)
    if k and len(design.sensors):
        ss = control.ss(A, B, C, D, states=list(states), inputs=list(inputs), outputs=list(outputs))
        ss_cold = control.ss(A2, B2, C, D, states=list(states), inputs=list(inputs), outputs=list(outputs))
    else:  # python-control cannot hold a system without inputs or outputs
        ss = ss_cold = None
    poles = np.linalg.eigvals(A) if A.size else np.zeros(0, complex)
    poles = poles[np.argsort(-poles.real, kind="stable")]
    notes.append("rotations are small rotations about world axes through the centre of mass; torques about it")
    if drive == "current_loop":
        notes.append(f"per-coil analog current loops V = R0 i_cmd + Kc (i_cmd - i), bandwidth "
                     f"{wc:.4g} rad/s at the hot corner (Kc = w_c L_kk - R0)")
    return MultiaxisPlant(
        design_name=design.name, free_axes=free, drive=drive,
        current_loop_bandwidth_rad_per_s=wc if drive == "current_loop" else None,
        position_m=pos, rotvec_rad=rot, bias_currents_A=I0, bias_voltages_V=Rh * I0,
        coil_names=tuple(c.name for c in design.coils),
        max_current_A=np.array([abs(c.max_current_A) for c in design.coils]),
        supply_voltage_V=float(design.study.supply_voltage_V), mass_matrix=M, stiffness=K, stiffness_error=Kerr,
        allocation=G, allocation_error=Gerr6[idx], allocation_all_axes=G6, inductance_H=L,
        resistance_hot_ohm=Rh, resistance_cold_ohm=Rc, temperature_hot_C=Th, temperature_cold_C=Tc,
        current_loop_gain_V_per_A=Kc, sensors=sensors, A=A, B=B, C=C, D=D, A_cold=A2, B_cold=B2,
        state_names=states, input_names=inputs, output_names=outputs, ss=ss, ss_cold=ss_cold,
        poles_rad_per_s=poles, notes=tuple(notes))
