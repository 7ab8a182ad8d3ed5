"""Op-amp realisation of the lead (and PI) controller with preferred component values.

Circuit: stage 1 is an inverting amplifier whose input impedance is ``R3`` in series with
``R1 || C1`` and whose feedback is ``R2``::

    H1(s) = -R2/(R1 + R3) * (1 + s R1 C1) / (1 + s C1 R1 R3/(R1 + R3))

zero ``1/(R1 C1)``, pole ``(R1 + R3)/(R1 R3 C1)``, DC gain ``R2/(R1 + R3)``. For a PID, stage 2
is an inverting PI stage (input ``Ra``, feedback ``Rb`` in series with ``Cb``):
``H2(s) = -(Rb/Ra)(1 + 1/(s Rb Cb))`` with ``Ra = Rb``; for a PD, stage 2 is a unity inverting
buffer, so the two inversions cancel. The sensor signal is taken as a voltage and the stage
output drives a current driver.

Nothing here prints, plots or touches files.
"""

from __future__ import annotations

import enum
import math
from dataclasses import dataclass

import numpy as np

from fields.control.checks import check_choice, check_positive
from fields.errors import InputError, SolverError
from fields.physics.checks import input_error

#: IEC 60063:2015 preferred-number series (mantissas of one decade), as published
E_SERIES: dict[str, tuple[float, ...]] = {
    "E6": (1.0, 1.5, 2.2, 3.3, 4.7, 6.8),
    "E12": (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2),
    "E24": (1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
            3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1),
}

#: capacitor decades tried for C1 and Cb: 1 nF .. 8.2 uF (common practice, no source)
CAPACITOR_DECADES_F = (1e-9, 1e-8, 1e-7, 1e-6)
#: resistor range of the lead stage (ohm): above op-amp output loading, below bias-current
#: offsets (common practice, no source)
RESISTOR_RANGE_OHM = (1e3, 1e6)
#: smallest PI-stage resistor (ohm) (common practice, no source)
MIN_PI_RESISTOR_OHM = 10e3


class SecondStage(enum.StrEnum):
    """What follows the lead stage: a PI stage (PID) or a unity inverting buffer (PD)."""

    PI = "pi"
    UNITY_BUFFER = "unity_buffer"


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
    check_choice("e_series", "name", name, tuple(E_SERIES))
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
    v = check_positive("snap_to_e_series", "value", value)
    mant = np.asarray(e_series(series))
    dec = math.floor(math.log10(v))
    cands = np.concatenate([mant * 10.0 ** (dec - 1), mant * 10.0 ** dec, mant * 10.0 ** (dec + 1)])
    best = cands[np.argmin(np.abs(np.log(cands / v)))]
    return float(f"{best:.3g}")


