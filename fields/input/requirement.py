"""Requirement file (TOML) -> validated :class:`Requirement` for ``hoverfield size``.

A *requirement file* says what a suspension levitator must do, not how it is built: the payload,
the magnet (given, or chosen from standard disc sizes and grades), the operating gap or gap range,
the supply voltage, the space the coil may fill and the wire gauges on hand, an optional
soft-iron core, the limits (winding temperature, current density, driver dissipation, supply
headroom) and the objective. ``fields.studies.size`` turns it into ranked designs. The format is
in README.md ("Requirement file reference"). Every error names file, key path, value and rule.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from fields.errors import GeometryError
from fields.input import tables
from fields.input.csvtable import TomlTable, file_error, read_toml, show_value
from fields.input.units import UnitParseError

#: standard disc magnets (diameter, height) in metres to choose from. INVENTED list of common
#: hobby and catalogue sizes, metric and inch (common practice, no source)
STANDARD_DISC_SIZES_M: tuple[tuple[float, float], ...] = (
    (6e-3, 3e-3), (8e-3, 3e-3), (8e-3, 5e-3), (10e-3, 3e-3), (10e-3, 5e-3), (12e-3, 3e-3), (12e-3, 6e-3),
    (12.7e-3, 3.175e-3), (12.7e-3, 6.35e-3), (15e-3, 5e-3), (15e-3, 8e-3), (20e-3, 5e-3), (20e-3, 10e-3),
    (25e-3, 5e-3), (25e-3, 10e-3),
)
STANDARD_SIZES_SOURCE = "invented list of common disc magnet sizes (common practice, no source)"
#: grades the chooser tries when the file names none (common catalogue grades; common practice)
DEFAULT_CHOICE_GRADES = ("N35", "N42", "N52")
#: magnet-wire gauges tried when the file names none (common practice, no source)
DEFAULT_GAUGES = ("AWG 22", "AWG 24", "AWG 26", "AWG 28", "AWG 30")
#: supply headroom kept free for control when the file gives none: the low-headroom line of
#: :mod:`fields.devices.drive` (a fraction of the supply; common practice, no source)
DEFAULT_HEADROOM_FRACTION = 0.2
#: thinnest winding the search considers, radially and axially (m): a few wire layers
MIN_BUILD_M = 2e-3
OBJECTIVES = {
    "coil_power": ("coil_power_W", "steady coil power I^2 R(T) at the operating gap (W)"),
    "coil_temperature": ("coil_temperature_C", "steady winding temperature at the operating gap (degC)"),
    "total_mass": ("total_mass_kg", "copper + magnet + core mass (kg; the payload is fixed)"),
    "magnet_volume": ("magnet_volume_m3", "magnet volume, a stand-in for cost (m^3); ties go to lower coil power"),
}
TOP_KEYS = ("name", "description", "invented", "floater", "operating", "coil", "core", "limits", "objective",
            "search")


@dataclass(frozen=True)
class MagnetChoice:
    """One floater magnet the search may use: an axially magnetized disc."""

    diameter_m: float
    height_m: float
    grade: str

    @property
    def volume_m3(self) -> float:
        return math.pi * self.diameter_m**2 / 4.0 * self.height_m

    @property
    def mass_kg(self) -> float:
        return self.volume_m3 * tables.lookup_grade(self.grade).density_kg_per_m3

    @property
    def label(self) -> str:
        return f"{self.diameter_m * 1e3:g} x {self.height_m * 1e3:g} mm {self.grade}"


@dataclass(frozen=True)
class Requirement:
    """A validated requirement (SI units; temperatures in degC).

    ``magnets`` holds one entry when the file gives the magnet, else every size x grade to choose
    from. ``gaps_m`` are the gaps the design must hover at (the operating gap, and the ends of
    the range when one is given); the objective is taken at ``operating_gap_m``. The driver
    dissipation limit is ``inf`` when not given; ``fill_factor``, ``max_winding_temperature_C``
    and ``max_current_density_A_per_m2`` are None when not given (the search then uses the
    winding model's defaults, :func:`fields.studies.size_model.limits_of`).
    """

    file: str
    name: str
    description: str
    invented: bool
    payload_mass_kg: float
    payload_below_m: float
    magnets: tuple[MagnetChoice, ...]
    magnet_chosen: bool
    operating_gap_m: float
    gaps_m: tuple[float, ...]
    supply_voltage_V: float
    ambient_C: float
    convection_W_per_m2K: float
    max_outer_radius_m: float
    max_height_m: float
    min_inner_radius_m: float
    min_outer_radius_m: float
    min_height_m: float
    gauges: tuple[str, ...]
    fill_factor: float | None
    coil_bottom_height_m: float
    core_permeability: float | None
    core_saturation_T: float | None
    insulation_class_C: float
    max_winding_temperature_C: float | None
    max_current_density_A_per_m2: float | None
    max_driver_dissipation_W: float
    min_headroom_V: float
    objective: str
    seed: int
    shortlist: int
    generations: int

    @property
    def objective_column(self) -> str:
        return OBJECTIVES[self.objective][0]

    @property
    def has_core(self) -> bool:
        return self.core_permeability is not None


def _current_density(t: TomlTable, key: str) -> float | None:
    """A current density in A/m^2 (``"3.5 A/mm^2"``), None when not given."""
    v = t.raw(key, None)
    if v is None:
        return None
    from fields.input.units import registry

    rule = "a current density with a unit, e.g. \"3.5 A/mm^2\""
    if not isinstance(v, str):
        raise t.fail(key, rule, v)
    try:
        x = float(registry().Quantity(v.strip().replace("^", "**")).to("A/m**2").magnitude)
    except Exception:  # pint raises many types for bad or mismatched units
        raise t.fail(key, rule, v) from None
    if not (math.isfinite(x) and x > 0):
        raise t.fail(key, "positive", v)
    return x


def _text_list(t: TomlTable, key: str, default: tuple[str, ...]) -> list[str]:
    v = t.raw(key, None)
    if v is None:
        return list(default)
    if not isinstance(v, list) or not v or not all(isinstance(x, str) for x in v):
        raise t.fail(key, "a non-empty list of strings", v)
    return v


def _grade(t: TomlTable, key: str, name: str, where: str) -> str:
    g = tables.lookup_grade(name)
    if g is None:
        raise GeometryError(f"{t.file}: {where}", "the value", "a grade of the table: " + ", ".join(
            x.name for x in tables.GRADES.values()), show_value(name))
    return g.name


def _magnets(t: TomlTable) -> tuple[tuple[MagnetChoice, ...], bool]:
    if t.boolean("choose", False):
        t.done(("choose", "sizes", "grades"))
        sizes = STANDARD_DISC_SIZES_M
        raw = t.raw("sizes", None)
        if raw is not None:
            if not isinstance(raw, list) or not raw:
                raise t.fail("sizes", "a list of [diameter, height] pairs, e.g. [[\"12.7 mm\", \"6.35 mm\"]]", raw)
            sizes = []
            for i, pair in enumerate(raw):
                if not isinstance(pair, list) or len(pair) != 2:
                    raise GeometryError(f"{t.file}: {t.path}.sizes[{i}]", "the value", "a [diameter, height] pair",
                                        show_value(pair))
                sub = TomlTable({"d": pair[0], "h": pair[1]}, f"{t.path}.sizes[{i}]", t.file)
                try:
                    sizes.append((sub.quantity("d", "length", positive=True), sub.quantity("h", "length", positive=True)))
                except GeometryError:
                    raise GeometryError(f"{t.file}: {t.path}.sizes[{i}]", "the value",
                                        "two positive lengths, e.g. [\"12.7 mm\", \"6.35 mm\"]", show_value(pair)) from None
        grades = [_grade(t, "grades", g, f"{t.path}.grades[{i}]")
                  for i, g in enumerate(_text_list(t, "grades", DEFAULT_CHOICE_GRADES))]
        return tuple(MagnetChoice(float(d), float(h), g) for d, h in sizes for g in grades), True
    t.done(("choose", "shape", "diameter", "height", "grade"))
    t.string("shape", "cylinder", choices=("cylinder",))
    d = t.quantity("diameter", "length", positive=True)
    h = t.quantity("height", "length", positive=True)
    g = _grade(t, "grade", t.string("grade"), f"{t.path}.grade")
    return (MagnetChoice(d, h, g),), False


def _operating(t: TomlTable) -> tuple[float, tuple[float, ...], float, float, float]:
    t.done(("gap", "gap_min", "gap_max", "supply_voltage", "ambient_temperature", "convection_coefficient"))
    has_range = t.has("gap_min") or t.has("gap_max")
    if has_range:
        lo = t.quantity("gap_min", "length", positive=True)
        hi = t.quantity("gap_max", "length", positive=True)
        if hi <= lo:
            raise t.fail("gap_max", f"larger than gap_min ({t.data['gap_min']})", t.data["gap_max"])
        op = t.quantity("gap", "length", 0.5 * (lo + hi), positive=True)
        if not lo <= op <= hi:
            raise t.fail("gap", "within gap_min..gap_max", t.data["gap"])
        gaps = tuple(sorted({lo, op, hi}))
    else:
        op = t.quantity("gap", "length", positive=True)
        gaps = (op,)
    v = t.quantity("supply_voltage", "voltage", positive=True)
    amb = t.quantity("ambient_temperature", "temperature", 25.0)
    conv = t.quantity("convection_coefficient", "heat_transfer", 10.0, positive=True)
    return op, gaps, v, amb, conv


def _coil(t: TomlTable) -> dict[str, Any]:
    keys = ("max_outer_radius", "max_height", "min_inner_radius", "min_outer_radius", "min_height", "wire_gauges",
            "fill_factor", "bottom_height")
    t.done(keys)
    bmax = t.quantity("max_outer_radius", "length", positive=True)
    hmax = t.quantity("max_height", "length", positive=True)
    amin = t.quantity("min_inner_radius", "length", 1e-3, nonnegative=True)
    bmin = t.quantity("min_outer_radius", "length", amin + MIN_BUILD_M, positive=True)
    hmin = t.quantity("min_height", "length", min(MIN_BUILD_M * 2.5, hmax), positive=True)
    if amin + MIN_BUILD_M > bmax:
        raise t.fail("max_outer_radius", f"at least min_inner_radius + {MIN_BUILD_M * 1e3:g} mm of winding", t.data["max_outer_radius"])
    if not amin + MIN_BUILD_M <= bmin <= bmax:
        raise t.fail("min_outer_radius", f"between min_inner_radius + {MIN_BUILD_M * 1e3:g} mm and max_outer_radius",
                     t.data["min_outer_radius"])
    if hmin > hmax:
        raise t.fail("min_height", "at most max_height", t.data["min_height"])
    gauges = []
    for i, g in enumerate(_text_list(t, "wire_gauges", DEFAULT_GAUGES)):
        try:
            n = tables.parse_gauge(g)
        except ValueError:
            raise GeometryError(f"{t.file}: {t.path}.wire_gauges[{i}]", "the value", "an AWG size such as \"AWG 26\"",
                                show_value(g)) from None
        if not 0 <= n <= 44:
            raise GeometryError(f"{t.file}: {t.path}.wire_gauges[{i}]", "the value", "a magnet-wire size from AWG 0 to AWG 44",
                                show_value(g))
        gauges.append(f"AWG {n}")
    fill = t.number("fill_factor", None, positive=True, maximum=tables.HEXAGONAL_FILL) if t.has("fill_factor") else None
    bottom = t.quantity("bottom_height", "length", 0.1, positive=True)
    return {"max_outer_radius_m": bmax, "max_height_m": hmax, "min_inner_radius_m": amin, "min_outer_radius_m": bmin,
            "min_height_m": hmin, "gauges": tuple(dict.fromkeys(gauges)), "fill_factor": None if fill is None else float(fill),
            "coil_bottom_height_m": bottom}


def _limits(t: TomlTable, supply_V: float, ambient_C: float) -> dict[str, Any]:
    t.done(("insulation_class", "max_winding_temperature", "max_current_density", "max_driver_dissipation",
            "min_supply_headroom"))
    ins = t.quantity("insulation_class", "temperature", 130.0)
    if ins not in tables.THERMAL_CLASSES_C:
        raise t.fail("insulation_class", "a thermal class in degrees C: " + ", ".join(
            f"\"{c:g} degC\"" for c in tables.THERMAL_CLASSES_C), t.data["insulation_class"])
    tmax = None
    if t.has("max_winding_temperature"):
        tmax = t.quantity("max_winding_temperature", "temperature")
        if not ambient_C < tmax <= ins:
            raise t.fail("max_winding_temperature", f"above the ambient ({ambient_C:g} degC) and at most the insulation "
                         f"class ({ins:g} degC)", t.data["max_winding_temperature"])
    jmax = _current_density(t, "max_current_density")
    pdrv = t.quantity("max_driver_dissipation", "power", math.inf, positive=True)
    head = t.quantity("min_supply_headroom", "voltage", DEFAULT_HEADROOM_FRACTION * supply_V, nonnegative=True)
    if head >= supply_V:
        raise t.fail("min_supply_headroom", f"below the supply voltage ({supply_V:g} V)", t.data["min_supply_headroom"])
    return {"insulation_class_C": ins, "max_winding_temperature_C": tmax, "max_current_density_A_per_m2": jmax,
            "max_driver_dissipation_W": pdrv, "min_headroom_V": head}


def load_requirement(path: str | Path) -> Requirement:
    """Read and validate a requirement file.

    Raises
    ------
    GeometryError
        One line naming the file, the key path, the value and the rule.

    Examples
    --------
    >>> from pathlib import Path
    >>> r = load_requirement(Path(__file__).parents[2] / "geometries" / "requirement_suspension.toml")
    >>> r.objective, r.magnet_chosen, round(r.payload_mass_kg, 3)
    ('coil_power', True, 0.03)
    """
    file = str(path)
    _, data = read_toml(path, "the requirement file")
    root = TomlTable(data, "", file)
    root.done(TOP_KEYS)
    for sec in ("floater", "operating", "coil"):
        if sec not in data:
            raise file_error(file, sec, f"given (a [{sec}] table)", "nothing", "this section")
    name = root.string("name", Path(file).stem)
    if not name.strip() or any(c in name for c in '/\\:*?"<>|'):
        raise root.fail("name", "a name usable as a folder name (no / \\ : * ? \" < > |)", name)
    fl = root.sub("floater")
    fl.done(("payload_mass", "payload_below", "magnet"))
    payload = fl.quantity("payload_mass", "mass", nonnegative=True)
    below = fl.quantity("payload_below", "length", 12e-3, nonnegative=True)
    if "magnet" not in fl.data:
        raise file_error(file, "floater.magnet", "given (a [floater.magnet] table: shape, diameter, height, grade; "
                         "or choose = true)", "nothing", "this section")
    magnets, chosen = _magnets(fl.sub("magnet"))
    op, gaps, supply, amb, conv = _operating(root.sub("operating"))
    coil = _coil(root.sub("coil"))
    mur = jsat = None
    if "core" in data:
        ct = root.sub("core")
        ct.done(("relative_permeability", "saturation_polarization"))
        mur = float(ct.number("relative_permeability", minimum=1.0))
        jsat = float(ct.quantity("saturation_polarization", "flux_density", positive=True))
    limits = _limits(root.sub("limits") if "limits" in data else TomlTable({}, "limits", file), supply, amb)
    obj_t = root.sub("objective") if "objective" in data else TomlTable({}, "objective", file)
    obj_t.done(("minimize",))
    objective = obj_t.string("minimize", "coil_power", choices=tuple(OBJECTIVES))
    st = root.sub("search") if "search" in data else TomlTable({}, "search", file)
    st.done(("seed", "shortlist", "generations"))
    seed = int(st.number("seed", 0, integer=True, minimum=0))
    short = int(st.number("shortlist", 5, integer=True, minimum=1, maximum=50))
    gens = int(st.number("generations", 40, integer=True, minimum=1, maximum=10000))
    invented = root.boolean("invented", False)
    desc = root.string("description", "")
    try:
        return Requirement(file=file, name=name, description=desc, invented=invented, payload_mass_kg=payload,
                           payload_below_m=below, magnets=magnets, magnet_chosen=chosen, operating_gap_m=op, gaps_m=gaps,
                           supply_voltage_V=supply, ambient_C=amb, convection_W_per_m2K=conv, **coil,
                           core_permeability=mur, core_saturation_T=jsat, **limits, objective=objective, seed=seed,
                           shortlist=short, generations=gens)
    except UnitParseError as e:  # pragma: no cover - every quantity above is parsed through TomlTable
        raise GeometryError(file, "a quantity", e.rule, "") from None
