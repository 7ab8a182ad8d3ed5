"""Coil data sheet: winding, resistance, heat, current density and inductance of one coil.

The pieces live in :mod:`fields.devices.winding` (wire, resistance, cooling, steady temperature)
and :mod:`fields.devices.inductance` (self, mutual and core inductance); :func:`coil_datasheet`
runs them in named steps and gathers the numbers in a :class:`CoilData`. Index letters: ``k``
coils, ``g`` gaps.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.devices.inductance import air_self_inductance_H
from fields.devices.notices import Notice
from fields.devices.winding import (CONTINUOUS_CURRENT_DENSITY_A_PER_MM2, DEFAULT_INSULATION_CLASS_C,
                                    HOT_SPOT_ALLOWANCE_K, Wire, coil_wire, cooling_surface_m2,
                                    hot_resistance_ohm, resistance_20C_ohm, steady_temperature_C)
from fields.errors import InputError
from fields.input import tables
from fields.model.design import Coil, Design

INDUCTANCE_MODELS = ("air", "iron_cells")
"""Why dL/dgap is what it is: an air coil and a rigid magnet floater (dL/dgap = 0); soft-iron
cores solved by ring cells at the hover current of each gap (the floater and the bias current
set the iron's operating point on its B-H curve, so the incremental inductance changes with
the gap)."""

#: Chebyshev-Lobatto gaps at which the cell solve runs for L(gap) (interpolated in between,
#: dL/dgap from the interpolant's derivative)
INDUCTANCE_NODES = 17


@dataclass(frozen=True)
class CoilData:
    """Electrical and thermal data sheet of one coil (SI; arrays over gaps ``g``).

    Attributes
    ----------
    name : str
    turns : float
    wire_diameter_m : float
        Bare copper diameter (m).
    wire_source : str
        One of :data:`fields.devices.winding.WIRE_SOURCES`.
    wire_gauge : str or None
        The AWG size when given.
    assumed_fill_factor : float or None
        The copper fill the wire diameter was inferred at (``wire_source == "inferred"``).
    copper_fill_factor : float
        ``N pi d^2 / 4 / ((b - a) h)``.
    mean_turn_length_m, wire_length_m, copper_mass_kg : float
    copper_area_m2 : float
        Cross-section of one bare wire (m^2).
    resistance_20C_ohm : float
    operating_temperature_C, resistance_operating_ohm : float
        Temperature used for the hot resistance (the self-consistent steady temperature at the
        hover current of the operating gap, else at the nominal current) and the resistance there.
    inductance_air_H, inductance_error_H : float
        Air-core self-inductance and its quadrature error estimate.
    inductance_core_H : float
        Core contribution at the operating gap (0 without cores).
    inductance_H : float
        Total at the operating gap.
    time_constant_20C_s, time_constant_operating_s : float
        L / R.
    gaps_m, inductance_vs_gap_H, dL_dgap_H_per_m : ndarray, shape (g,)
        Incremental self-inductance at each gap's current (hover current, else nominal) and its
        derivative along the gap.
    flux_linkage_vs_gap_Wb : ndarray, shape (g,)
        Flux linkage at each gap's current: own air-core flux ``L_air I``, the cores' (saturable)
        and the floater's magnets' (Wb); NaN for the floater part off the cores' axis.
    inductance_interpolation_H : float
        Largest gap-interpolation error estimate of ``inductance_vs_gap_H`` (0 without cores).
    inductance_model : str
        One of :data:`INDUCTANCE_MODELS`: why dL/dgap is what it is.
    currents_from_hover : bool
        True when the thermal arrays use the given hover currents, False for the nominal current.
    hover_currents_A : ndarray, shape (g,)
        The hover current of this coil at each gap (input; NaN when not given).
    power_W, temperature_C, temperature_rise_K, resistance_hot_ohm : ndarray, shape (g,)
        Steady, self-consistent values at the hover current (``inf`` where it runs away).
    runaway : ndarray of bool, shape (g,)
    current_density_A_per_mm2 : ndarray, shape (g,)
        At the hover current.
    current_density_nominal_A_per_mm2, current_density_max_A_per_mm2 : float
    nominal_current_A, max_current_A : float
    voltage_drive_cold_V : ndarray, shape (g,)
        Voltage that drives the hover current through the coil at 20 C.
    current_hot_same_voltage_A : ndarray, shape (g,)
        Current that voltage gives once the coil is at its steady temperature.
    surface_area_m2 : float
    bore_cooled : bool
        True when the bore counts in the cooling surface (no core fills it).
    convection_W_per_m2K, ambient_temperature_C, insulation_class_C : float
    insulation_class_given : bool
        False when :data:`fields.devices.winding.DEFAULT_INSULATION_CLASS_C` was assumed.
    notices : tuple of Notice
        Codes (values in brackets): ``wire_inferred``, ``high_fill``, ``fill_mismatch`` (see
        :func:`fields.devices.winding.coil_wire`); ``thermal_runaway`` (``count``, ``of``,
        ``first_gap_m``, ``runs_m``: the contiguous gap runs of :func:`gap_runs`, ``operating_gap_m``); ``runaway_at_operating`` (``quoted_temperature_C``);
        ``insulation_class_assumed`` (``class_C``); ``above_thermal_class`` (``class_C``,
        ``count``, ``of``, ``gap_lo_m``, ``gap_hi_m``, ``runs_m``, ``operating_gap_m``); ``near_thermal_class`` (``temperature_C``,
        ``allowance_K``, ``class_C``); ``current_density_high`` (``max_A_per_mm2``,
        ``limit_A_per_mm2``, ``currents_from_hover``); ``max_current_density_high``
        (``value_A_per_mm2``, ``limit_A_per_mm2``); ``core_saturates`` (``count``, ``of``): some
        core cell passes the saturation fraction of its curve at that many gaps.
    """

    name: str
    turns: float
    wire_diameter_m: float
    wire_source: str
    wire_gauge: str | None
    assumed_fill_factor: float | None
    copper_fill_factor: float
    mean_turn_length_m: float
    wire_length_m: float
    copper_area_m2: float
    copper_mass_kg: float
    resistance_20C_ohm: float
    operating_temperature_C: float
    resistance_operating_ohm: float
    inductance_air_H: float
    inductance_error_H: float
    inductance_core_H: float
    inductance_H: float
    time_constant_20C_s: float
    time_constant_operating_s: float
    gaps_m: np.ndarray
    inductance_vs_gap_H: np.ndarray
    dL_dgap_H_per_m: np.ndarray
    flux_linkage_vs_gap_Wb: np.ndarray
    inductance_interpolation_H: float
    inductance_model: str
    currents_from_hover: bool
    hover_currents_A: np.ndarray
    power_W: np.ndarray
    temperature_C: np.ndarray
    temperature_rise_K: np.ndarray
    resistance_hot_ohm: np.ndarray
    runaway: np.ndarray
    current_density_A_per_mm2: np.ndarray
    current_density_nominal_A_per_mm2: float
    current_density_max_A_per_mm2: float
    nominal_current_A: float
    max_current_A: float
    voltage_drive_cold_V: np.ndarray
    current_hot_same_voltage_A: np.ndarray
    surface_area_m2: float
    bore_cooled: bool
    convection_W_per_m2K: float
    ambient_temperature_C: float
    insulation_class_C: float
    insulation_class_given: bool
    notices: tuple[Notice, ...] = ()

    def resistance_ohm(self, temperature_C) -> np.ndarray:
        """Resistance (ohm) at temperatures (C): ``R20 (1 + alpha (T - 20))`` (IEC 60028)."""
        return hot_resistance_ohm(self.resistance_20C_ohm, temperature_C)


# ------------------------------------------------------------------------------------- steps


def _currents(design: Design, coil_index: int, hover_currents_A, gaps: np.ndarray):
    """This coil's current per gap, all coils' currents (or None) and whether they are hover currents."""
    coil = design.coils[coil_index]
    k, ng = len(design.coils), gaps.size
    if hover_currents_A is None:
        return np.full(ng, float(coil.nominal_current_A)), None, False
    H = np.asarray(hover_currents_A, dtype=float)
    if H.ndim == 1:
        if H.size != ng:
            raise InputError(f"coil_datasheet: hover_currents_A must have {ng} values (one per gap); got {H.size}.")
        I_all = np.zeros((ng, k))
        I_all[:, coil_index] = H
        return H.copy(), I_all, True
    if H.shape != (ng, k):
        raise InputError(f"coil_datasheet: hover_currents_A must have shape ({ng}, {k}); got {H.shape}.")
    return H[:, coil_index].copy(), H, True


def gap_runs(gaps_m, mask) -> tuple[tuple[float, float], ...]:
    """The gaps where ``mask`` holds as contiguous runs along the sorted gap grid: ``(first,
    last)`` gap of each run (a lone gap is a run of one), so a range never spans gaps where the
    mask is False.

    >>> gap_runs([1.0, 2.0, 3.0, 4.0, 5.0], [True, True, False, True, False])
    ((1.0, 2.0), (4.0, 4.0))
    """
    g = np.asarray(gaps_m, dtype=float)
    m = np.asarray(mask, dtype=bool)
    o = np.argsort(g, kind="stable")
    g, m = g[o], m[o]
    runs, start = [], None
    for i in range(g.size):
        if m[i] and start is None:
            start = i
        if start is not None and (not m[i] or i == g.size - 1):
            end = i if m[i] else i - 1
            runs.append((float(g[start]), float(g[end])))
            start = None
    return tuple(runs)


def _thermal(coil: Coil, I: np.ndarray, R20: float, G: float, Tamb: float, gaps: np.ndarray,
             notices: list[Notice], design_gap_m: float = float("nan")):
    """Steady temperature, hot resistance and power at each gap's current."""
    T, run = steady_temperature_C(I, R20, G, Tamb)
    R_hot = hot_resistance_ohm(R20, T)
    if np.any(run):
        notices.append(Notice("thermal_runaway", coil.name, {"count": int(run.sum()), "of": int(gaps.size),
                                                             "first_gap_m": float(gaps[run][0]),
                                                             "runs_m": gap_runs(gaps, run),
                                                             "operating_gap_m": float(design_gap_m)}))
    return T, run, R_hot, I * I * R_hot


