"""The geometry loader: examples load, every error case gives its one-line message.

Error messages follow one pattern: "<file>: <key path>: <what> must be <rule>; got <value>."
"""

from __future__ import annotations

import math
import tomllib

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fields.errors import GeometryError, HoverfieldError
from fields.input.geometry import load, loads
from fields.studies.sweep import toml_text

from helpers import EXAMPLES, MINIMAL, SUSPENSION


def _mutate(old: str, new: str) -> str:
    assert old in MINIMAL, old
    return MINIMAL.replace(old, new, 1)


def test_minimal_loads_in_si():
    d = loads(MINIMAL, "m.toml")
    c = d.coils[0]
    assert (c.inner_radius_m, c.outer_radius_m, c.height_m) == pytest.approx((0.005, 0.015, 0.020))
    # floater mass = volume x NdFeB density (7500 kg/m^3, tables) when no payload is given
    vol = math.pi * 0.005**2 * 0.005
    assert d.floater.mass_kg == pytest.approx(vol * 7500.0)
    # gap measured from the coil's underside (z = 20 mm) to the floater top (origin - 2.5 mm)
    origin = d.study.floater_origin_m(0.003)[0]
    assert origin[2] + 0.0025 == pytest.approx(0.020 - 0.003)


@pytest.mark.parametrize("path", EXAMPLES, ids=lambda p: p.name)
def test_examples_load(path):
    d = load(path)
    assert d.invented, "example designs must be marked invented"
    assert d.floater.mass_kg > 0
    assert d.study.gap_min_m < d.study.operating_gap_m < d.study.gap_max_m


def test_suspension_numbers():
    d = load(SUSPENSION)
    c = d.coils[0]
    # AWG 26 bare diameter from ASTM B258: 0.005 in x 92^(10/39) = 0.4049 mm
    assert c.wire_diameter_m == pytest.approx(0.4049e-3, rel=1e-3)
    # turns from the copper fill factor: N = fill (b - a) h / (pi d^2 / 4)
    assert c.turns == round(0.6 * 0.015 * 0.030 / (math.pi * c.wire_diameter_m**2 / 4))
    # payload 30 g at -12 mm, magnet 12.7 x 6.35 mm N42 at the origin: centre of mass by moments
    m_mag = math.pi * 0.00635**2 * 0.00635 * 7500
    assert d.floater.centre_of_mass_m[2] == pytest.approx(-0.012 * 0.030 / (m_mag + 0.030))


ERROR_CASES = [
    # (old text, new text, expected message fragment)
    ('outer_radius = "15 mm"', 'outer_radus = "15 mm"', r"coils\[0\]\.outer_radus: this key must be one the format knows; did you mean \"outer_radius\""),
    ('height = "20 mm"', 'height = "20 kg"', r"coils\[0\]\.height: the value must be a length .*got \"20 kg\""),
    ('height = "20 mm"', 'height = 20', r"coils\[0\]\.height: .*bare numbers have no unit.*got 20"),
    ('height = "20 mm"', 'height = "-20 mm"', r"coils\[0\]\.height: the value must be positive; got \"-20 mm\""),
    ('height = "20 mm"', 'height = "0 mm"', r"coils\[0\]\.height: the value must be positive"),
    ('inner_radius = "5 mm"', 'inner_radius = "15 mm"', r"coils\[0\]\.inner_radius: the value must be smaller than outer_radius"),
    ('turns = 500', 'turns = 5000\nwire_gauge = "AWG 20"', r"coils\[0\]\.turns: the value must be at most \d+ for this winding cross-section"),
    ('turns = 500', 'turns = 500\nwire_gauge = "AWG 30"\nfill_factor = 0.3', r"coils\[0\]\.turns: the value must be consistent with fill_factor 0.3"),
    ('grade = "N42"', 'grade = "N43"', r"floater\.magnets\[0\]\.grade: the value must be a grade from the table"),
    ('grade = "N42"', 'grade = "N42"\ncolour = "red"', r"floater\.magnets\[0\]\.colour: this key must be one the format knows"),
    ('shape = "cylinder"', 'shape = "cilinder"', r"floater\.magnets\[0\]\.shape: .*did you mean \"cylinder\""),
    ('gap_min = "3 mm"', 'gap_min = "30 mm"', r"study\.gap_min: the value must be smaller than gap_max"),
    ('supply_voltage = "12 V"', 'supply_voltage = "12 A"', r"study\.supply_voltage: the value must be a voltage"),
    ('position = ["0 mm", "0 mm", "30 mm"]', 'position = ["0 mm", "30 mm"]', r"coils\[0\]\.position: the value must be a list of three quantities"),
    ('position = ["0 mm", "0 mm", "30 mm"]', 'position = ["0 mm", "0 mm", 30]', r"coils\[0\]\.position\[2\]: .*no unit"),
    ('nominal_current = "0.5 A"', 'nominal_current = "2 A"', r"coils\[0\]\.nominal_current: the value must be within max_current"),
]


