"""The candidates of ``hoverfield size``: one design from a requirement and a few numbers, its
geometry file, and its quick evaluation against the requirement's limits.

A candidate is a magnet (index into :attr:`Requirement.magnets`), a wire gauge and three
continuous numbers: the winding height ``h``, outer radius ``b`` and the share ``t`` of the free
radial range at which the inner radius sits (``a = a_min + t (b - build - a_min)``), so every
point of the unit box is a valid winding. The coil's lower face is at the requirement's
``bottom_height``; the floater hangs ``gap`` below it. On the axis of an iron-free
axisymmetric design the physics is unchanged by sliding coil and floater together, so the coil
position is not a free number: it follows from the gap.

The quick evaluation uses the package's engine: the candidate is written as a geometry file,
read by :func:`fields.input.geometry.loads` and evaluated by
:func:`fields.analysis.axial_curves` at the requirement's gaps; the force of an iron-free
coil is proportional to its turns (superposition), so one force call serves every gauge.
Resistance and heat are those of :mod:`fields.devices.winding`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fields.devices import winding
from fields.input import tables
from fields.input.requirement import MIN_BUILD_M, Requirement

#: wall between a core and the winding (m): the coil former (common practice, no source)
FORMER_WALL_M = 0.5e-3
#: density of soft iron (kg/m^3), for the core's share of the total mass (from memory)
IRON_DENSITY_KG_PER_M3 = 7870.0
#: the limits the search checks, in the order they are reported
LIMIT_NAMES = ("winding temperature", "current density", "supply headroom", "driver dissipation", "upward force")


@dataclass(frozen=True)
class Limits:
    """The requirement's limits with the winding model's defaults filled in."""

    max_winding_temperature_C: float
    max_current_density_A_per_m2: float
    min_headroom_V: float
    max_driver_dissipation_W: float
    fill_factor: float


def limits_of(req: Requirement) -> Limits:
    """The limits of ``req``; where the file gives none: the insulation class less the hot-spot
    allowance (:data:`fields.devices.winding.HOT_SPOT_ALLOWANCE_K`), the continuous current
    density of natural-convection coils and the winding model's default copper fill."""
    tmax = req.max_winding_temperature_C
    if tmax is None:
        tmax = req.insulation_class_C - winding.HOT_SPOT_ALLOWANCE_K
    j = req.max_current_density_A_per_m2
    if j is None:
        j = winding.CONTINUOUS_CURRENT_DENSITY_A_PER_MM2 * 1e6
    fill = req.fill_factor if req.fill_factor is not None else winding.DEFAULT_FILL_FACTOR
    return Limits(tmax, j, req.min_headroom_V, req.max_driver_dissipation_W, fill)


@dataclass(frozen=True)
class Candidate:
    """One design of the search (SI)."""

    magnet: int
    gauge: str
    height_m: float
    outer_radius_m: float
    inner_radius_m: float

    def key(self) -> tuple:
        return (self.magnet, self.gauge, round(self.height_m, 7), round(self.outer_radius_m, 7),
                round(self.inner_radius_m, 7))


def geometry_of(req: Requirement, magnet: int, gauge: str, x) -> Candidate:
    """The candidate at ``x = (h, b, t)`` (see the module notes)."""
    h, b, t = (float(v) for v in x)
    amin = max(req.min_inner_radius_m, FORMER_WALL_M + 0.5e-3) if req.has_core else req.min_inner_radius_m
    a = amin + min(max(t, 0.0), 1.0) * max(b - MIN_BUILD_M - amin, 0.0)
    return Candidate(int(magnet), gauge, h, b, a)


def bounds_of(req: Requirement) -> list[tuple[float, float]]:
    """Bounds of ``(h, b, t)``."""
    return [(req.min_height_m, req.max_height_m), (req.min_outer_radius_m, req.max_outer_radius_m), (0.0, 1.0)]