def _operating_temperature(design: Design, coil: Coil, I: np.ndarray, gaps: np.ndarray, from_hover: bool,
                           R20: float, G: float, Tamb: float, notices: list[Notice]) -> float:
    """Steady temperature at the operating gap's current (hover, interpolated, or nominal)."""
    I_op = float(np.interp(design.study.operating_gap_m, gaps, I)) if from_hover else float(coil.nominal_current_A)
    T_op, run_op = steady_temperature_C([I_op], R20, G, Tamb)
    if run_op[0]:
        quoted = float(tables.THERMAL_CLASSES_C[-1])
        notices.append(Notice("runaway_at_operating", coil.name, {"quoted_temperature_C": quoted}))
        return quoted
    return float(T_op[0])


def _insulation(coil: Coil, T: np.ndarray, gaps: np.ndarray, notices: list[Notice],
                operating_gap_m: float = float("nan")) -> tuple[float, bool]:
    """The thermal class (given or assumed) and notices when the winding reaches it."""
    given = coil.insulation_class_C is not None
    ins = float(coil.insulation_class_C) if given else DEFAULT_INSULATION_CLASS_C
    if not given:
        notices.append(Notice("insulation_class_assumed", coil.name, {"class_C": ins}))
    fin = np.isfinite(T)
    if np.any(fin):
        Tmax = float(np.max(T[fin]))
        over = fin & (T > ins)
        if Tmax > ins:
            go = gaps[over]
            notices.append(Notice("above_thermal_class", coil.name, {
                "class_C": ins, "count": int(over.sum()), "of": int(gaps.size),
                "gap_lo_m": float(go.min()), "gap_hi_m": float(go.max()), "runs_m": gap_runs(gaps, over),
                "operating_gap_m": float(operating_gap_m)}))
        elif Tmax + HOT_SPOT_ALLOWANCE_K > ins:
            notices.append(Notice("near_thermal_class", coil.name, {
                "temperature_C": Tmax, "allowance_K": HOT_SPOT_ALLOWANCE_K, "class_C": ins}))
    return ins, given


