"""The ``[[parameters]]`` tables of a sweep file -> validated :class:`Parameter` objects.

Each parameter names a value of the base geometry file by its key path
(:mod:`fields.input.keypaths`) and varies it as a range (``start``, ``stop``, ``count``, linear or
log spacing) or a list of ``values`` of the same type as the base file's value.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from fields.input.csvtable import check_keys, file_error as _err, show_value
from fields.input.keypaths import get_path, leaf_paths, parse_path
from fields.input.units import KINDS, UnitParseError, parse

PARAMETER_KEYS = ("key", "start", "stop", "count", "values", "spacing")
#: the SI suffix a parameter's column gets, by the kind of quantity it holds
_SI_SUFFIX = {"length": "m", "mass": "kg", "current": "A", "flux_density": "T", "angle": "rad", "voltage": "V",
              "acceleration": "m_per_s2", "density": "kg_per_m3", "heat_transfer": "W_per_m2K",
              "temperature": "C", "time": "s", "frequency": "Hz", "power": "W", "force": "N",
              "resistance": "ohm", "inductance": "H"}
#: a number followed by a unit: groups (number, unit text)
NUMBER_THEN_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


@dataclass(frozen=True)
class Parameter:
    """One varied value of the geometry file.

    ``choices`` holds every value it can take as ``(toml_value, si_value)`` pairs: the value as
    written into the geometry dict (e.g. ``"10.5 mm"``, ``"N42"``, ``[0, 0, 1]``) and its SI
    number (NaN for text and directions). Ranges (``is_range``) run from ``start`` to ``stop``
    in the unit the user wrote (``unit_text``), ``count`` values for a grid.
    """

    key: str
    column: str
    kind: str  # "quantity", "integer", "number", "text"
    unit_kind: str | None
    unit_text: str | None
    start: float
    stop: float
    count: int
    spacing: str
    choices: tuple = ()
    is_range: bool = False

    def value_at(self, u: float) -> tuple[Any, float]:
        """The (toml_value, si_value) at a fraction ``u`` in [0, 1] of the range or list."""
        if not self.is_range:
            j = min(int(math.floor(u * len(self.choices))), len(self.choices) - 1)
            return self.choices[j]
        if self.spacing == "log":
            x = math.exp(math.log(self.start) + u * (math.log(self.stop) - math.log(self.start)))
        else:
            x = self.start + u * (self.stop - self.start)
        return self.make(x)

    def make(self, x: float) -> tuple[Any, float]:
        """(toml_value, si_value) of the number ``x`` in the parameter's unit."""
        if self.kind == "integer":
            n = int(round(x))
            return n, float(n)
        if self.kind == "number":
            return float(x), float(x)
        text = f"{x:.12g} {self.unit_text}"
        return text, parse(text, self.unit_kind)

    def grid(self) -> tuple:
        """Every grid value as (toml_value, si_value) pairs."""
        if not self.is_range:
            return self.choices
        if self.count == 1:
            return (self.make(self.start),)
        if self.spacing == "log":
            xs = np.geomspace(self.start, self.stop, self.count)
        else:
            xs = np.linspace(self.start, self.stop, self.count)
        return tuple(self.make(float(x)) for x in xs)


def _quantity_kind(value: str) -> str | None:
    for kind in KINDS:
        try:
            parse(value, kind)
            return kind
        except UnitParseError:
            continue
    return None


def _value_kind(cur: Any) -> tuple[str, str | None]:
    """(kind, unit kind) of the value a key path holds in the base file."""
    if isinstance(cur, bool):
        return "text", None
    if isinstance(cur, int):
        return "integer", None
    if isinstance(cur, float):
        return "number", None
    if isinstance(cur, str):
        unit_kind = _quantity_kind(cur)
        return ("quantity", unit_kind) if unit_kind is not None else ("text", None)
    return "text", None


def _resolve_key(t: dict, where: str, base: dict, base_name: str, file: str) -> tuple[str, Any]:
    key = t.get("key")
    if not isinstance(key, str):
        raise _err(file, f"{where}.key", "a key path of the geometry file in quotes, e.g. \"floater.magnets[0].diameter\"", key)
    tokens = parse_path(key)
    ok, cur = get_path(base, tokens) if tokens is not None else (False, None)
    if not ok or isinstance(cur, dict) or (isinstance(cur, list) and cur and all(isinstance(x, dict) for x in cur)):
        near = difflib.get_close_matches(key, leaf_paths(base), n=1, cutoff=0.0)
        hint = f" (nearest valid: \"{near[0]}\")" if near else ""
        raise _err(file, f"{where}.key", f"a key path that exists in {base_name}{hint}", key, "the key path")
    return key, cur


def _list_choices(vals: Any, where: str, kind: str, unit_kind: str | None, cur: Any, file: str) -> tuple:
    if not isinstance(vals, list) or not vals:
        raise _err(file, f"{where}.values", "a non-empty list", vals)
    choices = []
    for j, v in enumerate(vals):
        w = f"{where}.values[{j}]"
        if kind == "quantity":
            try:
                choices.append((v, parse(v, unit_kind)))
            except UnitParseError as e:
                raise _err(file, w, e.rule + f" like the geometry file's {show_value(cur)}", v) from None
        elif kind == "integer":
            if isinstance(v, bool) or not isinstance(v, int):
                raise _err(file, w, f"a whole number like the geometry file's {cur}", v)
            choices.append((v, float(v)))
        elif kind == "number":
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                raise _err(file, w, f"a plain number like the geometry file's {cur}", v)
            choices.append((float(v), float(v)))
        else:
            if type(v) is not type(cur) or (isinstance(cur, list) and len(v) != len(cur)):
                raise _err(file, w, f"a value of the same type as the geometry file's {show_value(cur)}", v)
            choices.append((v, math.nan))
    return tuple(choices)


