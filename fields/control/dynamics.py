"""Control model of one degree of freedom of a levitated floater (issue 6).

A pure module: it takes plant numbers (:class:`PlantParameters`) and a force table
(:class:`ForceTable`), never the magnetics code, and returns frozen result dataclasses.

Conventions
-----------
- One degree of freedom ``s`` (m) along a named axis ("vertical" = up, or e.g. "lateral x"),
  measured from the equilibrium.
- Stiffness ``k_s = -dF/ds`` (N/m): negative = unstable (the suspension levitator's vertical
  axis). Force per ampere ``k_i = dF/dI`` (N/A). Mechanical pole ``p = sqrt(-k_s/m)`` for
  ``k_s < 0``.
- Coil: ``V = R I + L dI/dt + k_i ds/dt``. The last term is the back-EMF: for a coil whose flux
  linkage is ``lambda(s, I) = L I + Lambda(s)``, the co-energy gives ``F = dW'/ds`` and, by
  reciprocity, ``d lambda/ds = dF/dI = k_i`` (Woodson & Melcher, Electromechanical Dynamics,
  Part I, 1968, ch. 3). The inductance ``L`` is taken constant.
- Current drive: the input is the coil current (an ideal current source). Voltage drive: the
  input is the coil voltage; :func:`design_controller` then closes a fast analog proportional
  current loop (common practice, no source) so the outer loop commands a current.
- Linear sensor: ``y = G_s s + G_i (I - I0)`` in ``sensor_unit``; a nonlinear sensor is a
  callable with a range (:class:`Sensor`).
- Force table: ``F(s, I) = F0(s) + I Fk(s)`` is the magnetic force along ``+s`` only; the
  simulation adds ``-m g`` (``g = gravity_m_per_s2``, 9.80665 for the vertical axis, 0 for a
  horizontal one). ``Fk`` is also the back-EMF coefficient ``d lambda/ds``.
- Feedback sign: the controller output is ``I_cmd = I0 - C(y - y_ref)``; ``C`` carries the sign
  of ``G_s k_i`` so that the loop transfer ``L = C P`` has the usual negative-feedback form.
- Index letters in shape lines: ``t`` time samples, ``g`` table positions, ``a`` start
  offsets, ``b`` start velocities (or band widths), ``w`` frequencies, ``x`` states.

Nothing here prints, plots or touches files.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass, field
from typing import Callable

import control
import numpy as np
from scipy.integrate import solve_ivp
from scipy.interpolate import CubicSpline
from scipy.optimize import brentq, minimize_scalar

from fields.errors import ContactError, GeometryError, SolverError

#: standard gravity (m/s^2), CGPM 1901; used when the axis is "vertical" and no value is given
STANDARD_GRAVITY_M_PER_S2 = 9.80665

#: nominal design rule: gain crossover at this multiple of the unstable pole (common practice,
#: no source; the open-loop-unstable limit omega_c > 2 p is in Skogestad & Postlethwaite,
#: Multivariable Feedback Control, 2nd ed., 2005, sec. 5.8, recalled from memory)
NOMINAL_CROSSOVER_MULTIPLE = 3.0
#: nominal phase margin (deg) behind the plant's delay budget
NOMINAL_PHASE_MARGIN_DEG = 45.0
#: sample rate at least this multiple of the crossover frequency (rule of thumb: 10-20x;
#: Franklin, Powell & Workman, Digital Control of Dynamic Systems, 3rd ed., 1998, ch. 11
#: "sample rate selection"; Astrom & Wittenmark, Computer-Controlled Systems, 3rd ed., 1997,
#: give omega_c h = 0.15-0.5, i.e. 12-40 samples per crossover period; both recalled from memory)
SAMPLES_PER_CROSSOVER_PERIOD = 20.0
#: the whole loop delay (sensor + computation + half a sample of zero-order hold) may use at
#: most this share of the phase margin at crossover (common practice, no source)
DELAY_SHARE_OF_PHASE_MARGIN = 1.0 / 3.0
#: largest phase one lead stage is asked to give (deg); beyond it the lead ratio exceeds ~60
MAX_LEAD_DEG = 75.0

#: IEC 60063:2015 preferred-number series (mantissas of one decade), as published
E_SERIES: dict[str, tuple[float, ...]] = {
    "E6": (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
    "E12": (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
    "E24": (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
            3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1),
}

DRIVES = ("voltage", "current")
KINDS = ("pd", "pid")


def _check_positive(where: str, what: str, value: float) -> float:
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise GeometryError(where, what, "a positive finite number", value)
    return v


def _check_finite(where: str, what: str, value: float) -> float:
    v = float(value)
    if not math.isfinite(v):
        raise GeometryError(where, what, "finite", value)
    return v


def _check_choice(where: str, what: str, value: str, choices: tuple[str, ...]) -> str:
    if value not in choices:
        raise GeometryError(where, what, "one of " + ", ".join(repr(c) for c in choices), value)
    return value


def _json_float(x: float) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def _json_complex(z) -> dict[str, list]:
    z = np.asarray(z, dtype=complex).ravel()
    return {"real": [float(v) for v in z.real], "imag": [float(v) for v in z.imag]}


# --------------------------------------------------------------------------------------------
# E-series
# --------------------------------------------------------------------------------------------


def e_series(name: str = "E24") -> tuple[float, ...]:
    """Mantissas (1 <= v < 10) of an IEC 60063 preferred-number series.

    Parameters
    ----------
    name : {"E6", "E12", "E24"}

    Returns
    -------
    tuple of float

    Examples
    --------
    >>> e_series("E12")[:4]
    (1.0, 1.2, 1.5, 1.8)
    """
    _check_choice("e_series", "name", name, tuple(E_SERIES))
    return E_SERIES[name]


def snap_to_e_series(value: float, series: str = "E24") -> float:
    """The series value nearest to ``value`` on a logarithmic scale.

    Parameters
    ----------
    value : float
        Positive component value (ohm, F, ...).
    series : {"E6", "E12", "E24"}

    Returns
    -------
    float

    Examples
    --------
    >>> snap_to_e_series(4.6e3, "E12")
    4700.0
    """
    v = _check_positive("snap_to_e_series", "value", value)
    mant = np.asarray(e_series(series))
    dec = math.floor(math.log10(v))
    cands = np.concatenate([mant * 10.0 ** (dec - 1), mant * 10.0 ** dec, mant * 10.0 ** (dec + 1)])
    best = cands[np.argmin(np.abs(np.log(cands / v)))]
    return float(f"{best:.3g}")


# --------------------------------------------------------------------------------------------
# Plant
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class PlantParameters:
    """Numbers of one axis of the levitator, linearised at the equilibrium (SI).

    Attributes
    ----------
    axis_name : str
        "vertical" (s up) or a horizontal axis name such as "lateral x".
    mass_kg : float
        Floater mass with payload.
    stiffness_N_per_m : float
        ``k_s = -dF/ds`` at the equilibrium and hover current; negative = unstable.
    force_per_ampere_N_per_A : float
        ``k_i = dF/dI``; also the back-EMF coefficient (V s/m).
    resistance_ohm, inductance_H : float
        Coil resistance and inductance.
    hover_current_A : float
        Coil current at the equilibrium ``I0``.
    max_current_A : float
        Driver current limit (the command is clipped to +-max_current_A).
    supply_voltage_V : float
        Driver supply (the coil voltage is clipped to +-supply_voltage_V).
    sensor_gain_per_m : float
        ``G_s``, signal per metre.
    sensor_crosstalk_per_A : float
        ``G_i``, signal per ampere of coil current (e.g. a Hall sensor seeing the coil).
    sensor_unit : str
        Unit of the sensor signal ("V" or "signal").
    gravity_m_per_s2 : float or None
        Gravitational acceleration along ``-s``. ``None``: 9.80665 for "vertical", else 0.
    """

    axis_name: str
    mass_kg: float
    stiffness_N_per_m: float
    force_per_ampere_N_per_A: float
    resistance_ohm: float
    inductance_H: float
    hover_current_A: float
    max_current_A: float
    supply_voltage_V: float
    sensor_gain_per_m: float
    sensor_crosstalk_per_A: float = 0.0
    sensor_unit: str = "V"
    gravity_m_per_s2: float | None = None

    def __post_init__(self) -> None:
        w = "PlantParameters"
        if not isinstance(self.axis_name, str) or not self.axis_name.strip():
            raise GeometryError(w, "axis_name", "a non-empty string", self.axis_name)
        _check_positive(w, "mass_kg", self.mass_kg)
        _check_finite(w, "stiffness_N_per_m", self.stiffness_N_per_m)
        ki = _check_finite(w, "force_per_ampere_N_per_A", self.force_per_ampere_N_per_A)
        if ki == 0:
            raise GeometryError(w, "force_per_ampere_N_per_A", "non-zero (the coil must act)", ki)
        _check_positive(w, "resistance_ohm", self.resistance_ohm)
        _check_positive(w, "inductance_H", self.inductance_H)
        imax = _check_positive(w, "max_current_A", self.max_current_A)
        i0 = _check_finite(w, "hover_current_A", self.hover_current_A)
        if abs(i0) >= imax:
            raise GeometryError(w, "hover_current_A", f"inside +-max_current_A = {imax:g} A", i0)
        vs = _check_positive(w, "supply_voltage_V", self.supply_voltage_V)
        if abs(i0) * self.resistance_ohm >= vs:
            raise GeometryError(w, "hover voltage R*I0", f"below supply_voltage_V = {vs:g} V",
                                abs(i0) * self.resistance_ohm)
        gs = _check_finite(w, "sensor_gain_per_m", self.sensor_gain_per_m)
        if gs == 0:
            raise GeometryError(w, "sensor_gain_per_m", "non-zero", gs)
        _check_finite(w, "sensor_crosstalk_per_A", self.sensor_crosstalk_per_A)
        g = self.gravity_m_per_s2
        if g is None:
            g = STANDARD_GRAVITY_M_PER_S2 if self.axis_name.strip().lower() == "vertical" else 0.0
            object.__setattr__(self, "gravity_m_per_s2", g)
        g = _check_finite(w, "gravity_m_per_s2", g)
        if g < 0:
            raise GeometryError(w, "gravity_m_per_s2", "non-negative (it acts along -s)", g)

    @property
    def hover_voltage_V(self) -> float:
        """Coil voltage at the equilibrium, ``R I0`` (V)."""
        return self.resistance_ohm * self.hover_current_A

    @property
    def mechanical_pole_rad_per_s(self) -> float:
        """``sqrt(|k_s|/m)``: the unstable pole for ``k_s < 0``, the natural frequency otherwise."""
        return math.sqrt(abs(self.stiffness_N_per_m) / self.mass_kg)

    def to_dict(self) -> dict:
        """JSON-ready dict (units in keys)."""
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


@dataclass(frozen=True, eq=False)
class Plant:
    """Linear model of one axis (see :func:`linear_plant`).

    Attributes
    ----------
    params : PlantParameters
    drive : {"voltage", "current"}
    A, B, C, D : ndarray, shapes (x, x), (x, 1), (1, x), (1, 1)
        States ``(s_m, v_m_per_s, current_A)`` for voltage drive (``current_A`` is the deviation
        ``I - I0``), ``(s_m, v_m_per_s)`` for current drive. Input: voltage deviation
        ``V - R I0`` (V) or current deviation ``I - I0`` (A). Output: sensor signal deviation.
    state_names, input_name, output_name : str
    numerator, denominator : ndarray
        Transfer function input -> signal, descending powers of ``s``.
    ss, tf : control.StateSpace, control.TransferFunction
    poles_rad_per_s : ndarray of complex, shape (x,)
        Sorted by decreasing real part.
    mechanical_pole_rad_per_s : float
        ``sqrt(|k_s|/m)``.
    unstable_pole_rad_per_s : float
        Largest positive real part of the poles (0 if none). With voltage drive the back-EMF
        pulls it slightly below ``sqrt(-k_s/m)``.
    unstable_time_constant_s : float
        ``1/unstable_pole`` (inf if stable).
    unstable_pole_count : int
    electrical_pole_rad_per_s : float
        ``R/L`` of the coil alone.
    nominal_crossover_rad_per_s : float
        ``NOMINAL_CROSSOVER_MULTIPLE`` times the reference pole.
    min_sample_rate_Hz : float
    max_loop_delay_s : float
        Total delay budget including half a sample of zero-order hold.
    rules : tuple of str
        The rules behind the three numbers above, with sources.
    """

    params: PlantParameters
    drive: str
    A: np.ndarray
    B: np.ndarray
    C: np.ndarray
    D: np.ndarray
    state_names: tuple[str, ...]
    input_name: str
    output_name: str
    numerator: np.ndarray
    denominator: np.ndarray
    ss: control.StateSpace
    tf: control.TransferFunction
    poles_rad_per_s: np.ndarray
    mechanical_pole_rad_per_s: float
    unstable_pole_rad_per_s: float
    unstable_time_constant_s: float
    unstable_pole_count: int
    electrical_pole_rad_per_s: float
    nominal_crossover_rad_per_s: float
    min_sample_rate_Hz: float
    max_loop_delay_s: float
    rules: tuple[str, ...]

    @property
    def reference_pole_rad_per_s(self) -> float:
        """The pole the crossover is placed from: the unstable pole, else ``sqrt(|k_s|/m)``."""
        return self.unstable_pole_rad_per_s if self.unstable_pole_rad_per_s > 0 \
            else self.mechanical_pole_rad_per_s

    def to_dict(self) -> dict:
        """JSON-ready dict: arrays as lists, units in keys, complex poles as real/imag lists."""
        return {
            "params": self.params.to_dict(),
            "drive": self.drive,
            "state_names": list(self.state_names),
            "input_name": self.input_name,
            "output_name": self.output_name,
            "A": self.A.tolist(), "B": self.B.tolist(), "C": self.C.tolist(), "D": self.D.tolist(),
            "tf_numerator": self.numerator.tolist(),
            "tf_denominator": self.denominator.tolist(),
            "poles_rad_per_s": _json_complex(self.poles_rad_per_s),
            "mechanical_pole_rad_per_s": self.mechanical_pole_rad_per_s,
            "unstable_pole_rad_per_s": self.unstable_pole_rad_per_s,
            "unstable_time_constant_s": _json_float(self.unstable_time_constant_s),
            "unstable_pole_count": self.unstable_pole_count,
            "electrical_pole_rad_per_s": self.electrical_pole_rad_per_s,
            "nominal_crossover_rad_per_s": _json_float(self.nominal_crossover_rad_per_s),
            "min_sample_rate_Hz": _json_float(self.min_sample_rate_Hz),
            "max_loop_delay_s": _json_float(self.max_loop_delay_s),
            "rules": list(self.rules),
        }


def _plant_matrices(p: PlantParameters, drive: str):
    m, ks, ki = p.mass_kg, p.stiffness_N_per_m, p.force_per_ampere_N_per_A
    R, L, gs, gi = p.resistance_ohm, p.inductance_H, p.sensor_gain_per_m, p.sensor_crosstalk_per_A
    if drive == "voltage":
        A = np.array([[0.0, 1.0, 0.0], [-ks / m, 0.0, ki / m], [0.0, -ki / L, -R / L]])
        B = np.array([[0.0], [0.0], [1.0 / L]])
        C = np.array([[gs, 0.0, gi]])
        D = np.zeros((1, 1))
        num = np.array([gi / L, 0.0, gi * ks / (m * L) + gs * ki / (m * L)])
        den = np.array([1.0, R / L, ks / m + ki**2 / (m * L), R * ks / (m * L)])
    else:
        A = np.array([[0.0, 1.0], [-ks / m, 0.0]])
        B = np.array([[0.0], [ki / m]])
        C = np.array([[gs, 0.0]])
        D = np.array([[gi]])
        num = np.array([gi, 0.0, gi * ks / m + gs * ki / m])
        den = np.array([1.0, 0.0, ks / m])
    nz = np.flatnonzero(num)
    num = num[nz[0]:] if nz.size else np.zeros(1)
    return A, B, C, D, num, den


def _nominal_rules(ref_pole: float):
    wc = NOMINAL_CROSSOVER_MULTIPLE * ref_pole
    if wc <= 0:
        return math.nan, math.nan, math.nan
    fs = SAMPLES_PER_CROSSOVER_PERIOD * wc / (2 * math.pi)
    tau = DELAY_SHARE_OF_PHASE_MARGIN * math.radians(NOMINAL_PHASE_MARGIN_DEG) / wc
    return wc, fs, tau


RULES = (
    f"Crossover: omega_c = {NOMINAL_CROSSOVER_MULTIPLE:g} x the unstable pole p (an open-loop-unstable "
    "loop needs omega_c above about 2p; Skogestad & Postlethwaite, Multivariable Feedback Control, "
    "2nd ed. 2005, sec. 5.8, recalled from memory; the factor 3 is common practice, no source).",
    f"Sample rate: f_s >= {SAMPLES_PER_CROSSOVER_PERIOD:g} x f_c, f_c = omega_c/(2 pi) (rule of thumb "
    "10-20x: Franklin, Powell & Workman, Digital Control of Dynamic Systems, 3rd ed. 1998, ch. 11; "
    "Astrom & Wittenmark, Computer-Controlled Systems, 3rd ed. 1997, omega_c h = 0.15-0.5; "
    "recalled from memory).",
    f"Delay: the total loop delay tau (sensor + computation + half a sample of zero-order hold) "
    f"costs omega_c tau of phase at crossover; keep it <= {DELAY_SHARE_OF_PHASE_MARGIN:.3g} of the "
    f"phase margin ({NOMINAL_PHASE_MARGIN_DEG:g} deg nominal): tau_max = "
    f"{DELAY_SHARE_OF_PHASE_MARGIN:.3g} PM / omega_c (common practice, no source).",
)


def linear_plant(params: PlantParameters, drive: str = "voltage") -> Plant:
    """Linearised one-axis plant with coil and sensor.

    Parameters
    ----------
    params : PlantParameters
    drive : {"voltage", "current"}
        Voltage drive keeps the coil's electrical pole and back-EMF; current drive treats the
        coil as an ideal current source.

    Returns
    -------
    Plant

    Notes
    -----
    Model (Franklin, Powell & Emami-Naeini, Feedback Control of Dynamic Systems, magnetic
    levitation example, with ``k_x = -k_s``)::

        m s'' = -k_s s + k_i i
        L i'  = -R i - k_i s' + u           (voltage drive, back-EMF k_i s')
        y     = G_s s + G_i i

    Voltage drive: ``Y/U = (G_i (s^2 + k_s/m) + G_s k_i/m) / (L ((s + R/L)(s^2 + k_s/m)
    + k_i^2 s/(m L)))``. Current drive: ``Y/I = G_s k_i/(m (s^2 + k_s/m)) + G_i``.

    Design-rule numbers (``rules``): omega_c = 3 p; f_s >= 20 omega_c/(2 pi) (Franklin,
    Powell & Workman 1998, ch. 11); total delay <= PM/3 / omega_c with PM = 45 deg.

    Examples
    --------
    >>> p = PlantParameters("vertical", 0.011, -20.0, 0.25, 20.0, 0.15, 0.4, 1.0, 24.0, 1000.0)
    >>> plant = linear_plant(p, "current")
    >>> round(plant.unstable_pole_rad_per_s, 3)
    42.64
    """
    _check_choice("linear_plant", "drive", drive, DRIVES)
    A, B, C, D, num, den = _plant_matrices(params, drive)
    poles = np.linalg.eigvals(A)
    poles = poles[np.argsort(-poles.real, kind="stable")]
    scale = max(1.0, float(np.max(np.abs(poles))))
    unstable = poles[poles.real > 1e-12 * scale]
    p_u = float(np.max(unstable.real)) if unstable.size else 0.0
    mech = params.mechanical_pole_rad_per_s
    ref = p_u if p_u > 0 else mech
    wc, fs, tau = _nominal_rules(ref)
    if drive == "voltage":
        names = ("s_m", "v_m_per_s", "current_A")
        inp = "voltage_deviation_V"
    else:
        names = ("s_m", "v_m_per_s")
        inp = "current_deviation_A"
    return Plant(
        params=params, drive=drive, A=A, B=B, C=C, D=D, state_names=names, input_name=inp,
        output_name=f"signal_deviation_{params.sensor_unit}", numerator=num, denominator=den,
        ss=control.ss(A, B, C, D), tf=control.tf(num, den), poles_rad_per_s=poles,
        mechanical_pole_rad_per_s=mech, unstable_pole_rad_per_s=p_u,
        unstable_time_constant_s=1.0 / p_u if p_u > 0 else math.inf,
        unstable_pole_count=int(unstable.size),
        electrical_pole_rad_per_s=params.resistance_ohm / params.inductance_H,
        nominal_crossover_rad_per_s=wc, min_sample_rate_Hz=fs, max_loop_delay_s=tau, rules=RULES,
    )


def _current_loop_matrices(p: PlantParameters, kc: float):
    """Voltage-driven coil with the analog current loop ``V = R i_ref + K_c (i_ref - i)`` closed.

    States ``(s, v, i)``, input ``i_ref`` (current deviation command, A), output signal.
    """
    m, ks, ki = p.mass_kg, p.stiffness_N_per_m, p.force_per_ampere_N_per_A
    R, L = p.resistance_ohm, p.inductance_H
    A = np.array([[0.0, 1.0, 0.0], [-ks / m, 0.0, ki / m], [0.0, -ki / L, -(R + kc) / L]])
    B = np.array([[0.0], [0.0], [(R + kc) / L]])
    C = np.array([[p.sensor_gain_per_m, 0.0, p.sensor_crosstalk_per_A]])
    return A, B, C, np.zeros((1, 1))


def _eval_ss(A, B, C, D, pts) -> np.ndarray:
    """SISO frequency response ``C (pI - A)^-1 B + D`` at complex points (any shape)."""
    pts = np.asarray(pts, dtype=complex)
    flat = pts.ravel()
    n = A.shape[0]
    if n == 0:
        return np.full(pts.shape, complex(D[0, 0]))
    M = flat[:, None, None] * np.eye(n)[None] - A[None]
    x = np.linalg.solve(M, np.broadcast_to(B.astype(complex), (flat.size, n, 1)))
    out = (C[None] @ x)[:, 0, 0] + D[0, 0]
    return out.reshape(pts.shape)


# --------------------------------------------------------------------------------------------
# Controller
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class OpAmpLeadNetwork:
    """Component values of an analog realisation of the controller.

    Circuit (stated): stage 1 is an inverting amplifier whose input impedance is ``R3`` in series
    with ``R1 || C1`` and whose feedback is ``R2``::

        H1(s) = -R2/(R1 + R3) * (1 + s R1 C1) / (1 + s C1 R1 R3/(R1 + R3))

    zero ``1/(R1 C1)``, pole ``(R1 + R3)/(R1 R3 C1)``, DC gain ``R2/(R1 + R3)``. For a PID,
    stage 2 is an inverting PI stage (input ``Ra``, feedback ``Rb`` in series with ``Cb``):
    ``H2(s) = -(Rb/Ra)(1 + 1/(s Rb Cb))`` with ``Ra = Rb``; for a PD, stage 2 is a unity
    inverting buffer, so the two inversions cancel. The sensor signal is taken as a voltage and
    the stage output drives a current driver of ``driver_transconductance_A_per_V``.
    Resistors from ``resistor_series``, capacitors from ``capacitor_series`` (IEC 60063).

    Attributes
    ----------
    R1_ohm, C1_F, R3_ohm, R2_ohm : float
    Ra_ohm, Rb_ohm, Cb_F : float
        PI stage (PID only; 0 for a PD).
    zero_rad_per_s, pole_rad_per_s, dc_gain_V_per_V, integral_zero_rad_per_s : float
        Realised with the snapped values.
    target_zero_rad_per_s, target_pole_rad_per_s, target_dc_gain_V_per_V : float
    driver_transconductance_A_per_V : float
    max_relative_error : float
        Largest relative deviation of zero, pole, gain (and integral zero) from the targets.
    circuit : str
    """

    R1_ohm: float
    C1_F: float
    R3_ohm: float
    R2_ohm: float
    Ra_ohm: float
    Rb_ohm: float
    Cb_F: float
    zero_rad_per_s: float
    pole_rad_per_s: float
    dc_gain_V_per_V: float
    integral_zero_rad_per_s: float
    target_zero_rad_per_s: float
    target_pole_rad_per_s: float
    target_dc_gain_V_per_V: float
    driver_transconductance_A_per_V: float
    resistor_series: str
    capacitor_series: str
    max_relative_error: float
    circuit: str

    def to_dict(self) -> dict:
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


_CAP_DECADES = (1e-9, 1e-8, 1e-7, 1e-6)  # 1 nF .. 8.2 uF
_R_RANGE = (1e3, 1e6)


def analog_lead_network(zero_rad_per_s: float, pole_rad_per_s: float, dc_gain_V_per_V: float,
                        integral_zero_rad_per_s: float = 0.0, *,
                        driver_transconductance_A_per_V: float = 1.0,
                        resistor_series: str = "E24", capacitor_series: str = "E12") -> OpAmpLeadNetwork:
    """Snap an op-amp lead (and optional PI) network to preferred values.

    Parameters
    ----------
    zero_rad_per_s, pole_rad_per_s : float
        Lead zero below the lead pole.
    dc_gain_V_per_V : float
        Magnitude of the lead's DC gain (the sign is set by the stage count, see the class).
    integral_zero_rad_per_s : float
        PI-stage zero ``1/(Rb Cb)``; 0 for none.
    driver_transconductance_A_per_V : float
        Only recorded (the gain already includes it).
    resistor_series, capacitor_series : {"E6", "E12", "E24"}

    Returns
    -------
    OpAmpLeadNetwork

    Notes
    -----
    Every capacitor of the series from 1 nF to 8.2 uF is tried for ``C1``; ``R1``, ``R3``,
    ``R2`` follow from the targets and are snapped; resistors must lie in 1 kohm..1 Mohm. The
    choice with the smallest largest relative error wins.
    """
    w = "analog_lead_network"
    wz = _check_positive(w, "zero_rad_per_s", zero_rad_per_s)
    wp = _check_positive(w, "pole_rad_per_s", pole_rad_per_s)
    if wp <= wz:
        raise GeometryError(w, "pole_rad_per_s", f"above zero_rad_per_s = {wz:g}", wp)
    k = _check_positive(w, "dc_gain_V_per_V", dc_gain_V_per_V)
    caps = [float(f"{m * d:.3g}") for d in _CAP_DECADES for m in e_series(capacitor_series)]
    best = None
    for c1 in caps:
        r1 = 1.0 / (wz * c1)
        rpar = 1.0 / (wp * c1)
        r3 = r1 * rpar / (r1 - rpar)
        r2 = k * (r1 + r3)
        try:
            snapped = [snap_to_e_series(r, resistor_series) for r in (r1, r3, r2)]
        except GeometryError:
            continue
        if not all(_R_RANGE[0] <= r <= _R_RANGE[1] for r in snapped):
            continue
        R1, R3, R2 = snapped
        z = 1.0 / (R1 * c1)
        p = (R1 + R3) / (R1 * R3 * c1)
        g = R2 / (R1 + R3)
        err = max(abs(z / wz - 1), abs(p / wp - 1), abs(g / k - 1))
        if best is None or err < best[0]:
            best = (err, R1, c1, R3, R2, z, p, g)
    if best is None:
        raise SolverError(f"{w}: resistor values must fit 1 kohm..1 Mohm for some capacitor "
                          f"1 nF..8.2 uF; got none for zero {wz:g} rad/s, pole {wp:g} rad/s, gain {k:g}.")
    err, R1, C1, R3, R2, z, p, g = best
    Ra = Rb = Cb = 0.0
    wi_real = 0.0
    if integral_zero_rad_per_s > 0:
        wi = float(integral_zero_rad_per_s)
        bestpi = None
        for cb in caps:
            rb = snap_to_e_series(1.0 / (wi * cb), resistor_series)
            if not (10e3 <= rb <= _R_RANGE[1]):
                continue
            e = abs(1.0 / (rb * cb) / wi - 1)
            if bestpi is None or e < bestpi[0]:
                bestpi = (e, rb, cb)
        if bestpi is None:
            raise SolverError(f"{w}: PI resistor must fit 10 kohm..1 Mohm; got none for "
                              f"integral zero {wi:g} rad/s.")
        e, Rb, Cb = bestpi
        Ra = Rb
        wi_real = 1.0 / (Rb * Cb)
        err = max(err, e)
    circuit = ("stage 1: inverting op-amp, input R3 in series with (R1 || C1), feedback R2; "
               "zero 1/(R1 C1), pole (R1+R3)/(R1 R3 C1), DC gain R2/(R1+R3); stage 2: "
               + ("inverting PI, input Ra, feedback Rb + Cb in series, zero 1/(Rb Cb)"
                  if integral_zero_rad_per_s > 0 else "unity inverting buffer")
               + "; output to the current driver")
    return OpAmpLeadNetwork(
        R1_ohm=R1, C1_F=C1, R3_ohm=R3, R2_ohm=R2, Ra_ohm=Ra, Rb_ohm=Rb, Cb_F=Cb,
        zero_rad_per_s=z, pole_rad_per_s=p, dc_gain_V_per_V=g, integral_zero_rad_per_s=wi_real,
        target_zero_rad_per_s=wz, target_pole_rad_per_s=wp, target_dc_gain_V_per_V=k,
        driver_transconductance_A_per_V=float(driver_transconductance_A_per_V),
        resistor_series=resistor_series, capacitor_series=capacitor_series,
        max_relative_error=float(err), circuit=circuit,
    )


@dataclass(frozen=True, eq=False)
class ControllerDesign:
    """A PD (lead with filtered derivative) or PID controller for one axis.

    The controller maps the signal error ``e = y - y_ref`` to a current command
    ``I_cmd = I0 - u``, ``U(s) = C(s) E(s)``, parallel form::

        C(s) = Kp + Ki/s + Kd s/(tau_f s + 1)

    Attributes
    ----------
    kind : {"pd", "pid"}
    drive : {"voltage", "current"}
    sign : float
        ``sign(G_s k_i)``, already inside the gains.
    crossover_rad_per_s : float
    phase_margin_target_deg : float
    lead_phase_deg : float
        Phase the lead supplies at crossover.
    phase_budget_deg : dict
        Plant, zero-order hold, delay, integral and lead phases at crossover (deg).
    zero_rad_per_s, pole_rad_per_s : float
        Lead zero and pole (``pole = 1/tau_f``); centred geometrically on the crossover.
    integral_zero_rad_per_s : float
        PID integral zero (0 for a PD).
    lead_gain : float
        ``K`` of ``sign K (1 + s/zero)/(1 + s/pole) [(s + w_i)/s]``.
    kp_A_per_signal, kd_A_s_per_signal, ki_A_per_signal_s, derivative_filter_tau_s : float
    numerator, denominator : ndarray
        ``C(s)``, descending powers of ``s``.
    tf : control.TransferFunction
    sample_time_s : float or None
        ``None`` for an analog design.
    discrete_tf : control.TransferFunction or None
        Tustin (bilinear) transform with pre-warping at the crossover, via ``control.c2d``.
    discrete_numerator, discrete_denominator : ndarray or None
        Difference equation ``sum a_j u[k-j] = sum b_j e[k-j]`` (``a_0 = 1``).
    discretisation : str
    loop_delay_s : float
        Delay the design budgeted for (s).
    current_loop_gain_V_per_A, current_loop_bandwidth_rad_per_s : float
        Voltage drive only: analog current loop ``V = R i_ref + K_c (i_ref - i)``, bandwidth
        ``(R + K_c)/L``. Zero and inf for current drive.
    loop_plant : control.StateSpace
        The plant the outer loop sees (input current command deviation, output signal).
    analog : OpAmpLeadNetwork
    signal_unit : str
    """

    kind: str
    drive: str
    sign: float
    crossover_rad_per_s: float
    phase_margin_target_deg: float
    lead_phase_deg: float
    phase_budget_deg: dict
    zero_rad_per_s: float
    pole_rad_per_s: float
    integral_zero_rad_per_s: float
    lead_gain: float
    kp_A_per_signal: float
    kd_A_s_per_signal: float
    ki_A_per_signal_s: float
    derivative_filter_tau_s: float
    numerator: np.ndarray
    denominator: np.ndarray
    tf: control.TransferFunction
    sample_time_s: float | None
    discrete_tf: control.TransferFunction | None
    discrete_numerator: np.ndarray | None
    discrete_denominator: np.ndarray | None
    discretisation: str
    loop_delay_s: float
    current_loop_gain_V_per_A: float
    current_loop_bandwidth_rad_per_s: float
    loop_plant: control.StateSpace
    analog: OpAmpLeadNetwork
    signal_unit: str

    def to_dict(self) -> dict:
        """JSON-ready dict; gain keys carry the sensor unit (e.g. ``kp_A_per_V``)."""
        u = self.signal_unit
        return {
            "kind": self.kind, "drive": self.drive, "sign": self.sign,
            "crossover_rad_per_s": self.crossover_rad_per_s,
            "phase_margin_target_deg": self.phase_margin_target_deg,
            "lead_phase_deg": self.lead_phase_deg,
            "phase_budget_deg": dict(self.phase_budget_deg),
            "zero_rad_per_s": self.zero_rad_per_s, "pole_rad_per_s": self.pole_rad_per_s,
            "integral_zero_rad_per_s": self.integral_zero_rad_per_s,
            f"kp_A_per_{u}": self.kp_A_per_signal,
            f"kd_A_s_per_{u}": self.kd_A_s_per_signal,
            f"ki_A_per_{u}_s": self.ki_A_per_signal_s,
            "derivative_filter_tau_s": self.derivative_filter_tau_s,
            "tf_numerator": self.numerator.tolist(), "tf_denominator": self.denominator.tolist(),
            "sample_time_s": self.sample_time_s,
            "discrete_numerator": None if self.discrete_numerator is None
            else self.discrete_numerator.tolist(),
            "discrete_denominator": None if self.discrete_denominator is None
            else self.discrete_denominator.tolist(),
            "discretisation": self.discretisation,
            "loop_delay_s": self.loop_delay_s,
            "current_loop_gain_V_per_A": self.current_loop_gain_V_per_A,
            "current_loop_bandwidth_rad_per_s": _json_float(self.current_loop_bandwidth_rad_per_s),
            "analog": None if self.analog is None else self.analog.to_dict(),
        }


def _loop_plant_matrices(plant: Plant, kc: float):
    if plant.drive == "voltage":
        return _current_loop_matrices(plant.params, kc)
    return plant.A, plant.B, plant.C, plant.D


def design_controller(plant: Plant, crossover_multiple: float = 3.0, phase_margin_deg: float = 45.0,
                      sample_time_s: float | None = None, *, kind: str = "pd",
                      loop_delay_s: float = 0.0, current_loop_multiple: float = 10.0,
                      integral_zero_fraction: float = 0.1,
                      driver_transconductance_A_per_V: float = 1.0) -> ControllerDesign:
    """Lead/PD (or PID) starting-point design placed from the plant.

    Parameters
    ----------
    plant : Plant
    crossover_multiple : float
        Gain crossover ``omega_c`` = this multiple of the unstable pole (of ``sqrt(|k_s|/m)``
        for a stable axis).
    phase_margin_deg : float
        Wanted phase margin at ``omega_c``.
    sample_time_s : float or None
        Digital controller period (the zero-order hold's ``omega_c T/2`` of lag is budgeted and
        the controller is discretised); ``None`` for an analog design.
    kind : {"pd", "pid"}
        PID adds an integral zero ``integral_zero_fraction * omega_c`` (a decade below
        crossover by default) that removes the offset after a payload change.
    loop_delay_s : float
        Extra loop delay (sensor, computation) budgeted in the phase.
    current_loop_multiple : float
        Voltage drive: bandwidth of the analog current loop as a multiple of ``omega_c``.
    integral_zero_fraction : float
    driver_transconductance_A_per_V : float
        Current-driver gain used to size the op-amp network.

    Returns
    -------
    ControllerDesign

    Raises
    ------
    SolverError
        If one lead stage would need more than ``MAX_LEAD_DEG`` of phase.

    Notes
    -----
    Classical loop shaping (Franklin, Powell & Emami-Naeini, Feedback Control of Dynamic
    Systems, ch. 6, lead compensation): the lead ``(1 + s/z)/(1 + s/p)`` gives its largest phase
    ``phi = asin((1 - a)/(1 + a))``, ``a = z/p``, at ``sqrt(z p)``; it is centred on ``omega_c``
    with ``phi = PM - 180 deg - angle P(j omega_c) + omega_c (T/2 + tau) + atan(w_i/omega_c)``,
    and the gain makes ``|C P| = 1`` at ``omega_c``.

    Voltage drive: an analog proportional current loop ``V = R i_ref + K_c (i_ref - i)`` (the
    ``R i_ref`` feed-forward gives unit DC current gain) with bandwidth ``(R + K_c)/L =
    current_loop_multiple * omega_c`` makes the coil a current source (common practice, no
    source); its residual lag and the back-EMF are included exactly in ``loop_plant`` and in the
    phase budget.

    Discretisation: Tustin with pre-warping at ``omega_c`` (``control.c2d(..., "tustin",
    prewarp_frequency=omega_c)``), so the phase at crossover is kept.
    """
    w = "design_controller"
    _check_choice(w, "kind", kind, KINDS)
    m = _check_positive(w, "crossover_multiple", crossover_multiple)
    pm = _check_positive(w, "phase_margin_deg", phase_margin_deg)
    if pm >= 90:
        raise GeometryError(w, "phase_margin_deg", "below 90", pm)
    T = None if sample_time_s is None else _check_positive(w, "sample_time_s", sample_time_s)
    tau = float(loop_delay_s)
    if not (math.isfinite(tau) and tau >= 0):
        raise GeometryError(w, "loop_delay_s", "non-negative", loop_delay_s)
    ref = plant.reference_pole_rad_per_s
    if ref <= 0:
        raise GeometryError(w, "plant stiffness_N_per_m", "non-zero (the crossover is placed from "
                            "the plant pole)", plant.params.stiffness_N_per_m)
    wc = m * ref
    p = plant.params
    if T is not None and T * wc > math.pi / 2:
        raise GeometryError(w, "sample_time_s", f"below pi/(2 omega_c) = {math.pi / 2 / wc:.4g} s", T)
    if plant.drive == "voltage":
        we = _check_positive(w, "current_loop_multiple", current_loop_multiple) * wc
        kc = max(0.0, we * p.inductance_H - p.resistance_ohm)
        bw = (p.resistance_ohm + kc) / p.inductance_H
    else:
        kc, bw = 0.0, math.inf
    A, B, C, D = _loop_plant_matrices(plant, kc)
    P = complex(_eval_ss(A, B, C, D, [1j * wc])[0])
    sgn = float(np.sign(p.sensor_gain_per_m * p.force_per_ampere_N_per_A))
    th_p = float(np.angle(sgn * P))
    if th_p > 0:
        th_p -= 2 * math.pi
    th_zoh = -wc * T / 2 if T is not None else 0.0
    th_d = -wc * tau if tau > 0 else 0.0
    wi = _check_positive(w, "integral_zero_fraction", integral_zero_fraction) * wc if kind == "pid" else 0.0
    th_i = -math.atan(wi / wc)
    phi = math.radians(pm) - math.pi - th_p - th_zoh - th_d - th_i
    if phi > math.radians(MAX_LEAD_DEG):
        raise SolverError(f"{w}: needed lead phase must be at most {MAX_LEAD_DEG:g} deg for one lead "
                          f"stage; got {math.degrees(phi):.1f} deg (lower phase_margin_deg, the sample "
                          f"time, the delay, or raise current_loop_multiple).")
    phi = max(phi, math.radians(1.0))
    sphi = math.sin(phi)
    wz = wc * math.sqrt((1 - sphi) / (1 + sphi))
    wp = wc * math.sqrt((1 + sphi) / (1 - sphi))
    lead = (1 + 1j * wc / wz) / (1 + 1j * wc / wp)
    integ = (1j * wc + wi) / (1j * wc) if kind == "pid" else 1.0
    K = 1.0 / abs(lead * integ * P)
    tf_ = 1.0 / wp
    if kind == "pid":
        ki = sgn * K * wi
        kp = sgn * K * (1 + wi / wz) - ki * tf_
        kd = sgn * K / wz - kp * tf_
        num = np.array([kp * tf_ + kd, kp + ki * tf_, ki])
        den = np.array([tf_, 1.0, 0.0])
    else:
        ki = 0.0
        kp = sgn * K
        kd = sgn * K * (1 / wz - 1 / wp)
        num = np.array([kp * tf_ + kd, kp])
        den = np.array([tf_, 1.0])
    num, den = num / den[0], den / den[0]
    Ctf = control.tf(num, den)
    if T is not None:
        Cd = control.c2d(Ctf, T, method="tustin", prewarp_frequency=wc)
        dnum = np.atleast_1d(np.squeeze(Cd.num[0][0]))
        dden = np.atleast_1d(np.squeeze(Cd.den[0][0]))
        dnum, dden = dnum / dden[0], dden / dden[0]
        Cd = control.tf(dnum, dden, T)
        disc = (f"Tustin (bilinear) with pre-warping at omega_c = {wc:.6g} rad/s via control.c2d, "
                f"T = {T:g} s")
    else:
        Cd, dnum, dden = None, None, None
        disc = "analog (no discretisation)"
    try:
        net = analog_lead_network(wz, wp, K / driver_transconductance_A_per_V, wi,
                                  driver_transconductance_A_per_V=driver_transconductance_A_per_V)
    except (GeometryError, SolverError):
        # no practical op-amp network for these numbers (e.g. a sensor signal not in volts)
        net = None
    budget = {"plant": math.degrees(th_p), "zero_order_hold": math.degrees(th_zoh),
              "delay": math.degrees(th_d), "integral": math.degrees(th_i),
              "lead": math.degrees(phi)}
    return ControllerDesign(
        kind=kind, drive=plant.drive, sign=sgn, crossover_rad_per_s=wc,
        phase_margin_target_deg=pm, lead_phase_deg=math.degrees(phi), phase_budget_deg=budget,
        zero_rad_per_s=wz, pole_rad_per_s=wp, integral_zero_rad_per_s=wi, lead_gain=K,
        kp_A_per_signal=kp, kd_A_s_per_signal=kd, ki_A_per_signal_s=ki, derivative_filter_tau_s=tf_,
        numerator=num, denominator=den, tf=Ctf, sample_time_s=T, discrete_tf=Cd,
        discrete_numerator=dnum, discrete_denominator=dden, discretisation=disc, loop_delay_s=tau,
        current_loop_gain_V_per_A=kc, current_loop_bandwidth_rad_per_s=bw,
        loop_plant=control.ss(A, B, C, D), analog=net, signal_unit=p.sensor_unit,
    )


# --------------------------------------------------------------------------------------------
# Margins of an open-loop-unstable loop
# --------------------------------------------------------------------------------------------


def loop_transfer(plant: Plant, controller: ControllerDesign, *, sampled: bool | None = None,
                  loop_delay_s: float | None = None, pade_order: int = 6):
    """The loop transfer ``L = C P`` (python-control object) that the margins are taken of.

    Parameters
    ----------
    plant : Plant
    controller : ControllerDesign
    sampled : bool or None
        ``None``: sampled if the controller has a sample time. Sampled loops are exact at the
        sampling instants: ``P`` is discretised with a zero-order hold, the delay is rounded to
        whole samples (``z^-d``) and the current-drive sensor crosstalk ``G_i`` sees the
        previous sample's current (``G_i z^-1``), as in :func:`simulate`.
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
        raise GeometryError(w, "controller.drive", f"the plant's drive {plant.drive!r}", controller.drive)
    if sampled is None:
        sampled = controller.sample_time_s is not None
    tau = controller.loop_delay_s if loop_delay_s is None else float(loop_delay_s)
    if not (math.isfinite(tau) and tau >= 0):
        raise GeometryError(w, "loop_delay_s", "non-negative", loop_delay_s)
    A, B, C, D = _loop_plant_matrices(plant, controller.current_loop_gain_V_per_A)
    if sampled:
        T = controller.sample_time_s
        if T is None:
            raise GeometryError(w, "controller.sample_time_s", "set for a sampled loop", None)
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
    domain : str
        "continuous" or "discrete, T = ... s, delay d samples".
    gain_interval : tuple of float
        ``(k_low, k_high)``: the closed loop with ``k L`` is stable for ``k_low < k < k_high``
        (``k_high`` may be inf). ``(nan, nan)`` if the nominal loop is unstable.
    lower_gain_margin_dB, upper_gain_margin_dB : float
        ``20 log10`` of the two ends (the lower one is negative).
    phase_margin_deg : float
        Smallest phase margin over the gain crossovers (inf if none).
    gain_crossovers_rad_per_s, phase_margins_deg : ndarray, shape (w,)
    phase_crossovers_rad_per_s : ndarray
        Frequencies where ``L`` crosses the negative real axis.
    real_axis_crossings : ndarray
        Distinct negative-real-axis crossings of the Nyquist curve (whole contour).
    encirclements_ccw : int
        Counter-clockwise encirclements of -1 by the Nyquist curve of ``L`` (counted numerically).
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

    domain: str
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

    def to_dict(self) -> dict:
        return {
            "domain": self.domain,
            "gain_interval": [_json_float(self.gain_interval[0]), _json_float(self.gain_interval[1])],
            "lower_gain_margin_dB": _json_float(self.lower_gain_margin_dB),
            "upper_gain_margin_dB": _json_float(self.upper_gain_margin_dB),
            "phase_margin_deg": _json_float(self.phase_margin_deg),
            "gain_crossovers_rad_per_s": self.gain_crossovers_rad_per_s.tolist(),
            "phase_margins_deg": self.phase_margins_deg.tolist(),
            "phase_crossovers_rad_per_s": self.phase_crossovers_rad_per_s.tolist(),
            "real_axis_crossings": self.real_axis_crossings.tolist(),
            "encirclements_ccw": self.encirclements_ccw,
            "open_loop_unstable_poles": self.open_loop_unstable_poles,
            "peak_sensitivity": self.peak_sensitivity,
            "peak_sensitivity_rad_per_s": self.peak_sensitivity_rad_per_s,
            "closed_loop_poles": _json_complex(self.closed_loop_poles),
            "closed_loop_poles_rad_per_s": _json_complex(self.closed_loop_poles_rad_per_s),
            "stable": self.stable,
        }


class _Contour:
    """Nyquist contour as segments ``f_k(t)``, ``t`` in [0, 1], refined by bisection."""

    def __init__(self, segments, kinds, evalf, n0=257):
        self.segs = segments
        self.kinds = kinds
        self.evalf = evalf
        ns = len(segments)
        self.tau = np.concatenate([k + np.linspace(0, 1, n0, endpoint=False) for k in range(ns)]
                                  + [np.array([float(ns)])])
        self.pts = self.points(self.tau)
        self.val = evalf(self.pts)

    def points(self, tau):
        tau = np.asarray(tau, dtype=float)
        k = np.minimum(np.floor(tau).astype(int), len(self.segs) - 1)
        t = tau - k
        out = np.empty(tau.shape, dtype=complex)
        for j in np.unique(k):
            mk = k == j
            out[mk] = self.segs[j](t[mk])
        return out

    def refine(self, centres, max_points=300_000, max_iter=200):
        centres = np.atleast_1d(np.asarray(centres, dtype=complex))
        for _ in range(max_iter):
            dL = np.abs(np.diff(self.val))
            bad = np.zeros(dL.size, dtype=bool)
            for c in centres:
                d = self.val - c
                inc = np.abs(np.angle(d[1:] / d[:-1]))
                near = np.minimum(np.abs(d[1:]), np.abs(d[:-1]))
                bad |= (inc > np.pi / 8) | (dL > 0.5 * near)
            if not bad.any():
                return
            mids = 0.5 * (self.tau[:-1][bad] + self.tau[1:][bad])
            if self.tau.size + mids.size > max_points:
                break
            newp = self.points(mids)
            newv = self.evalf(newp)
            tau = np.concatenate([self.tau, mids])
            order = np.argsort(tau, kind="stable")
            self.tau = tau[order]
            self.pts = np.concatenate([self.pts, newp])[order]
            self.val = np.concatenate([self.val, newv])[order]
        raise SolverError("loop_margins: Nyquist curve must stay clear of the counted points; got a "
                          "curve through (or too near) one of them (marginal loop).")

    def winding(self, c) -> float:
        d = self.val - c
        return float(np.sum(np.angle(d[1:] / d[:-1])) / (2 * np.pi))

    def value_at(self, tau) -> complex:
        return complex(self.evalf(self.points(np.array([tau])))[0])


def _nyquist_segments(poles, dt, scale):
    """Segments of the Nyquist contour, indented around poles on the stability boundary."""
    segs, kinds = [], []
    if dt is None:
        tol = 1e-9 * max(scale, float(np.max(np.abs(poles))) if poles.size else scale)
        axis = np.sort(np.unique(np.round(poles[np.abs(poles.real) <= tol].imag, 12)))
        hi = 1e3 * max(scale, float(np.max(np.abs(poles))) if poles.size else scale)
        ws = 1e-3 * scale

        def axis_seg(a, b):
            ua, ub = np.arcsinh(a / ws), np.arcsinh(b / ws)
            return lambda t: 1j * ws * np.sinh(ua + t * (ub - ua))

        def indent(wj, e):
            return lambda t: 1j * wj + e * np.exp(1j * (-np.pi / 2 + np.pi * t))

        a = -hi
        for wj in axis:
            e = 1e-6 * max(scale, abs(wj))
            segs.append(axis_seg(a, wj - e))
            kinds.append("axis")
            segs.append(indent(wj, e))
            kinds.append("indent")
            a = wj + e
        segs.append(axis_seg(a, hi))
        kinds.append("axis")
        segs.append(lambda t: hi * np.exp(1j * (np.pi / 2 - np.pi * t)))
        kinds.append("arc")
    else:
        on = poles[np.abs(np.abs(poles) - 1) <= 1e-9]
        th = np.sort(np.unique(np.round(np.angle(on), 12)))
        if th.size:
            ext = np.concatenate([th, [th[0] + 2 * np.pi]])
            gap = int(np.argmax(np.diff(ext)))
            th0 = 0.5 * (ext[gap] + ext[gap + 1])
            th = np.sort((th - th0) % (2 * np.pi)) + th0
        else:
            th0 = -np.pi

        def arc(a, b):
            return lambda t: np.exp(1j * (a + t * (b - a)))

        def indent(tj, e):
            return lambda t: np.exp(1j * tj) * (1 + e * np.exp(1j * (-np.pi / 2 + np.pi * t)))

        a = th0
        for tj in th:
            e = 1e-6
            segs.append(arc(a, tj - e))
            kinds.append("axis")
            segs.append(indent(tj, e))
            kinds.append("indent")
            a = tj + e
        segs.append(arc(a, th0 + 2 * np.pi))
        kinds.append("axis")
    return segs, kinds


def _ss_arrays(sys):
    return (np.asarray(sys.A, float), np.asarray(sys.B, float), np.asarray(sys.C, float),
            np.asarray(sys.D, float))


def _root(f, a, b, fa, fb):
    """Root of f in [a, b] by brentq; linear interpolation if rounding hides the sign change."""
    try:
        return brentq(f, a, b, xtol=1e-14)
    except ValueError:
        return a + (b - a) * fa / (fa - fb) if fa != fb else 0.5 * (a + b)


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
    with gain ``k`` is stable iff the Nyquist curve encircles ``-1/k`` counter-clockwise
    ``P_ol`` times. The contour runs up the imaginary axis (around the unit circle for a
    sampled loop), is indented to the right of (outside) poles on the boundary, and closes over
    the right half plane; ``L`` is evaluated on it exactly, the winding is summed from phase
    increments after bisection refinement (each increment < 22.5 deg). The count is constant
    for ``-1/k`` between two negative-real-axis crossings, which gives the gain interval: an
    open-loop-unstable loop has a *lower* gain margin (below 1) as well as an upper one.
    """
    L = loop_transfer(plant, controller, sampled=sampled, loop_delay_s=loop_delay_s)
    A, B, C, D = _ss_arrays(L)
    dt = L.dt if L.isdtime(strict=True) else None
    poles = np.linalg.eigvals(A) if A.size else np.zeros(0, complex)
    scale = controller.crossover_rad_per_s
    if dt is None:
        tol = 1e-9 * max(scale, float(np.max(np.abs(poles))) if poles.size else scale)
        n_unst = int(np.sum(poles.real > tol))
        domain = "continuous"
    else:
        n_unst = int(np.sum(np.abs(poles) > 1 + 1e-9))
        tau = controller.loop_delay_s if loop_delay_s is None else float(loop_delay_s)
        domain = f"discrete, T = {dt:g} s, delay {int(round(tau / dt))} samples"

    def evalf(p):
        return _eval_ss(A, B, C, D, p)

    segs, kinds = _nyquist_segments(poles, dt, scale)
    cont = _Contour(segs, kinds, evalf)
    cont.refine([-1.0])

    # negative-real-axis crossings (whole contour)
    im = cont.val.imag
    xs = []
    for i in np.flatnonzero(np.sign(im[:-1]) * np.sign(im[1:]) < 0):
        tr = _root(lambda t: cont.value_at(t).imag, cont.tau[i], cont.tau[i + 1], im[i], im[i + 1])
        xs.append(cont.value_at(tr).real)
    xs.extend(cont.val.real[im == 0])
    # the contour meets the real axis of L at the symmetric points (s = 0 and s = inf; z = +-1),
    # where L is real; add them explicitly (one of them is the contour's start/end)
    special = [0.0] if dt is None else [1.0, -1.0]
    for sp in special:
        if not np.any(np.abs(poles - sp) < 1e-9):
            xs.append(float(evalf(np.array([sp])).real[0]))
    if dt is None:
        xs.append(float(D[0, 0]) if D.size else 0.0)
    big = float(np.max(np.abs(cont.val))) if cont.val.size else 1.0
    xs = np.sort(np.array([x for x in xs if x < -1e-12 * big]))
    neg = []
    for x in xs:
        if not neg or abs(x - neg[-1]) > 1e-7 * abs(x):
            neg.append(float(x))
    neg = np.array(neg)
    # test points between crossings
    edges = np.concatenate([[-np.inf], neg, [0.0]])
    tests = []
    for a, b in zip(edges[:-1], edges[1:]):
        tests.append(2 * b if not np.isfinite(a) else (a / 2 if b == 0 else 0.5 * (a + b)))
    cont.refine(np.concatenate([[-1.0], tests]))
    n_enc_raw = cont.winding(-1.0)
    n_enc = int(round(n_enc_raw))
    if abs(n_enc_raw - n_enc) > 1e-6:
        raise SolverError(f"loop_margins: winding number must be an integer; got {n_enc_raw:.6g}.")
    stable_iv = [int(round(cont.winding(c))) == n_unst for c in tests]
    k_low = k_high = math.nan
    for j, (a, b) in enumerate(zip(edges[:-1], edges[1:])):
        if a < -1.0 < b and stable_iv[j]:
            lo, hi = j, j
            while lo > 0 and stable_iv[lo - 1]:
                lo -= 1
            while hi < len(stable_iv) - 1 and stable_iv[hi + 1]:
                hi += 1
            a, b = edges[lo], edges[hi + 1]
            k_low = 0.0 if not np.isfinite(a) else -1.0 / a
            k_high = math.inf if b == 0 else -1.0 / b
    # gain and phase crossovers on positive frequencies
    tau_ax = cont.tau
    kidx = np.minimum(np.floor(tau_ax).astype(int), len(segs) - 1)
    is_axis = np.array([kinds[k] == "axis" for k in kidx])
    if dt is None:
        freq = cont.pts.imag
    else:
        freq = np.angle(cont.pts) / dt
    pos = is_axis & (freq > 0)
    if dt is not None:
        pos &= np.abs(cont.pts) > 1 - 1e-12
    mag = np.log(np.abs(cont.val))
    im = cont.val.imag
    wgc, pms = [], []
    wpc = []
    idx = np.flatnonzero(pos[:-1] & pos[1:] & (kidx[:-1] == kidx[1:]))
    for i in idx:
        if np.sign(mag[i]) * np.sign(mag[i + 1]) < 0:
            tr = _root(lambda t: math.log(abs(cont.value_at(t))), tau_ax[i], tau_ax[i + 1], mag[i], mag[i + 1])
            pt = cont.points(np.array([tr]))[0]
            wgc.append(float(pt.imag if dt is None else np.angle(pt) / dt))
            pms.append(math.degrees(float(np.angle(-cont.value_at(tr)))))
        if np.sign(im[i]) * np.sign(im[i + 1]) < 0 and cont.val[i].real < 0:
            tr = _root(lambda t: cont.value_at(t).imag, tau_ax[i], tau_ax[i + 1], im[i], im[i + 1])
            pt = cont.points(np.array([tr]))[0]
            wpc.append(float(pt.imag if dt is None else np.angle(pt) / dt))
    order = np.argsort(wgc)
    wgc = np.array(wgc)[order]
    pms = np.array(pms)[order]
    # peak sensitivity
    sens = np.where(pos, 1.0 / np.abs(1.0 + cont.val), 0.0)
    i = int(np.argmax(sens))
    lo_t, hi_t = tau_ax[max(i - 1, 0)], tau_ax[min(i + 1, tau_ax.size - 1)]
    res = minimize_scalar(lambda t: -1.0 / abs(1.0 + cont.value_at(t)), bounds=(lo_t, hi_t),
                          method="bounded", options={"xatol": 1e-12})
    ms = max(float(sens[i]), float(-res.fun))
    tbest = res.x if -res.fun > sens[i] else tau_ax[i]
    pb = cont.points(np.array([tbest]))[0]
    w_ms = float(pb.imag if dt is None else np.angle(pb) / dt)
    # closed-loop poles
    d0 = float(D[0, 0]) if D.size else 0.0
    Acl = A - B @ C / (1.0 + d0)
    clp = np.linalg.eigvals(Acl) if Acl.size else np.zeros(0, complex)
    if dt is None:
        stable = bool(np.all(clp.real < 0))
        cls = clp
    else:
        stable = bool(np.all(np.abs(clp) < 1))
        with np.errstate(divide="ignore"):
            cls = np.log(clp.astype(complex)) / dt
    clp = clp[np.argsort(-np.abs(clp) if dt is not None else -clp.real, kind="stable")]
    cls = cls[np.argsort(-cls.real, kind="stable")]
    return Margins(
        domain=domain, gain_interval=(k_low, k_high),
        lower_gain_margin_dB=20 * math.log10(k_low) if k_low > 0 else (-math.inf if k_low == 0 else math.nan),
        upper_gain_margin_dB=20 * math.log10(k_high) if k_high > 0 else math.nan,
        phase_margin_deg=float(np.min(pms)) if pms.size else math.inf,
        gain_crossovers_rad_per_s=wgc, phase_margins_deg=pms,
        phase_crossovers_rad_per_s=np.sort(np.array(wpc)), real_axis_crossings=neg,
        encirclements_ccw=n_enc, open_loop_unstable_poles=n_unst, peak_sensitivity=ms,
        peak_sensitivity_rad_per_s=w_ms, closed_loop_poles=clp, closed_loop_poles_rad_per_s=cls,
        stable=stable, loop=L,
    )


@dataclass(frozen=True)
class ProportionalStudy:
    """Why pure proportional feedback cannot hold the floater (see :func:`proportional_only`).

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
        Some positive gain gives all poles strictly in the left half plane.
    back_emf_damping_per_s2 : float
        ``k_i^2/(m L)`` (voltage drive); stable window only if it exceeds ``-k_s/m``.
    explanation : str
    """

    drive: str
    critical_gain: float
    gains: np.ndarray
    closed_loop_poles_rad_per_s: np.ndarray
    max_real_part_rad_per_s: np.ndarray
    min_damping_ratio: np.ndarray
    stabilisable: bool
    back_emf_damping_per_s2: float
    explanation: str

    def to_dict(self) -> dict:
        return {
            "drive": self.drive, "critical_gain": self.critical_gain, "gains": self.gains.tolist(),
            "closed_loop_poles_rad_per_s": [_json_complex(r) for r in self.closed_loop_poles_rad_per_s],
            "max_real_part_rad_per_s": self.max_real_part_rad_per_s.tolist(),
            "min_damping_ratio": [_json_float(v) for v in self.min_damping_ratio],
            "stabilisable": self.stabilisable,
            "back_emf_damping_per_s2": self.back_emf_damping_per_s2,
            "explanation": self.explanation,
        }


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
    A, B, C, D = plant.A, plant.B, plant.C, plant.D
    rows, maxre, zeta = [], [], []
    for K in gains:
        Ks = sgn * K
        Acl = A - B @ C * Ks / (1.0 + Ks * D[0, 0])
        ev = np.linalg.eigvals(Acl)
        ev = ev[np.argsort(-ev.real, kind="stable")]
        rows.append(ev)
        maxre.append(float(np.max(ev.real)))
        cpx = ev[np.abs(ev.imag) > 1e-9 * max(1.0, float(np.max(np.abs(ev))))]
        zeta.append(float(np.min(-cpx.real / np.abs(cpx))) if cpx.size else math.nan)
    maxre = np.array(maxre)
    scale = max(1.0, plant.mechanical_pole_rad_per_s)
    tol = 1e-9 * scale
    b_emf = ki**2 / (m * prm.inductance_H)
    p2 = -ks / m
    if plant.drive == "current":
        stabilisable = False
        w_osc = math.sqrt(max(gains.max() * abs(ki * gs) / m - p2, 0.0))
        expl = (f"Current drive, proportional only: s^2 + (k_s + K k_i G_s)/m = 0. Below the critical "
                f"gain {kcrit:.4g} A/{prm.sensor_unit} a real pole is positive (the floater runs away, "
                f"rate up to {plant.mechanical_pole_rad_per_s:.4g} 1/s); above it both poles sit on the "
                f"imaginary axis (max real part {np.max(np.abs(maxre[gains > kcrit])) if np.any(gains > kcrit) else 0:.2g} "
                f"1/s, numerically zero): an undamped oscillation, e.g. {w_osc:.4g} rad/s at "
                f"{gains.max() / kcrit:g} x critical. No gain adds damping; a derivative (lead) term is needed.")
    else:
        a = prm.resistance_ohm / prm.inductance_H
        stabilisable = bool(np.any(maxre < -tol))
        if b_emf > p2:
            lo = a * p2 * m * prm.inductance_H / abs(gs * ki)
            hi = a * b_emf * m * prm.inductance_H / abs(gs * ki)
            window = f"a stable window exists for {lo:.4g} < K < {hi:.4g} V/{prm.sensor_unit} (weakly damped)"
        else:
            window = "no gain is stable"
        expl = (f"Voltage drive, proportional only: Routh-Hurwitz on s^3 + (R/L) s^2 + (b - p^2) s + "
                f"(K' - (R/L) p^2) needs b = k_i^2/(m L) = {b_emf:.4g} 1/s^2 above p^2 = -k_s/m = "
                f"{p2:.4g} 1/s^2: {window}. Across the gains tried the fastest mode grows at "
                f"{maxre.min():.4g} to {maxre.max():.4g} 1/s (positive = growing): the coil's electrical "
                f"lag turns the undamped oscillation of current drive into a growing one.")
    return ProportionalStudy(
        drive=plant.drive, critical_gain=kcrit, gains=gains,
        closed_loop_poles_rad_per_s=np.array(rows), max_real_part_rad_per_s=maxre,
        min_damping_ratio=np.array(zeta), stabilisable=stabilisable,
        back_emf_damping_per_s2=b_emf, explanation=expl,
    )


# --------------------------------------------------------------------------------------------
# Force table, sensor, scenario
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class ForceTable:
    """Magnetic force along ``+s`` versus position: ``F(s, I) = F0(s) + I Fk(s)``.

    Gravity is *not* in the table; :func:`simulate` adds ``-m g``. Interpolated by a cubic
    spline (``scipy.interpolate.CubicSpline``, not-a-knot ends). ``Fk`` is also the back-EMF
    coefficient ``d lambda/ds`` (V s/m) by reciprocity.

    Attributes
    ----------
    positions_m : ndarray, shape (g,)
        Strictly increasing, ``g >= 4``; the floater leaving this range ends a simulation.
    F0_N : ndarray, shape (g,)
        Force at zero current.
    Fk_N_per_A : ndarray, shape (g,)
        Force per ampere.
    """

    positions_m: np.ndarray
    F0_N: np.ndarray
    Fk_N_per_A: np.ndarray

    def __post_init__(self) -> None:
        w = "ForceTable"
        s = np.asarray(self.positions_m, dtype=float)
        f0 = np.asarray(self.F0_N, dtype=float)
        fk = np.asarray(self.Fk_N_per_A, dtype=float)
        if s.ndim != 1 or s.size < 4:
            raise GeometryError(w, "positions_m", "a 1-D array of at least 4 positions", s.shape)
        if f0.shape != s.shape or fk.shape != s.shape:
            raise GeometryError(w, "F0_N and Fk_N_per_A", f"shape {s.shape} like positions_m",
                                (f0.shape, fk.shape))
        if not (np.all(np.isfinite(s)) and np.all(np.isfinite(f0)) and np.all(np.isfinite(fk))):
            raise GeometryError(w, "table values", "finite", "non-finite entries")
        if np.any(np.diff(s) <= 0):
            raise GeometryError(w, "positions_m", "strictly increasing", s.tolist()[:6])
        object.__setattr__(self, "positions_m", s)
        object.__setattr__(self, "F0_N", f0)
        object.__setattr__(self, "Fk_N_per_A", fk)
        object.__setattr__(self, "_f0", CubicSpline(s, f0))
        object.__setattr__(self, "_fk", CubicSpline(s, fk))

    @property
    def range_m(self) -> tuple[float, float]:
        return float(self.positions_m[0]), float(self.positions_m[-1])

    def force_N(self, s_m, current_A) -> np.ndarray:
        """``F0(s) + I Fk(s)`` (N), broadcast over ``s_m`` and ``current_A``."""
        return self._f0(s_m) + np.asarray(current_A) * self._fk(s_m)

    def force_per_ampere_N_per_A(self, s_m) -> np.ndarray:
        return self._fk(s_m)

    def stiffness_N_per_m(self, s_m, current_A) -> np.ndarray:
        """``k_s = -dF/ds`` (N/m) from the spline derivative."""
        return -(self._f0(s_m, 1) + np.asarray(current_A) * self._fk(s_m, 1))

    def hover_current_A(self, mass_kg: float, gravity_m_per_s2: float, s_m: float = 0.0) -> float:
        """Current that balances ``m g`` at ``s_m``: ``(m g - F0)/Fk`` (A)."""
        fk = float(self._fk(s_m))
        if fk == 0:
            raise SolverError(f"ForceTable.hover_current_A: Fk at s = {s_m:g} m must be non-zero; got 0.")
        return (mass_kg * gravity_m_per_s2 - float(self._f0(s_m))) / fk

    def linearise(self, s_m: float, current_A: float) -> tuple[float, float]:
        """``(k_s N/m, k_i N/A)`` at a position and current."""
        return float(self.stiffness_N_per_m(s_m, current_A)), float(self._fk(s_m))


@dataclass(frozen=True, eq=False)
class Sensor:
    """Position sensor: ``signal = clip(function(s_m, current_A), *range_signal)``.

    Attributes
    ----------
    function : callable
        Vectorised ``(s_m (n,), current_A (n,)) -> signal (n,)``.
    range_signal : tuple of float
        Output clip (the sensor saturates outside it).
    unit : str
    """

    function: Callable[[np.ndarray, np.ndarray], np.ndarray]
    range_signal: tuple[float, float] = (-math.inf, math.inf)
    unit: str = "V"

    def __call__(self, s_m, current_A) -> np.ndarray:
        return np.clip(self.function(s_m, current_A), self.range_signal[0], self.range_signal[1])


def linear_sensor(params: PlantParameters, range_signal=(-math.inf, math.inf)) -> Sensor:
    """``y = G_s s + G_i (I - I0)``, clipped to ``range_signal``."""
    gs, gi, i0 = params.sensor_gain_per_m, params.sensor_crosstalk_per_A, params.hover_current_A
    lo, hi = float(range_signal[0]), float(range_signal[1])
    if not lo < hi:
        raise GeometryError("linear_sensor", "range_signal", "(low, high) with low < high", range_signal)
    return Sensor(lambda s, i: gs * np.asarray(s) + gi * (np.asarray(i) - i0), (lo, hi), params.sensor_unit)


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
        _check_positive(w, "t_end_s", self.t_end_s)
        for k in self.__dataclass_fields__:
            v = getattr(self, k)
            if v is not None:
                _check_finite(w, k, v)
        for k in ("reference_step_time_s", "force_step_time_s", "force_impulse_time_s", "payload_time_s"):
            if getattr(self, k) < 0:
                raise GeometryError(w, k, "non-negative", getattr(self, k))


@dataclass(frozen=True)
class SimulationEvent:
    """The floater left the force table: ``kind`` is "fell"/"contact" (vertical axis: below /
    above the table) or "left_table_low"/"left_table_high" (other axes)."""

    time_s: float
    kind: str
    s_m: float


@dataclass(frozen=True, eq=False)
class SimulationResult:
    """Time series of one simulation, shapes (t,).

    Attributes
    ----------
    time_s, s_m, v_m_per_s, current_A, voltage_V, signal, command_A : ndarray
        ``voltage_V`` is the applied coil voltage for voltage drive; for current drive it is
        ``R I + Fk(s) v`` (the ``L dI/dt`` spikes of a stepped current are left out).
        ``command_A`` is the held current command.
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

    def columns(self) -> dict[str, np.ndarray]:
        """Arrays with unit-named keys."""
        return {"time_s": self.time_s, "s_m": self.s_m, "v_m_per_s": self.v_m_per_s,
                "current_A": self.current_A, "voltage_V": self.voltage_V,
                f"signal_{self.signal_unit}": self.signal, "command_A": self.command_A}

    def to_csv_rows(self) -> list[list]:
        """Header row of unit-named keys, then one row of floats per sample."""
        cols = self.columns()
        rows = [list(cols)]
        rows.extend([float(v) for v in r] for r in zip(*cols.values()))
        return rows


# --------------------------------------------------------------------------------------------
# Nonlinear simulation
# --------------------------------------------------------------------------------------------


class _Physics:
    """Vectorised right-hand side shared by solve_ivp (n = 1) and the batch RK4 (n starts)."""

    def __init__(self, params: PlantParameters, table: ForceTable, drive: str, kc: float, coil_on: bool):
        self.p = params
        self.table = table
        self.drive = drive
        self.kc = kc
        self.coil_on = coil_on
        self.imax = params.max_current_A
        self.vs = params.supply_voltage_V

    def current_and_voltage(self, X, held):
        """Actual coil current and applied voltage for states X (x, n) and held command (n,)."""
        p = self.p
        s, v = X[0], X[1]
        fk = self.table._fk(s)
        if self.drive == "current":
            I = np.clip(held, -self.imax, self.imax) if self.coil_on else np.zeros_like(s)
            V = p.resistance_ohm * I + fk * v
        else:
            I = X[2]
            if self.coil_on:
                iref = np.clip(held, -self.imax, self.imax)
                V = np.clip(p.resistance_ohm * iref + self.kc * (iref - I), -self.vs, self.vs)
            else:
                V = np.zeros_like(s)
        return I, V, fk

    def rhs(self, X, held, mass, f_ext):
        p = self.p
        I, V, fk = self.current_and_voltage(X, held)
        s, v = X[0], X[1]
        acc = (self.table._f0(s) + I * fk + f_ext) / mass - p.gravity_m_per_s2
        if self.drive == "current":
            return np.stack([v, acc])
        dI = (V - p.resistance_ohm * I - fk * v) / p.inductance_H
        return np.stack([v, acc, dI])


def _event_kind(params: PlantParameters, high: bool) -> str:
    if params.axis_name.strip().lower() == "vertical":
        return "contact" if high else "fell"
    return "left_table_high" if high else "left_table_low"


class _DigitalController:
    """Discrete controller state-space, vectorised over n starts: u = C x + D e, x+ = A x + B e."""

    def __init__(self, controller: ControllerDesign, n: int):
        sysd = control.ss(controller.discrete_tf)
        self.A, self.B, self.C, self.D = _ss_arrays(sysd)
        self.x = np.zeros((self.A.shape[0], n))

    def step(self, e):
        u = (self.C @ self.x)[0] + self.D[0, 0] * e
        self.x = self.A @ self.x + self.B @ e[None, :]
        return u


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
        Defaults to :func:`linear_sensor` without a range clip.
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
    table ends. Current drive: ``I = clip(I_cmd, +-I_max)``. Voltage drive: the analog current
    loop ``V = clip(R i_ref + K_c (i_ref - I), +-V_supply)``, ``i_ref = clip(I_cmd, +-I_max)``,
    ``L dI/dt = V - R I - Fk(s) v``. The sensor sees the current just before each sample (the
    new command is not yet applied). No anti-windup.
    """
    w = "simulate"
    if controller is not None:
        if controller.sample_time_s is None:
            raise GeometryError(w, "controller.sample_time_s", "set (the simulation runs the sampled "
                                "controller; use a short sample time to stand in for an analog build)", None)
        drive = controller.drive if drive is None else drive
        if drive != controller.drive:
            raise GeometryError(w, "drive", f"the controller's drive {controller.drive!r}", drive)
    drive = _check_choice(w, "drive", "current" if drive is None else drive, DRIVES)
    sensor = linear_sensor(params) if sensor is None else sensor
    tau = float(loop_delay_s)
    if not (math.isfinite(tau) and tau >= 0):
        raise GeometryError(w, "loop_delay_s", "non-negative", loop_delay_s)
    lo, hi = table.range_m
    sc = scenario
    if not lo < sc.s0_m < hi:
        raise ContactError(f"{w}: scenario.s0_m must be inside the force table ({lo:g}, {hi:g}) m; "
                           f"got {sc.s0_m:g}.")
    coil_on = controller is not None
    kc = controller.current_loop_gain_V_per_A if coil_on else 0.0
    phys = _Physics(params, table, drive, kc, coil_on)
    i0 = params.hover_current_A
    T = controller.sample_time_s if coil_on else None
    t_end = sc.t_end_s
    dt_out = sc.output_step_s if sc.output_step_s is not None else (T if T is not None else t_end / 1000)
    # actions: (time, priority, kind)
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
    # group by time
    tol_t = 1e-12 * max(t_end, 1.0)
    groups: list[tuple[float, list[str]]] = []
    for t, _, kind in acts:
        if groups and abs(t - groups[-1][0]) <= tol_t:
            groups[-1][1].append(kind)
        else:
            groups.append((t, [kind]))
    if not groups or groups[0][0] > tol_t:
        groups.insert(0, (0.0, []))
    times_out = np.arange(0.0, t_end + 0.5 * dt_out, dt_out)

    # state
    ic = sc.initial_current_A
    if ic is None:
        ic = i0 if coil_on else 0.0
    X = np.array([sc.s0_m, sc.v0_m_per_s] + ([ic] if drive == "voltage" else []), dtype=float)
    mass = params.mass_kg
    f_ext = 0.0
    s_ref = 0.0
    held = np.array([i0 if coil_on else 0.0])
    ctrl = _DigitalController(controller, 1) if coil_on else None
    queue: deque = deque()
    applied_count = 0
    rec_t, rec_X, rec_held = [], [], []
    events: list[SimulationEvent] = []

    def ev_low(t, x, *a):
        return x[0] - lo
    ev_low.terminal, ev_low.direction = True, -1

    def ev_high(t, x, *a):
        return x[0] - hi
    ev_high.terminal, ev_high.direction = True, 1

    atol = np.array([1e-12, 1e-10] + ([1e-10] if drive == "voltage" else []))
    for gi, (tg, kinds) in enumerate(groups):
        for kind in kinds:
            if kind == "reference":
                s_ref = sc.reference_m
            elif kind == "force":
                f_ext = sc.force_step_N
            elif kind == "impulse":
                X[1] += sc.force_impulse_N_s / mass
            elif kind == "payload":
                mass = params.mass_kg + sc.payload_kg
                if mass <= 0:
                    raise GeometryError(w, "mass_kg + scenario.payload_kg", "positive", mass)
            elif kind == "sample":
                I, _, _ = phys.current_and_voltage(X[:, None], held)
                y = sensor(np.array([X[0]]), I)
                y_ref = sensor(np.array([s_ref]), np.array([i0]))
                u = ctrl.step(y - y_ref)
                queue.append(i0 - u)
            elif kind == "apply":
                held = queue.popleft()
                applied_count += 1
        t_next = groups[gi + 1][0] if gi + 1 < len(groups) else t_end
        rec_t.append(tg)
        rec_X.append(X.copy())
        rec_held.append(float(held[0]))
        if t_next <= tg + tol_t:
            continue
        inner = times_out[(times_out > tg + tol_t) & (times_out < t_next - tol_t)]
        sol = solve_ivp(lambda t, x: phys.rhs(x[:, None], held, mass, f_ext)[:, 0], (tg, t_next), X,
                        method="RK45", t_eval=inner if inner.size else None, events=(ev_low, ev_high),
                        rtol=rtol, atol=atol, dense_output=False)
        if inner.size:
            rec_t.extend(sol.t.tolist())
            rec_X.extend(sol.y.T.copy())
            rec_held.extend([float(held[0])] * sol.t.size)
        if sol.status == 1:
            for j, high in ((0, False), (1, True)):
                if sol.t_events[j].size:
                    te = float(sol.t_events[j][0])
                    xe = sol.y_events[j][0]
                    events.append(SimulationEvent(te, _event_kind(params, high), float(xe[0])))
                    rec_t.append(te)
                    rec_X.append(xe.copy())
                    rec_held.append(float(held[0]))
            break
        if sol.status < 0:
            raise SolverError(f"{w}: solve_ivp must succeed; got {sol.message!r} at t = {tg:g} s.")
        X = sol.y[:, -1].copy()
    else:
        rec_t.append(t_end)
        rec_X.append(X.copy())
        rec_held.append(float(held[0]))
    t_arr = np.array(rec_t)
    Xa = np.array(rec_X).T
    held_a = np.array(rec_held)
    order = np.argsort(t_arr, kind="stable")
    t_arr, Xa, held_a = t_arr[order], Xa[:, order], held_a[order]
    I, V, _ = phys.current_and_voltage(Xa, held_a)
    y = sensor(Xa[0], I)
    return SimulationResult(time_s=t_arr, s_m=Xa[0], v_m_per_s=Xa[1], current_A=np.asarray(I, float),
                            voltage_V=np.asarray(V, float), signal=np.asarray(y, float), command_A=held_a,
                            events=tuple(events), signal_unit=sensor.unit, drive=drive)


# --------------------------------------------------------------------------------------------
# Capture range (vectorised fixed-step RK4 over all starts)
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
        "captured", "fell", "contact", "left_table_low", "left_table_high" or "not settled".
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

    def to_dict(self) -> dict:
        return {
            "s0_grid_m": self.s0_grid_m.tolist(), "v0_grid_m_per_s": self.v0_grid_m_per_s.tolist(),
            "captured": self.captured.tolist(), "fate": self.fate.tolist(),
            "band_m": list(self.band_m), "band_resolution_m": self.band_resolution_m,
            "step_s": self.step_s, "tolerance_m": self.tolerance_m,
            "tolerance_m_per_s": self.tolerance_m_per_s, "t_end_s": self.t_end_s,
        }


def _rk4_step_size(params: PlantParameters, table: ForceTable, controller: ControllerDesign, drive: str):
    """RK4 sub-steps per sample: h lambda_max <= 0.2, at least 2 per sample."""
    T = controller.sample_time_s
    A, _, _, _ = (_current_loop_matrices(params, controller.current_loop_gain_V_per_A)
                  if drive == "voltage" else _plant_matrices(params, "current")[:4])
    lam = float(np.max(np.abs(np.linalg.eigvals(A))))
    s = np.linspace(*table.range_m, 201)
    kmax = float(np.max(np.abs(table.stiffness_N_per_m(s, params.max_current_A)))
                 + np.max(np.abs(table.stiffness_N_per_m(s, 0.0))))
    lam = max(lam, math.sqrt(kmax / params.mass_kg))
    m = max(2, int(math.ceil(T * lam / 0.2)))
    return m, T / m


def _batch_run(params, table, controller, drive, sensor, s0, v0, t_end, delay_s):
    """Vectorised RK4 over n starts; returns final s, v, fate codes (0 ok, -1 low, +1 high)."""
    n = s0.size
    phys = _Physics(params, table, drive, controller.current_loop_gain_V_per_A, True)
    i0 = params.hover_current_A
    M, h = _rk4_step_size(params, table, controller, drive)
    T = controller.sample_time_s
    nsamp = int(math.ceil(t_end / T - 1e-9))
    d_sub = int(round(delay_s / h))
    X = np.vstack([s0, v0] + ([np.full(n, i0)] if drive == "voltage" else []))
    alive = np.ones(n, dtype=bool)
    fate = np.zeros(n, dtype=int)
    held = np.full(n, i0)
    ctrl = _DigitalController(controller, n)
    y_ref = sensor(np.zeros(n), np.full(n, i0))
    queue: deque = deque()
    lo, hi = table.range_m
    mass = params.mass_kg
    step = 0
    for _ in range(nsamp):
        I, _, _ = phys.current_and_voltage(X, held)
        u = ctrl.step(sensor(X[0], I) - y_ref)
        queue.append((step + d_sub, i0 - u))
        for _ in range(M):
            while queue and queue[0][0] <= step:
                held = queue.popleft()[1]
            k1 = phys.rhs(X, held, mass, 0.0)
            k2 = phys.rhs(X + 0.5 * h * k1, held, mass, 0.0)
            k3 = phys.rhs(X + 0.5 * h * k2, held, mass, 0.0)
            k4 = phys.rhs(X + h * k3, held, mass, 0.0)
            Xn = X + (h / 6.0) * (k1 + 2 * k2 + 2 * k3 + k4)
            X = np.where(alive[None, :], Xn, X)
            out_lo = alive & (X[0] <= lo)
            out_hi = alive & (X[0] >= hi)
            fate[out_lo] = -1
            fate[out_hi] = 1
            alive &= ~(out_lo | out_hi)
            step += 1
        if not alive.any():
            break
    return X[0], X[1], fate, h


def capture_range(params: PlantParameters, table: ForceTable, controller: ControllerDesign, s0_grid_m,
                  v0_grid_m_per_s=(0.0,), *, t_end_s: float = 0.5, tolerance_m: float | None = None,
                  tolerance_m_per_s: float | None = None, sensor: Sensor | None = None,
                  loop_delay_s: float = 0.0, band_refine_rounds: int = 2) -> CaptureResult:
    """Grid of start offsets and velocities: which ones end at rest at the equilibrium.

    Parameters
    ----------
    params, table, controller
        As for :func:`simulate` (the controller must be sampled).
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
    All starts are integrated at once by classical fixed-step RK4 (vectorised over starts) with
    the controller sampled at its period ``T`` and ``M`` steps per sample, ``h = T/M``, ``M``
    the smallest integer >= 2 with ``h lambda_max <= 0.2`` (``lambda_max`` the largest plant
    eigenvalue magnitude, current loop included, or ``sqrt(max|k_s|/m)`` over the table). With a
    PD and an unbalanced table the rest point is offset from 0: use a PID or a larger tolerance.
    """
    w = "capture_range"
    if controller.sample_time_s is None:
        raise GeometryError(w, "controller.sample_time_s", "set (sampled controller)", None)
    drive = controller.drive
    sensor = linear_sensor(params) if sensor is None else sensor
    s0g = np.sort(np.asarray(s0_grid_m, dtype=float).ravel())
    v0g = np.asarray(v0_grid_m_per_s, dtype=float).ravel()
    if not np.any(v0g == 0):
        v0g = np.concatenate([v0g, [0.0]])
    v0g = np.sort(v0g)
    lo, hi = table.range_m
    if s0g.size < 2 or s0g[0] <= lo or s0g[-1] >= hi:
        raise GeometryError(w, "s0_grid_m", f"at least 2 offsets inside the table ({lo:g}, {hi:g}) m",
                            (float(s0g[0]), float(s0g[-1])) if s0g.size else ())
    tol_s = 0.01 * (hi - lo) if tolerance_m is None else _check_positive(w, "tolerance_m", tolerance_m)
    tol_v = tol_s * controller.crossover_rad_per_s if tolerance_m_per_s is None \
        else _check_positive(w, "tolerance_m_per_s", tolerance_m_per_s)
    S, Vv = np.meshgrid(s0g, v0g, indexing="ij")

    def run(s0, v0):
        fs, fv, fate, h = _batch_run(params, table, controller, drive, sensor, s0, v0, t_end_s, loop_delay_s)
        ok = (fate == 0) & (np.abs(fs) < tol_s) & (np.abs(fv) < tol_v)
        return ok, fate, fs, fv, h

    ok, fate, fs, fv, h = run(S.ravel(), Vv.ravel())
    names = np.where(fate == -1, _event_kind(params, False),
                     np.where(fate == 1, _event_kind(params, True),
                              np.where(ok, "captured", "not settled")))
    captured = ok.reshape(S.shape)
    j0 = int(np.flatnonzero(v0g == 0)[0])
    row = captured[:, j0]
    i_eq = int(np.argmin(np.abs(s0g)))
    if not row[i_eq]:
        raise SolverError(f"{w}: the start nearest the equilibrium (s0 = {s0g[i_eq]:g} m) must be captured; "
                          f"got {names.reshape(S.shape)[i_eq, j0]} (the loop does not hold the floater).")
    a = i_eq
    while a > 0 and row[a - 1]:
        a -= 1
    b = i_eq
    while b < row.size - 1 and row[b + 1]:
        b += 1
    # brackets: (uncaptured, captured) on each side; None if the grid edge is captured
    lo_br = (s0g[a - 1], s0g[a]) if a > 0 else None
    hi_br = (s0g[b], s0g[b + 1]) if b < row.size - 1 else None
    res = 0.0 if (lo_br is None and hi_br is None) else max(
        (lo_br[1] - lo_br[0]) if lo_br else 0.0, (hi_br[1] - hi_br[0]) if hi_br else 0.0)
    for _ in range(int(band_refine_rounds)):
        pts, parts = [], []
        for br in (lo_br, hi_br):
            if br is None:
                parts.append(0)
                continue
            inner = np.linspace(br[0], br[1], 9)[1:-1]
            pts.append(inner)
            parts.append(inner.size)
        if not pts:
            break
        q = np.concatenate(pts)
        okq = run(q, np.zeros_like(q))[0]
        k = 0
        if lo_br is not None:
            seg = okq[k:k + parts[0]]
            grid = np.concatenate([[lo_br[0]], q[k:k + parts[0]], [lo_br[1]]])
            flags = np.concatenate([[False], seg, [True]])
            # first captured point from the left whose right neighbours are captured
            idx = len(flags) - 1
            while idx > 0 and flags[idx - 1]:
                idx -= 1
            lo_br = (grid[idx - 1], grid[idx])
            k += parts[0]
        if hi_br is not None:
            seg = okq[k:k + parts[1]]
            grid = np.concatenate([[hi_br[0]], q[k:k + parts[1]], [hi_br[1]]])
            flags = np.concatenate([[True], seg, [False]])
            idx = 0
            while idx < len(flags) - 1 and flags[idx + 1]:
                idx += 1
            hi_br = (grid[idx], grid[idx + 1])
        res = max((lo_br[1] - lo_br[0]) if lo_br else 0.0, (hi_br[1] - hi_br[0]) if hi_br else 0.0)
    band = (float(lo_br[1]) if lo_br else float(s0g[0]), float(hi_br[0]) if hi_br else float(s0g[-1]))
    return CaptureResult(
        s0_grid_m=s0g, v0_grid_m_per_s=v0g, captured=captured, fate=names.reshape(S.shape), band_m=band,
        band_resolution_m=float(res), final_s_m=fs.reshape(S.shape), final_v_m_per_s=fv.reshape(S.shape),
        step_s=h, tolerance_m=tol_s, tolerance_m_per_s=tol_v, t_end_s=float(t_end_s),
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
    status : tuple of str, shape (b,)
        "limit cycle", "growing", "fell", "contact" (or "left_table_low/high").
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
    status: tuple[str, ...]
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

    def to_dict(self) -> dict:
        out = {}
        for k in self.__dataclass_fields__:
            v = getattr(self, k)
            if isinstance(v, np.ndarray):
                v = [_json_float(x) for x in v]
            elif isinstance(v, tuple):
                v = list(v)
            elif isinstance(v, float):
                v = _json_float(v)
            out[k] = v
        return out


def _relay_run(params, table, mode, band, lead, on, off, s_set, t_end, s0):
    """One on/off run. States: s, v, [I], Joule energy, supply energy; measures over the 2nd half."""
    p = params
    lo, hi = table.range_m
    up = float(np.sign(p.force_per_ampere_N_per_A))  # "on" pushes along +s if k_i > 0
    R, L = p.resistance_ohm, p.inductance_H
    volt = mode == "voltage"

    def rhs(t, x, state_on):
        s, v = x[0], x[1]
        fk = float(table._fk(s))
        if volt:
            I = x[2]
            V = on if state_on else off
            dI = [(V - R * I - fk * v) / L]
        else:
            I = on if state_on else off
            V = R * I + fk * v
            dI = []
        acc = (float(table._f0(s)) + I * fk) / p.mass_kg - p.gravity_m_per_s2
        return [v, acc] + dI + [R * I * I, V * I]

    def sigma(x):
        return up * ((x[0] - s_set) + lead * x[1])

    def ev_lo(t, x, *a):
        return x[0] - lo
    ev_lo.terminal, ev_lo.direction = True, -1

    def ev_hi(t, x, *a):
        return x[0] - hi
    ev_hi.terminal, ev_hi.direction = True, 1

    def ev_on(t, x, *a):  # while on: switch off when sigma rises above +band/2
        return sigma(x) - band / 2
    ev_on.terminal, ev_on.direction = True, 1

    def ev_off(t, x, *a):  # while off: switch on when sigma falls below -band/2
        return sigma(x) + band / 2
    ev_off.terminal, ev_off.direction = True, -1

    x = np.array([s0, 0.0] + ([p.hover_current_A] if volt else []) + [0.0, 0.0])
    iE = 3 if volt else 2
    state_on = sigma(x) < -band / 2
    t = 0.0
    half = 0.5 * t_end
    rec_t, rec_s, rec_I = [0.0], [s0], [x[2] if volt else (on if state_on else off)]
    on_times = []
    on_time_2nd = 0.0
    e_half = None
    status = "limit cycle"
    for _ in range(200_000):
        if t >= t_end - 1e-15:
            break
        target = half if t < half else t_end
        grid = np.arange(math.floor(t / 2e-4) + 1, math.floor(target / 2e-4) + 1) * 2e-4
        grid = grid[(grid > t) & (grid < target)]
        sol = solve_ivp(rhs, (t, target), x, args=(state_on,), method="RK45", rtol=1e-8, atol=1e-11,
                        events=(ev_on if state_on else ev_off, ev_lo, ev_hi),
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
        rec_I += (sy[2][keep].tolist() + [x_new[2]]) if volt else [on if state_on else off] * int(keep.sum() + 1)
        if state_on and t_new > half:
            on_time_2nd += t_new - max(t, half)
        t, x = t_new, x_new
        if e_half is None and t >= half - 1e-15 and j != 0:
            e_half = x[iE:iE + 2].copy()
        if j in (1, 2):
            status = _event_kind(p, j == 2)
            break
        if j == 0:
            state_on = not state_on
            if state_on:
                on_times.append(t)
    else:
        raise SolverError("hysteresis_study: switching must stay below 200000 events per run; got more "
                          "(band too narrow).")
    rec_t, rec_s, rec_I = np.array(rec_t), np.array(rec_s), np.array(rec_I)
    out = {"status": status, "end": t, "peak": float(np.max(np.abs(rec_I)))}
    sel = rec_t >= half
    if status != "limit cycle" or e_half is None:
        out.update(amp=math.nan, freq=math.nan, mean_s=math.nan, pj=math.nan, ps=math.nan, duty=math.nan)
        return out
    s2 = rec_s[sel]
    r3 = (rec_t >= half) & (rec_t < 0.75 * t_end)
    r4 = rec_t >= 0.75 * t_end
    a3 = 0.5 * (rec_s[r3].max() - rec_s[r3].min())
    a4 = 0.5 * (rec_s[r4].max() - rec_s[r4].min())
    if a4 > 1.5 * a3 and a4 > 1e-9:
        out["status"] = "growing"
    dur = t_end - half
    e_end = x[iE:iE + 2]
    out.update(amp=float(0.5 * (s2.max() - s2.min())), freq=sum(ti >= half for ti in on_times) / dur,
               mean_s=float(np.trapezoid(s2, rec_t[sel]) / dur), pj=float((e_end[0] - e_half[0]) / dur),
               ps=float((e_end[1] - e_half[1]) / dur), duty=on_time_2nd / dur)
    return out


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
        The linear design to compare with (simulated with :func:`simulate`); its derivative time
        ``Kd/Kp`` is the default ``lead_time_s``.
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
    _check_choice(w, "mode", mode, DRIVES)
    bands = np.atleast_1d(np.asarray(band_widths_m, dtype=float))
    if bands.size == 0 or np.any(~np.isfinite(bands)) or np.any(bands <= 0):
        raise GeometryError(w, "band_widths_m", "positive finite widths", bands.tolist())
    lead = (controller.kd_A_s_per_signal / controller.kp_A_per_signal) if lead_time_s is None \
        else float(lead_time_s)
    if not (math.isfinite(lead) and lead >= 0):
        raise GeometryError(w, "lead_time_s", "non-negative", lead_time_s)
    if mode == "current":
        on = params.max_current_A if on_current_A is None else float(on_current_A)
        off = float(off_current_A)
    else:
        on = params.supply_voltage_V
        off = float(off_voltage_V)
    s0 = set_position_m if s0_m is None else float(s0_m)
    runs = [_relay_run(params, table, mode, b, lead, on, off, set_position_m, t_end_s, s0) for b in bands]
    lin = simulate(params, table, controller, Scenario(t_end_s=t_end_s, s0_m=s0 + 0.5 * float(bands.max()),
                                                       reference_m=set_position_m))
    sel = lin.time_s >= 0.5 * t_end_s
    lin_amp = float(0.5 * (lin.s_m[sel].max() - lin.s_m[sel].min())) if sel.any() else math.nan
    lin_pj = float(np.mean(params.resistance_ohm * lin.current_A[sel] ** 2)) if sel.any() else math.nan

    def col(k):
        return np.array([r[k] for r in runs], dtype=float)

    return HysteresisStudy(
        mode=mode, lead_time_s=lead, band_widths_m=bands, status=tuple(r["status"] for r in runs),
        amplitude_m=col("amp"), frequency_Hz=col("freq"), mean_s_m=col("mean_s"),
        mean_joule_power_W=col("pj"), mean_supply_power_W=col("ps"), duty=col("duty"),
        peak_current_A=col("peak"), linear_amplitude_m=lin_amp, linear_mean_joule_power_W=lin_pj,
        hover_joule_power_W=params.resistance_ohm * params.hover_current_A**2, end_time_s=col("end"),
    )
