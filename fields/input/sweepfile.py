"""Sweep file (TOML) -> validated :class:`SweepSpec` bound to its base geometry file.

A *sweep file* names which values of a geometry file vary — by the geometry file's own key
paths, e.g. ``floater.magnets[0].diameter`` — each as a range (``start``, ``stop``, ``count``)
or a list of ``values``; ``mode = "grid"`` takes every combination, ``mode = "sample"`` a seeded
space-filling sample. It also names the objectives to rank by, the flags and limits that reject
a design, and the objectives of the Pareto front. The format is in README.md ("Sweep file
reference"). Units are parsed by :func:`fields.input.units.parse`, like the geometry file's.
"""

from __future__ import annotations

import difflib
import hashlib
import json
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from fields import __version__
from fields.input.csvtable import check_keys, file_error as _err, read_toml
from fields.input.sweep_parameters import NUMBER_THEN_UNIT, Parameter, read_parameters
from fields.input.units import UnitParseError, parse

# ============================================================================== result columns

#: every column a sweep row holds, with the SI unit its limits are converted to (None for plain
#: numbers and flags) and what it means
RESULT_COLUMNS: dict[str, tuple[str | None, str]] = {
    "mass_kg": ("kg", "floater mass (magnets + payload)"),
    "payload_mass_kg": ("kg", "payload in the design"),
    "target_gap_m": ("m", "the study's operating gap"),
    "hover_current_A": ("A", "drive current that holds the floater at the operating gap (may exceed the limit)"),
    "at_target_gap": (None, "true: held at the operating gap by the hover current; false: at the passive "
                            "zero-current equilibrium (the operating-point rule the report uses: a passive stable height first)"),
    "operating_gap_m": ("m", "gap of the operating point (six-axis equilibrium)"),
    "operating_current_A": ("A", "drive current at the operating point"),
    "ki_N_per_A": ("N/A", "upward force per ampere of drive current at the operating point"),
    "kz_N_per_m": ("N/m", "vertical stiffness -dF_up/dh (negative: unstable)"),
    "k_lateral_N_per_m": ("N/m", "mean horizontal stiffness"),
    "k_tilt_Nm_per_rad": ("N*m/rad", "mean tilt stiffness about the horizontal axes"),
    "unstable_pole_1_per_s": ("1/s", "sqrt(-k_z / m) when k_z < 0, else 0"),
    "fastest_growth_1_per_s": ("1/s", "largest growth rate of the unstable modes (0 if none)"),
    "axes_needing_control": (None, "unstable axes of the six-axis verdict"),
    "residual_lateral_force_N": ("N", "horizontal force left at the operating point (0 for axisymmetric designs)"),
    "residual_torque_Nm": ("N*m", "torque left at the operating point (0 for axisymmetric designs)"),
    "coil_resistance_20C_ohm": ("ohm", "sum over coils at 20 C"),
    "coil_power_W": ("W", "steady I^2 R(T) over all coils at the operating current"),
    "coil_temperature_C": ("degC", "hottest coil's steady average temperature (inf: runaway)"),
    "coil_temperature_rise_K": ("K", "hottest coil's steady rise above ambient"),
    "supply_voltage_V": ("V", "the study's supply voltage"),
    "coil_voltage_V": ("V", "largest steady coil voltage R(T) |I| at the operating current (hot resistance)"),
    "voltage_headroom_V": ("V", "supply_voltage_V minus coil_voltage_V (negative: the supply cannot hold the "
                                "operating current)"),
    "max_payload_kg": ("kg", "largest payload that hovers at the operating gap within the current limit"),
    "min_payload_kg": ("kg", "smallest payload that hovers there"),
    "payload_margin_kg": ("kg", "max_payload_kg minus the design's payload"),
    "force_error_N": ("N", "quadrature error estimate of the force at the operating point"),
    "contact": (None, "flag: the floater touches a body at the evaluated poses"),
    "no_equilibrium": (None, "flag: no operating point (neither a passive stable height nor hover within the limit)"),
    "core_saturation": (None, "flag: a core can reach saturation within +-max_current at the operating point "
                              "(the linear force model is approximate there)"),
    "too_hot": (None, "flag: a coil's steady temperature exceeds its insulation class, or runs away"),
    "over_current": (None, "flag: hovering at the operating gap needs more than max_current"),
    "supply_short": (None, "flag: the supply voltage is below a coil's steady voltage at the operating current"),
}
FLAGS = ("contact", "no_equilibrium", "core_saturation", "too_hot", "over_current", "supply_short")
BOOL_COLUMNS = frozenset(FLAGS) | {"at_target_gap"}

