"""Writing results: atomic files, CSV with units in column names, JSON (through :mod:`fields.io.serialize`).

Every writer goes through :func:`write_atomic`: the content lands in a temporary file in the
same folder and is renamed into place, so an interrupted run leaves either the old file or the
complete new one, never half a file. Nothing here ever writes to an input file.
"""

from __future__ import annotations

import csv
import io
import math
import os
import tempfile
from pathlib import Path
from typing import Any, Iterable, Sequence

import numpy as np

from fields import __version__
from fields.io.serialize import to_json


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


def write_json(path: str | Path, obj: Any) -> Path:
    """Write ``obj`` (dataclasses, arrays, dicts, ...) as strict JSON through :func:`fields.io.serialize.to_json`."""
    return write_atomic(path, to_json(obj))


def write_png(path: str | Path, fig) -> Path:
    """Render a matplotlib figure to PNG bytes and write them atomically."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=130, bbox_inches="tight")
    return write_atomic(path, buf.getvalue())
