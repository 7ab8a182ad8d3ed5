"""Lead/PD (or PID) starting-point controller placed from the plant, and its discrete form.

The controller maps the signal error ``e = y - y_ref`` to a current command ``I_cmd = I0 - u``,
``U(s) = C(s) E(s)``; ``C`` carries the sign of ``G_s k_i`` so that the loop transfer
``L = C P`` has the usual negative-feedback form.

Nothing here prints, plots or touches files.
"""

from __future__ import annotations

import enum
import math
from dataclasses import dataclass

import control
import numpy as np

from fields.control.checks import check_choice, check_non_negative, check_positive
from fields.control.circuits import OpAmpLeadNetwork, analog_lead_network
from fields.control.plant import Plant, loop_plant_matrices
from fields.errors import InputError, SolverError
from fields.physics.checks import input_error

#: largest phase one lead stage is asked to give (deg); beyond it the lead ratio exceeds ~60
MAX_LEAD_DEG = 75.0
#: smallest lead phase used (deg), so that zero and pole stay distinct
MIN_LEAD_DEG = 1.0

KINDS = ("pd", "pid")


class Discretisation(enum.StrEnum):
    """How the controller runs: analog, or Tustin (bilinear) with pre-warping at crossover."""

    ANALOG = "analog"
    TUSTIN_PREWARP = "tustin_prewarp"


@dataclass(frozen=True)
class PhaseBudget:
    """Phases at the crossover frequency (deg) that the lead is sized from.

    ``lead = PM - 180 - plant - zero_order_hold - delay - integral``.
    """

    plant: float
    zero_order_hold: float
    delay: float
    integral: float
    lead: float


@dataclass(frozen=True, eq=False)
class ControllerDesign:
    """A PD (lead with filtered derivative) or PID controller for one axis.

    Parallel form::

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
    phase_budget_deg : PhaseBudget
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
    discretisation : Discretisation
    prewarp_frequency_rad_per_s : float or None
        Pre-warping frequency of the Tustin transform (the crossover); ``None`` if analog.
    loop_delay_s : float
        Delay the design budgeted for (s).
    current_loop_gain_V_per_A, current_loop_bandwidth_rad_per_s : float
        Voltage drive only: analog current loop ``V = R i_ref + K_c (i_ref - i)``, bandwidth
        ``(R + K_c)/L``. Zero and inf for current drive.
    loop_plant : control.StateSpace
        The plant the outer loop sees (input current command deviation, output signal).
    analog : OpAmpLeadNetwork or None
        ``None`` if no practical op-amp network fits (e.g. a sensor signal not in volts).
    signal_unit : str
    """

    kind: str
    drive: str
    sign: float
    crossover_rad_per_s: float
    phase_margin_target_deg: float
    lead_phase_deg: float
    phase_budget_deg: PhaseBudget
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
    discretisation: Discretisation
    prewarp_frequency_rad_per_s: float | None
    loop_delay_s: float
    current_loop_gain_V_per_A: float
    current_loop_bandwidth_rad_per_s: float
    loop_plant: control.StateSpace
    analog: OpAmpLeadNetwork | None
    signal_unit: str


# --------------------------------------------------------------------------------------------
# design steps
# --------------------------------------------------------------------------------------------


def _current_loop(plant: Plant, wc: float, current_loop_multiple: float) -> tuple[float, float]:
    """``(K_c V/A, bandwidth rad/s)`` of the analog current loop (voltage drive)."""
    if plant.drive != "voltage":
        return 0.0, math.inf
    p = plant.params
    we = check_positive("design_controller", "current_loop_multiple", current_loop_multiple) * wc
    kc = max(0.0, we * p.inductance_H - p.resistance_ohm)
    return kc, (p.resistance_ohm + kc) / p.inductance_H


def _phase_budget(P: complex, sgn: float, wc: float, T: float | None, tau: float, wi: float,
                  pm_deg: float) -> tuple[float, float, float, float, float]:
    """Phases (rad) of plant, hold, delay and integral at ``wc``, and the lead phase needed."""
    th_p = float(np.angle(sgn * P))
    if th_p > 0:
        th_p -= 2 * math.pi
    th_zoh = -wc * T / 2 if T is not None else 0.0
    th_d = -wc * tau if tau > 0 else 0.0
    th_i = -math.atan(wi / wc)
    phi = math.radians(pm_deg) - math.pi - th_p - th_zoh - th_d - th_i
    if phi > math.radians(MAX_LEAD_DEG):
        raise SolverError(f"design_controller: needed lead phase must be at most {MAX_LEAD_DEG:g} deg for "
                          f"one lead stage; got {math.degrees(phi):.1f} deg (lower phase_margin_deg, the "
                          f"sample time, the delay, or raise current_loop_multiple).")
    return th_p, th_zoh, th_d, th_i, max(phi, math.radians(MIN_LEAD_DEG))


