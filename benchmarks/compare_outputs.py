"""Compare two hoverfield output folders: every JSON number and every CSV cell.

Walks both folders, pairs files by relative path, and lists:

- files present in only one folder;
- JSON values that differ: numbers beyond the relative tolerance, and strings, booleans, nulls
  or list lengths that are not equal (file paths inside the JSON are compared by file name, as
  the folders differ);
- CSV cells that differ the same way (comment lines starting with ``#`` are skipped).

Usage: ``python benchmarks/compare_outputs.py BEFORE AFTER [--rtol 1e-9] [--atol 1e-12]``.
Exit status 0 when nothing differs, 1 otherwise.
"""

from __future__ import annotations

import argparse
import csv
import json
import math
import sys
from pathlib import Path


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def _close(a: float, b: float, rtol: float, atol: float) -> bool:
    if math.isnan(a) and math.isnan(b):
        return True
    if math.isinf(a) or math.isinf(b):
        return a == b
    return abs(a - b) <= atol + rtol * max(abs(a), abs(b))


def _path_like(s: str) -> bool:
    return "/" in s and Path(s).suffix != ""


def compare_json(a, b, where: str, rtol: float, atol: float, out: list[str]) -> None:
    """Append one line per difference between two parsed JSON values."""
    if isinstance(a, dict) and isinstance(b, dict):
        for k in sorted(set(a) | set(b)):
            if k not in a or k not in b:
                out.append(f"{where}.{k}: only in {'after' if k not in a else 'before'}")
            else:
                compare_json(a[k], b[k], f"{where}.{k}", rtol, atol, out)
    elif isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            out.append(f"{where}: length {len(a)} -> {len(b)}")
        for i, (x, y) in enumerate(zip(a, b)):
            compare_json(x, y, f"{where}[{i}]", rtol, atol, out)
    elif _is_number(a) and _is_number(b):
        if not _close(float(a), float(b), rtol, atol):
            out.append(f"{where}: {a!r} -> {b!r}")
    elif isinstance(a, str) and isinstance(b, str) and _path_like(a) and _path_like(b):
        if Path(a).name != Path(b).name:
            out.append(f"{where}: {a!r} -> {b!r}")
    elif a != b or type(a) is not type(b):
        out.append(f"{where}: {a!r} -> {b!r}")


def _cell(c: str):
    try:
        return float(c)
    except ValueError:
        return c


def compare_csv(pa: Path, pb: Path, rtol: float, atol: float, out: list[str], name: str) -> None:
    """Append one line per differing cell of two CSV files (comment lines skipped)."""
    def rows(p):
        return list(csv.reader(ln for ln in p.read_text(encoding="utf-8").splitlines() if ln and not ln.startswith("#")))

    ra, rb = rows(pa), rows(pb)
    if len(ra) != len(rb):
        out.append(f"{name}: {len(ra)} rows -> {len(rb)} rows")
    head = ra[0] if ra else []
    for i, (x, y) in enumerate(zip(ra, rb)):
        if len(x) != len(y):
            out.append(f"{name} row {i}: {len(x)} cells -> {len(y)} cells")
        for j, (u, v) in enumerate(zip(x, y)):
            fu, fv = _cell(u), _cell(v)
            col = head[j] if j < len(head) else j
            if isinstance(fu, float) and isinstance(fv, float):
                if not _close(fu, fv, rtol, atol):
                    out.append(f"{name} row {i} {col}: {u} -> {v}")
            elif u != v:
                out.append(f"{name} row {i} {col}: {u!r} -> {v!r}")


def compare_folders(before: Path, after: Path, rtol: float = 1e-9, atol: float = 1e-12) -> list[str]:
    """Every difference between the JSON and CSV files of two output folders, one line each."""
    out: list[str] = []
    fa = {p.relative_to(before).as_posix() for p in before.rglob("*") if p.is_file()}
    fb = {p.relative_to(after).as_posix() for p in after.rglob("*") if p.is_file()}
    for name in sorted(fa ^ fb):
        out.append(f"{name}: only in {'before' if name in fa else 'after'}")
    for name in sorted(fa & fb):
        pa, pb = before / name, after / name
        if name.endswith(".json"):
            compare_json(json.loads(pa.read_text(encoding="utf-8")), json.loads(pb.read_text(encoding="utf-8")),
                         name, rtol, atol, out)
        elif name.endswith(".csv"):
            compare_csv(pa, pb, rtol, atol, out, name)
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("before", type=Path)
    ap.add_argument("after", type=Path)
    ap.add_argument("--rtol", type=float, default=1e-9, help="relative tolerance for numbers (default 1e-9)")
    ap.add_argument("--atol", type=float, default=1e-12, help="absolute tolerance for numbers near zero (default 1e-12)")
    args = ap.parse_args(argv)
    diffs = compare_folders(args.before, args.after, args.rtol, args.atol)
    for d in diffs:
        print(d)
    print(f"{len(diffs)} differences")
    return 1 if diffs else 0


if __name__ == "__main__":
    sys.exit(main())