def wire_area_m2(gauge: str) -> float:
    d = tables.awg_diameter_m(tables.parse_gauge(gauge))
    return math.pi * d * d / 4.0


def turns_of(c: Candidate, fill: float) -> int:
    """Turns at the copper fill, rounded as the geometry loader rounds them."""
    area = (c.outer_radius_m - c.inner_radius_m) * c.height_m
    return max(1, int(round(fill * area / wire_area_m2(c.gauge))))


def _mm(x: float) -> str:
    return f"{x * 1e3:.6g} mm"


def design_dict(req: Requirement, c: Candidate, *, name: str, hover_A: float = 0.0, max_A: float = 1.0,
                with_core: bool | None = None) -> dict:
    """The parsed geometry file of a candidate (the suspension example's structure).

    ``hover_A`` and ``max_A`` become the coil's nominal and maximum current. With ``with_core``
    (default: when the requirement asks for one) a cylinder core fills the bore less the former
    wall, as tall as the winding, and the gap is measured from it.
    """
    lim = limits_of(req)
    core = req.has_core if with_core is None else with_core
    m = req.magnets[c.magnet]
    zb = req.coil_bottom_height_m
    gop, gmin, gmax = req.operating_gap_m, min(req.gaps_m), max(req.gaps_m)
    zc = zb + 0.5 * c.height_m
    turns = turns_of(c, lim.fill_factor)
    coil = {"name": "lift coil", "inner_radius": _mm(c.inner_radius_m), "outer_radius": _mm(c.outer_radius_m),
            "height": _mm(c.height_m), "wire_gauge": c.gauge, "turns": turns,
            "position": ["0 mm", "0 mm", _mm(zc)], "axis": [0, 0, 1],
            "nominal_current": f"{hover_A:.6g} A", "max_current": f"{max_A:.6g} A",
            "insulation_class": f"{req.insulation_class_C:g} degC"}
    data: dict = {"name": name, "description": f"Generated by hoverfield size from {req.name}: {m.label} floater, "
                  f"{c.gauge} coil{' on a soft-iron core' if core else ''}.",
                  "invented": True, "coils": [coil]}
    if core:
        data["cores"] = [{"name": "iron core", "shape": "cylinder", "diameter": _mm(2 * (c.inner_radius_m - FORMER_WALL_M)),
                          "height": _mm(c.height_m), "position": ["0 mm", "0 mm", _mm(zc)], "axis": [0, 0, 1],
                          "relative_permeability": req.core_permeability,
                          "saturation_polarization": f"{req.core_saturation_T:g} T"}]
    data["floater"] = {"name": "disc floater", "payload_mass": f"{req.payload_mass_kg * 1e3:.6g} g",
                       "payload_position": ["0 mm", "0 mm", _mm(-req.payload_below_m)],
                       "magnets": [{"name": "floater disc", "shape": "cylinder", "diameter": _mm(m.diameter_m),
                                    "height": _mm(m.height_m), "grade": m.grade, "magnetization": [0, 0, 1]}]}
    z_under = zb - gop - m.height_m  # the floater's underside at the operating gap
    hall_z = zb - min(2e-3, 0.5 * gmin)
    data["sensors"] = [
        {"type": "beam", "name": "beam gate", "height": _mm(z_under), "beam_height": "3 mm", "beam_width": "3 mm",
         "direction": [1, 0, 0], "output_span": "5 V"},
        {"type": "hall", "name": "hall under coil", "position": ["0 mm", "0 mm", _mm(hall_z)], "axis": [0, 0, 1],
         "range": "100 mT"}]
    i_lo, i_hi = -abs(hover_A), min(2.0 * abs(hover_A), max_A)
    data["study"] = {"gap_min": _mm(max(1e-3, 0.3 * gmin)), "gap_max": _mm(max(2.0 * gmax, gmax + 10e-3)), "gap_points": 131,
                     "operating_gap": _mm(gop), "gap_reference": "iron core" if core else "lift coil",
                     "currents": [f"{i_lo:.6g} A", f"{i_hi:.6g} A"], "lateral_span": "6 mm", "tilt_span": "15 deg",
                     "supply_voltage": f"{req.supply_voltage_V:g} V", "ambient_temperature": f"{req.ambient_C:g} degC",
                     "convection_coefficient": f"{req.convection_W_per_m2K:g} W/m^2/K",
                     "sensor_line_start": ["0 mm", "0 mm", _mm(zb - gmax)], "sensor_line_end": ["0 mm", "0 mm", _mm(hall_z)],
                     "sensor_line_points": 14}
    return data