def _lead_corners(wc: float, phi: float) -> tuple[float, float]:
    """Zero and pole of a lead with its largest phase ``phi`` at ``wc`` (geometric centre)."""
    sphi = math.sin(phi)
    return wc * math.sqrt((1 - sphi) / (1 + sphi)), wc * math.sqrt((1 + sphi) / (1 - sphi))


def _parallel_form(kind: str, sgn: float, K: float, wz: float, wp: float, wi: float):
    """``(kp, kd, ki, tau_f, num, den)`` of ``sgn K (1 + s/wz)/(1 + s/wp) [(s + wi)/s]``."""
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
    return kp, kd, ki, tf_, num / den[0], den / den[0]


def _discretise(Ctf: control.TransferFunction, T: float | None, wc: float):
    """Tustin with pre-warping at ``wc`` by ``control.c2d``: ``(tf, num, den)`` (monic den)."""
    if T is None:
        return None, None, None
    Cd = control.c2d(Ctf, T, method="tustin", prewarp_frequency=wc)
    dnum = np.atleast_1d(np.squeeze(Cd.num[0][0]))
    dden = np.atleast_1d(np.squeeze(Cd.den[0][0]))
    dnum, dden = dnum / dden[0], dden / dden[0]
    return control.tf(dnum, dden, T), dnum, dden


def _analog_network(wz: float, wp: float, K: float, wi: float, gm_A_per_V: float) -> OpAmpLeadNetwork | None:
    try:
        return analog_lead_network(wz, wp, K / gm_A_per_V, wi, driver_transconductance_A_per_V=gm_A_per_V)
    except (InputError, SolverError):
        # no practical op-amp network for these numbers (e.g. a sensor signal not in volts)
        return None


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
    check_choice(w, "kind", kind, KINDS)
    m = check_positive(w, "crossover_multiple", crossover_multiple)
    pm = check_positive(w, "phase_margin_deg", phase_margin_deg)
    if pm >= 90:
        raise input_error(w, "phase_margin_deg", "below 90", pm)
    T = None if sample_time_s is None else check_positive(w, "sample_time_s", sample_time_s)
    tau = check_non_negative(w, "loop_delay_s", loop_delay_s)
    ref = plant.reference_pole_rad_per_s
    if ref <= 0:
        raise input_error(w, "plant stiffness_N_per_m", "non-zero (the crossover is placed from "
                          "the plant pole)", plant.params.stiffness_N_per_m)
    wc = m * ref
    p = plant.params
    if T is not None and T * wc > math.pi / 2:
        raise input_error(w, "sample_time_s", f"below pi/(2 omega_c) = {math.pi / 2 / wc:.4g} s", T)
    kc, bw = _current_loop(plant, wc, current_loop_multiple)
    loop_plant = control.ss(*loop_plant_matrices(plant, kc))
    P = complex(np.asarray(loop_plant(1j * wc)).reshape(-1)[0])
    sgn = float(np.sign(p.sensor_gain_per_m * p.force_per_ampere_N_per_A))
    wi = check_positive(w, "integral_zero_fraction", integral_zero_fraction) * wc if kind == "pid" else 0.0
    th_p, th_zoh, th_d, th_i, phi = _phase_budget(P, sgn, wc, T, tau, wi, pm)
    wz, wp = _lead_corners(wc, phi)
    lead = (1 + 1j * wc / wz) / (1 + 1j * wc / wp)
    integ = (1j * wc + wi) / (1j * wc) if kind == "pid" else 1.0
    K = 1.0 / abs(lead * integ * P)
    kp, kd, ki, tf_, num, den = _parallel_form(kind, sgn, K, wz, wp, wi)
    Ctf = control.tf(num, den)
    Cd, dnum, dden = _discretise(Ctf, T, wc)
    budget = PhaseBudget(plant=math.degrees(th_p), zero_order_hold=math.degrees(th_zoh),
                         delay=math.degrees(th_d), integral=math.degrees(th_i), lead=math.degrees(phi))
    return ControllerDesign(
        kind=kind, drive=plant.drive, sign=sgn, crossover_rad_per_s=wc,
        phase_margin_target_deg=pm, lead_phase_deg=math.degrees(phi), phase_budget_deg=budget,
        zero_rad_per_s=wz, pole_rad_per_s=wp, integral_zero_rad_per_s=wi, lead_gain=K,
        kp_A_per_signal=kp, kd_A_s_per_signal=kd, ki_A_per_signal_s=ki, derivative_filter_tau_s=tf_,
        numerator=num, denominator=den, tf=Ctf, sample_time_s=T, discrete_tf=Cd,
        discrete_numerator=dnum, discrete_denominator=dden,
        discretisation=Discretisation.ANALOG if T is None else Discretisation.TUSTIN_PREWARP,
        prewarp_frequency_rad_per_s=None if T is None else wc, loop_delay_s=tau,
        current_loop_gain_V_per_A=kc, current_loop_bandwidth_rad_per_s=bw, loop_plant=loop_plant,
        analog=_analog_network(wz, wp, K, wi, driver_transconductance_A_per_V), signal_unit=p.sensor_unit,
    )