def _current_density(coil: Coil, I: np.ndarray, wire: Wire, from_hover: bool, notices: list[Notice]):
    """Current density (A/mm^2) at each gap, at the nominal and at the max current."""
    A = wire.area_m2
    Jd = np.abs(I) / A * 1e-6
    Jnom = abs(float(coil.nominal_current_A)) / A * 1e-6
    Jmax = abs(float(coil.max_current_A)) / A * 1e-6
    limit = CONTINUOUS_CURRENT_DENSITY_A_PER_MM2
    if np.max(Jd) > limit:
        notices.append(Notice("current_density_high", coil.name, {
            "max_A_per_mm2": float(np.max(Jd)), "limit_A_per_mm2": limit, "currents_from_hover": from_hover}))
    if Jmax > limit:
        notices.append(Notice("max_current_density_high", coil.name,
                              {"value_A_per_mm2": float(Jmax), "limit_A_per_mm2": limit}))
    return Jd, float(Jnom), float(Jmax)


def _gap_currents(design: Design, gaps: np.ndarray, I_all, at: np.ndarray) -> np.ndarray:
    """All coils' currents (n, k) at gaps ``at``: the hover currents interpolated (NaN and values
    beyond the rating replaced by the nominal current), else the nominal currents."""
    nom = np.array([float(c.nominal_current_A) for c in design.coils])
    if I_all is None:
        return np.repeat(nom[None], at.size, axis=0)
    imax = np.array([abs(float(c.max_current_A)) for c in design.coils])
    H = np.where(np.isfinite(I_all) & (np.abs(I_all) <= imax[None]), I_all, nom[None])
    order = np.argsort(gaps)
    return np.stack([np.interp(at, gaps[order], H[order, j]) for j in range(H.shape[1])], axis=1)