def _in_unit(text: str, unit_text: str, unit_kind: str) -> float:
    """The quantity ``text`` as a number of ``unit_text`` (affine, so offset temperature units work)."""
    zero = parse(f"0 {unit_text}", unit_kind)
    one = parse(f"1 {unit_text}", unit_kind)
    return (parse(text, unit_kind) - zero) / (one - zero)


def _range_bounds(t: dict, where: str, kind: str, unit_kind: str | None, cur: Any, file: str):
    """(start, stop, unit text) of a range, in the unit the start is written in."""
    if kind == "quantity":
        for nm in ("start", "stop"):
            try:
                parse(t[nm], unit_kind)
            except UnitParseError as e:
                raise _err(file, f"{where}.{nm}", e.rule + f" like the geometry file's {show_value(cur)}", t[nm]) from None
        m = NUMBER_THEN_UNIT.match(t["start"])
        unit_text = m.group(2) if m and m.group(2) else None
        if unit_text is None:
            raise _err(file, f"{where}.start", "a number followed by a unit", t["start"])
        return float(m.group(1)), _in_unit(t["stop"], unit_text, unit_kind), unit_text
    for nm in ("start", "stop"):
        v = t[nm]
        bad = isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v)
        if bad or (kind == "integer" and not isinstance(v, int)):
            raise _err(file, f"{where}.{nm}", ("a whole number" if kind == "integer" else "a plain number") +
                       f" like the geometry file's {cur}", v)
    return float(t["start"]), float(t["stop"]), None


def _parameter(t: dict, i: int, base: dict, base_name: str, file: str, mode: str) -> Parameter:
    where = f"parameters[{i}]"
    if not isinstance(t, dict):
        raise _err(file, where, "a table written [[parameters]]", t, "this entry")
    check_keys(t, PARAMETER_KEYS, file, where, "the sweep format")
    key, cur = _resolve_key(t, where, base, base_name, file)
    has_range = any(x in t for x in ("start", "stop", "count"))
    if has_range and "values" in t:
        raise _err(file, f"{where}.values", "given alone (a range start/stop/count or a list of values, not both)", t["values"])
    spacing = t.get("spacing", "linear")
    if spacing not in ("linear", "log"):
        raise _err(file, f"{where}.spacing", "\"linear\" or \"log\"", spacing)
    kind, unit_kind = _value_kind(cur)
    common = dict(key=key, column=key + (f"_{_SI_SUFFIX[unit_kind]}" if unit_kind else ""), kind=kind, unit_kind=unit_kind)
    if not has_range:
        if "values" not in t:
            raise _err(file, where, "given a range (start, stop, count) or a list of values", "neither", "a parameter")
        choices = _list_choices(t["values"], where, kind, unit_kind, cur, file)
        return Parameter(**common, unit_text=None, start=math.nan, stop=math.nan, count=len(choices),
                         spacing="linear", choices=choices, is_range=False)
    if kind not in ("quantity", "integer", "number"):
        raise _err(file, f"{where}.start", f"absent: {key} holds {show_value(cur)}, which only a list of values can vary", t.get("start"))
    for req in ("start", "stop") + (("count",) if mode == "grid" else ()):
        if req not in t:
            raise _err(file, f"{where}.{req}", "present (a range needs start, stop" + (" and count)" if mode == "grid" else ")"), "nothing", "this key")
    count = t.get("count", 2)
    if isinstance(count, bool) or not isinstance(count, int) or count < 1:
        raise _err(file, f"{where}.count", "a whole number of at least 1", count)
    x0, x1, unit_text = _range_bounds(t, where, kind, unit_kind, cur, file)
    if spacing == "log" and not (x0 > 0 and x1 > 0):
        raise _err(file, f"{where}.start", "positive (with spacing = \"log\") as is stop", t["start"])
    p = Parameter(**common, unit_text=unit_text, start=x0, stop=x1, count=count, spacing=spacing, is_range=True)
    if kind == "integer" and mode == "grid":
        ints = [v for v, _ in p.grid()]
        if len(set(ints)) != len(ints):
            raise _err(file, f"{where}.count", f"at most {abs(int(x1) - int(x0)) + 1} (whole numbers from {int(x0)} to {int(x1)})", count)
    return p


def read_parameters(data: dict, base: dict, base_name: str, file: str, mode: str) -> tuple[Parameter, ...]:
    raw = data.get("parameters")
    if not isinstance(raw, list) or not raw:
        raise _err(file, "parameters", "at least one [[parameters]] table", raw, "this section")
    params = tuple(_parameter(t, i, base, base_name, file, mode) for i, t in enumerate(raw))
    seen: dict[str, int] = {}
    for i, q in enumerate(params):
        if q.key in seen:
            raise _err(file, f"parameters[{i}].key", f"different from parameters[{seen[q.key]}].key", q.key)
        seen[q.key] = i
    return params
