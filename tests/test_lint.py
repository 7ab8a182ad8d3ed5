"""House rules that a linter can check (common practice, no source).

- matplotlib is imported only by ``fields/io/plots.py`` (ruff's flake8-tidy-imports banned-api, TID251,
  configured in pyproject.toml), and ``ruff check fields tests benchmarks`` passes;
- imports point downward along the data flow (errors < model < input < physics < analysis < devices <
  control < studies < io < cli), read from the source with :mod:`ast`; the one exception: studies,
  which writes files, may import io inside a function;
- no module is longer than 600 lines.
"""
from __future__ import annotations

import ast
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
LAYERS = ["errors", "model", "input", "physics", "analysis", "devices", "control", "studies", "io", "cli"]
#: (importing layer, imported layer) allowed inside a function, not at module level
LAZY_EDGES = {("studies", "io")}
MAX_LINES = 600


def layer_of(module: str) -> int | None:
    """Index in LAYERS of a ``fields.<layer>...`` module name, None for anything else."""
    parts = module.split(".")
    if parts[0] != "fields" or len(parts) < 2:
        return None
    return LAYERS.index(parts[1]) if parts[1] in LAYERS else None


def imports_of(path: Path):
    """(line, imported module, at module level) of every absolute import in a source file."""
    tree = ast.parse(path.read_text())
    top = {id(n) for n in tree.body}
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            if node.module == "fields":  # ``from fields import input``: the names are the modules
                for a in node.names:
                    yield node.lineno, f"fields.{a.name}", id(node) in top
            else:
                yield node.lineno, node.module, id(node) in top
        elif isinstance(node, ast.Import):
            for a in node.names:
                yield node.lineno, a.name, id(node) in top


def package_modules():
    return sorted((ROOT / "fields").rglob("*.py"))


def test_layer_lookup():
    assert layer_of("fields.model.design") < layer_of("fields.input.geometry") < layer_of("fields.physics.demag")
    assert layer_of("fields.errors") == 0
    assert layer_of("numpy.linalg") is None and layer_of("fields") is None


def test_imports_point_downward():
    bad = []
    for p in package_modules():
        rel = p.relative_to(ROOT).with_suffix("")
        me = layer_of(".".join(rel.parts))
        if me is None:
            continue
        for line, mod, at_top in imports_of(p):
            other = layer_of(mod)
            if other is None or other <= me:
                continue
            if not at_top and (LAYERS[me], LAYERS[other]) in LAZY_EDGES:
                continue
            bad.append(f"{rel}.py:{line} imports {mod}")
    assert not bad, "upward imports:\n" + "\n".join(bad)


def test_modules_are_small():
    long = [f"{p.relative_to(ROOT)}: {n} lines" for p in package_modules()
            if (n := len(p.read_text().splitlines())) > MAX_LINES]
    assert not long, f"modules over {MAX_LINES} lines:\n" + "\n".join(long)


def ruff_available() -> bool:
    if shutil.which("ruff") is not None:
        return True
    return subprocess.run([sys.executable, "-m", "ruff", "--version"], capture_output=True).returncode == 0


@pytest.mark.skipif(not ruff_available(), reason="ruff is not installed (pip install -e .[test])")
def test_ruff_passes():
    r = subprocess.run([sys.executable, "-m", "ruff", "check", "fields", "tests", "benchmarks"],
                       capture_output=True, text=True, cwd=ROOT)
    assert r.returncode == 0, r.stdout + r.stderr
