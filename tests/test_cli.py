"""The command line: one-line errors with non-zero exit, summaries, files written, fast --help."""

from __future__ import annotations

import subprocess
import sys

import pytest

from fields import cli

from helpers import MINIMAL, REPULSIVE, ROOT, SUSPENSION


def test_help_is_fast_and_light():
    # importing the CLI must not import the heavy numerical stack (common practice, no source:
    # a --help that answers instantly)
    code = "import sys, fields.cli; print(any(m in sys.modules for m in ('magpylib', 'matplotlib', 'pint')))"
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert r.stdout.strip() == "False"
    r = subprocess.run([sys.executable, "-m", "fields.cli", "--help"], capture_output=True, text=True, cwd=ROOT)
    assert r.returncode == 0 and "report" in r.stdout and "Safety" in r.stdout


@pytest.mark.parametrize("path", [SUSPENSION, REPULSIVE], ids=lambda p: p.name)
def test_check_prints_summary_and_writes_picture(path, tmp_path, capsys):
    rc = cli.main(["check", str(path), "-o", str(tmp_path)])
    out = capsys.readouterr().out
    assert rc == 0
    assert "floater:" in out and "R(20 C)" in out and "turns" in out
    assert "N42 -> Br 1.300 T" in out
    png = (tmp_path / "design.png").read_bytes()
    assert png.startswith(b"\x89PNG")


@pytest.mark.parametrize("mutation, fragment", [
    (('outer_radius = "15 mm"', 'outer_radius = "15"'), "coils[0].outer_radius"),
    (('grade = "N42"', 'grade = "N99"'), "floater.magnets[0].grade"),
    (('gap_min = "3 mm"', 'gap_min = "3 mm"\ngap_mni = "1 mm"'), 'did you mean "gap_min"'),
])
def test_bad_file_gives_one_line_and_exit_2(tmp_path, mutation, fragment):
    p = tmp_path / "bad.toml"
    p.write_text(MINIMAL.replace(*mutation))
    before = p.read_bytes()
    r = subprocess.run([sys.executable, "-m", "fields.cli", "check", str(p), "-o", str(tmp_path / "o")],
                       capture_output=True, text=True, cwd=ROOT)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in r.stderr
    assert lines[0].startswith(f"hoverfield: error: {p}: ") and fragment in lines[0]
    assert p.read_bytes() == before  # the input file is never written


def test_missing_file(tmp_path, capsys):
    rc = cli.main(["check", str(tmp_path / "nope.toml")])
    assert rc == 2
    assert "the geometry file must be an existing file" in capsys.readouterr().err


@pytest.mark.slow
def test_curves_and_stability_commands(tmp_path, capsys):
    assert cli.main(["curves", str(SUSPENSION), "-o", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "hover current" in out and "axially unstable" in out
    assert cli.main(["stability", str(REPULSIVE), "-o", str(tmp_path), "--no-maps"]) == 0
    out = capsys.readouterr().out
    assert "vertical: stable" in out and "sideways x/y: unstable" in out
    for f in ("curves.csv", "curves.json", "curves.png", "stiffness.csv", "stability.json", "allocation.csv"):
        assert (tmp_path / f).is_file(), f


def test_every_command_is_listed_and_python_m_works():
    # one module per command under fields.cli; `python -m fields.cli` is the same entry point
    r = subprocess.run([sys.executable, "-m", "fields.cli", "--help"], capture_output=True, text=True, cwd=ROOT)
    for name in ("check", "curves", "stability", "coil", "sensors", "control", "report", "sweep", "figures"):
        assert f"    {name}" in r.stdout, name
    r = subprocess.run([sys.executable, "-m", "fields.cli", "coil", "--help"], capture_output=True, text=True, cwd=ROOT)
    assert r.returncode == 0 and "coil datasheet" in r.stdout