@pytest.mark.parametrize("old, new, pattern", ERROR_CASES)
def test_error_messages(old, new, pattern):
    with pytest.raises(GeometryError, match=pattern) as exc:
        loads(_mutate(old, new), "bad.toml")
    msg = str(exc.value)
    assert msg.startswith("bad.toml: ") and "\n" not in msg


def test_missing_floater():
    text = MINIMAL.split("[floater]")[0] + "[study]\n" + MINIMAL.split("[study]")[1]
    with pytest.raises(GeometryError, match=r"bad.toml: floater: a design must be given a \[floater\] section"):
        loads(text, "bad.toml")


def test_invalid_toml_gives_line_and_column():
    with pytest.raises(GeometryError, match=r"bad.toml: the file must be valid TOML; got .*line 3, column"):
        loads('name = "x"\n\nheight = "5 mm\n', "bad.toml")


def test_overlap_at_operating_gap(tmp_path):
    # a fixed magnet placed where the floater hovers
    text = MINIMAL + '''
[[magnets]]
name = "intruder"
shape = "sphere"
diameter = "6 mm"
grade = "N35"
position = ["0 mm", "0 mm", "8 mm"]
'''
    text = text.replace('supply_voltage = "12 V"', 'supply_voltage = "12 V"\noperating_gap = "10 mm"\ngap_reference = "c"')
    with pytest.raises(GeometryError, match=r"bad.toml: (floater magnet 1 / intruder|intruder / floater magnet 1): solids at the operating gap must be apart \(they overlap\)"):
        loads(text, "bad.toml")


def test_mesh_missing_and_open(tmp_path):
    import trimesh

    text = MINIMAL + '''
[[magnets]]
name = "blob"
shape = "mesh"
file = "blob.stl"
grade = "N35"
position = ["40 mm", "0 mm", "0 mm"]
'''
    with pytest.raises(GeometryError, match=r"magnets\[0\]\.file: the value must be an existing mesh file"):
        loads(text, str(tmp_path / "g.toml"), base_dir=tmp_path)
    box = trimesh.creation.box((5, 5, 5))
    open_box = trimesh.Trimesh(box.vertices, box.faces[:-2])
    open_box.export(tmp_path / "blob.stl")
    with pytest.raises(GeometryError, match=r"magnets\[0\]\.file: the value must be a closed \(watertight\) triangle mesh"):
        loads(text, str(tmp_path / "g.toml"), base_dir=tmp_path)
    box.export(tmp_path / "blob.stl")
    d = loads(text, str(tmp_path / "g.toml"), base_dir=tmp_path)
    # mesh_unit defaults to mm: a 5 mm cube
    assert d.magnets[0].volume_m3 == pytest.approx(125e-9, rel=1e-9)


def test_never_writes_input(tmp_path):
    p = tmp_path / "d.toml"
    p.write_text(MINIMAL)
    before = p.read_bytes(), p.stat().st_mtime_ns
    load(p)
    assert (p.read_bytes(), p.stat().st_mtime_ns) == before


# ---- property-based fuzzing: malformed and random files raise only the tool's own error ----

_values = st.recursive(
    st.one_of(st.integers(-10**6, 10**6), st.floats(allow_nan=True), st.booleans(),
              st.text(max_size=12), st.sampled_from(["5 mm", "-1 mm", "1.3 T", "0 A", "N42", "cylinder", "ring", "12 V", "nan mm", "1e400 mm"])),
    lambda inner: st.one_of(st.lists(inner, max_size=4), st.dictionaries(st.text(max_size=8), inner, max_size=4)),
    max_leaves=10,
)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.text(max_size=200))
def test_fuzz_random_text(text):
    try:
        loads(text, "fuzz.toml")
    except HoverfieldError:
        pass


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.data())
def test_fuzz_mutated_minimal(data):
    doc = tomllib.loads(MINIMAL)
    section = data.draw(st.sampled_from(["coils", "floater", "study", "top"]))
    if section == "coils":
        target = doc["coils"][0]
    elif section == "floater":
        target = doc["floater"]["magnets"][0]
    elif section == "study":
        target = doc["study"]
    else:
        target = doc
    key = data.draw(st.sampled_from(sorted(target) + ["extra"]))
    target[key] = data.draw(_values)
    text = _dump(doc)
    try:
        loads(text, "fuzz.toml")
    except HoverfieldError:
        pass


def _dump(obj) -> str:
    """TOML text for the fuzz test: the project's writer (its round trip is checked below)."""
    return toml_text(obj)


