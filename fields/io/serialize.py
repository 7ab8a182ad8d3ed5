"""One serialiser for result dataclasses: JSON-ready data, JSON text and flat CSV rows.

Any frozen dataclass (nested dataclasses, numpy arrays and scalars, enums, tuples, lists and
dicts inside) turns into plain JSON types with :func:`to_data`; non-finite floats become
``None`` (JSON ``null``). Three field options (:mod:`fields.studies.result_fields`), set with
:func:`internal`, :func:`optional` and :func:`flattened`, say how a field is written:

- ``internal``: kept on the object for the caller (solver objects, arrays the CLI prints), never
  written;
- ``optional``: left out when ``None`` (a section that does not apply to the design);
- ``flattened``: the nested dataclass's fields are written into the parent's level.

Examples
--------
>>> from dataclasses import dataclass
>>> import numpy as np
>>> @dataclass(frozen=True)
... class Point:
...     gap_m: float
...     forces_N: np.ndarray
...     note: str | None = optional()
...     cache: object = internal()
>>> to_data(Point(0.01, np.array([1.0, np.nan])))
{'gap_m': 0.01, 'forces_N': [1.0, None]}
>>> flat_row(Point(0.01, np.array([1.0, 2.0])))
{'gap_m': 0.01, 'forces_N[0]': 1.0, 'forces_N[1]': 2.0}
"""

from __future__ import annotations

import dataclasses
import enum
import json
import math
from typing import Any

import numpy as np

from fields.studies.result_fields import OPTION_KEY, flattened, internal, optional

#: the field options, defined beside the result dataclasses that use them
__all__ = ["csv_table", "flat_row", "flattened", "internal", "optional", "to_data", "to_json"]


def _fields(obj) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for f in dataclasses.fields(obj):
        how = f.metadata.get(OPTION_KEY)
        value = getattr(obj, f.name)
        if how == "internal" or (how == "optional" and value is None):
            continue
        if how == "flatten":
            out.update(value if isinstance(value, dict) else _fields(value))
        else:
            out[f.name] = value
    return out


def to_data(obj: Any) -> Any:
    """Plain JSON types (dict, list, str, float, int, bool, None) for ``obj``.

    Dataclasses become dicts of their written fields (see the module notes), numpy arrays and
    tuples lists, enums their value, numpy scalars Python scalars, non-finite floats ``None``.
    Dict keys become strings.
    """
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {k: to_data(v) for k, v in _fields(obj).items()}
    if isinstance(obj, dict):
        return {str(k): to_data(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_data(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_data(obj.tolist())
    if isinstance(obj, enum.Enum):
        return to_data(obj.value)
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        f = float(obj)
        return f if math.isfinite(f) else None
    if isinstance(obj, complex):
        return [to_data(obj.real), to_data(obj.imag)]
    return obj


def to_json(obj: Any, indent: int | None = 2) -> str:
    """JSON text of :func:`to_data` (strict JSON: no NaN or Infinity), ending in a newline."""
    return json.dumps(to_data(obj), indent=indent, allow_nan=False) + "\n"


def flat_row(obj: Any, prefix: str = "") -> dict[str, Any]:
    """One flat CSV row: nested keys joined by ``.``, list entries as ``name[i]``.

    Values are scalars (float, int, bool, str, or ``None`` for non-finite numbers and missing
    values), ready for :func:`fields.io.export.csv_text`.
    """
    data = to_data(obj)
    out: dict[str, Any] = {}

    def walk(node: Any, key: str) -> None:
        if isinstance(node, dict):
            for k, v in node.items():
                walk(v, f"{key}.{k}" if key else k)
        elif isinstance(node, list):
            for i, v in enumerate(node):
                walk(v, f"{key}[{i}]")
        else:
            out[key] = node

    walk(data, prefix)
    return out


def csv_table(objs) -> tuple[list[str], list[list[Any]]]:
    """(columns, rows) of :func:`flat_row` over several objects; columns in first-seen order,
    cells an object lacks left empty (``None``)."""
    rows = [flat_row(o) for o in objs]
    cols: dict[str, None] = {}
    for r in rows:
        cols.update(dict.fromkeys(r))
    names = list(cols)
    return names, [[r.get(c) for c in names] for r in rows]