#: designs above this count are refused (a typo in a count should not start a month-long run)
MAX_DESIGNS = 1_000_000
SWEEP_KEYS = ("name", "description", "invented", "base", "mode", "parameters", "sample", "objectives",
              "ranking", "pareto", "constraints")

#: the kind of quantity (fields.input.units.KINDS) of each column unit that has one
_UNIT_KIND = {"kg": "mass", "m": "length", "A": "current", "1/s": "frequency", "N": "force", "ohm": "resistance",
              "W": "power", "degC": "temperature", "V": "voltage"}


# ============================================================================== the spec


@dataclass(frozen=True)
class Objective:
    column: str
    sense: str  # "min" or "max"
    weight: float = 1.0


@dataclass(frozen=True)
class Limit:
    column: str
    minimum: float | None
    maximum: float | None
    text: str


@dataclass(frozen=True)
class SweepSpec:
    """A validated sweep description bound to its base geometry file.

    Attributes
    ----------
    file : str
        The sweep file.
    base_path : str
        The base geometry file.
    base_text : str
        Its content (the designs are made from this, never from the file again).
    name : str
    parameters : tuple of Parameter
    mode : str
        ``"grid"`` or ``"sample"``.
    sample_count, sample_method, seed
        Sample mode: number of designs, ``"sobol"`` or ``"latin_hypercube"``, integer seed.
    objectives : tuple of Objective
    ranking : str
        ``"weighted"`` or ``"lexicographic"``.
    pareto : tuple of str
        Two or three objective columns of the Pareto front.
    reject_flags : tuple of str
        Flags that make a design infeasible.
    limits : tuple of Limit
    sweep_id : str
        SHA-256 of the tool version, the base file's content and the sweep file's content.
    invented : bool
    """

    file: str
    base_path: str
    base_text: str
    name: str
    parameters: tuple[Parameter, ...]
    mode: str
    sample_count: int
    sample_method: str
    seed: int
    objectives: tuple[Objective, ...]
    ranking: str
    pareto: tuple[str, ...]
    reject_flags: tuple[str, ...]
    limits: tuple[Limit, ...]
    sweep_id: str
    invented: bool = False

    @property
    def n_designs(self) -> int:
        if self.mode == "sample":
            return self.sample_count
        return int(np.prod([len(p.grid()) for p in self.parameters]))

    @property
    def columns(self) -> list[str]:
        """Columns of a sweep row: index, the parameters (SI), the results, failure."""
        return ["index"] + [q.column for q in self.parameters] + list(RESULT_COLUMNS) + ["failure"]



# ============================================================================== other sections


def _sample(data: dict, file: str, mode: str) -> tuple[int, str, int]:
    sample = data.get("sample", {})
    if not isinstance(sample, dict):
        raise _err(file, "sample", "a table [sample]", sample, "this section")
    check_keys(sample, ("count", "method", "seed"), file, "sample", "the sweep format")
    n, method, seed = sample.get("count", 0), sample.get("method", "sobol"), sample.get("seed", 0)
    if mode == "sample":
        if isinstance(n, bool) or not isinstance(n, int) or not 1 <= n <= MAX_DESIGNS:
            raise _err(file, "sample.count", f"a whole number from 1 to {MAX_DESIGNS}", n)
        if method not in ("sobol", "latin_hypercube"):
            raise _err(file, "sample.method", "\"sobol\" or \"latin_hypercube\"", method)
        if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
            raise _err(file, "sample.seed", "a whole number of at least 0", seed)
    elif sample:
        raise _err(file, "sample", "absent with mode = \"grid\"", "a [sample] table", "this section")
    return (int(n) if mode == "sample" else 0), method, int(seed)


def objective_columns() -> list[str]:
    """The result columns an objective or a limit can name (every numeric column; not the flags)."""
    return [c for c in RESULT_COLUMNS if c not in BOOL_COLUMNS]


def _check_column(col: Any, file: str, where: str) -> None:
    cols = objective_columns()
    if col not in cols:
        near = difflib.get_close_matches(str(col), cols, n=1, cutoff=0.0)
        hint = f" (did you mean \"{near[0]}\"?)" if near else ""
        raise _err(file, where, "one of the result columns " + ", ".join(cols) + hint, col)


