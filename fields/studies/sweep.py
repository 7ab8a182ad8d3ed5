"""Design sweeps: vary numbers of a geometry file, evaluate every design, rank them.

The pieces, in the order of the data flow:

- :func:`fields.input.sweepfile.load_sweep`: sweep file -> validated :class:`SweepSpec`;
- :mod:`fields.studies.expand`: the designs (overrides of the base file, their TOML text);
- :func:`fields.studies.evaluate.evaluate_design`: one design -> one row of numbers, at the
  operating point of :func:`fields.analysis.operating.operating_point`;
- :mod:`fields.studies.executors`: process pool or Dask cluster, resumable chunk files;
- :mod:`fields.studies.ranking`: feasibility, Pareto front, ranking;
- :func:`run_sweep` (here): the whole run and its output files (tables, plots, the best design
  written back as a geometry file).

A design that fails (any :class:`fields.errors.HoverfieldError`) keeps its one-line reason in
the ``failure`` column; it never stops the sweep.
"""

from __future__ import annotations

import math
import time
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from fields import __version__
from fields.errors import InputError, SolverError
from fields.input.sweepfile import RESULT_COLUMNS, SweepSpec, load_sweep
from fields.studies.evaluate import evaluate_design
from fields.studies.executors import convert_row, default_chunk, done_rows, run_chunks
from fields.studies.expand import (apply_overrides, design_text, expand, expand_full, expand_one, parameter_cell, toml_text,
                                   toml_value)
from fields.studies.ranking import pareto_front, rank, ranking_text, rejection_reasons

__all__ = ["SweepResult", "run_sweep", "load_sweep", "expand", "expand_one", "design_text", "toml_text",
           "evaluate_design", "pareto_front", "rank"]


@dataclass(frozen=True)
class SweepResult:
    """What :func:`run_sweep` produced.

    Attributes
    ----------
    spec : SweepSpec
    columns : list of str
        Columns of ``table`` (units in the names).
    table : list of dict
        Every design's row, by index (floats, bools, the failure text).
    feasible : ndarray of bool, shape (n,)
    order : ndarray of int
        Feasible design indices, best first.
    front : ndarray of int
        Pareto-front design indices (feasible designs only).
    best_index : int or None
        None when no design is feasible.
    evaluated : int
        Designs computed in this call (0 when every chunk already existed).
    reused : int
        Designs read back from existing chunk files.
    files : dict of str to str
    seconds : float
    """

    spec: SweepSpec
    columns: list[str]
    table: list[dict]
    feasible: np.ndarray
    order: np.ndarray
    front: np.ndarray
    best_index: int | None
    evaluated: int
    reused: int
    files: dict = field(default_factory=dict)
    seconds: float = 0.0

    def column(self, name: str) -> np.ndarray:
        """One numeric column over all designs (n,)."""
        return np.array([float(r[name]) for r in self.table])

    @property
    def failed(self) -> int:
        """Designs that could not be evaluated."""
        return sum(1 for r in self.table if r["failure"])

    def best_overrides(self) -> dict | None:
        """The best design's overrides of the base file (None without a feasible design)."""
        return None if self.best_index is None else expand_one(self.spec, self.best_index)


def _check_out_dir(spec: SweepSpec, sweep_path, out: Path) -> None:
    base_abs = Path(spec.base_path).resolve()
    for name in ("best_design.toml", "sweep.csv"):
        if (out / name).resolve() in (base_abs, Path(sweep_path).resolve()):
            raise InputError(f"run_sweep: the output folder must be one that does not hold the input files; got {out}.")