def _inductance(design: Design, coil_index: int, gaps: np.ndarray, I_all, notices: list[Notice]):
    """Air self-inductance, its error, L per gap, dL/dgap, flux linkage per gap, the core part at the
    operating gap, the interpolation error estimate and the model name."""
    from fields.devices.inductance import core_inductance_terms
    from fields.physics.iron_family import ChebyshevInterpolant, lobatto_points

    coil = design.coils[coil_index]
    ng = gaps.size
    g_op = design.study.operating_gap_m
    L_air, L_err = air_self_inductance_H(coil)
    I_self = _gap_currents(design, gaps, I_all, gaps)[:, coil_index]
    if not design.cores:
        return L_air, L_err, np.full(ng, L_air), np.zeros(ng), L_air * I_self, 0.0, 0.0, "air"
    lo, hi = float(np.min(gaps)), float(np.max(gaps))
    direct = ng <= INDUCTANCE_NODES or hi <= lo
    at = gaps if direct else 0.5 * (lo + hi) + 0.5 * (hi - lo) * lobatto_points(INDUCTANCE_NODES)
    at = np.concatenate([at, [g_op]])
    Lc, sat, link = core_inductance_terms(design, at, _gap_currents(design, gaps, I_all, at), linkage=True)
    Lk = Lc[:, coil_index, coil_index]
    psi = link[:, coil_index]
    if direct:
        L_gap, dL, psi_gap, tail = Lk[:-1], np.full(ng, np.nan), psi[:-1], 0.0
        if ng >= 3:
            o = np.argsort(gaps)
            dL[o] = np.gradient(Lk[:-1][o], gaps[o])
    else:
        f = ChebyshevInterpolant(lo, hi, np.stack((Lk[:-1], psi[:-1]), axis=1))
        vals = f(gaps)
        L_gap, psi_gap = vals[:, 0], vals[:, 1]
        dL = f.derivative(gaps)[:, 0]
        tail = float(f.tail[0])
    n_sat = int(np.sum(sat[:-1]))
    if n_sat:
        notices.append(Notice("core_saturates", coil.name, {"count": n_sat, "of": int(sat.size - 1)}))
    return (L_air, L_err, L_air + L_gap, dL, L_air * I_self + psi_gap, float(Lk[-1]), tail, "iron_cells")


# ---------------------------------------------------------------------------------- datasheet