def _column_tables(raw: Any, file: str, where: str, keys: tuple[str, ...]) -> list[tuple[str, dict]]:
    """(key path, table) of each ``[[where]]`` table, its keys and its result ``column`` checked."""
    if not isinstance(raw, list):
        raise _err(file, where, f"a list of [[{where}]] tables", raw, "this section")
    out = []
    for i, t in enumerate(raw):
        w = f"{where}[{i}]"
        if not isinstance(t, dict):
            raise _err(file, w, f"a table written [[{where}]]", t, "this entry")
        check_keys(t, keys, file, w, "the sweep format")
        _check_column(t.get("column"), file, f"{w}.column")
        out.append((w, t))
    return out


def _objectives(data: dict, file: str) -> tuple[Objective, ...]:
    out = []
    for w, o in _column_tables(data.get("objectives", []), file, "objectives", ("column", "sense", "weight")):
        col = o["column"]
        sense = o.get("sense")
        if sense not in ("min", "max"):
            raise _err(file, f"{w}.sense", "\"min\" or \"max\"", sense)
        wt = o.get("weight", 1.0)
        if isinstance(wt, bool) or not isinstance(wt, (int, float)) or not (math.isfinite(wt) and wt > 0):
            raise _err(file, f"{w}.weight", "a positive plain number", wt)
        out.append(Objective(col, sense, float(wt)))
    if not out:
        raise _err(file, "objectives", "at least one [[objectives]] table (column and sense)", "none", "this section")
    if len({o.column for o in out}) != len(out):
        raise _err(file, "objectives", "each column once", [o.column for o in out], "the objectives")
    return tuple(out)


def _ranking_and_pareto(data: dict, objectives: tuple[Objective, ...], file: str) -> tuple[str, tuple[str, ...]]:
    ranking = data.get("ranking", "weighted")
    if ranking not in ("weighted", "lexicographic"):
        raise _err(file, "ranking", "\"weighted\" or \"lexicographic\"", ranking)
    names = [o.column for o in objectives]
    pareto = data.get("pareto", names[:3])
    if (not isinstance(pareto, list) or not 2 <= len(pareto) <= 3 or len(set(pareto)) != len(pareto)
            or not all(c in names for c in pareto)):
        if len(objectives) < 2 and "pareto" not in data:
            pareto = []
        else:
            raise _err(file, "pareto", "a list of two or three different objective columns (" + ", ".join(names) + ")", pareto)
    return ranking, tuple(pareto)


def _limit_value(v: Any, col: str, file: str, where: str) -> float:
    """A limit in the column's SI unit; quantities go through :func:`fields.input.units.parse`."""
    unit = RESULT_COLUMNS[col][0]
    if unit is None:
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise _err(file, where, f"a plain number ({col} has no unit)", v)
        return float(v)
    rule = f"a quantity with a unit convertible to {unit}, e.g. \"1 {unit}\""
    if not isinstance(v, str):
        raise _err(file, where, rule, v)
    try:
        if unit in _UNIT_KIND:
            return parse(v, _UNIT_KIND[unit])
        if unit == "K":  # a temperature difference: the affine parse of two temperatures
            m = NUMBER_THEN_UNIT.match(v)
            return parse(v, "temperature") - parse(f"0 {m.group(2)}", "temperature")
        return _composite(v, unit)
    except (UnitParseError, AttributeError):
        raise _err(file, where, rule, v) from None


def _composite(text: str, unit: str) -> float:
    """A quantity of a unit that has no kind in :data:`fields.input.units.KINDS` (N/m, N/A, N*m,
    N*m/rad), converted with the shared unit registry."""
    from fields.input.units import registry

    ureg = registry()
    try:
        q = ureg.Quantity(text.strip().replace("^", "**"))
        return float(q.to(unit).magnitude)
    except Exception:  # pint raises many types for bad or mismatched units
        raise UnitParseError(unit, text) from None


