"""The process helpers of fields.physics.parallel: results equal the serial run, errors come back.

No physics here: the checks are the helpers' contract (chunk order, values and exceptions
returned from forked processes, serial fallback).
"""

from __future__ import annotations

import os

import numpy as np
import pytest

from fields.errors import HoverfieldError, InputError
from fields.physics import parallel


def test_map_chunks_equals_the_serial_run_in_order():
    x = np.arange(101.0)
    parts = parallel.map_chunks(lambda sl: (os.getpid(), x[sl] ** 2), len(x), workers=2, min_items_per_worker=1)
    assert np.array_equal(np.concatenate([p[1] for p in parts]), x ** 2)
    if len(parts) > 1:  # fork available: the second chunk ran in another process
        assert parts[0][0] == os.getpid() != parts[1][0]


def test_background_returns_the_value_from_another_process():
    pending = parallel.background(lambda: (os.getpid(), parallel.worker_count()))
    pid, workers = pending.get()
    if parallel.worker_count() > 1:
        assert pid != os.getpid() and workers == 1  # splits inside a background task run serially
    assert pending.get() == (pid, workers)  # a second get returns the same value


def test_background_errors_come_back_named():
    def bad_input():
        raise InputError("where: key must be a positive number; got -1.")

    def bug():
        raise ZeroDivisionError("division by zero")

    with pytest.raises(HoverfieldError, match="a positive number"):
        parallel.background(bad_input).get()
    with pytest.raises((RuntimeError, ZeroDivisionError), match="division by zero"):
        parallel.background(bug).get()


def test_one_worker_runs_inline(monkeypatch):
    monkeypatch.setenv("HOVERFIELD_WORKERS", "1")
    assert parallel.background(os.getpid).get() == os.getpid()
    assert parallel.map_chunks(lambda sl: os.getpid(), 50, min_items_per_worker=1) == [os.getpid()]
