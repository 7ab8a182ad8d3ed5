"""Linear model of one degree of freedom of a levitated floater, and its force table.

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
  input is the coil voltage; the controller design then closes a fast analog proportional
  current loop (common practice, no source) so the outer loop commands a current.
- Linear sensor: ``y = G_s s + G_i (I - I0)`` in ``sensor_unit``; a nonlinear sensor is a
  callable with a range (:class:`Sensor`).
- Force table: ``F(s, I) = F0(s) + I Fk(s)`` is the magnetic force along ``+s`` only; the
  simulation adds ``-m g``. ``Fk`` is also the back-EMF coefficient ``d lambda/ds``.
- Index letters in shape lines: ``t`` time samples, ``g`` table positions, ``a`` start
  offsets, ``b`` start velocities (or band widths), ``w`` frequencies, ``x`` states.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import control
import numpy as np
from scipy.constants import g as STANDARD_GRAVITY_M_PER_S2
from scipy.interpolate import CubicSpline

from fields.control.checks import check_choice, check_finite, check_positive
from fields.errors import SolverError
from fields.physics.checks import input_error

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

DRIVES = ("voltage", "current")


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
        Gravitational acceleration along ``-s``. ``None``: standard gravity (CGPM 1901,
        ``scipy.constants.g``) for "vertical", else 0.
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
            raise input_error(w, "axis_name", "a non-empty string", self.axis_name)
        check_positive(w, "mass_kg", self.mass_kg)
        check_finite(w, "stiffness_N_per_m", self.stiffness_N_per_m)
        ki = check_finite(w, "force_per_ampere_N_per_A", self.force_per_ampere_N_per_A)
        if ki == 0:
            raise input_error(w, "force_per_ampere_N_per_A", "non-zero (the coil must act)", ki)
        check_positive(w, "resistance_ohm", self.resistance_ohm)
        check_positive(w, "inductance_H", self.inductance_H)
        imax = check_positive(w, "max_current_A", self.max_current_A)
        i0 = check_finite(w, "hover_current_A", self.hover_current_A)
        if abs(i0) >= imax:
            raise input_error(w, "hover_current_A", f"inside +-max_current_A = {imax:g} A", i0)
        vs = check_positive(w, "supply_voltage_V", self.supply_voltage_V)
        if abs(i0) * self.resistance_ohm >= vs:
            raise input_error(w, "hover voltage R*I0", f"below supply_voltage_V = {vs:g} V",
                              abs(i0) * self.resistance_ohm)
        gs = check_finite(w, "sensor_gain_per_m", self.sensor_gain_per_m)
        if gs == 0:
            raise input_error(w, "sensor_gain_per_m", "non-zero", gs)
        check_finite(w, "sensor_crosstalk_per_A", self.sensor_crosstalk_per_A)
        g = self.gravity_m_per_s2
        if g is None:
            g = STANDARD_GRAVITY_M_PER_S2 if self.is_vertical else 0.0
            object.__setattr__(self, "gravity_m_per_s2", g)
        g = check_finite(w, "gravity_m_per_s2", g)
        if g < 0:
            raise input_error(w, "gravity_m_per_s2", "non-negative (it acts along -s)", g)

    @property
    def is_vertical(self) -> bool:
        """The axis is the vertical one (``axis_name`` "vertical", any case)."""
        return self.axis_name.strip().lower() == "vertical"

    @property
    def hover_voltage_V(self) -> float:
        """Coil voltage at the equilibrium, ``R I0`` (V)."""
        return self.resistance_ohm * self.hover_current_A

    @property
    def mechanical_pole_rad_per_s(self) -> float:
        """``sqrt(|k_s|/m)``: the unstable pole for ``k_s < 0``, the natural frequency otherwise."""
        return math.sqrt(abs(self.stiffness_N_per_m) / self.mass_kg)


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
        Transfer function input -> signal, descending powers of ``s`` (closed form).
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
        ``SAMPLES_PER_CROSSOVER_PERIOD`` times the nominal crossover frequency.
    max_loop_delay_s : float
        Total delay budget including half a sample of zero-order hold:
        ``DELAY_SHARE_OF_PHASE_MARGIN * NOMINAL_PHASE_MARGIN_DEG / omega_c``.
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

    @property
    def reference_pole_rad_per_s(self) -> float:
        """The pole the crossover is placed from: the unstable pole, else ``sqrt(|k_s|/m)``."""
        return self.unstable_pole_rad_per_s if self.unstable_pole_rad_per_s > 0 \
            else self.mechanical_pole_rad_per_s


def plant_matrices(p: PlantParameters, drive: str):
    """``(A, B, C, D)`` of the open plant (states and input as in :class:`Plant`)."""
    m, ks, ki = p.mass_kg, p.stiffness_N_per_m, p.force_per_ampere_N_per_A
    R, L, gs, gi = p.resistance_ohm, p.inductance_H, p.sensor_gain_per_m, p.sensor_crosstalk_per_A
    if drive == "voltage":
        A = np.array([[0.0, 1.0, 0.0], [-ks / m, 0.0, ki / m], [0.0, -ki / L, -R / L]])
        B = np.array([[0.0], [0.0], [1.0 / L]])
        C = np.array([[gs, 0.0, gi]])
        D = np.zeros((1, 1))
    else:
        A = np.array([[0.0, 1.0], [-ks / m, 0.0]])
        B = np.array([[0.0], [ki / m]])
        C = np.array([[gs, 0.0]])
        D = np.array([[gi]])
    return A, B, C, D


def current_loop_matrices(p: PlantParameters, kc: float):
    """Voltage-driven coil with the analog current loop ``V = R i_ref + K_c (i_ref - i)`` closed.

    States ``(s, v, i)``, input ``i_ref`` (current deviation command, A), output signal.
    """
    m, ks, ki = p.mass_kg, p.stiffness_N_per_m, p.force_per_ampere_N_per_A
    R, L = p.resistance_ohm, p.inductance_H
    A = np.array([[0.0, 1.0, 0.0], [-ks / m, 0.0, ki / m], [0.0, -ki / L, -(R + kc) / L]])
    B = np.array([[0.0], [0.0], [(R + kc) / L]])
    C = np.array([[p.sensor_gain_per_m, 0.0, p.sensor_crosstalk_per_A]])
    return A, B, C, np.zeros((1, 1))


def loop_plant_matrices(plant: Plant, kc: float):
    """What the outer loop drives: the current-loop plant (voltage drive) or the plant itself."""
    if plant.drive == "voltage":
        return current_loop_matrices(plant.params, kc)
    return plant.A, plant.B, plant.C, plant.D


def plant_polynomials(p: PlantParameters, drive: str) -> tuple[np.ndarray, np.ndarray]:
    """Numerator and denominator of input -> signal (descending powers of ``s``), closed form.

    Written out rather than taken from ``control.ss2tf``, which leaves round-off coefficients
    (e.g. an ``s^2`` term of relative size 1e-9 in a numerator that is a constant), so the
    exported polynomials would show the wrong relative degree.
    """
    m, ks, ki = p.mass_kg, p.stiffness_N_per_m, p.force_per_ampere_N_per_A
    R, L, gs, gi = p.resistance_ohm, p.inductance_H, p.sensor_gain_per_m, p.sensor_crosstalk_per_A
    if drive == "voltage":
        num = np.array([gi / L, 0.0, gi * ks / (m * L) + gs * ki / (m * L)])
        den = np.array([1.0, R / L, ks / m + ki**2 / (m * L), R * ks / (m * L)])
    else:
        num = np.array([gi, 0.0, gi * ks / m + gs * ki / m])
        den = np.array([1.0, 0.0, ks / m])
    nz = np.flatnonzero(num)
    num = num[nz[0]:] if nz.size else np.zeros(1)
    return num, den


def nominal_rules(ref_pole_rad_per_s: float) -> tuple[float, float, float]:
    """``(omega_c rad/s, min sample rate Hz, max loop delay s)`` of the nominal design rules."""
    wc = NOMINAL_CROSSOVER_MULTIPLE * ref_pole_rad_per_s
    if wc <= 0:
        return math.nan, math.nan, math.nan
    fs = SAMPLES_PER_CROSSOVER_PERIOD * wc / (2 * math.pi)
    tau = DELAY_SHARE_OF_PHASE_MARGIN * math.radians(NOMINAL_PHASE_MARGIN_DEG) / wc
    return wc, fs, tau


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

    Design-rule numbers: omega_c = 3 p; f_s >= 20 omega_c/(2 pi) (Franklin, Powell & Workman
    1998, ch. 11); total delay <= PM/3 / omega_c with PM = 45 deg.

    Examples
    --------
    >>> p = PlantParameters("vertical", 0.011, -20.0, 0.25, 20.0, 0.15, 0.4, 1.0, 24.0, 1000.0)
    >>> plant = linear_plant(p, "current")
    >>> round(plant.unstable_pole_rad_per_s, 3)
    42.64
    """
    check_choice("linear_plant", "drive", drive, DRIVES)
    A, B, C, D = plant_matrices(params, drive)
    poles = np.linalg.eigvals(A)
    poles = poles[np.argsort(-poles.real, kind="stable")]
    scale = max(1.0, float(np.max(np.abs(poles))))
    unstable = poles[poles.real > 1e-12 * scale]
    p_u = float(np.max(unstable.real)) if unstable.size else 0.0
    mech = params.mechanical_pole_rad_per_s
    wc, fs, tau = nominal_rules(p_u if p_u > 0 else mech)
    if drive == "voltage":
        names = ("s_m", "v_m_per_s", "current_A")
        inp = "voltage_deviation_V"
    else:
        names = ("s_m", "v_m_per_s")
        inp = "current_deviation_A"
    ss = control.ss(A, B, C, D)
    num, den = plant_polynomials(params, drive)
    return Plant(
        params=params, drive=drive, A=A, B=B, C=C, D=D, state_names=names, input_name=inp,
        output_name=f"signal_deviation_{params.sensor_unit}", numerator=num, denominator=den,
        ss=ss, tf=control.tf(num, den), poles_rad_per_s=poles,
        mechanical_pole_rad_per_s=mech, unstable_pole_rad_per_s=p_u,
        unstable_time_constant_s=1.0 / p_u if p_u > 0 else math.inf,
        unstable_pole_count=int(unstable.size),
        electrical_pole_rad_per_s=params.resistance_ohm / params.inductance_H,
        nominal_crossover_rad_per_s=wc, min_sample_rate_Hz=fs, max_loop_delay_s=tau,
    )


