"""Writing results: atomic files, CSV with units in column names, JSON.

Every writer goes through :func:`write_atomic`: the content lands in a temporary file in the
same folder and is renamed into place, so an interrupted run leaves either the old file or the
complete new one, never half a file. Nothing here ever writes to an input file.
"""

from __future__ import annotations

import csv
import io
import json
import math
import os
import tempfile
from pathlib import Path
from typing import Any, Iterable, Sequence

import numpy as np

from fields import __version__


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
    """Comment lines that open every CSV: design, content, tool version."""
    return [f"# hoverfield {__version__}", f"# design: {design_name}", f"# {what}"]


def csv_text(columns: Sequence[str], rows: Iterable[Sequence[Any]], comments: Sequence[str] = ()) -> str:
    """CSV text with ``#`` comment lines first; floats written with 10 significant digits."""
    buf = io.StringIO()
    for c in comments:
        buf.write(c if c.startswith("#") else "# " + c)
        buf.write("\n")
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(columns)
    for r in rows:
        w.writerow([_fmt(v) for v in r])
    return buf.getvalue()


def _fmt(v: Any) -> Any:
    if isinstance(v, (float, np.floating)):
        if not math.isfinite(v):
            return "" if math.isnan(v) else ("inf" if v > 0 else "-inf")
        return f"{float(v):.10g}"
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (bool, np.bool_)):
        return "true" if v else "false"
    return v


def write_csv(path: str | Path, columns: Sequence[str], rows: Iterable[Sequence[Any]], comments: Sequence[str] = ()) -> Path:
    return write_atomic(path, csv_text(columns, rows, comments))


def read_csv(path: str | Path) -> tuple[list[str], np.ndarray]:
    """Read a CSV written by :func:`write_csv` (numeric columns) back: (columns, array (rows, cols))."""
    lines = [ln for ln in Path(path).read_text(encoding="utf-8").splitlines() if ln and not ln.startswith("#")]
    cols = next(csv.reader([lines[0]]))
    rows = []
    for r in csv.reader(lines[1:]):
        rows.append([_parse_cell(c) for c in r])
    return cols, np.array(rows, dtype=float) if rows else np.zeros((0, len(cols)))


def _parse_cell(c: str) -> float:
    if c == "":
        return math.nan
    if c in ("true", "false"):
        return 1.0 if c == "true" else 0.0
    return float(c)


def to_jsonable(obj: Any) -> Any:
    """Convert numpy arrays/scalars, tuples and dataclass dicts to plain JSON types (NaN -> null)."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        f = float(obj)
        return f if math.isfinite(f) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    return obj


def write_json(path: str | Path, obj: Any) -> Path:
    return write_atomic(path, json.dumps(to_jsonable(obj), indent=2, allow_nan=False) + "\n")


def write_png(path: str | Path, fig) -> Path:
    """Render a matplotlib figure to PNG bytes and write them atomically."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=130, bbox_inches="tight")
    return write_atomic(path, buf.getvalue())