@dataclass(frozen=True)
class Quick:
    """Quick numbers of one candidate (SI): what the limits and the objective need."""

    candidate: Candidate
    turns: int
    hover_current_A: float          # at the operating gap
    worst_current_A: float          # largest |hover current| over the gaps
    ki_N_per_A: float
    kz_N_per_m: float
    resistance_20C_ohm: float
    coil_temperature_C: float       # at the worst gap's current
    coil_power_W: float             # at the operating gap
    coil_voltage_V: float           # at the worst current, hot
    headroom_V: float
    driver_dissipation_W: float
    current_density_A_per_m2: float
    total_mass_kg: float
    magnet_volume_m3: float
    violations: tuple[float, ...]   # per LIMIT_NAMES, normalised, 0 where met
    values: tuple[float, ...]       # the value each limit compares

    @property
    def feasible(self) -> bool:
        return not any(v > 0 for v in self.violations)

    @property
    def violation(self) -> float:
        return float(sum(self.violations))


def _temperature(I: float, R20: float, G: float, amb: float) -> float:
    T, _ = winding.steady_temperature_C([I], R20, G, amb)
    return float(T[0])


def check_limits(req: Requirement, temperature_C: float, current_density_A_per_m2: float, headroom_V: float,
                 driver_W: float, ki_min_N_per_A: float) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """Normalised violations (0 where met) and the compared values, in :data:`LIMIT_NAMES` order."""
    lim = limits_of(req)
    tmax, span = lim.max_winding_temperature_C, lim.max_winding_temperature_C - req.ambient_C
    jmax, Vs = lim.max_current_density_A_per_m2, req.supply_voltage_V
    pmax = lim.max_driver_dissipation_W
    big = 1e3  # a runaway, an unreachable hover or no upward force
    viol = (max(0.0, (temperature_C - tmax) / span) if math.isfinite(temperature_C) else big,
            max(0.0, (current_density_A_per_m2 - jmax) / jmax) if math.isfinite(current_density_A_per_m2) else big,
            max(0.0, (lim.min_headroom_V - headroom_V) / Vs) if math.isfinite(headroom_V) else big,
            (max(0.0, (driver_W - pmax) / pmax) if math.isfinite(pmax) else 0.0) if math.isfinite(driver_W) else big,
            0.0 if ki_min_N_per_A > 0 else big)
    values = (temperature_C, current_density_A_per_m2, headroom_V, driver_W, ki_min_N_per_A)
    return tuple(float(v) for v in viol), tuple(float(v) for v in values)


def limit_text(req: Requirement, index: int, value: float) -> str:
    """How far a candidate is from one limit, e.g. ``"winding temperature: best candidate
    reaches 212 C, limit 155 C"``."""
    lim = limits_of(req)
    name = LIMIT_NAMES[index]
    if index == 0:
        got = "runs away thermally" if not math.isfinite(value) else f"reaches {value:.0f} C"
        return f"{name}: best candidate {got}, limit {lim.max_winding_temperature_C:.0f} C"
    if index == 1:
        return (f"{name}: best candidate needs {value / 1e6:.3g} A/mm^2, limit "
                f"{lim.max_current_density_A_per_m2 / 1e6:.3g} A/mm^2")
    if index == 2:
        got = "cannot reach the hover current" if not math.isfinite(value) else f"leaves {value:.3g} V"
        return f"{name}: best candidate {got}, needs at least {lim.min_headroom_V:.3g} V of {req.supply_voltage_V:g} V"
    if index == 3:
        return f"{name}: best candidate puts {value:.3g} W into a linear driver, limit {lim.max_driver_dissipation_W:.3g} W"
    return f"{name}: no candidate's coil pulls the floater up (force per ampere {value:.3g} N/A)"


