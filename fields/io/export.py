"""Writing results: atomic files, CSV that spreadsheet-style readers take as it is, JSON (through
:mod:`fields.io.serialize`).

Every writer goes through :func:`write_atomic`: the content lands in a temporary file in the
same folder and is renamed into place, so an interrupted run leaves either the old file or the
complete new one, never half a file. Nothing here ever writes to an input file.

CSV files follow RFC 4180 (Shafranovich, *Common Format and MIME Type for CSV Files*, 2005): the
header is the first line, one record per line, names without spaces (units in the names,
``gap_m``, ``Fz_N``), numbers at full binary64 precision (``repr``: the shortest text that reads
back to the same double). What a file holds (tool, design, content) goes into a sidecar
``<stem>.meta.json`` next to it; ``#`` comment lines above the header are written only when asked
for (``comment_lines=True`` or inside :func:`csv_comment_lines`).
"""

from __future__ import annotations

import contextlib
import contextvars
import csv
import io
import math
import os
import re
import tempfile
from pathlib import Path
from typing import Any, Iterable, Iterator, Sequence

import numpy as np

from fields import __version__
from fields.errors import InputError
from fields.io.serialize import to_json

#: unit of a column from the end of its name (longest first), for the sidecar's column list
_UNIT_SUFFIXES: tuple[tuple[str, str], ...] = (
    ("_Nm_per_rad", "N*m/rad"), ("_N_per_A_m", "N/(A*m)"), ("_m_per_s2", "m/s^2"), ("_N_per_A", "N/A"),
    ("_N_per_m", "N/m"), ("_m_per_s", "m/s"), ("_Nm_per_A", "N*m/A"), ("_1_per_s", "1/s"),
    ("_rad_per_s", "rad/s"), ("_per_A", "1/A"), ("_T_per_m", "T/m"), ("_ohm", "ohm"), ("_degC", "degC"),
    ("_kg", "kg"), ("_Hz", "Hz"), ("_Nm", "N*m"), ("_rad", "rad"), ("_m", "m"), ("_N", "N"), ("_A", "A"),
    ("_T", "T"), ("_W", "W"), ("_V", "V"), ("_H", "H"), ("_C", "degC"), ("_K", "K"), ("_s", "s"),
)

_COMMENT_LINES: contextvars.ContextVar[bool] = contextvars.ContextVar("hoverfield_csv_comment_lines", default=False)


def write_atomic(path: str | Path, data: bytes | str) -> Path:
    """Write ``data`` to ``path`` atomically (temporary file + rename); returns the path."""
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    if isinstance(data, str):
        data = data.encode("utf-8")
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part", dir=p.parent)
    umask = os.umask(0)
    os.umask(umask)
    try:
        os.chmod(tmp, 0o666 & ~umask)  # ordinary file permissions, not mkstemp's private 0600
        with os.fdopen(fd, "wb") as f:
            f.write(data)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, p)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return p


def header_lines(design_name: str, what: str) -> list[str]:
    """What a CSV holds, as lines: tool version, design, content (they go to the sidecar
    ``<stem>.meta.json``, or above the header with comment lines on)."""
    return [f"# hoverfield {__version__}", f"# design: {design_name}", f"# {what}"]


@contextlib.contextmanager
def csv_comment_lines(on: bool = True) -> Iterator[None]:
    """Within this block, :func:`write_csv` also writes the notes as ``#`` lines above the header
    (for readers that skip comments); the sidecar JSON is written either way."""
    token = _COMMENT_LINES.set(bool(on))
    try:
        yield
    finally:
        _COMMENT_LINES.reset(token)


def column_name(name: str) -> str:
    """A CSV column name without spaces: runs of white space become ``_``.

    >>> column_name("lift coil_power_W")
    'lift_coil_power_W'
    """
    return re.sub(r"\s+", "_", str(name).strip())


def column_unit(name: str) -> str | None:
    """The unit a column name ends in (``"gap_m"`` -> ``"m"``), None when it names none.

    >>> column_unit("kz_N_per_m"), column_unit("captured")
    ('N/m', None)
    """
    for suffix, unit in _UNIT_SUFFIXES:
        if name.endswith(suffix) and len(name) > len(suffix):
            return unit
    return None