def _constraints(data: dict, file: str) -> tuple[tuple[str, ...], tuple[Limit, ...]]:
    cons = data.get("constraints", {})
    if not isinstance(cons, dict):
        raise _err(file, "constraints", "a table [constraints]", cons, "this section")
    check_keys(cons, ("reject_flags", "limits"), file, "constraints", "the sweep format")
    flags = cons.get("reject_flags", list(FLAGS))
    if not isinstance(flags, list) or not all(isinstance(f_, str) for f_ in flags):
        raise _err(file, "constraints.reject_flags", "a list drawn from " + ", ".join(f'"{f_}"' for f_ in FLAGS), flags)
    for j, f_ in enumerate(flags):
        if f_ not in FLAGS:
            near = difflib.get_close_matches(f_, FLAGS, n=1)
            hint = f" (did you mean \"{near[0]}\"?)" if near else ""
            raise _err(file, f"constraints.reject_flags[{j}]", "one of " + ", ".join(f'"{x}"' for x in FLAGS) + hint, f_)
    limits = []
    for w, lt in _column_tables(cons.get("limits", []), file, "constraints.limits", ("column", "min", "max")):
        col = lt["column"]
        if "min" not in lt and "max" not in lt:
            raise _err(file, w, "given min, max or both", "neither", "a limit")
        lo = _limit_value(lt.get("min"), col, file, f"{w}.min") if "min" in lt else None
        hi = _limit_value(lt.get("max"), col, file, f"{w}.max") if "max" in lt else None
        limits.append(Limit(col, lo, hi, ", ".join(f"{k_} {lt[k_]}" for k_ in ("min", "max") if k_ in lt)))
    return tuple(flags), tuple(limits)


def _sweep_id(base_text: str, data: dict) -> str:
    h = hashlib.sha256()
    for part in (__version__, base_text, json.dumps(data, sort_keys=True, default=str)):
        h.update(part.encode("utf-8"))
        h.update(b"\0")
    return h.hexdigest()


# ============================================================================== the loader


def load_sweep(path: str | Path, base_path: str | Path | None = None) -> SweepSpec:
    """Read and validate a sweep file against its base geometry file.

    Parameters
    ----------
    path : str or Path
        The sweep file (TOML).
    base_path : str or Path, optional
        The base geometry file; default the sweep file's ``base`` (relative to the sweep file).

    Returns
    -------
    SweepSpec

    Raises
    ------
    GeometryError
        One line naming the file, the key path, the value and the rule. The base file itself is
        validated by the normal loader.

    Examples
    --------
    >>> from pathlib import Path
    >>> root = Path(__file__).parents[2] / "geometries"
    >>> spec = load_sweep(root / "sweeps" / "suspension_magnet.toml", root / "suspension.toml")
    >>> spec.mode, spec.n_designs, [p.column for p in spec.parameters]
    ('grid', 64, ['floater.magnets[0].diameter_m', 'floater.magnets[0].height_m'])
    """
    from fields.input import geometry

    file = str(path)
    _, data = read_toml(path, "the sweep file")
    check_keys(data, SWEEP_KEYS, file, "", "the sweep format")
    if base_path is None:
        if not isinstance(data.get("base"), str):
            raise _err(file, "base", "the base geometry file (or pass it explicitly)", data.get("base"), "this key")
        base_path = Path(path).parent / data["base"]
    bp = Path(base_path)
    base_design = geometry.load(bp)  # the base itself must be a valid design
    base_text, base = read_toml(bp, "the geometry file")
    mode = data.get("mode", "grid")
    if mode not in ("grid", "sample"):
        raise _err(file, "mode", "\"grid\" (every combination) or \"sample\" (a space-filling sample)", mode)
    params = read_parameters(data, base, bp.name, file, mode)
    n_sample, method, seed = _sample(data, file, mode)
    objectives = _objectives(data, file)
    ranking, pareto = _ranking_and_pareto(data, objectives, file)
    flags, limits = _constraints(data, file)
    for k_ in ("name", "description"):
        if k_ in data and not isinstance(data[k_], str):
            raise _err(file, k_, "a string in quotes", data[k_])
    invented = data.get("invented", False)
    if not isinstance(invented, bool):
        raise _err(file, "invented", "true or false", invented)
    spec = SweepSpec(file=file, base_path=str(bp), base_text=base_text, name=data.get("name", Path(path).stem),
                     parameters=params, mode=mode, sample_count=n_sample, sample_method=method, seed=seed,
                     objectives=objectives, ranking=ranking, pareto=pareto, reject_flags=flags, limits=limits,
                     sweep_id=_sweep_id(base_text, data), invented=invented or base_design.invented)
    if spec.n_designs > MAX_DESIGNS:
        raise _err(file, "parameters", f"at most {MAX_DESIGNS} designs in all", spec.n_designs, "the grid")
    return spec
