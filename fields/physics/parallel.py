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

:func:`background` runs a whole independent task (a report stage) in one forked process while
this one goes on; inside it every split runs serially (one extra process, not a second pool).
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
#: set in a process started by :func:`background`: its splits run serially
_IN_BACKGROUND = False


def worker_count() -> int:
    """Processes a split may use (see the module notes)."""
    if _IN_BACKGROUND:
        return 1
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


def _quiet_child() -> None:
    """A forked worker ends silently when its pool is closed (the command's SIGTERM handler,
    inherited from the parent, would print a traceback)."""
    import signal

    signal.signal(signal.SIGTERM, signal.SIG_DFL)


def serial_worker() -> None:
    """Initializer of an outer pool's workers (a sweep's or a tolerance study's designs, the
    sizing search): their own splits run serially, so that the pool, not a pool per worker,
    uses the cores (and the memory stays one process per core)."""
    global _IN_BACKGROUND
    _IN_BACKGROUND = True
    _quiet_child()


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
        with mp.get_context("fork").Pool(w - 1, initializer=_quiet_child) as pool:
            pending = [pool.apply_async(_run, (i,)) for i in range(1, w)]
            first = fn(chunks[0])
            return [first] + [p.get() for p in pending]
    finally:
        _TASK = None


class Pending:
    """The outcome of a :func:`background` task: :meth:`get` waits for it."""

    def __init__(self, fn: Callable[[], object]) -> None:
        self._fn = fn
        self._proc = self._conn = None
        self._done = False
        self._value = None
        if worker_count() > 1 and not mp.current_process().daemon and "fork" in mp.get_all_start_methods():
            ctx = mp.get_context("fork")
            self._conn, child = ctx.Pipe(duplex=False)
            self._proc = ctx.Process(target=_background_main, args=(fn, child), daemon=False)
            self._proc.start()
            child.close()

    def get(self):
        """The task's return value; its exception is raised here (a :class:`HoverfieldError` as
        itself, anything else as a RuntimeError naming the original type and message)."""
        if not self._done:
            if self._proc is None:
                self._value = ("value", self._fn())
            else:
                try:
                    self._value = self._conn.recv()
                except EOFError:
                    self._value = ("crash", f"the background process ended without a result (exit code "
                                            f"{self._proc.exitcode})")
                self._proc.join()
                self._conn.close()
            self._done = True
        kind, v = self._value
        if kind == "value":
            return v
        if kind == "hoverfield":
            from fields.errors import HoverfieldError

            raise HoverfieldError(v)
        raise RuntimeError(v)


def _background_main(fn: Callable[[], object], conn) -> None:
    global _IN_BACKGROUND
    _IN_BACKGROUND = True
    _quiet_child()
    try:
        from fields.errors import HoverfieldError

        try:
            out = ("value", fn())
        except HoverfieldError as e:
            out = ("hoverfield", str(e))
        except Exception as e:  # noqa: BLE001 - reported to the parent, which records it
            import traceback

            out = ("error", f"{type(e).__name__}: {e} ({traceback.format_exc(limit=2).splitlines()[-1]})")
        try:
            conn.send(out)
        except Exception as e:  # noqa: BLE001 - an unpicklable result
            conn.send(("error", f"the result could not be sent back: {type(e).__name__}: {e}"))
    finally:
        conn.close()


def background(fn: Callable[[], object]) -> Pending:
    """Start ``fn()`` in a forked process (it inherits every cache built so far) and return at
    once; :meth:`Pending.get` collects its value. Serial (``fn`` runs at ``get``) where there is
    one worker, inside a worker, or without ``fork``."""
    return Pending(fn)
