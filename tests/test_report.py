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


# report_dir: the README's Quick start command run once per session (tests/conftest.py)


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
        if "data-zero-below" in it:  # shown as 0: an exact zero, or round-off within the stated bound
            assert it["text"] == "0" and abs(float(value)) <= float(it["data-zero-below"]), it
            continue
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
    assert re.search(r"sideways x/y( coupled with tilt about x/y)?: stable", dom)
    # the page loads no scripts and must log no page errors
    assert "Uncaught" not in r.stderr and "CONSOLE" not in r.stderr
    assert dom.count("data:image/png;base64,") >= 8  # figures embedded: self-contained


@pytest.mark.slow
def test_csv_and_c_header_round_trip(report_dir):
    import csv

    exp = report_dir / "exports"
    p = formats.c_ident(load(SUSPENSION).name) + "_"  # every C name carries the design's prefix
    for hname, single in (("tables.h", False), ("tables_float.h", True)):
        arrays = formats.parse_c_header((exp / hname).read_text())
        for csv_name, h_name, axis1, value, extra in (
                ("table_Fz.csv", "FZ_N", "current_A", "Fz_N", ["error_Fz_N"]),
                ("table_kz.csv", "KZ_N_PER_M", "current_A", "kz_N_per_m", ["error_kz_N_per_m"]),
                ("table_ki.csv", "KI_N_PER_A", "current_A", "ki_N_per_A", []),
                ("table_I_of_F.csv", "I_OF_F_A", "force_N", "I_A", [])):
            rows = list(csv.DictReader((exp / csv_name).read_text().splitlines()))  # long format, header first
            assert list(rows[0]) == ["gap_m", axis1, value, *extra]
            g = np.array(sorted({float(r["gap_m"]) for r in rows}))
            x1 = np.array(sorted({float(r[axis1]) for r in rows}))
            table = np.array([float(r[value]) if r[value] else math.nan for r in rows]).reshape(len(g), len(x1))
            # full precision in both files: the same binary64 values (IEEE 754-2008, sec. 5.12.2);
            # single precision: the nearest binary32
            cast = (lambda a: a.astype(np.float32).astype(float)) if single else (lambda a: a)
            np.testing.assert_array_equal(cast(g), cast(arrays[p + "GAP_M"]))
            ok = np.isfinite(table)  # no value (beyond the max current): the flag in C, NaN when read back
            np.testing.assert_array_equal(cast(table[ok]), cast(arrays[p + h_name][ok]))
            assert np.all(np.isnan(arrays[p + h_name][~ok]))
            for e in extra:  # the error bars are tables of the header too (issue: exports carry the force error)
                err = np.array([float(r[e]) for r in rows]).reshape(len(g), len(x1))
                np.testing.assert_array_equal(cast(err), cast(arrays[p + e.upper()]))
    # the header itself round-trips binary64 exactly
    a = np.array([[1 / 3, -2.5e-7], [math.pi, 1e300]])
    back = formats.parse_c_header(formats.c_header("t", {"x": a}, {"x": "N"}, []))
    assert np.array_equal(back["T_X"], a)


@pytest.mark.slow
def test_force_table_matches_the_curves(report_dir):
    cols, data = read_csv(report_dir / "exports" / "table_Fz.csv")
    ccols, cdata = read_csv(report_dir / "curves.csv")
    # F(g, I) at I = 0 equals F0 in curves.csv at the same gaps (independent export paths)
    assert cols == ["gap_m", "current_A", "Fz_N", "error_Fz_N"]
    at0 = data[data[:, 1] == 0.0]
    assert len(at0)
    F0 = dict(zip(cdata[:, 0], cdata[:, ccols.index("F0_N")]))
    for g, _, F, _ in at0:
        assert F == pytest.approx(F0[g], rel=1e-8)


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


# ----------------------------------------------------------------------------- exports other tools read