def run_sweep(base_path, sweep_path, out_dir, workers: int | None = None, scheduler_address: str | None = None,
              progress: bool = True, chunk_size: int | None = None) -> SweepResult:
    """Run a sweep: evaluate every design (resumably), rank, write the tables, plots and best design.

    Parameters
    ----------
    base_path : str or Path
        The base geometry file (never written to).
    sweep_path : str or Path
        The sweep file.
    out_dir : str or Path
        Output folder: ``sweep_chunks/`` (one CSV per finished chunk), ``sweep.csv``,
        ``ranked.csv``, ``front.csv``, ``sweep.json``, ``front.png``, ``objectives.png``,
        ``best_design.toml``.
    workers : int, optional
        Local worker processes (default ``os.cpu_count()``); ``0`` evaluates in this process.
    scheduler_address : str, optional
        ``"tcp://host:port"`` of a Dask scheduler: the chunks run on that cluster instead (the
        workers need ``fields`` installed; files are written here, by this process).
    progress : bool
        A tqdm bar on stderr (designs, rate, time left).
    chunk_size : int, optional
        Designs per task (default up to 32, see :func:`fields.studies.executors.default_chunk`).

    Returns
    -------
    SweepResult
    """
    t0 = time.perf_counter()
    spec = load_sweep(sweep_path, base_path)
    from fields.input.geometry import load as load_design
    from fields.studies.evaluate import check_affine_floater

    check_affine_floater(load_design(base_path), "a sweep")
    out = Path(out_dir)
    _check_out_dir(spec, sweep_path, out)
    chunk_dir = out / "sweep_chunks"
    full = expand_full(spec)
    done = done_rows(chunk_dir, spec)
    todo = [(i, o) for i, o, _ in full if i not in done]
    cs = chunk_size or default_chunk(len(full))
    chunks = [todo[a:a + cs] for a in range(0, len(todo), cs)]
    evaluated = 0
    if chunks:
        evaluated = run_chunks(spec, chunks, chunk_dir, {i: s for i, _, s in full}, len(full), workers,
                               scheduler_address, progress)
        done = done_rows(chunk_dir, spec)
    missing = [i for i, _, _ in full if i not in done]
    if missing:
        raise SolverError(f"sweep: designs {missing[:5]} have no result after the run; run it again to resume")
    table = [convert_row(spec, done[i]) for i, _, _ in full]
    return _finish(spec, out, full, table, evaluated, len(full) - evaluated, t0)


# ============================================================================== outputs


@dataclass(frozen=True)
class _Ranked:
    reasons: list
    feasible: np.ndarray
    order: np.ndarray
    score: np.ndarray
    front: np.ndarray
    values: np.ndarray
    best: int | None


def _rank_table(spec: SweepSpec, table: list[dict]) -> _Ranked:
    n = len(table)
    reasons = [rejection_reasons(spec, r) for r in table]
    feasible = np.array([not r for r in reasons], bool)
    fidx = np.flatnonzero(feasible)
    names = [o.column for o in spec.objectives]
    senses = [o.sense for o in spec.objectives]
    V = np.array([[table[i][c] for c in names] for i in range(n)], float).reshape(n, len(names))
    order_f, score_f = rank(V[fidx], senses, [o.weight for o in spec.objectives], spec.ranking)
    order = fidx[order_f]
    score = np.full(n, math.nan)
    score[fidx] = score_f
    if spec.pareto:
        pcols = [names.index(c) for c in spec.pareto]
        front = fidx[pareto_front(V[np.ix_(fidx, pcols)], [senses[j] for j in pcols])]
    else:
        front = np.array([], int)
    return _Ranked(reasons, feasible, order, score, front, V, int(order[0]) if len(order) else None)


def _head(spec: SweepSpec) -> list[str]:
    return [f"hoverfield {__version__} sweep {spec.name}", f"base: {spec.base_path}", f"sweep file: {spec.file}",
            f"sweep_id: {spec.sweep_id}"]


def _column_meta(spec: SweepSpec) -> dict:
    """What each column of the sweep tables means (sidecar ``columns_described``)."""
    from fields.input.sweepfile import RESULT_COLUMNS

    desc = {"index": "design index (the order of expansion)", "failure": "why the design could not be evaluated (empty: it was)",
            "rank": "1 = best feasible design", "score": "ranking score (see ranking)",
            "rejected_by": "why the design is infeasible"}
    for q in spec.parameters:
        desc[q.column] = (f"{q.key} as written in the geometry file (text)" if q.kind == "text"
                          else f"{q.key} in SI units")
    desc.update({c: d for c, (_, d) in RESULT_COLUMNS.items()})
    return {"columns_described": desc, "sweep_id": spec.sweep_id}