@dataclass(frozen=True)
class OpAmpLeadNetwork:
    """Component values of the analog controller (circuit in the module docstring).

    Attributes
    ----------
    R1_ohm, C1_F, R3_ohm, R2_ohm : float
        Lead stage.
    Ra_ohm, Rb_ohm, Cb_F : float
        PI stage (PID only; 0 for a PD).
    zero_rad_per_s, pole_rad_per_s, dc_gain_V_per_V, integral_zero_rad_per_s : float
        Realised with the snapped values.
    target_zero_rad_per_s, target_pole_rad_per_s, target_dc_gain_V_per_V : float
    driver_transconductance_A_per_V : float
    resistor_series, capacitor_series : str
        IEC 60063 series names.
    max_relative_error : float
        Largest relative deviation of zero, pole, gain (and integral zero) from the targets.
    second_stage : SecondStage
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
    second_stage: SecondStage


def _capacitors(series: str) -> list[float]:
    return [float(f"{m * d:.3g}") for d in CAPACITOR_DECADES_F for m in e_series(series)]


def _lead_stage(wz: float, wp: float, k: float, caps: list[float], resistor_series: str):
    """Best (error, R1, C1, R3, R2, zero, pole, gain) over the capacitors, or None."""
    best = None
    for c1 in caps:
        r1 = 1.0 / (wz * c1)
        rpar = 1.0 / (wp * c1)
        r3 = r1 * rpar / (r1 - rpar)
        r2 = k * (r1 + r3)
        try:
            snapped = [snap_to_e_series(r, resistor_series) for r in (r1, r3, r2)]
        except InputError:
            continue
        if not all(RESISTOR_RANGE_OHM[0] <= r <= RESISTOR_RANGE_OHM[1] for r in snapped):
            continue
        R1, R3, R2 = snapped
        z = 1.0 / (R1 * c1)
        p = (R1 + R3) / (R1 * R3 * c1)
        g = R2 / (R1 + R3)
        err = max(abs(z / wz - 1), abs(p / wp - 1), abs(g / k - 1))
        if best is None or err < best[0]:
            best = (err, R1, c1, R3, R2, z, p, g)
    return best


def _pi_stage(wi: float, caps: list[float], resistor_series: str):
    """Best (error, Rb, Cb) for the PI zero ``1/(Rb Cb)``, or None."""
    best = None
    for cb in caps:
        rb = snap_to_e_series(1.0 / (wi * cb), resistor_series)
        if not (MIN_PI_RESISTOR_OHM <= rb <= RESISTOR_RANGE_OHM[1]):
            continue
        e = abs(1.0 / (rb * cb) / wi - 1)
        if best is None or e < best[0]:
            best = (e, rb, cb)
    return best


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
        Magnitude of the lead's DC gain (the sign is set by the stage count).
    integral_zero_rad_per_s : float
        PI-stage zero ``1/(Rb Cb)``; 0 for none.
    driver_transconductance_A_per_V : float
        Only recorded (the gain already includes it).
    resistor_series, capacitor_series : {"E6", "E12", "E24"}

    Returns
    -------
    OpAmpLeadNetwork

    Raises
    ------
    SolverError
        If no capacitor gives resistors inside the allowed range.

    Notes
    -----
    Every capacitor of the series from 1 nF to 8.2 uF is tried for ``C1``; ``R1``, ``R3``,
    ``R2`` follow from the targets and are snapped; resistors must lie in 1 kohm..1 Mohm. The
    choice with the smallest largest relative error wins.

    Examples
    --------
    >>> net = analog_lead_network(48.0, 340.0, 0.28)
    >>> net.second_stage
    <SecondStage.UNITY_BUFFER: 'unity_buffer'>
    """
    w = "analog_lead_network"
    wz = check_positive(w, "zero_rad_per_s", zero_rad_per_s)
    wp = check_positive(w, "pole_rad_per_s", pole_rad_per_s)
    if wp <= wz:
        raise input_error(w, "pole_rad_per_s", f"above zero_rad_per_s = {wz:g}", wp)
    k = check_positive(w, "dc_gain_V_per_V", dc_gain_V_per_V)
    caps = _capacitors(capacitor_series)
    best = _lead_stage(wz, wp, k, caps, resistor_series)
    if best is None:
        raise SolverError(f"{w}: resistor values must fit 1 kohm..1 Mohm for some capacitor "
                          f"1 nF..8.2 uF; got none for zero {wz:g} rad/s, pole {wp:g} rad/s, gain {k:g}.")
    err, R1, C1, R3, R2, z, p, g = best
    Ra = Rb = Cb = 0.0
    wi_real = 0.0
    if integral_zero_rad_per_s > 0:
        wi = float(integral_zero_rad_per_s)
        bestpi = _pi_stage(wi, caps, resistor_series)
        if bestpi is None:
            raise SolverError(f"{w}: PI resistor must fit 10 kohm..1 Mohm; got none for "
                              f"integral zero {wi:g} rad/s.")
        e, Rb, Cb = bestpi
        Ra = Rb
        wi_real = 1.0 / (Rb * Cb)
        err = max(err, e)
    return OpAmpLeadNetwork(
        R1_ohm=R1, C1_F=C1, R3_ohm=R3, R2_ohm=R2, Ra_ohm=Ra, Rb_ohm=Rb, Cb_F=Cb,
        zero_rad_per_s=z, pole_rad_per_s=p, dc_gain_V_per_V=g, integral_zero_rad_per_s=wi_real,
        target_zero_rad_per_s=wz, target_pole_rad_per_s=wp, target_dc_gain_V_per_V=k,
        driver_transconductance_A_per_V=float(driver_transconductance_A_per_V),
        resistor_series=resistor_series, capacitor_series=capacitor_series,
        max_relative_error=float(err),
        second_stage=SecondStage.PI if integral_zero_rad_per_s > 0 else SecondStage.UNITY_BUFFER,
    )