def _invented_tables(single: bool = False):
    """Force tables of the small invented design of tests/helpers.py (iron-free coil over a disc),
    built as the exports stage builds them, and their C header."""
    from fields import analysis
    from fields.input import geometry

    from helpers import MINIMAL

    d = geometry.loads(MINIMAL, file="minimal.toml")
    c = analysis.axial_curves(d, currents_A=[0.0])
    imax = c.max_current_A
    I = np.linspace(-imax, imax, 5)
    g = c.gaps_m[::10]
    F0, f = c.F0_N[::10], c.ki_N_per_A[::10]
    Fz = F0[:, None] + f[:, None] * I[None, :]
    kz = c.kz0_N_per_m[::10, None] - c.dki_dh_N_per_A_m[::10, None] * I[None, :]
    ki = np.repeat(f[:, None], len(I), axis=1)
    Fgrid = np.linspace(0.0, 3.0 * d.weight_N, 7)
    Iinv = (Fgrid[None, :] - F0[:, None]) / f[:, None]
    Iinv[0, 0] = np.inf  # a non-finite entry must not reach C
    text = formats.force_tables_header(d.name, g, I, Fgrid, Fz, kz, ki, Iinv, imax, d.weight_N,
                                       precision="single" if single else "double")
    return d, dict(g=g, I=I, F=Fgrid, Fz=Fz, Iinv=Iinv, imax=imax), text