def _write_tables(spec: SweepSpec, out: Path, table: list[dict], rk: _Ranked) -> dict:
    from fields.io.export import write_csv

    cols = spec.columns
    head = _head(spec)
    meta = _column_meta(spec)

    def vals(r):
        return [r[c] for c in cols]

    files = {"sweep.csv": str(write_csv(out / "sweep.csv", cols, [vals(r) for r in table], head + [
        "every design, by index; failure: why it could not be evaluated"], meta))}
    rank_of = {int(i): j + 1 for j, i in enumerate(rk.order)}
    rrows = [[rank_of[int(i)], rk.score[i], *vals(table[i]), ""] for i in rk.order]
    rrows += [["", math.nan, *vals(table[i]), "; ".join(rk.reasons[i])] for i in range(len(table)) if not rk.feasible[i]]
    objectives = ", ".join(f"{o.column} ({o.sense}, weight {o.weight:g})" for o in spec.objectives)
    files["ranked.csv"] = str(write_csv(out / "ranked.csv", ["rank", "score"] + cols + ["rejected_by"], rrows, head + [
        f"ranking: {ranking_text(spec)}; objectives " + objectives,
        "feasible designs first, by rank; then the rejected ones with the reason"], meta))
    files["front.csv"] = str(write_csv(out / "front.csv", cols, [vals(table[i]) for i in rk.front], head + [
        "Pareto front (non-dominated feasible designs) over " + ", ".join(spec.pareto)], meta))
    return files


def _write_plots(spec: SweepSpec, out: Path, table: list[dict], rk: _Ranked) -> dict:
    from fields.io import plots
    from fields.io.export import write_png

    files = {}
    names = [o.column for o in spec.objectives]
    senses = [o.sense for o in spec.objectives]
    fidx = np.flatnonzero(rk.feasible)
    shown = list(spec.pareto or names[:1])
    if len(fidx):
        pf = plots.front_scatter(rk.values[fidx][:, [names.index(c) for c in shown]],
                                 np.searchsorted(fidx, rk.front), shown,
                                 [s for c, s in zip(names, senses) if c in shown],
                                 best=int(np.searchsorted(fidx, rk.best)) if rk.best is not None else None,
                                 title=f"{spec.name}: Pareto front ({len(rk.front)} of {len(fidx)} feasible designs)")
        files["front.png"] = str(write_png(out / "front.png", pf))
        plots.close(pf)
    par = {q.column: [r[q.column] for r in table] for q in spec.parameters}
    objv = {c: rk.values[:, j] for j, c in enumerate(names)}
    fmask = np.isin(np.arange(len(table)), rk.front)
    title = f"{spec.name}: objectives versus parameters"
    text_params = [q.column for q in spec.parameters if q.kind == "text"]
    if text_params:
        # categories in the order the sweep file lists them, not sorted as text
        cats = {q.column: [parameter_cell(q.kind, v, si) for v, si in q.choices] for q in spec.parameters if q.kind == "text"}
        po = plots.objectives_vs_categories(par, objv, rk.feasible, categories=cats, front_mask=fmask, title=title)
    else:
        po = plots.objectives_vs_parameters(par, objv, rk.feasible, front_mask=fmask, title=title)
    files["objectives.png"] = str(write_png(out / "objectives.png", po))
    plots.close(po)
    return files


def _write_best(spec: SweepSpec, out: Path, full, table: list[dict], best: int) -> tuple[dict, dict]:
    """best_design.toml (validated by the loader before it is written) and its summary."""
    from fields.input import geometry
    from fields.io.export import write_atomic

    over = full[best][1]
    data = apply_overrides(tomllib.loads(spec.base_text), over)
    data["name"] = f"{data.get('name', Path(spec.base_path).stem)}-sweep-best"
    data["description"] = best_description(spec, best, over, table[best])
    comments = (f"hoverfield geometry file: best design (index {best}) of sweep \"{spec.name}\" of {Path(spec.base_path).name}",
                "written by hoverfield sweep; changed: " + "; ".join(f"{k} = {toml_value(v)}" for k, v in over.items()))
    if spec.invented:
        comments += ("INVENTED EXAMPLE: derived from an invented base design.",)
    text = toml_text(data, comments)
    geometry.loads(text, file=str(out / "best_design.toml"), base_dir=Path(spec.base_path).parent)
    files = {"best_design.toml": str(write_atomic(out / "best_design.toml", text))}
    info = {"index": best, "overrides": over, "objectives": {o.column: table[best][o.column] for o in spec.objectives},
            "row": {c: table[best][c] for c in spec.columns}}
    return files, info


