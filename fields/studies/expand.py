"""Sweep expansion: a :class:`fields.input.sweepfile.SweepSpec` -> every design's overrides, and
the geometry-file text of each design.

Every design is made by editing the *parsed* base geometry file (a dict; the file is never
touched) and writing it back to TOML text with :func:`toml_text`, so the normal loader
(:func:`fields.input.geometry.loads`) validates every design exactly like a user's file.
"""

from __future__ import annotations

import copy
import io
import itertools
import json
import math
import re
import tomllib
import warnings
from typing import Any

import numpy as np

from fields.errors import InputError
from fields.input.keypaths import set_path
from fields.input.sweepfile import SweepSpec


def unit_samples(spec: SweepSpec) -> np.ndarray:
    """The seeded sample in the unit cube, shape (sample_count, parameters): scrambled Sobol or
    Latin hypercube of :mod:`scipy.stats.qmc`."""
    from scipy.stats import qmc

    dim = len(spec.parameters)
    if spec.sample_method == "sobol":
        eng = qmc.Sobol(dim, scramble=True, rng=spec.seed)
        with warnings.catch_warnings():
            # balance needs a power of two; any count is still a valid low-discrepancy prefix
            warnings.filterwarnings("ignore", message=".*balance properties.*")
            return eng.random(spec.sample_count)
    return qmc.LatinHypercube(dim, rng=spec.seed).random(spec.sample_count)


def parameter_cell(kind: str, toml_value_: Any, si_value: float) -> float | str:
    """What a parameter's column holds for one design: the SI number, or for text-valued
    parameters (grades, wire gauges, directions) the value as the geometry file writes it
    (strings as they are, lists as TOML text, e.g. ``"[0, 0, -1]"``).

    >>> parameter_cell("text", "N42", float("nan")), parameter_cell("text", [0, 0, 1], float("nan"))
    ('N42', '[0, 0, 1]')
    """
    if kind != "text":
        return si_value
    return toml_value_ if isinstance(toml_value_, str) else toml_value(toml_value_)


def expand_full(spec: SweepSpec) -> list[tuple[int, dict, tuple[float | str, ...]]]:
    """Every design as ``(index, overrides, column values of the parameters)`` (SI numbers; text
    for text-valued parameters, see :func:`parameter_cell`)."""
    if spec.mode == "grid":
        combos = itertools.product(*[q.grid() for q in spec.parameters])
    else:
        combos = ([q.value_at(float(u)) for q, u in zip(spec.parameters, row)] for row in unit_samples(spec))
    out = []
    for i, combo in enumerate(combos):
        over = {q.key: v for q, (v, _) in zip(spec.parameters, combo)}
        out.append((i, over, tuple(parameter_cell(q.kind, v, s) for q, (v, s) in zip(spec.parameters, combo))))
    return out


def expand(spec: SweepSpec) -> list[tuple[int, dict]]:
    """Every design of the sweep as ``(index, overrides)``.

    ``overrides`` maps key paths of the base geometry file to the values written there (e.g.
    ``{"floater.magnets[0].diameter": "10.5 mm"}``). Grid mode: the first parameter varies
    slowest. Sample mode: the seeded Sobol (scrambled) or Latin-hypercube sample of scipy.stats.qmc
    mapped onto the ranges (lists: equal shares of [0, 1); whole numbers rounded).
    """
    return [(i, o) for i, o, _ in expand_full(spec)]


def expand_one(spec: SweepSpec, index: int) -> dict:
    """The overrides of one design (same as ``dict(expand(spec))[index]``)."""
    return expand_full(spec)[index][1]


# ============================================================================== TOML text


_BARE = re.compile(r"^[A-Za-z0-9_-]+$")


def _tkey(k: str) -> str:
    return k if _BARE.match(k) else json.dumps(k, ensure_ascii=False)


def toml_value(v: Any) -> str:
    """One TOML value (string, number, boolean, list or inline table) as text."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_tkey(k)} = {toml_value(x)}" for k, x in v.items()) + "}"
    raise InputError(f"toml_value: a value must be a string, number, boolean, list or table; got {type(v).__name__}.")


def _is_aot(v: Any) -> bool:
    return isinstance(v, list) and bool(v) and all(isinstance(x, dict) for x in v)


def toml_text(data: dict, comments: tuple[str, ...] = ()) -> str:
    """TOML text of a parsed geometry file (tables, arrays of tables, inline values).

    ``tomllib.loads(toml_text(d)) == d`` for every dict of strings, numbers, booleans, lists
    and tables (no dates).

    Examples
    --------
    >>> print(toml_text({"name": "a", "study": {"gap_min": "3 mm"}}), end="")
    name = "a"
    <BLANKLINE>
    [study]
    gap_min = "3 mm"
    """
    buf = io.StringIO()
    for c in comments:
        buf.write(f"# {c}\n")

    def table(d: dict, path: str) -> None:
        for k, v in d.items():
            if not isinstance(v, dict) and not _is_aot(v):
                buf.write(f"{_tkey(k)} = {toml_value(v)}\n")
        for k, v in d.items():
            sub = f"{path}.{_tkey(k)}" if path else _tkey(k)
            if isinstance(v, dict):
                buf.write(f"\n[{sub}]\n")
                table(v, sub)
            elif _is_aot(v):
                for item in v:
                    buf.write(f"\n[[{sub}]]\n")
                    table(item, sub)

    table(data, "")
    return buf.getvalue()


def apply_overrides(data: dict, overrides: dict) -> dict:
    """A deep copy of a parsed geometry dict with ``overrides`` (key path -> value) applied."""
    out = copy.deepcopy(data)
    for key, v in overrides.items():
        set_path(out, key, copy.deepcopy(v))
    return out


def design_text(base_text: str, overrides: dict, comments: tuple[str, ...] = ()) -> str:
    """Geometry-file text of the base with ``overrides`` applied to its parsed dict."""
    return toml_text(apply_overrides(tomllib.loads(base_text), overrides), comments)