def _compile_and_run(tmp_path, header: str, body: str) -> str:
    gcc = shutil.which("gcc")
    if gcc is None:
        pytest.skip("gcc is not installed (Debian package 'gcc')")
    (tmp_path / "tables.h").write_text(header)
    (tmp_path / "main.c").write_text('#include <stdio.h>\n#include "tables.h"\nint main(void)\n{\n' + body
                                     + "    return 0;\n}\n")
    r = subprocess.run([gcc, "-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-o", str(tmp_path / "main"),
                        str(tmp_path / "main.c")], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    run = subprocess.run([str(tmp_path / "main")], capture_output=True, text=True, timeout=60)
    assert run.returncode == 0
    return run.stdout


@pytest.mark.parametrize("single", [False, True], ids=["double", "single"])
def test_c_header_compiles_and_its_lookup_matches_the_python_table(tmp_path, single):
    from scipy.interpolate import RegularGridInterpolator

    d, t, text = _invented_tables(single)
    # C has no NaN or infinity literals: none may appear (ISO C99 has no such constants in source)
    body_text = re.sub(r"/\*.*?\*/", "", text, flags=re.S)
    assert not re.search(r"\b(nan|inf|NAN|INFINITY)\b", body_text)
    p, lp = formats.c_ident(d.name), formats.c_ident(d.name).lower()
    g, I, F = t["g"], t["I"], t["F"]
    # points inside the grid (off the nodes) and one beyond each end (clamped)
    gq = [g[0] + 0.37 * (g[1] - g[0]), 0.5 * (g[3] + g[4]), g[-1] + 1e-3]
    iq = [I[0] + 0.2 * (I[1] - I[0]), 0.3 * I[-1], I[-1] + 0.5]
    lines = "".join(f'    printf("%.17g\\n", (double){lp}_fz_n_at({float(x)!r}, {float(y)!r}));\n' for x in gq for y in iq)
    lines += f'    printf("%.17g %.17g %d\\n", (double){p}_GAP_M_STEP, (double){p}_MAX_CURRENT_A, {p}_GAP_M_LEN);\n'
    fq = [0.5 * (F[1] + F[2]), F[-1] - 1e-6]
    lines += "".join(f'    printf("%d\\n", {p}_IS_NO_VALUE({lp}_i_of_f_a_at({float(x)!r}, {float(y)!r})) ? 1 : 0);\n'
                     for x in gq[:2] for y in fq)
    out = _compile_and_run(tmp_path, text, lines).split("\n")
    # reference: scipy's RegularGridInterpolator (linear = bilinear on a rectangular grid) on the
    # same table, at the query points clamped to the grid as the header says
    ref = RegularGridInterpolator((g, I), t["Fz"], method="linear")
    rtol = 1e-6 if single else 1e-12  # binary32 keeps about 7 digits; binary64 rounding only
    k = 0
    for x in gq:
        for y in iq:
            want = float(ref([[min(max(x, g[0]), g[-1]), min(max(y, I[0]), I[-1])]])[0])
            assert float(out[k]) == pytest.approx(want, rel=rtol, abs=1e-7 if single else 1e-15), (x, y)
            k += 1
    step, imax, n = out[k].split()
    assert float(step) == pytest.approx((g[-1] - g[0]) / (len(g) - 1), rel=rtol) and int(n) == len(g)
    assert float(imax) == pytest.approx(t["imax"], rel=rtol)
    k += 1
    # the inverse table: a cell with a corner beyond the max current (or not finite) has no value
    inv = t["Iinv"]
    for x in gq[:2]:
        for y in fq:
            i = int(np.searchsorted(g, x) - 1)
            j = int(min(np.searchsorted(F, y) - 1, len(F) - 2))
            corners = inv[i:i + 2, j:j + 2]
            expect = not np.all(np.isfinite(corners) & (np.abs(corners) <= t["imax"]))
            assert out[k] == ("1" if expect else "0"), (x, y, corners)
            k += 1


def test_csv_files_read_in_spreadsheet_style_readers(tmp_path):
    import csv

    from fields.input.csvtable import read_csv_meta, read_csv_table
    from fields.io.export import csv_comment_lines, write_csv, write_long_csv

    g = np.array([0.004, 0.0050000000000000001, 1 / 3])
    I = np.array([-1.2, 0.0, 1.2])
    F = g[:, None] * 10.0 + I[None, :] / 7.0
    path = write_long_csv(tmp_path / "table_Fz.csv", {"gap_m": g, "current_A": I}, {"Fz_N": F},
                          ["# hoverfield test", "# design: invented", "# upward force on a grid"])
    text = path.read_text()
    assert text.splitlines()[0] == "gap_m,current_A,Fz_N"  # the header is the first line
    # Python's csv module (RFC 4180 dialect) with the header as field names
    rows = list(csv.DictReader(text.splitlines()))
    assert len(rows) == g.size * I.size
    for r, (a, b) in zip(rows, [(a, b) for a in range(3) for b in range(3)]):
        # full precision: float(repr(x)) == x for every binary64 x (Python language reference,
        # "Floating point arithmetic", repr gives the shortest round-tripping text)
        assert float(r["gap_m"]) == g[a] and float(r["current_A"]) == I[b] and float(r["Fz_N"]) == F[a, b]
    # numpy.genfromtxt with names from the header, as a spreadsheet-style reader
    arr = np.genfromtxt(path, delimiter=",", names=True)
    assert arr.dtype.names == ("gap_m", "current_A", "Fz_N")
    np.testing.assert_array_equal(arr["Fz_N"].reshape(3, 3), F)
    meta = read_csv_meta(path)
    assert meta["design"] == "invented" and meta["notes"][-1] == "upward force on a grid"
    assert [c["unit"] for c in meta["columns"]] == ["m", "A", "N"]
    # names with spaces (a coil called "lift coil") lose them; empty cells for no value
    p2 = write_csv(tmp_path / "heat.csv", ["gap_m", "lift coil_power_W"], [[0.01, math.nan], [0.02, 1.5]])
    head, body, _ = read_csv_table(p2)
    assert head == ["gap_m", "lift_coil_power_W"] and body[0] == ["0.01", ""]
    arr = np.genfromtxt(p2, delimiter=",", names=True)
    assert math.isnan(arr["lift_coil_power_W"][0]) and arr["lift_coil_power_W"][1] == 1.5
    # comment lines only behind the option: genfromtxt(names=True) would take a "#" line for the
    # names (numpy documentation of genfromtxt, "names"), so a reader must be told to skip it
    with csv_comment_lines():
        p3 = write_csv(tmp_path / "c.csv", ["x_m"], [[0.5]], ["# a note"])
    assert p3.read_text().splitlines()[0] == "# a note"
    assert np.genfromtxt(p3, delimiter=",", names=True, skip_header=1)["x_m"] == 0.5
    assert write_csv(tmp_path / "d.csv", ["x_m"], [[0.5]], ["# a note"]).read_text().startswith("x_m\n")


def test_stl_export_is_in_millimetres_with_one_named_solid_per_body(tmp_path):
    import trimesh

    from fields.input import geometry
    from fields.model import meshes

    from helpers import MINIMAL

    d = geometry.loads(MINIMAL, file="minimal.toml")
    path = tmp_path / f"geometry_{meshes.STL_UNIT}.stl"
    path.write_text(meshes.stl_text_mm(d))
    scene = trimesh.load(str(path))  # trimesh reads each ASCII solid as one named geometry
    assert set(scene.geometry) == {meshes.stl_solid_name(s.name) for s in bodies.design_solids(d)}
    coil = d.coils[0]
    lo, hi = scene.geometry[meshes.stl_solid_name(coil.name)].bounds
    # the invented design's coil: outer radius 15 mm, height 20 mm, centre at z = 30 mm; the
    # faceted radius is the equal-area polygon's (Zwillinger, CRC Standard Mathematical Tables)
    r_poly_mm = meshes.polygon_radius_m(15e-3, meshes.MESH_SEGMENTS) * 1e3
    assert hi[0] == pytest.approx(r_poly_mm, rel=1e-6) and -lo[0] == pytest.approx(r_poly_mm, rel=1e-6)
    assert lo[2] == pytest.approx(20.0, abs=1e-6) and hi[2] == pytest.approx(40.0, abs=1e-6)
    mag = scene.geometry[meshes.stl_solid_name(d.floater.magnets[0].name)]
    assert mag.extents[2] == pytest.approx(5.0, abs=1e-6)  # the 5 mm disc, in mm
    assert all(m.is_watertight for m in scene.geometry.values())


@pytest.mark.slow
def test_exported_mesh_is_closed_with_the_model_volume(report_dir):
    import trimesh

    d = load(SUSPENSION)
    mesh = trimesh.load(str(report_dir / "exports" / "geometry_mm.stl"), force="mesh")
    assert mesh.is_watertight
    model_mm3 = sum(s.volume_m3 for s in bodies.design_solids(d)) * 1e9
    # the STL text keeps 10 significant digits per coordinate: volume agrees to ~1e-8 relative
    assert mesh.volume == pytest.approx(model_mm3, rel=1e-6)


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
def test_design_without_coils_reports_without_control_and_exits_0(tmp_path):
    # the repulsive base without its coils: passive levitation, nothing to control; no failure
    # (common practice, no source: a passive design is a result, not an error)
    text = REPULSIVE.read_text()
    text = re.sub(r"\[\[coils\]\].*?(?=\[\[coils\]\]|\[floater\])", "", text, flags=re.S)
    text = re.sub(r"(?m)^supply_voltage = .*$", "", text)
    p = tmp_path / "nocoils.toml"
    p.write_text(text)
    out = tmp_path / "out"
    rc = cli.main(["report", str(p), "-o", str(out), "-q"])
    assert rc == 0
    status = json.loads((out / "run_status.json").read_text())
    assert not status["stages_failed"] and "stability" in status["stages_done"]
    assert (out / "stability.json").exists() and (out / "curves.csv").exists()
    assert "What failed" not in (out / "report.html").read_text()


@pytest.mark.slow
def test_failed_stage_is_reported_and_the_rest_kept(tmp_path):
    # one stage fails (a file stands where the exports folder must go): it is reported, the rest kept
    text = REPULSIVE.read_text()
    p = tmp_path / "d.toml"
    p.write_text(text)
    out = tmp_path / "out"
    out.mkdir()
    (out / "exports").write_text("a file where the exports folder should be")
    rc = cli.main(["report", str(p), "-o", str(out), "-q"])
    assert rc == 1
    html = (out / "report.html").read_text()
    assert "What failed" in html and "exports" in html
    status = json.loads((out / "run_status.json").read_text())
    assert "exports" in status["stages_failed"] and "stability" in status["stages_done"]


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


# ----------------------------------------------------------------------------- the report page


class _Page(HTMLParser):
    """Links, ids, the warnings box text and the nav of the report."""

    def __init__(self):
        super().__init__()
        self.hrefs, self.ids, self.warn, self.verdict = [], set(), [], []
        self._box = None
        self._depth = 0

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if "id" in a:
            self.ids.add(a["id"])
        if tag == "a" and "href" in a:
            self.hrefs.append(a["href"])
        if tag == "div" and a.get("class") in ("warn", "verdict"):
            self._box, self._depth = a["class"], 1
        elif tag == "div" and self._box:
            self._depth += 1

    def handle_endtag(self, tag):
        if tag == "div" and self._box:
            self._depth -= 1
            if self._depth == 0:
                self._box = None

    def handle_data(self, data):
        if self._box == "warn":
            self.warn.append(data)
        elif self._box == "verdict":
            self.verdict.append(data)


@pytest.mark.slow
def test_report_has_contents_file_links_and_no_machine_paths(report_dir):
    html = (report_dir / "report.html").read_text(encoding="utf-8")
    p = _Page()
    p.feed(html)
    # the table of contents: every h2 has an id, and every "#..." link resolves to one
    assert '<nav class="toc">' in html
    h2 = re.findall(r"<h2[^>]*>", html)
    assert h2 and all('id="' in h for h in h2)
    local = [h[1:] for h in p.hrefs if h.startswith("#")]
    assert len(local) == len(h2) and set(local) <= p.ids
    # every file of the run (but the page itself) is linked, with a one-line description
    files = sorted(q.relative_to(report_dir).as_posix() for q in report_dir.rglob("*")
                   if q.is_file() and q.name not in ("report.html", "run_status.json"))
    for f in files:
        m = re.search(rf'<li><a href="{re.escape(f)}"><code>[^<]*</code></a> <small>([^<]+)</small></li>', html)
        assert m and m.group(1).strip(), f
        assert (report_dir / f).is_file()
    # no folder of this machine: neither the output folder, the repository nor the home folder
    for folder in {str(report_dir), str(ROOT), str(Path.home())}:
        assert folder not in html, folder
    assert "input <code>" in html and "suspension.toml</code>" in html
    # nothing cut off at the right edge: tables scroll, pre scrolls, images shrink to the page
    # (CSS Overflow Module Level 3, overflow-x; CSS 2.1, max-width)
    assert re.search(r"\.scroll\{[^}]*overflow-x:auto", html) and re.search(r"pre\{[^}]*overflow-x:auto", html)
    assert re.search(r"img\{[^}]*max-width:100%", html)
    assert html.count("<table>") == html.count('<div class="scroll"><table>')


@pytest.mark.slow
def test_error_figures_carry_units_and_round_designs_get_no_spin_warning(report_dir):
    html = (report_dir / "report.html").read_text(encoding="utf-8")
    # every number whose key path names an error is followed by a unit
    errs = re.findall(r'data-path="([^"]*error[^"]*)"[^>]*>[^<]*</span>( [^<\s,;)]+)?', html)
    assert errs
    for path, unit in errs:
        assert unit and unit.strip(), path
    p = _Page()
    p.feed(html)
    warn, verdict = " ".join(p.warn), " ".join(p.verdict)
    # the suspension floater is round: its spin is neutral by symmetry, said in the verdict only
    assert "spin about vertical: neutral" in verdict
    assert "spin about vertical" not in warn
    stab = json.loads((report_dir / "stability.json").read_text())
    assert not any("spin about vertical" in n for n in stab["notes"])