def quick_numbers(req: Requirement, c: Candidate, F0_N: np.ndarray, ki_per_turn: np.ndarray,
                  dki_dh_per_turn: float, kz0: float, mass_kg: float) -> Quick:
    """The quick numbers of a candidate from the per-turn force of its winding shape.

    ``F0_N`` and ``ki_per_turn`` at every gap of ``req.gaps_m``; ``dki_dh_per_turn``, ``kz0`` at
    the operating gap.
    """
    lim = limits_of(req)
    N = turns_of(c, lim.fill_factor)
    a, b, h = c.inner_radius_m, c.outer_radius_m, c.height_m
    area = wire_area_m2(c.gauge)
    weight = mass_kg * tables.G_STANDARD
    ki = ki_per_turn * N
    with np.errstate(divide="ignore", invalid="ignore"):
        I = np.where(ki > 0, (weight - F0_N) / ki, np.inf)
    iop = req.gaps_m.index(req.operating_gap_m)
    i_op = float(I[iop])
    i_w = float(np.max(np.abs(I)))
    R20 = tables.COPPER_RESISTIVITY_20C_OHM_M * N * math.pi * (a + b) / area
    S = 2 * math.pi * b * h + 2 * math.pi * (b * b - a * a) + (0.0 if req.has_core else 2 * math.pi * a * h)
    G = req.convection_W_per_m2K * S
    amb = req.ambient_C
    if math.isfinite(i_w):
        T_w = _temperature(i_w, R20, G, amb)
        T_op = _temperature(i_op, R20, G, amb)
    else:
        T_w = T_op = math.inf
    Rw = R20 * (1 + tables.COPPER_ALPHA_20C_PER_K * (T_w - 20.0))
    Rop = R20 * (1 + tables.COPPER_ALPHA_20C_PER_K * (T_op - 20.0))
    V = abs(i_w) * Rw
    Vs = req.supply_voltage_V
    # linear (transistor) stage: what the supply drops outside the coil, largest over the gaps
    with np.errstate(invalid="ignore"):
        P_drv = max(((Vs - abs(float(i)) * Rw) * abs(float(i)) for i in I), default=math.nan) if math.isfinite(i_w) else math.inf
    J = i_w / area
    m = req.magnets[c.magnet]
    core_m = (math.pi * (a - FORMER_WALL_M) ** 2 * h * IRON_DENSITY_KG_PER_M3) if req.has_core else 0.0
    copper_m = tables.COPPER_DENSITY_KG_PER_M3 * N * math.pi * (a + b) * area
    viol, values = check_limits(req, T_w, J, Vs - V, float(P_drv), float(np.min(ki)))
    kz = kz0 - i_op * dki_dh_per_turn * N
    return Quick(candidate=c, turns=N, hover_current_A=i_op, worst_current_A=i_w, ki_N_per_A=float(ki[iop]), kz_N_per_m=float(kz),
                 resistance_20C_ohm=R20, coil_temperature_C=T_w, coil_power_W=i_op * i_op * Rop if math.isfinite(i_op) else math.inf,
                 coil_voltage_V=V, headroom_V=Vs - V, driver_dissipation_W=float(P_drv), current_density_A_per_m2=J,
                 total_mass_kg=copper_m + m.mass_kg + core_m, magnet_volume_m3=m.volume_m3,
                 violations=viol, values=values)