def coil_datasheet(design: Design, coil_index: int, hover_currents_A=None, gaps_m=None,
                   operating_temperature_C: float | None = None) -> CoilData:
    """Electrical and thermal data sheet of one coil.

    Parameters
    ----------
    design : Design
    coil_index : int
        Which coil (index into ``design.coils``).
    hover_currents_A : array_like, shape (g,) or (g, k), optional
        Hover current of this coil (or of all coils, one column per coil) at each gap, from the
        equilibrium analysis. Without it the thermal arrays use the nominal current.
    gaps_m : array_like, shape (g,), optional
        Gaps of ``hover_currents_A``; default the study's gap grid.
    operating_temperature_C : float, optional
        Temperature of the hot resistance; default the steady temperature at the hover current at
        the operating gap (interpolated), or at the nominal current without hover currents.

    Returns
    -------
    CoilData

    Notes
    -----
    Steps: currents per gap; wire and fill (:func:`fields.devices.winding.coil_wire`); winding
    length, copper mass and ``R20``; cooling surface and steady temperature per gap; operating
    temperature; insulation class; current density; inductance (air, core, dL/dgap).
    """
    k = len(design.coils)
    if not (isinstance(coil_index, (int, np.integer)) and 0 <= coil_index < k):
        raise InputError(f"coil_datasheet: coil_index must be an integer in 0..{k - 1}; got {coil_index!r}.")
    coil = design.coils[coil_index]
    st = design.study
    gaps = st.gaps() if gaps_m is None else np.atleast_1d(np.asarray(gaps_m, dtype=float))
    I, I_all, from_hover = _currents(design, coil_index, hover_currents_A, gaps)
    wire, wire_notices = coil_wire(coil)
    notices = list(wire_notices)
    N = float(coil.turns)
    length = N * float(np.pi * (coil.inner_radius_m + coil.outer_radius_m))
    R20 = resistance_20C_ohm(coil, wire)
    S, bore_cooled = cooling_surface_m2(design, coil_index)
    hconv = float(st.convection_W_per_m2K)
    Tamb = float(st.ambient_temperature_C)
    G = hconv * S
    T, run, R_hot, P = _thermal(coil, I, R20, G, Tamb, gaps, notices, st.operating_gap_m)
    if operating_temperature_C is None:
        T_op = _operating_temperature(design, coil, I, gaps, from_hover, R20, G, Tamb, notices)
    else:
        T_op = float(operating_temperature_C)
    R_op = float(hot_resistance_ohm(R20, T_op))
    ins, ins_given = _insulation(coil, T, gaps, notices, st.operating_gap_m)
    Jd, Jnom, Jmax = _current_density(coil, I, wire, from_hover, notices)
    V_cold = I * R20
    with np.errstate(invalid="ignore", divide="ignore"):
        I_hot = np.where(np.isfinite(R_hot), V_cold / R_hot, 0.0)
    L_air, L_err, L_gap, dL, psi, L_core_op, L_tail, model = _inductance(design, coil_index, gaps, I_all, notices)
    L_tot = L_air + L_core_op
    return CoilData(
        name=coil.name, turns=N, wire_diameter_m=wire.diameter_m, wire_source=wire.source,
        wire_gauge=wire.gauge, assumed_fill_factor=wire.assumed_fill, copper_fill_factor=wire.copper_fill_factor,
        mean_turn_length_m=float(np.pi * (coil.inner_radius_m + coil.outer_radius_m)), wire_length_m=float(length),
        copper_area_m2=float(wire.area_m2),
        copper_mass_kg=float(tables.COPPER_DENSITY_KG_PER_M3 * length * wire.area_m2),
        resistance_20C_ohm=float(R20), operating_temperature_C=T_op, resistance_operating_ohm=R_op,
        inductance_air_H=float(L_air), inductance_error_H=float(L_err), inductance_core_H=L_core_op,
        inductance_H=float(L_tot), time_constant_20C_s=float(L_tot / R20), time_constant_operating_s=float(L_tot / R_op),
        gaps_m=gaps, inductance_vs_gap_H=L_gap, dL_dgap_H_per_m=dL, flux_linkage_vs_gap_Wb=psi,
        inductance_interpolation_H=L_tail, inductance_model=model,
        currents_from_hover=from_hover, hover_currents_A=I if from_hover else np.full(gaps.size, np.nan),
        power_W=P, temperature_C=T, temperature_rise_K=T - Tamb, resistance_hot_ohm=R_hot, runaway=run,
        current_density_A_per_mm2=Jd, current_density_nominal_A_per_mm2=Jnom, current_density_max_A_per_mm2=Jmax,
        nominal_current_A=float(coil.nominal_current_A), max_current_A=float(coil.max_current_A),
        voltage_drive_cold_V=V_cold, current_hot_same_voltage_A=I_hot, surface_area_m2=float(S),
        bore_cooled=bore_cooled, convection_W_per_m2K=hconv, ambient_temperature_C=Tamb, insulation_class_C=ins,
        insulation_class_given=ins_given, notices=tuple(notices),
    )