def best_description(spec: SweepSpec, index: int, overrides: dict, row: dict) -> str:
    """The ``description`` of best_design.toml: which design it is, the values it changes and its
    objectives (with the units in their column names), so the file says what it holds.

    >>> from types import SimpleNamespace as NS
    >>> spec = NS(name="s", base_path="base.toml", invented=False,
    ...           objectives=(NS(column="mass_kg"),), parameters=())
    >>> best_description(spec, 3, {"floater.magnets[0].grade": "N52"}, {"mass_kg": 0.0125})
    'Best design (index 3) of sweep "s" of base.toml: floater.magnets[0].grade = "N52"; objectives mass_kg = 0.0125.'
    """
    changed = "; ".join(f"{k} = {toml_value(v)}" for k, v in overrides.items())
    objs = ", ".join(f"{o.column} = {row[o.column]:.6g}" for o in spec.objectives)
    text = (f"Best design (index {index}) of sweep \"{spec.name}\" of {Path(spec.base_path).name}: {changed}; "
            f"objectives {objs}.")
    if spec.invented:
        text = "INVENTED EXAMPLE. " + text
    return text


def _summary(spec: SweepSpec, table: list[dict], rk: _Ranked, evaluated: int, reused: int, seconds: float,
             best_info: dict | None) -> dict:
    return {
        "sweep": spec.name, "sweep_file": spec.file, "base": spec.base_path, "sweep_id": spec.sweep_id,
        "mode": spec.mode, "designs": len(table), "failed": int(sum(1 for r in table if r["failure"])),
        "feasible": int(rk.feasible.sum()), "front_size": int(len(rk.front)), "evaluated_this_run": evaluated,
        "reused_from_chunks": reused, "seconds": seconds,
        "designs_per_second": (evaluated / seconds) if evaluated and seconds > 0 else None,
        "ranking": ranking_text(spec),
        "objectives": [{"column": o.column, "sense": o.sense, "weight": o.weight} for o in spec.objectives],
        "pareto": list(spec.pareto), "reject_flags": list(spec.reject_flags),
        "limits": [{"column": lim.column, "min": lim.minimum, "max": lim.maximum} for lim in spec.limits],
        "parameters": [{"key": q.key, "column": q.column, "values": len(q.grid()) if spec.mode == "grid" else None,
                        "text_values": [parameter_cell(q.kind, v, si) for v, si in q.choices] if q.kind == "text" else None}
                       for q in spec.parameters],
        "columns": {c: {"unit": RESULT_COLUMNS[c][0], "meaning": RESULT_COLUMNS[c][1]} for c in RESULT_COLUMNS},
        "designs_table": [{c: r[c] for c in spec.columns} for r in table],
        "best": best_info, "front_indices": [int(i) for i in rk.front],
        "failures": [{"index": r["index"], "reason": r["failure"]} for r in table if r["failure"]][:20],
    }


def _finish(spec: SweepSpec, out: Path, full, table: list[dict], evaluated: int, reused: int, t0: float) -> SweepResult:
    from fields.io.export import write_json

    rk = _rank_table(spec, table)
    files = _write_tables(spec, out, table, rk)
    files.update(_write_plots(spec, out, table, rk))
    best_info = None
    if rk.best is not None:
        best_files, best_info = _write_best(spec, out, full, table, rk.best)
        files.update(best_files)
    seconds = time.perf_counter() - t0
    files["sweep.json"] = str(out / "sweep.json")
    summary = _summary(spec, table, rk, evaluated, reused, seconds, best_info)
    summary["files"] = dict(files)
    write_json(out / "sweep.json", summary)
    return SweepResult(spec=spec, columns=spec.columns, table=table, feasible=rk.feasible, order=rk.order,
                       front=rk.front, best_index=rk.best, evaluated=evaluated, reused=reused, files=files,
                       seconds=seconds)