def objective_value(req: Requirement, q: Quick) -> float:
    """The number the search minimises: the objective when every limit is met, else a large
    number growing with the total violation (so the search still moves towards feasibility)."""
    if not q.feasible:
        return 1e9 * (1.0 + q.violation)
    if req.objective == "coil_power":
        return q.coil_power_W
    if req.objective == "coil_temperature":
        return q.coil_temperature_C
    if req.objective == "total_mass":
        return q.total_mass_kg
    return q.magnet_volume_m3 * 1e6 + 1e-4 * q.coil_power_W  # cm^3, ties to the lower coil power


#: per process: the loaded design of each (requirement, magnet), the template of its shapes
_TEMPLATES: dict = {}


def _template(req: Requirement, magnet: int):
    """The candidate design of ``magnet`` read by the normal loader once per process.

    The coil's lower face is fixed, so the gap axis the loader places (floater top to that face)
    is the same for every winding shape of this magnet; only the coil changes between shapes.
    """
    from fields.input.geometry import loads
    from fields.studies.expand import toml_text

    key = (req, magnet)
    if key not in _TEMPLATES:
        if len(_TEMPLATES) > 256:
            _TEMPLATES.clear()
        c = geometry_of(req, magnet, req.gauges[0], (req.max_height_m, req.max_outer_radius_m, 0.0))
        data = design_dict(req, c, name="size-candidate", with_core=False)
        _TEMPLATES[key] = loads(toml_text(data), file=f"{req.file} (size candidate)", check_overlaps=False)
    return _TEMPLATES[key]


def candidate_design(req: Requirement, c: Candidate):
    """The iron-free design of a candidate: the template with this winding (turns as the loader
    rounds them, wire from the gauge, centre half a height above the fixed lower face)."""
    from dataclasses import replace

    base = _template(req, c.magnet)
    N = turns_of(c, limits_of(req).fill_factor)
    d = tables.awg_diameter_m(tables.parse_gauge(c.gauge))
    fill = N * math.pi * d * d / 4.0 / ((c.outer_radius_m - c.inner_radius_m) * c.height_m)
    coil = replace(base.coils[0], inner_radius_m=c.inner_radius_m, outer_radius_m=c.outer_radius_m, height_m=c.height_m,
                   turns=float(N), position_m=(0.0, 0.0, req.coil_bottom_height_m + 0.5 * c.height_m),
                   wire_diameter_m=d, wire_gauge=c.gauge, fill_factor=fill)
    return replace(base, coils=(coil,))


def shape_forces(req: Requirement, magnet: int, x) -> tuple[Candidate, np.ndarray, np.ndarray, float, float, float]:
    """Per-turn force of a winding shape at the requirement's gaps (iron-free engine).

    Returns ``(candidate of the first gauge, F0_N (g,), ki per turn (g,), dki/dh per turn at the
    operating gap, kz0 at the operating gap, floater mass)``.
    """
    from fields import analysis

    c = geometry_of(req, magnet, req.gauges[0], x)
    design = candidate_design(req, c)
    cv = analysis.axial_curves(design, gaps_m=list(req.gaps_m), currents_A=[0.0])
    N = design.coils[0].turns
    iop = req.gaps_m.index(req.operating_gap_m)
    return (c, np.asarray(cv.F0_N, float), np.asarray(cv.ki_N_per_A, float) / N,
            float(cv.dki_dh_N_per_A_m[iop]) / N, float(cv.kz0_N_per_m[iop]), float(design.floater.mass_kg))


def evaluate_shape(req: Requirement, magnet: int, x, gauges: tuple[str, ...] | None = None) -> list[Quick]:
    """Quick numbers of one winding shape for each gauge (default: every gauge of ``req``)."""
    _, F0, kit, dkit, kz0, mass = shape_forces(req, magnet, x)
    return [quick_numbers(req, geometry_of(req, magnet, g, x), F0, kit, dkit, kz0, mass) for g in (gauges or req.gauges)]
