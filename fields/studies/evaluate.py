"""One design of a sweep -> one row of numbers (:data:`fields.input.sweepfile.RESULT_COLUMNS`).

The design is evaluated at its operating point, found by the one rule of
:func:`fields.analysis.operating.operating_point` that the report and every command use.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from fields.errors import SolverError
from fields.input.sweepfile import RESULT_COLUMNS
from fields.model.design import Design

_STIFFNESS_COLUMNS = ("kz_N_per_m", "k_lateral_N_per_m", "k_tilt_Nm_per_rad", "unstable_pole_1_per_s",
                      "fastest_growth_1_per_s", "axes_needing_control", "residual_lateral_force_N",
                      "residual_torque_Nm", "force_error_N")


def _operating_point_or_none(design: Design):
    """The operating point, or None when the design has none (no passive height, no hover)."""
    from fields import analysis
    from fields.analysis.operating import operating_point

    # the zero-current equilibria need F0 and k_i only: one current is enough, and no error bar
    curves = analysis.axial_curves(design, currents_A=[0.0], estimate_error=False)
    try:
        return operating_point(design, curves)
    except SolverError:
        return None


def _payload_columns(design: Design, at_gap) -> dict[str, Any]:
    """Hover current and payload envelope at the operating gap (``at_gap``: its AxialCurves)."""
    ih = float(at_gap.hover_current_A[0])
    over = not (math.isfinite(ih) and abs(ih) <= at_gap.max_current_A * (1 + 1e-12))
    mx, mn = float(at_gap.max_payload_kg[0]), float(at_gap.min_payload_kg[0])
    return {"hover_current_A": ih, "over_current": over, "max_payload_kg": mx, "min_payload_kg": mn,
            "payload_margin_kg": mx - design.floater.payload_mass_kg}


def _stiffness_columns(design: Design, op) -> dict[str, Any]:
    """Stiffness, verdict and residual columns at the operating point (one basis call for the
    25-pose stencil of :func:`fields.analysis.stiffness_stencil`)."""
    from fields import analysis
    from fields.physics.wrench import wrench_basis

    up = design.axial  # up, or the gap direction of an offset study
    d = analysis.drive_pattern(design)
    eq = op.equilibrium
    P, Rv, finish = analysis.stiffness_stencil(design, eq.position_m, eq.rotvec_rad)
    saturable = bool(design.cores) and len(design.coils) > 0
    # with cores the stiffness comes from the saturable solve at the operating currents (the
    # report's rule, analysis.stiffness_matrix); the basis at the centre pose gives k_i there
    # the force error estimate (a second rule level) only where the row carries it: the centre pose
    b = wrench_basis(design, P[-1:], Rv[-1:]) if saturable else wrench_basis(design, P, Rv, estimate_error=False)
    centre = b if saturable else wrench_basis(design, P[-1:], Rv[-1:])
    out: dict[str, Any] = {"ki_N_per_A": float((b.Fk_N_per_A[-1] @ up) @ d) if len(design.coils) else 0.0,
                           "contact": bool(np.any(b.contact)), "core_saturation": False}
    if out["contact"]:
        out.update({c: math.nan for c in _STIFFNESS_COLUMNS})
        return out
    stiff = (analysis.stiffness_matrix(design, eq.position_m, eq.rotvec_rad, op.currents_A) if saturable
             else finish(b, op.currents_A))
    K = stiff.K
    kz = float(up @ K[:3, :3] @ up)
    out["kz_N_per_m"] = kz
    out["k_lateral_N_per_m"] = 0.5 * (float(np.trace(K[:3, :3])) - kz)
    out["k_tilt_Nm_per_rad"] = 0.5 * (float(np.trace(K[3:, 3:])) - float(up @ K[3:, 3:] @ up))
    out["unstable_pole_1_per_s"] = math.sqrt(-kz / design.floater.mass_kg) if kz < 0 else 0.0
    v = analysis.stability_verdict(design, stiff)
    rates = [1.0 / m.growth_time_s for m in v.modes if not m.stable and m.growth_time_s]
    out["fastest_growth_1_per_s"] = max(rates) if rates else 0.0
    out["axes_needing_control"] = float(v.unstable_count)
    Fres = stiff.force_N + np.asarray(design.study.gravity_m_per_s2) * design.floater.mass_kg
    out["residual_lateral_force_N"] = float(np.linalg.norm(Fres - (Fres @ up) * up))
    out["residual_torque_Nm"] = float(np.linalg.norm(stiff.torque_Nm))
    out["core_saturation"] = bool(b.core_saturated[-1])
    out["force_error_N"] = float(centre.error_F_N[-1])
    return out


def _coil_heat_columns(design: Design, drive_current_A: float) -> dict[str, Any]:
    """Steady coil heat and voltage with every coil at ``drive_current_A * d_k`` (lumped model of
    :func:`fields.devices.coil.steady_temperature_C`); NaN without a drive current.

    The coil voltage is Ohm's law at the steady winding temperature, ``V = |I| R20 (1 + alpha
    (T - 20 C))`` (copper's temperature coefficient, IEC 60028); the headroom is the supply less
    the largest coil voltage (the inductive share ``L dI/dt`` is zero in the steady state)."""
    from fields import analysis
    from fields.devices import winding
    from fields.input.tables import COPPER_ALPHA_20C_PER_K

    st = design.study
    ambient = float(st.ambient_temperature_C)
    supply = float(st.supply_voltage_V)
    if not design.coils:
        return {"coil_resistance_20C_ohm": 0.0, "coil_power_W": 0.0, "coil_temperature_C": ambient,
                "coil_temperature_rise_K": 0.0, "too_hot": False, "supply_voltage_V": supply, "coil_voltage_V": 0.0,
                "voltage_headroom_V": supply, "supply_short": False}
    d = analysis.drive_pattern(design)
    R_sum = P_sum = 0.0
    T_hot, too_hot, V_max = -math.inf, False, 0.0
    for i, c in enumerate(design.coils):
        R20, G = winding.resistance_and_cooling(design, i)
        R_sum += R20
        if not math.isfinite(drive_current_A):
            continue
        Ii = drive_current_A * d[i]
        T, run = winding.steady_temperature_C([Ii], R20, G, ambient)
        T = float(T[0])
        R_hot = R20 * (1.0 + COPPER_ALPHA_20C_PER_K * (T - 20.0)) if not run[0] else math.inf
        P_sum += Ii * Ii * R_hot if Ii != 0.0 else 0.0
        V_max = max(V_max, abs(Ii) * R_hot if Ii != 0.0 else 0.0)
        ins = c.insulation_class_C if c.insulation_class_C is not None else winding.DEFAULT_INSULATION_CLASS_C
        too_hot = too_hot or bool(run[0]) or T > ins
        T_hot = max(T_hot, T)
    if not math.isfinite(drive_current_A):
        return {"coil_resistance_20C_ohm": R_sum, "coil_power_W": math.nan, "coil_temperature_C": math.nan,
                "coil_temperature_rise_K": math.nan, "too_hot": False, "supply_voltage_V": supply,
                "coil_voltage_V": math.nan, "voltage_headroom_V": math.nan, "supply_short": False}
    return {"coil_resistance_20C_ohm": R_sum, "coil_power_W": P_sum, "coil_temperature_C": T_hot,
            "coil_temperature_rise_K": T_hot - ambient, "too_hot": too_hot, "supply_voltage_V": supply,
            "coil_voltage_V": V_max, "voltage_headroom_V": supply - V_max, "supply_short": V_max > supply}


def check_affine_floater(design: Design, what: str) -> None:
    """Refuse a soft-iron floater with a one-line error: these studies use the force basis that is
    affine in current (:func:`fields.physics.wrench.wrench_basis`)."""
    if design.floater.soft_iron:
        from fields.errors import GeometryError

        raise GeometryError(f"{design.source}: floater.soft_iron", f"the floater of {what}",
                            "made of magnets (the pull on a soft-iron floater is not affine in current; these studies "
                            "do not take it yet: use report, curves, stability and control)", "soft iron")


def evaluate_design(design: Design) -> dict:
    """Operating point, stiffness, stability, coil heat and payload envelope of one design.

    The design is evaluated at the operating point of
    :func:`fields.analysis.operating.operating_point` (a passive stable height at zero current
    preferred, else hovering at the operating gap on the hover current), the same one the report
    uses. Without an operating point the stiffness and heat columns are NaN and
    ``no_equilibrium`` is set.

    Parameters
    ----------
    design : Design

    Returns
    -------
    dict
        Plain floats and bools keyed by :data:`fields.input.sweepfile.RESULT_COLUMNS` (units in
        the names).

    Notes
    -----
    - Stiffness: the 6x6 matrix of :func:`fields.analysis.stiffness_matrix` (central
      differences with Richardson extrapolation) at the operating point; ``kz = u^T K u`` with
      ``u`` up, ``k_lateral`` and ``k_tilt`` the means over the two horizontal directions (half
      the trace of the 3x3 block minus its vertical entry), the verdict of
      :func:`fields.analysis.stability_verdict`.
    - Unstable pole ``sqrt(-k_z / m)`` (s^-1), the growth rate of the linearised vertical motion
      ``m z'' = -k_z z``.
    - Coil heat: the lumped steady state of :func:`fields.devices.coil.steady_temperature_C`;
      coil voltage ``|I| R(T)`` at that temperature, headroom ``supply - max V`` and the
      ``supply_short`` flag when it is negative.
    - Payload envelope: masses whose weight the force ``F0 +- |k_i| I_max`` can hold at the
      operating gap, as in :func:`fields.analysis.axial_curves`.
    """
    check_affine_floater(design, "a sweep, tolerance study or sizing")
    from fields import analysis

    gop = float(design.study.operating_gap_m)
    at_gap = analysis.axial_curves(design, gaps_m=[gop], currents_A=[0.0])
    out: dict[str, Any] = {"mass_kg": design.floater.mass_kg, "payload_mass_kg": design.floater.payload_mass_kg,
                           "target_gap_m": gop}
    out.update(_payload_columns(design, at_gap))
    op = _operating_point_or_none(design)
    if op is None:
        out.update(at_target_gap=False, operating_gap_m=math.nan, operating_current_A=math.nan, ki_N_per_A=math.nan,
                   contact=bool(at_gap.contact[0]), core_saturation=False, no_equilibrium=True)
        out.update({c: math.nan for c in _STIFFNESS_COLUMNS})
        drive = math.nan
    else:
        out.update(at_target_gap=not op.passive, operating_gap_m=op.equilibrium.gap_m,
                   operating_current_A=op.drive_current_A, no_equilibrium=False)
        out.update(_stiffness_columns(design, op))
        drive = op.drive_current_A
    out.update(_coil_heat_columns(design, drive))
    return {c: (bool(out[c]) if isinstance(out[c], (bool, np.bool_)) else float(out[c])) for c in RESULT_COLUMNS}
