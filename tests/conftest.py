"""Shared fixtures: the suspension example's report, run once per test session."""

import os

# one BLAS thread per process, as the command sets it (fields/cli/__init__.py): set before numpy
# is first imported so that the tests time like the command
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

from pathlib import Path  # noqa: E402

import pytest  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
SUSPENSION_FILE = ROOT / "geometries" / "suspension.toml"


@pytest.fixture(scope="session")
def report_dir(tmp_path_factory):
    """The README's Quick start command on the suspension example, run in-process once."""
    from fields import cli

    out = tmp_path_factory.mktemp("report")
    rc = cli.main(["report", str(SUSPENSION_FILE), "-o", str(out), "-q"])
    assert rc == 0
    return out
