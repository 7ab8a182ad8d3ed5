"""Independent pose batches on both cores: chunks in forked worker processes.

Evaluations whose poses are independent samples (a map's grid, the multi-axis force model's
fitting poses) are split into contiguous chunks; the first runs in this process and the others in
processes forked from it, so that they inherit every cache the parent has built (iron models,
harmonic matrices, element kernels) instead of rebuilding them. Results come back pickled and
are returned in chunk order, so the outcome equals the serial run exactly (each chunk's poses are
evaluated by the same code; nothing is shared between poses of a chunk but the rule, which a
caller must not need across chunks: finite-difference stencils stay in one call).

The number of processes is ``HOVERFIELD_WORKERS`` from the environment, else the CPUs this
process may use, at most :data:`MAX_WORKERS`; 1 runs serially, and so does a call from inside a
worker process (no nested pools) or where ``fork`` is not available.
"""

from __future__ import annotations

import multiprocessing as mp
import os
from collections.abc import Callable

#: upper bound of worker processes (the machine this was tuned on has 2 cores)
MAX_WORKERS = 8
#: below this many items per worker a split is not worth a fork
MIN_ITEMS_PER_WORKER = 16

_TASK: Callable | None = None


def worker_count() -> int:
    """Processes a split may use (see the module notes)."""
    env = os.environ.get("HOVERFIELD_WORKERS")
    if env:
        try:
            return max(1, int(env))
        except ValueError:
            return 1
    try:
        n = len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        n = os.cpu_count() or 1
    return max(1, min(MAX_WORKERS, n))


def _run(i: int):
    return _TASK(i)  # type: ignore[misc]


def map_chunks(fn: Callable[[slice], object], n: int, workers: int | None = None,
               min_items_per_worker: int = MIN_ITEMS_PER_WORKER, warm_first: bool = False) -> list:
    """``[fn(chunk) for chunk in contiguous slices of range(n)]``, the chunks on several processes.

    ``fn`` takes a slice of the items and returns a picklable result; it runs in this process for
    the first chunk and in forked children for the others. ``min_items_per_worker``: fewer items
    per process are not split (lower it for items that cost seconds each). ``warm_first``: the
    first item alone runs here before the fork (its own chunk), so that caches it builds (e.g. an
    iron model's harmonic matrices) are built once and inherited.
    """
    global _TASK
    w = worker_count() if workers is None else max(1, int(workers))
    w = min(w, max(1, n // max(1, int(min_items_per_worker))))
    if w <= 1 or mp.current_process().daemon or "fork" not in mp.get_all_start_methods():
        return [fn(slice(0, n))]
    if warm_first and n > 1:
        head = fn(slice(0, 1))
        return [head] + [r for r in map_chunks(lambda sl: fn(slice(sl.start + 1, sl.stop + 1)), n - 1, w,
                                                min_items_per_worker)]
    edges = [round(i * n / w) for i in range(w + 1)]
    chunks = [slice(a, b) for a, b in zip(edges[:-1], edges[1:])]
    _TASK = lambda i: fn(chunks[i])  # noqa: E731 - read by the forked children through _run
    try:
        with mp.get_context("fork").Pool(w - 1) as pool:
            pending = [pool.apply_async(_run, (i,)) for i in range(1, w)]
            first = fn(chunks[0])
            return [first] + [p.get() for p in pending]
    finally:
        _TASK = None