# --------------------------------------------------------------------------------------------
# Force table and sensor
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class ForceTable:
    """Magnetic force along ``+s`` versus position: ``F(s, I) = F0(s) + I Fk(s)``.

    Gravity is *not* in the table; the simulation adds ``-m g``. Interpolated by a cubic
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
            raise input_error(w, "positions_m", "a 1-D array of at least 4 positions", s.shape)
        if f0.shape != s.shape or fk.shape != s.shape:
            raise input_error(w, "F0_N and Fk_N_per_A", f"shape {s.shape} like positions_m",
                              (f0.shape, fk.shape))
        if not (np.all(np.isfinite(s)) and np.all(np.isfinite(f0)) and np.all(np.isfinite(fk))):
            raise input_error(w, "table values", "finite", "non-finite entries")
        if np.any(np.diff(s) <= 0):
            raise input_error(w, "positions_m", "strictly increasing", s.tolist()[:6])
        object.__setattr__(self, "positions_m", s)
        object.__setattr__(self, "F0_N", f0)
        object.__setattr__(self, "Fk_N_per_A", fk)
        object.__setattr__(self, "_f0", CubicSpline(s, f0))
        object.__setattr__(self, "_fk", CubicSpline(s, fk))

    @property
    def range_m(self) -> tuple[float, float]:
        """First and last table position (m)."""
        return float(self.positions_m[0]), float(self.positions_m[-1])

    def force_N(self, s_m, current_A) -> np.ndarray:
        """``F0(s) + I Fk(s)`` (N), broadcast over ``s_m`` and ``current_A``."""
        return self._f0(s_m) + np.asarray(current_A) * self._fk(s_m)

    def zero_current_force_N(self, s_m) -> np.ndarray:
        """``F0(s)`` (N)."""
        return self._f0(s_m)

    def force_per_ampere_N_per_A(self, s_m, current_A=None) -> np.ndarray:
        """``Fk(s)`` (N/A), also the back-EMF coefficient (V s/m); the same at every current (an
        argument for the interface of :class:`fields.control.force_grid.GridForceTable`)."""
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
        raise input_error("linear_sensor", "range_signal", "(low, high) with low < high", range_signal)
    return Sensor(lambda s, i: gs * np.asarray(s) + gi * (np.asarray(i) - i0), (lo, hi), params.sensor_unit)
