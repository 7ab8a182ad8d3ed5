"""Shared readers for the project's input files: TOML tables that know their key path, and CSV.

:class:`TomlTable` wraps one TOML table with its file and key path; every accessor parses units
through :func:`fields.input.units.parse` and raises :class:`fields.errors.GeometryError` naming
file, key path, value and rule. The geometry loader and the sweep-file loader both read through
it. :func:`read_csv_table` is the one CSV reader (a header row, text cells; optional ``#`` lines
above the header) and :func:`read_csv_meta` reads a CSV's sidecar JSON;
:func:`read_csv` reads a numeric CSV written by :func:`fields.io.export.write_csv` back into an
array.
"""

from __future__ import annotations

import csv
import difflib
import io
import json
import math
import tomllib
from pathlib import Path
from typing import Any

import numpy as np

from fields.errors import GeometryError
from fields.input.units import UnitParseError, parse


class TomlTable:
    """A TOML table with its key path; every accessor raises GeometryError with file and path."""

    def __init__(self, data: Any, path: str, file: str) -> None:
        self.file = file
        self.path = path
        if not isinstance(data, dict):
            raise GeometryError(self._where(), "this entry", "a table (key = value lines)", show_value(data))
        self.data = data
        self.used: set[str] = set()

    def _where(self, key: str | None = None) -> str:
        p = self.path if key is None else (f"{self.path}.{key}" if self.path else key)
        return f"{self.file}: {p}" if p else self.file

    def has(self, key: str) -> bool:
        return key in self.data

    def raw(self, key: str, default: Any = ..., ) -> Any:
        self.used.add(key)
        if key not in self.data:
            if default is ...:
                raise GeometryError(self._where(key), "this key", "present", "nothing")
            return default
        return self.data[key]

    def fail(self, key: str, rule: str, got: Any) -> GeometryError:
        return GeometryError(self._where(key), "the value", rule, show_value(got))

    def quantity(self, key: str, kind: str, default: Any = ..., *, positive: bool = False,
                 nonnegative: bool = False) -> float:
        v = self.raw(key, default)
        if v is default and default is not ...:
            return v
        try:
            x = parse(v, kind)
        except UnitParseError as e:
            raise GeometryError(self._where(key), "the value", e.rule, show_value(v)) from None
        if positive and not x > 0:
            raise GeometryError(self._where(key), "the value", "positive", show_value(v))
        if nonnegative and x < 0:
            raise GeometryError(self._where(key), "the value", "zero or positive", show_value(v))
        return x

    def number(self, key: str, default: Any = ..., *, positive: bool = False, minimum: float | None = None,
               maximum: float | None = None, integer: bool = False) -> float:
        v = self.raw(key, default)
        if v is default and default is not ...:
            return v
        if isinstance(v, bool) or not isinstance(v, (int, float)) or (integer and not isinstance(v, int)):
            kind = "a whole number" if integer else "a plain number (no unit)"
            raise GeometryError(self._where(key), "the value", kind, show_value(v))
        if not math.isfinite(v):
            raise GeometryError(self._where(key), "the value", "a finite number", show_value(v))
        if positive and not v > 0:
            raise GeometryError(self._where(key), "the value", "positive", show_value(v))
        if minimum is not None and v < minimum:
            raise GeometryError(self._where(key), "the value", f"at least {minimum:g}", show_value(v))
        if maximum is not None and v > maximum:
            raise GeometryError(self._where(key), "the value", f"at most {maximum:g}", show_value(v))
        return v

    def string(self, key: str, default: Any = ..., choices: tuple[str, ...] | None = None) -> str:
        v = self.raw(key, default)
        if v is default and default is not ...:
            return v
        if not isinstance(v, str):
            raise GeometryError(self._where(key), "the value", "a string in quotes", show_value(v))
        if choices is not None and v not in choices:
            near = difflib.get_close_matches(v, choices, n=1)
            hint = f" (did you mean \"{near[0]}\"?)" if near else ""
            raise GeometryError(self._where(key), "the value", "one of " + ", ".join(f'"{c}"' for c in choices) + hint, show_value(v))
        return v

    def boolean(self, key: str, default: Any = ...) -> bool:
        v = self.raw(key, default)
        if not isinstance(v, bool):
            raise GeometryError(self._where(key), "the value", "true or false", show_value(v))
        return v

    def vector(self, key: str, kind: str, default: Any = ...) -> tuple[float, float, float]:
        v = self.raw(key, default)
        if v is default and default is not ...:
            return v
        if not isinstance(v, list) or len(v) != 3:
            raise GeometryError(self._where(key), "the value", f"a list of three quantities, e.g. [\"0 mm\", \"0 mm\", \"{'5 mm' if kind == 'length' else '1 deg'}\"]", show_value(v))
        out = []
        for i, item in enumerate(v):
            try:
                out.append(parse(item, kind))
            except UnitParseError as e:
                raise GeometryError(self._where(f"{key}[{i}]"), "the value", e.rule, show_value(item)) from None
        return tuple(out)

    def direction(self, key: str, default: Any = ...) -> tuple[float, float, float]:
        v = self.raw(key, default)
        if v is default and default is not ...:
            return v
        if (not isinstance(v, list) or len(v) != 3
                or not all(isinstance(c, (int, float)) and not isinstance(c, bool) and math.isfinite(c) for c in v)):
            raise GeometryError(self._where(key), "the value", "a direction of three plain numbers, e.g. [0, 0, 1]", show_value(v))
        a = np.asarray(v, dtype=float)
        n = float(np.linalg.norm(a))
        if n == 0.0:
            raise GeometryError(self._where(key), "the value", "a non-zero direction", show_value(v))
        return tuple(float(c) for c in a / n)

    def sub(self, key: str) -> TomlTable:
        self.used.add(key)
        return TomlTable(self.data[key], f"{self.path}.{key}" if self.path else key, self.file)

    def array(self, key: str, required: bool = False) -> list[TomlTable]:
        self.used.add(key)
        if key not in self.data:
            if required:
                raise GeometryError(self._where(key), "this section", "present", "nothing")
            return []
        v = self.data[key]
        if not isinstance(v, list):
            raise GeometryError(self._where(key), "this section", f"a list of tables, written [[{key}]]", show_value(v))
        base = f"{self.path}.{key}" if self.path else key
        return [TomlTable(item, f"{base}[{i}]", self.file) for i, item in enumerate(v)]

    def done(self, allowed: tuple[str, ...] | None = None) -> None:
        """Raise on keys nobody read (unknown keys), suggesting the nearest valid key."""
        valid = tuple(allowed) if allowed is not None else tuple(self.used)
        for key in self.data:
            if key not in self.used and key not in valid:
                near = difflib.get_close_matches(key, sorted(set(valid) | self.used), n=1, cutoff=0.5)
                hint = f"; did you mean \"{near[0]}\"" if near else ""
                raise GeometryError(self._where(key), "this key", "one the format knows" + hint, "an unknown key")


