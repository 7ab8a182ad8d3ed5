"""The main job: `hoverfield report` on the suspension example, and its exports.

Outside references: a real headless browser (Debian's Chromium) renders the page; ngspice (a
general-purpose circuit simulator) solves the exported SPICE subcircuit; trimesh checks the
exported mesh. Each is skipped with a reason when the program is absent.
"""

from __future__ import annotations

import json
import math
import re
import shutil
import signal
import subprocess
import sys
import time
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from fields.model import solids as bodies
from fields import cli
from fields.io import formats
from fields.input.csvtable import read_csv
from fields.input.geometry import load

from helpers import REPULSIVE, ROOT, SUSPENSION

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
NGSPICE = shutil.which("ngspice")


@pytest.fixture(scope="module")
def report_dir(tmp_path_factory):
    out = tmp_path_factory.mktemp("report")
    # the README's Quick start command, run in-process
    rc = cli.main(["report", str(SUSPENSION), "-o", str(out), "-q"])
    assert rc == 0
    return out


class _Nums(HTMLParser):
    def __init__(self):
        super().__init__()
        self.items = []
        self._cur = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "span" and "data-src" in a:
            self._cur = a
            self._cur["text"] = ""

    def handle_data(self, data):
        if self._cur is not None:
            self._cur["text"] += data

    def handle_endtag(self, tag):
        if tag == "span" and self._cur is not None:
            self.items.append(self._cur)
            self._cur = None


def _resolve(obj, path):
    for part in re.findall(r"[^.\[\]]+|\[\d+\]", path):
        obj = obj[int(part[1:-1])] if part.startswith("[") else obj[part]
    return obj


@pytest.mark.slow
def test_every_number_in_the_report_equals_its_json(report_dir):
    p = _Nums()
    p.feed((report_dir / "report.html").read_text(encoding="utf-8"))
    assert len(p.items) > 60
    cache = {}
    for it in p.items:
        src = it["data-src"]
        assert (report_dir / src).is_file(), src
        data = cache.setdefault(src, json.loads((report_dir / src).read_text()))
        value = _resolve(data, it["data-path"])
        if value is None:
            assert it["data-value"] == "null" and it["text"] == "n/a"
            continue
        assert float(it["data-value"]) == float(value), it
        # the text shown is the JSON value, scaled to the shown unit and rounded to the shown digits
        expected = f'{float(value) * float(it["data-scale"]):.{int(it["data-digits"])}g}'
        assert it["text"] == expected, it


@pytest.mark.slow
def test_report_opens_in_headless_browser(report_dir, tmp_path):
    if CHROMIUM is None:
        pytest.skip("Chromium is not installed (Debian package 'chromium'); .ci/run installs it")
    cmd = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           f"--user-data-dir={tmp_path / 'profile'}", "--enable-logging=stderr", "--v=0",
           "--dump-dom", (report_dir / "report.html").as_uri()]
    r = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr[-2000:]
    dom = r.stdout
    assert "Verdict" in dom and "vertical: unstable, needs feedback" in dom
    assert "sideways x/y: stable" in dom
    # the page loads no scripts and must log no page errors
    assert "Uncaught" not in r.stderr and "CONSOLE" not in r.stderr
    assert dom.count("data:image/png;base64,") >= 8  # figures embedded: self-contained


@pytest.mark.slow
def test_csv_and_c_header_round_trip(report_dir):
    exp = report_dir / "exports"
    arrays = formats.parse_c_header((exp / "tables.h").read_text())
    for csv_name, h_name in (("table_Fz.csv", "FZ_N"), ("table_kz.csv", "KZ_N_PER_M"), ("table_ki.csv", "KI_N_PER_A"),
                             ("table_I_of_F.csv", "I_OF_F_A")):
        cols, data = read_csv(exp / csv_name)
        assert cols[0] == "gap_m"
        np.testing.assert_allclose(data[:, 0], arrays["GAP_M"], rtol=1e-9)
        np.testing.assert_allclose(data[:, 1:], arrays[h_name], rtol=1e-9, atol=1e-300)
    # the header itself round-trips binary64 exactly
    a = np.array([[1 / 3, -2.5e-7], [math.pi, 1e300]])
    back = formats.parse_c_header(formats.c_header("t", {"x": a}, {"x": "N"}, []))
    assert np.array_equal(back["X"], a)


@pytest.mark.slow
def test_force_table_matches_the_curves(report_dir):
    cols, data = read_csv(report_dir / "exports" / "table_Fz.csv")
    ccols, cdata = read_csv(report_dir / "curves.csv")
    # F(g, I) at I = 0 column equals F0 in curves.csv at the same gaps (independent export paths)
    j0 = [i for i, c in enumerate(cols) if re.fullmatch(r"Fz_N_at_-?0A", c)]
    assert j0
    F0 = dict(zip(np.round(cdata[:, 0], 12), cdata[:, ccols.index("F0_N")]))
    for row in data:
        assert row[j0[0]] == pytest.approx(F0[round(row[0], 12)], rel=1e-8)


