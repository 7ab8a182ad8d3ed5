"""Running sweep designs: chunks of designs on a local process pool or a Dask cluster, each
finished chunk written as a CSV file so an interrupted sweep resumes where it stopped.

Chunk files are named by the sweep id (a hash of the tool version, the base file's content and
the sweep file's content) and the design indices they hold, and written atomically: a finished
sweep recomputes nothing, and a changed base or sweep file never reuses stale rows.
"""

from __future__ import annotations

import math
import os
import sys
import tomllib
from pathlib import Path
from typing import Any

from fields import __version__
from fields.errors import HoverfieldError
from fields.input.csvtable import read_csv_meta, read_csv_table
from fields.input.sweepfile import BOOL_COLUMNS, RESULT_COLUMNS, SweepSpec


def default_chunk(n: int) -> int:
    """Designs per task: up to 32 (amortises task overhead), fewer for small sweeps so both cores work."""
    return max(1, min(32, math.ceil(n / 16)))


def run_chunk(task: tuple) -> list[dict]:
    """Evaluate a chunk ``(base_text, label, base_dir, [(index, overrides), ...])`` of designs
    (runs in a worker process or on a Dask worker). A design that fails keeps its one-line
    reason in ``failure``."""
    from fields.input import geometry
    from fields.studies.evaluate import evaluate_design
    from fields.studies.expand import apply_overrides, toml_text

    base_text, label, base_dir, items = task
    base = tomllib.loads(base_text)
    rows = []
    for index, over in items:
        row: dict[str, Any] = {"index": index}
        try:
            design = geometry.loads(toml_text(apply_overrides(base, over)), file=f"{label} (sweep design {index})",
                                    base_dir=base_dir)
            row.update(evaluate_design(design))
            row["failure"] = ""
        except HoverfieldError as e:
            row.update({c: (False if c in BOOL_COLUMNS else math.nan) for c in RESULT_COLUMNS})
            row["failure"] = str(e).replace("\n", " ")
        except Exception as e:  # noqa: BLE001 - one design's bug must not end a long run: it is recorded
            row.update({c: (False if c in BOOL_COLUMNS else math.nan) for c in RESULT_COLUMNS})
            row["failure"] = f"internal error {type(e).__name__}: {e}".replace("\n", " ")
        rows.append(row)
    return rows


def chunk_name(spec: SweepSpec, first: int, last: int) -> str:
    return f"{spec.sweep_id[:16]}_{first:07d}_{last:07d}.csv"


def write_chunk(path: Path, spec: SweepSpec, rows: list[dict], si: dict[int, tuple]) -> None:
    """One finished chunk as CSV (atomic): index, parameter values, results, failure; the sweep id
    in its sidecar ``<stem>.meta.json`` (written first, so a CSV on disk always has one)."""
    from fields.io.export import write_csv

    body = [[r["index"], *si[r["index"]], *(r[c] for c in RESULT_COLUMNS), r["failure"]] for r in rows]
    write_csv(path, spec.columns, body, [f"hoverfield {__version__} sweep chunk"], meta={"sweep_id": spec.sweep_id})


def done_rows(chunk_dir: Path, spec: SweepSpec) -> dict[int, list[str]]:
    """Rows already computed for this sweep (by design index), from complete chunk files whose
    sidecar names this sweep's id."""
    import csv
    import json

    done: dict[int, list[str]] = {}
    if not chunk_dir.is_dir():
        return done
    cols = spec.columns  # no spaces in these names, so the CSV header is them as they are
    for f in sorted(chunk_dir.glob(f"{spec.sweep_id[:16]}_*.csv")):
        try:
            meta = read_csv_meta(f)
            head, rows, _ = read_csv_table(f)
        except (OSError, UnicodeDecodeError, csv.Error, json.JSONDecodeError):
            continue
        if head != cols or not meta or meta.get("sweep_id") != spec.sweep_id:
            continue
        for r in rows:
            if len(r) == len(cols):
                done[int(r[0])] = r
    return done


def convert_row(spec: SweepSpec, raw: list[str]) -> dict:
    """A chunk file's text row back to numbers, flags and the failure text."""
    kinds = {q.column: q.kind for q in spec.parameters}
    out: dict[str, Any] = {}
    for c, v in zip(spec.columns, raw):
        if c == "index":
            out[c] = int(v)
        elif c == "failure" or kinds.get(c) == "text":
            out[c] = v
        elif c in BOOL_COLUMNS:
            out[c] = v == "true"
        else:
            out[c] = math.nan if v == "" else float(v)
    return out


def open_executor(workers: int | None, scheduler_address: str | None):
    """(executor, closer): a process pool, or a Dask cluster's concurrent.futures executor."""
    if scheduler_address:
        from distributed import Client

        client = Client(scheduler_address, set_as_default=False)
        ex = client.get_executor(pure=False)

        def close():
            ex.shutdown(wait=True)
            client.close()

        return ex, close
    from concurrent.futures import ProcessPoolExecutor

    from fields.physics.parallel import serial_worker

    n = (os.cpu_count() or 1) if workers is None else workers
    ex = ProcessPoolExecutor(max_workers=n, initializer=serial_worker)
    return ex, lambda: ex.shutdown(wait=True, cancel_futures=True)


def run_chunks(spec: SweepSpec, chunks: list[list[tuple[int, dict]]], chunk_dir: Path, si: dict[int, tuple],
               total: int, workers: int | None, scheduler_address: str | None, progress: bool,
               desc: str = "sweep") -> int:
    """Evaluate the chunks (in this process with ``workers == 0``, else on a pool or cluster),
    writing each chunk file as it finishes; returns the number of designs evaluated. ``spec`` is
    a :class:`SweepSpec` or any object with its ``base_path``, ``base_text``, ``columns``,
    ``sweep_id`` and ``parameters`` (the tolerance study passes its own); ``desc`` labels the bar."""
    from tqdm import tqdm

    label = Path(spec.base_path).name
    base_dir = str(Path(spec.base_path).parent)
    todo = sum(len(ch) for ch in chunks)
    evaluated = 0
    bar = tqdm(total=total, initial=total - todo, file=sys.stderr, disable=not progress, unit="design",
               desc=desc, dynamic_ncols=True)

    def finished(ch, rows):
        nonlocal evaluated
        write_chunk(chunk_dir / chunk_name(spec, ch[0][0], ch[-1][0]), spec, rows, si)
        evaluated += len(rows)
        bar.update(len(rows))

    try:
        if workers == 0 and not scheduler_address:
            for ch in chunks:
                finished(ch, run_chunk((spec.base_text, label, base_dir, ch)))
        else:
            from concurrent.futures import as_completed

            ex, close = open_executor(workers, scheduler_address)
            try:
                futs = {ex.submit(run_chunk, (spec.base_text, label, base_dir, ch)): ch for ch in chunks}
                for fut in as_completed(futs):
                    finished(futs[fut], fut.result())
            finally:
                close()
    finally:
        bar.close()
    return evaluated