def show_value(v: Any) -> str:
    """A value as error messages show it: strings in quotes, tables as "a table", long reprs cut."""
    if isinstance(v, str):
        return f'"{v}"'
    if isinstance(v, dict):
        return "a table"
    s = repr(v)
    return s if len(s) < 60 else s[:57] + "..."


def file_error(file: str, path: str, rule: str, got: Any, what: str = "the value") -> GeometryError:
    """GeometryError "<file>: <path>: <what> must be <rule>; got <got>" (``got`` shown by :func:`show_value`)."""
    return GeometryError(f"{file}: {path}", what, rule, show_value(got))


def check_keys(data: dict, allowed: tuple[str, ...], file: str, path: str, known_by: str = "the format") -> None:
    """Raise on a key of ``data`` not in ``allowed``, suggesting the nearest valid one.

    The message reads "<file>: <path.key>: this key must be one <known_by> knows; did you mean
    ...; got an unknown key."
    """
    for key in data:
        if key not in allowed:
            near = difflib.get_close_matches(key, allowed, n=1, cutoff=0.5)
            hint = f"; did you mean \"{near[0]}\"" if near else ""
            where = f"{path}.{key}" if path else key
            raise GeometryError(f"{file}: {where}", "this key", f"one {known_by} knows" + hint, "an unknown key")


def read_toml(path: str | Path, what: str) -> tuple[str, dict]:
    """(text, parsed dict) of a TOML input file; GeometryError naming ``what`` when it is missing,
    unreadable or not valid TOML."""
    p = Path(path)
    file = str(path)
    if not p.is_file():
        raise GeometryError(file, what, "an existing file", "no such file")
    try:
        text = p.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as e:
        raise GeometryError(file, what, "readable UTF-8 text", type(e).__name__) from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise GeometryError(file, "the file", "valid TOML", str(e)) from None
    return text, data


def read_csv_table(path: str | Path) -> tuple[list[str], list[list[str]], list[str]]:
    """(header, rows of text cells, comment lines) of a CSV file.

    The header is the first line that does not start with ``#`` (files written with comment
    lines on carry ``#`` lines above it; by default there are none). Cells are read by the
    :mod:`csv` module, so quoted cells may hold commas and line breaks.
    """
    text = Path(path).read_text(encoding="utf-8")
    lines = text.splitlines(keepends=True)
    k = 0
    while k < len(lines) and lines[k].startswith("#"):
        k += 1
    comments = [ln.rstrip("\r\n") for ln in lines[:k]]
    rows = [r for r in csv.reader(io.StringIO("".join(lines[k:]))) if r]
    return (rows[0] if rows else []), rows[1:], comments


def read_csv_meta(path: str | Path) -> dict | None:
    """The sidecar ``<stem>.meta.json`` of a CSV file (what it holds, column units), or None
    when there is none."""
    p = Path(path)
    m = p.with_name(p.stem + ".meta.json")
    if not m.is_file():
        return None
    return json.loads(m.read_text(encoding="utf-8"))


def parse_cell(text: str) -> float:
    """A numeric CSV cell as written by :func:`fields.io.export.csv_text`: empty is NaN,
    ``true``/``false`` are 1/0, ``inf``/``-inf`` infinite, numbers exactly as written (full
    binary64 precision)."""
    if text == "":
        return math.nan
    if text in ("true", "false"):
        return 1.0 if text == "true" else 0.0
    return float(text)


def read_csv(path: str | Path) -> tuple[list[str], np.ndarray]:
    """Read a numeric CSV back: (columns, array of shape (rows, columns))."""
    cols, rows, _ = read_csv_table(path)
    data = [[parse_cell(c) for c in r] for r in rows]
    return cols, np.array(data, dtype=float) if data else np.zeros((0, len(cols)))
