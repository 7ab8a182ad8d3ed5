"""Drive headroom of a coil driver: the supply voltage against ``R I + L dI/dt``."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.devices.coil import CoilData
from fields.devices.notices import Notice
from fields.errors import InputError

#: displacement the drive must correct at the unstable pole's rate (headroom rule, m)
DEFAULT_CORRECTION_DISPLACEMENT_M = 1e-3
#: headroom below this fraction of the supply is flagged (a design margin, common practice, no source)
LOW_HEADROOM_FRACTION = 0.2


@dataclass(frozen=True)
class DriveHeadroom:
    """Supply-voltage headroom of one coil's driver at an operating point.

    Attributes
    ----------
    hover_current_A : float
    correction_current_A : float
        Extra current that produces the restoring force ``|k| x0`` (A).
    peak_current_A : float
        ``|I_hover| + correction_current_A``.
    rate_per_s : float
        ``p = sqrt(|k| / m)``: the unstable pole when ``k < 0`` (see ``unstable``).
    current_slew_A_per_s : float
        ``dI/dt = |k| x0 p / k_i``.
    voltage_resistive_V, voltage_inductive_V, voltage_required_V : float
        ``R I_peak``, ``L dI/dt`` and their sum (hot resistance).
    supply_voltage_V, headroom_V : float
        Supply and ``supply - required``.
    max_slew_A_per_s : float
        ``(V_supply - R |I_hover|) / L``: the fastest current change the supply allows at hover.
    linear_driver_dissipation_W : float
        ``(V_supply - R I) I`` in a linear (transistor) stage at the hover point, for heat sinking.
    coil_power_W : float
        ``R I^2`` at hover.
    resistance_ohm, inductance_H : float
        Resistance and inductance used (ohm, H).
    correction_displacement_m : float
    unstable : bool
        True when ``k < 0``: ``rate_per_s`` is the unstable pole ``sqrt(-k / m)``; otherwise it is
        the natural frequency ``sqrt(k / m)`` of a stable axis.
    notices : tuple of Notice
        ``"supply_short"`` (values ``supply_V``, ``required_V``, ``resistive_V``, ``inductive_V``,
        ``displacement_m``, ``rate_per_s``), ``"low_headroom"`` (``headroom_V``,
        ``fraction_of_supply``), ``"cannot_hold_hover"`` (``needed_V``), ``"peak_over_max"``
        (``peak_A``, ``max_A``).
    """

    hover_current_A: float
    correction_current_A: float
    peak_current_A: float
    rate_per_s: float
    current_slew_A_per_s: float
    voltage_resistive_V: float
    voltage_inductive_V: float
    voltage_required_V: float
    supply_voltage_V: float
    headroom_V: float
    max_slew_A_per_s: float
    linear_driver_dissipation_W: float
    coil_power_W: float
    resistance_ohm: float
    inductance_H: float
    correction_displacement_m: float
    unstable: bool
    notices: tuple[Notice, ...] = ()


def drive_headroom(coil_data: CoilData, hover_current_A: float, force_per_ampere_N_per_A: float,
                   stiffness_N_per_m: float, mass_kg: float, supply_voltage_V: float,
                   correction_displacement_m: float = DEFAULT_CORRECTION_DISPLACEMENT_M,
                   hot: bool = True) -> DriveHeadroom:
    """Voltage headroom of a coil driver: ``V = R I + L dI/dt`` against the supply.

    Parameters
    ----------
    coil_data : CoilData
    hover_current_A : float
    force_per_ampere_N_per_A : float
        ``k_i = dF/dI`` at the operating point (N/A), nonzero.
    stiffness_N_per_m : float
        Restoring stiffness ``k = -dF/dx`` along the controlled axis (N/m); ``k < 0`` is unstable
        with the pole ``p = sqrt(-k / m)``. ``|k|`` is used either way.
    mass_kg : float
    supply_voltage_V : float
    correction_displacement_m : float
        ``x0``: the displacement the drive must correct at the pole's rate (default 1 mm).
    hot : bool
        Use the resistance at the operating temperature (default) instead of 20 C.

    Returns
    -------
    DriveHeadroom

    Notes
    -----
    Rule (a sizing estimate, not a control design): to correct a displacement ``x0`` at the rate
    of the unstable pole ``p = sqrt(|k| / m)`` the force must slew at ``dF/dt ~ |k| x0 p``, so
    ``dI/dt ~ |k| x0 p / |k_i|``; the peak current adds ``|k| x0 / |k_i|`` to the hover current.
    The required voltage is ``R I_peak + L dI/dt`` (both terms taken with the same sign, the worst
    case).
    """
    ki = float(force_per_ampere_N_per_A)
    if not (np.isfinite(ki) and ki != 0.0):
        raise InputError(f"drive_headroom: force_per_ampere_N_per_A must be finite and nonzero; got {ki!r}.")
    m = float(mass_kg)
    if not (np.isfinite(m) and m > 0):
        raise InputError(f"drive_headroom: mass_kg must be positive; got {m!r}.")
    x0 = float(correction_displacement_m)
    if not (np.isfinite(x0) and x0 > 0):
        raise InputError(f"drive_headroom: correction_displacement_m must be positive; got {x0!r}.")
    k = float(stiffness_N_per_m)
    if not np.isfinite(k):
        raise InputError(f"drive_headroom: stiffness_N_per_m must be finite; got {k!r}.")
    Vs = float(supply_voltage_V)
    if not (np.isfinite(Vs) and Vs > 0):
        raise InputError(f"drive_headroom: supply_voltage_V must be positive; got {Vs!r}.")
    notices: list[Notice] = []
    name = coil_data.name
    p = float(np.sqrt(abs(k) / m))
    R = coil_data.resistance_operating_ohm if hot else coil_data.resistance_20C_ohm
    L = coil_data.inductance_H
    I = float(hover_current_A)
    dI_corr = abs(k) * x0 / abs(ki)
    Ipk = abs(I) + dI_corr
    slew = abs(k) * x0 * p / abs(ki)
    VR = R * Ipk
    VL = L * slew
    Vreq = VR + VL
    head = Vs - Vreq
    with np.errstate(divide="ignore"):
        max_slew = (Vs - R * abs(I)) / L if L > 0 else np.inf
    diss = max(0.0, (Vs - R * abs(I)) * abs(I))
    if head < 0:
        notices.append(Notice("supply_short", name, {"supply_V": Vs, "required_V": Vreq, "resistive_V": VR,
                                                     "inductive_V": VL, "displacement_m": x0, "rate_per_s": p}))
    elif head < LOW_HEADROOM_FRACTION * Vs:
        notices.append(Notice("low_headroom", name, {"headroom_V": head, "fraction_of_supply": LOW_HEADROOM_FRACTION}))
    if Vs - R * abs(I) <= 0:
        notices.append(Notice("cannot_hold_hover", name, {"needed_V": R * abs(I)}))
    if Ipk > abs(coil_data.max_current_A):
        notices.append(Notice("peak_over_max", name, {"peak_A": Ipk, "max_A": abs(coil_data.max_current_A)}))
    return DriveHeadroom(
        hover_current_A=I, correction_current_A=dI_corr, peak_current_A=Ipk, rate_per_s=p,
        current_slew_A_per_s=slew, voltage_resistive_V=VR, voltage_inductive_V=VL, voltage_required_V=Vreq,
        supply_voltage_V=Vs, headroom_V=head, max_slew_A_per_s=float(max_slew),
        linear_driver_dissipation_W=float(diss), coil_power_W=R * I * I, resistance_ohm=R, inductance_H=L,
        correction_displacement_m=x0, unstable=k < 0, notices=tuple(notices),
    )
