"""The command line: one-line errors with non-zero exit, summaries, files written, fast --help."""

from __future__ import annotations

import json
import re
import signal
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
    assert "vertical: stable" in out and re.search(r"sideways x/y( coupled with tilt about x/y)?: unstable", out)
    for f in ("curves.csv", "curves.json", "curves.png", "stiffness.csv", "stability.json", "allocation.csv"):
        assert (tmp_path / f).is_file(), f


def test_every_command_is_listed_and_python_m_works():
    # one module per command under fields.cli; `python -m fields.cli` is the same entry point
    r = subprocess.run([sys.executable, "-m", "fields.cli", "--help"], capture_output=True, text=True, cwd=ROOT)
    for name in ("check", "curves", "stability", "coil", "sensors", "control", "report", "sweep", "figures"):
        assert f"    {name}" in r.stdout, name
    r = subprocess.run([sys.executable, "-m", "fields.cli", "coil", "--help"], capture_output=True, text=True, cwd=ROOT)
    assert r.returncode == 0 and "coil datasheet" in r.stdout


@pytest.mark.slow
def test_output_into_a_closed_pipe_ends_quietly(tmp_path):
    # `hoverfield check FILE | head`: the reader closes the pipe before the command writes; the
    # writer gets EPIPE (POSIX write(): "an attempt is made to write to a pipe ... that is not
    # open for reading by any process") and must stop without a traceback
    p = tmp_path / "m.toml"
    p.write_text(MINIMAL)
    proc = subprocess.Popen([sys.executable, "-m", "fields.cli", "check", str(p), "-o", str(tmp_path / "o")],
                            cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    proc.stdout.close()  # the reader is gone before the first line
    err = proc.stderr.read().decode()
    rc = proc.wait(timeout=120)
    assert "Traceback" not in err and "BrokenPipeError" not in err, err
    assert rc == cli.EXIT_BROKEN_PIPE == 128 + signal.SIGPIPE  # as a shell reports a SIGPIPE ending


@pytest.mark.slow
def test_head_of_the_check_output_has_no_traceback(tmp_path):
    # the same through a real shell pipeline into head (POSIX head reads only what it prints)
    import shlex
    import shutil

    if shutil.which("head") is None:
        pytest.skip("no head command")
    p = tmp_path / "m.toml"
    p.write_text(MINIMAL)
    cmd = (f"{shlex.quote(sys.executable)} -m fields.cli check {shlex.quote(str(p))} -o {shlex.quote(str(tmp_path / 'o'))}"
           " | head -n 1")
    r = subprocess.run(["sh", "-c", cmd], capture_output=True, text=True, cwd=ROOT, timeout=120)
    assert r.stdout.startswith("design: minimal") and "Traceback" not in r.stderr


@pytest.mark.slow
def test_assumed_fill_is_said_in_the_cli_and_the_report(tmp_path, capsys):
    # the invented minimal design gives 500 turns and no wire or fill factor: the wire follows
    # from an assumed copper fill, and the user must be told (a trade value: common practice,
    # no source)
    from fields.devices.winding import DEFAULT_FILL_FACTOR
    from fields.input.geometry import load
    from fields.io.report_builder import build_report

    p = tmp_path / "m.toml"
    p.write_text(MINIMAL)
    out = tmp_path / "o"
    assert cli.main(["coil", str(p), "-o", str(out)]) == 0
    text = capsys.readouterr().out
    said = f"an assumed copper fill {DEFAULT_FILL_FACTOR:g} (no fill_factor given"
    assert any(ln.startswith("warning: coil c:") and said in ln for ln in text.splitlines()), text
    coil_json = json.loads((out / "coil.json").read_text())
    assert any(said in w for w in coil_json["warnings"])

    def load_json(name):
        f = out / name
        return json.loads(f.read_text()) if f.is_file() else None

    html = build_report(load(p), out, {}, load_json, None)
    warn = html[html.index('<div class="warn">'):]
    assert said in warn[:warn.index("</div>")]


def test_cli_text_names_no_internal_identifiers():
    # what the commands print is built from fields.io.wording and the command modules: no
    # function calls ("wrench()") or code names ("left_table_high") in their sentences
    import ast

    pattern = re.compile(r"\w+\(\)|left_table_|_table_high|use wrench")
    files = list((ROOT / "fields" / "cli").glob("*.py")) + [ROOT / "fields" / "io" / "wording.py"]
    checked = 0
    for f in files:
        if f.name == "control.py":  # the control command is owned and checked with the control layer
            continue
        tree = ast.parse(f.read_text(encoding="utf-8"))
        docs = {id(n.body[0].value) for n in ast.walk(tree)
                if isinstance(n, (ast.Module, ast.FunctionDef, ast.ClassDef)) and n.body and isinstance(n.body[0], ast.Expr)}
        texts = [n.value for n in ast.walk(tree) if isinstance(n, ast.Constant) and isinstance(n.value, str)
                 and id(n) not in docs]
        checked += len(texts)
        for t in texts:
            assert not pattern.search(t), (f.name, t)
    assert checked > 100  # the sentences were found