def test_dump_roundtrip_helper():
    assert tomllib.loads(_dump(tomllib.loads(MINIMAL))) == tomllib.loads(MINIMAL)


# ---- the gap comes from the solid model's clearance --------------------------------------------

TILT = '''floater_tilt_axis = [1, 0, 0]
floater_tilt_angle = "20 deg"
'''


def _clearance_at(d, gaps):
    from fields.model.clearance import floater_clearance_m

    P = d.study.floater_origin_m(gaps)
    R = [d.study.floater_rotvec_rad] * len(gaps)
    return floater_clearance_m(d, P, R)


def test_gap_is_the_clearance_under_a_flat_face_at_any_tilt():
    # A 10 x 5 mm disc tilted by 20 deg under the flat underside of a 30 mm core: the nearest
    # point is the disc's highest rim point, r sin(t) + (h/2) cos(t) above its centre (support
    # function of a cylinder, elementary geometry), so gap = core underside - that height.
    coil_block = MINIMAL[MINIMAL.index("[[coils]]"):MINIMAL.index("[floater]")]
    text = MINIMAL.replace(coil_block, '''[[cores]]
name = "k"
shape = "cylinder"
diameter = "30 mm"
height = "20 mm"
position = ["0 mm", "0 mm", "50 mm"]
relative_permeability = 1000
saturation_polarization = "1.6 T"

''').replace("[study]\n", "[study]\n" + TILT)
    d = loads(text, "tilt.toml")
    t = math.radians(20.0)
    top = 0.005 * math.sin(t) + 0.0025 * math.cos(t)
    gaps = [0.003, d.study.operating_gap_m, 0.02]
    for g, c in zip(gaps, _clearance_at(d, gaps)):
        origin = d.study.floater_origin_m(g)[0]
        assert 0.040 - (origin[2] + top) == pytest.approx(g, abs=1e-12)
        assert c == pytest.approx(g, abs=1e-9)  # the loader's gap is the clearance


def test_gap_is_the_clearance_at_a_tilted_pose_under_a_coil_bore():
    # Tilted by 20 deg, the disc's highest point (x = 5 cos 20 = 4.7 mm) lies under the coil's
    # 5 mm bore: the nearest coil feature is the bore's bottom edge, not its flat underside. The
    # loader's gap must equal the clearance there. Independent reference: the least distance
    # from 20000 points on that edge circle to the disc, by clamping in the disc's meridian plane
    # (Ericson, Real-Time Collision Detection, 2005, 5.1.3); the sampling error of the circle
    # (spacing 1.6 um) is far below the 1e-6 m tolerance.
    import numpy as np
    from scipy.spatial.transform import Rotation

    d = loads(MINIMAL.replace('[study]\n', '[study]\n' + TILT), "tilt.toml")
    g = d.study.operating_gap_m
    c = _clearance_at(d, [g])[0]
    assert c == pytest.approx(g, abs=1e-9)
    phi = np.linspace(0, 2 * np.pi, 20000, endpoint=False)
    edge = np.column_stack([0.005 * np.cos(phi), 0.005 * np.sin(phi), np.full(phi.size, 0.020)])
    own = Rotation.from_rotvec(d.study.floater_rotvec_rad).inv().apply(edge - d.study.floater_origin_m(g)[0])
    dr = np.maximum(np.hypot(own[:, 0], own[:, 1]) - 0.005, 0.0)
    dz = np.maximum(np.abs(own[:, 2]) - 0.0025, 0.0)
    assert float(np.hypot(dr, dz).min()) == pytest.approx(g, abs=1e-6)
    # a vertical-extents rule (the coil as a solid disc) would differ: the disc's highest point
    # now sits closer than g to the plane of the coil's underside, because it is under the bore
    top = 0.005 * math.sin(math.radians(20)) + 0.0025 * math.cos(math.radians(20))
    assert 0.020 - (d.study.floater_origin_m(g)[0][2] + top) < g - 1e-5


def test_core_of_relative_permeability_one_is_refused_with_its_key_path():
    # mu_r = 1 is free space: a "core" of it magnetizes nothing, and the iron solve needs
    # chi = mu_r - 1 > 0 (definition of susceptibility; common practice, no source)
    text = MINIMAL.replace("[floater]", '[[cores]]\nname = "air core"\nshape = "cylinder"\ndiameter = "8 mm"\n'
                           'height = "10 mm"\nposition = ["0 mm", "0 mm", "30 mm"]\nrelative_permeability = 1\n'
                           'saturation_polarization = "1.6 T"\n\n[floater]', 1)
    with pytest.raises(GeometryError, match=r"bad.toml: cores\[0\]\.relative_permeability: the value must be greater than 1"):
        loads(text, "bad.toml")