def csv_text(columns: Sequence[str], rows: Iterable[Sequence[Any]], comments: Sequence[str] = (),
             comment_lines: bool = False) -> str:
    """CSV text: the header first (names as :func:`column_name`), then the rows.

    Floats are written by ``repr`` (the shortest text that reads back to the same binary64
    value), NaN and None as an empty cell, infinities as ``inf``/``-inf``, flags as
    ``true``/``false``. ``comments`` go above the header as ``#`` lines only with
    ``comment_lines=True``.
    """
    buf = io.StringIO()
    if comment_lines:
        for c in comments:
            buf.write(c if c.startswith("#") else "# " + c)
            buf.write("\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([column_name(c) for c in columns])
    for r in rows:
        w.writerow([_fmt(v) for v in r])
    return buf.getvalue()


def _fmt(v: Any) -> Any:
    if v is None:
        return ""
    if isinstance(v, (bool, np.bool_)):
        return "true" if v else "false"
    if isinstance(v, (float, np.floating)):
        x = float(v)
        if not math.isfinite(x):
            return "" if math.isnan(x) else ("inf" if x > 0 else "-inf")
        return repr(x)
    if isinstance(v, np.integer):
        return int(v)
    return v


def meta_path(path: str | Path) -> Path:
    """The sidecar of a CSV file: ``table_Fz.csv`` -> ``table_Fz.meta.json``."""
    p = Path(path)
    return p.with_name(p.stem + ".meta.json")


def csv_meta(columns: Sequence[str], comments: Sequence[str] = (), extra: dict | None = None) -> dict:
    """The sidecar content: generator, the notes (comment text without ``#``), every column with
    the unit its name ends in, and ``extra`` entries."""
    notes = [c[1:].strip() if c.startswith("#") else c for c in comments]
    meta: dict[str, Any] = {"generator": f"hoverfield {__version__}", "format": "RFC 4180 CSV, header on the first line",
                            "notes": notes,
                            "columns": [{"name": column_name(c), "unit": column_unit(column_name(c))} for c in columns]}
    for n in notes:
        if n.startswith("design: "):
            meta["design"] = n[len("design: "):]
    meta.update(extra or {})
    return meta


def write_csv(path: str | Path, columns: Sequence[str], rows: Iterable[Sequence[Any]], comments: Sequence[str] = (),
              meta: dict | None = None, comment_lines: bool | None = None) -> Path:
    """Write a CSV (:func:`csv_text`) and its sidecar ``<stem>.meta.json`` (:func:`csv_meta`),
    both atomically; returns the CSV's path.

    ``comment_lines`` None follows :func:`csv_comment_lines` (off by default).
    """
    on = _COMMENT_LINES.get() if comment_lines is None else bool(comment_lines)
    write_json(meta_path(path), csv_meta(columns, comments, meta))
    return write_atomic(path, csv_text(columns, rows, comments, comment_lines=on))


def write_long_csv(path: str | Path, axes: dict[str, Sequence[float]], values: dict[str, np.ndarray],
                   comments: Sequence[str] = (), meta: dict | None = None) -> Path:
    """A table on a grid in long format: one row per grid point, the axis values in columns.

    ``axes`` maps axis column names to their values (the first axis varies slowest), ``values``
    maps value column names to arrays of shape ``(len(ax0), len(ax1), ...)``. For a force table
    ``axes={"gap_m": g, "current_A": I}``, ``values={"Fz_N": F}`` gives the columns
    ``gap_m, current_A, Fz_N`` (the "tidy" layout of Wickham, *Tidy Data*, J. Stat. Softw. 59(10),
    2014).
    """
    names = list(axes)
    grids = [np.asarray(axes[n], float) for n in names]
    shape = tuple(len(g) for g in grids)
    cols = []
    for n, a in values.items():
        a = np.asarray(a, float)
        if a.shape != shape:
            raise InputError(f"write_long_csv: values[{n!r}] must have the axes' shape {shape}; got {a.shape}.")
        cols.append(a.reshape(-1))
    mesh = [m.reshape(-1) for m in np.meshgrid(*grids, indexing="ij")]
    rows = zip(*mesh, *cols)
    return write_csv(path, names + list(values), rows, comments, meta)


def write_json(path: str | Path, obj: Any) -> Path:
    """Write ``obj`` (dataclasses, arrays, dicts, ...) as strict JSON through :func:`fields.io.serialize.to_json`."""
    return write_atomic(path, to_json(obj))


def write_png(path: str | Path, fig) -> Path:
    """Render a matplotlib figure to PNG bytes and write them atomically."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=130, bbox_inches="tight")
    return write_atomic(path, buf.getvalue())