@pytest.mark.slow
def test_spice_subcircuit_dc_operating_point_gives_hover_current(report_dir, tmp_path):
    if NGSPICE is None:
        pytest.skip("ngspice is not installed (Debian package 'ngspice'); .ci/run installs it")
    ctrl = json.loads((report_dir / "control.json").read_text())
    sub = (report_dir / "exports" / "plant.sub").read_text()
    # harness: position held at the equilibrium; the coil voltage follows the velocity node with a
    # high gain, so the DC solution is the current at which the magnetic force balances gravity
    net = tmp_path / "op.cir"
    net.write_text("* hover current from the exported plant\n" + sub + """
Xp cp cn vel pos hf_plant
Vm cn 0 DC 0
Vpos pos 0 DC 0
Edrv cp 0 vel 0 100
.control
op
print i(Vm)
.endc
.end
""")
    r = subprocess.run([NGSPICE, "-b", str(net)], capture_output=True, text=True, timeout=120)
    # batch mode with only a .control block exits 1 with the note "no simulations run"; real
    # failures print errors
    assert "error" not in (r.stdout + r.stderr).lower(), r.stdout[-2000:] + r.stderr[-2000:]
    m = re.search(r"i\(vm\)\s*=\s*([-+0-9.eE]+)", r.stdout, flags=re.I)
    assert m, r.stdout[-2000:]
    current = float(m.group(1))  # positive into coil_p, out of coil_n through Vm
    hover = ctrl["bias_current_A"]
    curves = json.loads((report_dir / "curves.json").read_text())
    assert current == pytest.approx(hover, rel=5e-3)
    assert current == pytest.approx(curves["at_operating_gap"]["hover_current_A"], rel=5e-3)


@pytest.mark.slow
def test_exported_mesh_is_closed_with_the_model_volume(report_dir):
    import trimesh

    d = load(SUSPENSION)
    mesh = trimesh.load(str(report_dir / "exports" / "geometry.stl"), force="mesh")
    assert mesh.is_watertight
    model = sum(s.volume_m3 for s in bodies.design_solids(d))
    # STL stores float32 vertices: volume agrees to ~1e-6 relative
    assert mesh.volume == pytest.approx(model, rel=1e-5)


def _complete(path: Path) -> bool:
    b = path.read_bytes()
    if path.suffix == ".json":
        json.loads(b)
        return True
    if path.suffix == ".png":
        return b.startswith(b"\x89PNG") and b.rstrip().endswith(b"IEND\xaeB`\x82")
    if path.suffix == ".csv":
        import csv

        rows = list(csv.reader(ln for ln in b.decode().splitlines() if not ln.startswith("#")))
        return len(rows) >= 2 and all(len(r) == len(rows[0]) for r in rows)
    if path.suffix == ".html":
        return b.rstrip().endswith(b"</html>")
    return len(b) > 0


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
@pytest.mark.slow
def test_interrupted_run_leaves_complete_files_only(tmp_path, sig):
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-m", "fields.cli", "report", str(SUSPENSION), "-o", str(out), "-q"],
                            cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    # wait until the run has written something, then interrupt it mid-way
    t0 = time.time()
    while time.time() - t0 < 60 and not (out / "curves.json").exists():
        time.sleep(0.05)
    time.sleep(0.5)
    proc.send_signal(sig)
    proc.wait(timeout=60)
    assert proc.returncode != 0
    files = [p for p in out.rglob("*") if p.is_file()]
    assert files, "the run should have finished some files before the interrupt"
    assert not [p for p in files if p.name.endswith(".part")]
    for p in files:
        assert _complete(p), p


@pytest.mark.slow
def test_failed_stage_is_reported_and_the_rest_kept(tmp_path):
    # the repulsive base without its coils: passive levitation works, a control model cannot exist
    text = REPULSIVE.read_text()
    text = re.sub(r"\[\[coils\]\].*?(?=\[\[coils\]\]|\[floater\])", "", text, flags=re.S)
    p = tmp_path / "nocoils.toml"
    p.write_text(text)
    out = tmp_path / "out"
    rc = cli.main(["report", str(p), "-o", str(out), "-q"])
    assert rc == 1
    html = (out / "report.html").read_text()
    assert "What failed" in html and "control" in html
    assert (out / "stability.json").exists() and (out / "curves.csv").exists()
    status = json.loads((out / "run_status.json").read_text())
    assert "control" in status["stages_failed"] and "stability" in status["stages_done"]


def test_serialiser_writes_strict_json_and_flat_rows():
    # reference: RFC 8259 (JSON) has no NaN or Infinity, so non-finite numbers become null; the
    # text is parsed back by Python's standard json module
    import enum
    from dataclasses import dataclass

    from fields.io.serialize import csv_table, to_json
    from fields.studies.result_fields import flattened, internal, optional

    class Kind(enum.Enum):
        HALL = "hall"

    @dataclass(frozen=True)
    class Inner:
        gap_m: float
        flags: tuple

    @dataclass(frozen=True)
    class Outer:
        kind: Kind
        values_N: np.ndarray
        inner: Inner
        spread: Inner = flattened()
        missing: float | None = optional()
        cache: object = internal()

    obj = Outer(Kind.HALL, np.array([1.5, np.inf, np.nan]), Inner(0.01, (True, 2)), Inner(0.02, ()), cache=object())
    assert json.loads(to_json(obj)) == {"kind": "hall", "values_N": [1.5, None, None],
                                        "inner": {"gap_m": 0.01, "flags": [True, 2]}, "gap_m": 0.02, "flags": []}
    cols, rows = csv_table([Inner(0.01, (1, 2)), Inner(0.03, (4,))])
    assert cols == ["gap_m", "flags[0]", "flags[1]"]
    assert rows == [[0.01, 1, 2], [0.03, 4, None]]
