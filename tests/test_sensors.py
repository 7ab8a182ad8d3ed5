"""Tests of the sensor modules (fields.devices.beam, hall, placement, linearity): beam-gate occlusion against exact plane geometry, Hall readings against
closed-form coil fields and the general-purpose magpylib object interface."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from scipy import integrate
from scipy.constants import mu_0

from fields.devices.beam import beam_blocked_fraction, beam_response
from fields.devices.beam_placement import beam_placement_table
from fields.devices.hall import hall_response
from fields.devices.keepout import keepout
from fields.devices.linearity import inverse_table, linear_range
from fields.devices.placement import placement_table
from fields.errors import InputError, SolverError
from fields.input.tables import G_STANDARD
from fields.model.design import BeamGate, Coil, Design, Floater, HallSensor, Magnet, Study
from fields.model.polygon import circle_rectangle_area


def make_design(floater_magnets, coils=(), magnets=(), gap_origin=(0.0, 0.0, 0.0), op=0.01):
    """Invented test design: the floater hangs at z = -gap below the origin."""
    fl = Floater("floater", tuple(floater_magnets), 0.0, (0, 0, 0), 0.02, (0, 0, 0),
                 ((1e-6, 0, 0), (0, 1e-6, 0), (0, 0, 1e-6)))
    st = Study(0.005, 0.02, 31, "coil", gap_origin, (0.0, 0.0, -1.0), op, (0.0,), 0.0, 1, 0.0, 1,
               (0.0, 0.0, -G_STANDARD), 12.0)
    return Design("test", "invented test design", "tests", tuple(coils), (), tuple(magnets), fl, (), st)


def segment_area(R, d):
    """Area of the circular segment beyond a chord at distance d from the centre (-R <= d <= R):
    A = R^2 acos(d/R) - d sqrt(R^2 - d^2) (CRC Standard Mathematical Tables, 'circular segment')."""
    d = np.clip(d, -R, R)
    return R * R * np.arccos(d / R) - d * np.sqrt(R * R - d * d)


# ------------------------------------------------------------------------------ beam gate

@pytest.mark.parametrize("body", ["sphere", "disc_face_on", "ring_face_on"])
def test_circle_occlusion_vs_circular_segment(body):
    R = 0.01
    if body == "sphere":
        mags = [Magnet("s", "sphere", (2 * R,), (0, 0, 1.2))]
    elif body == "disc_face_on":  # cylinder axis turned onto the beam direction x
        mags = [Magnet("d", "cylinder", (2 * R, 0.004), (0, 0, 1.2), rotvec_rad=(0, np.pi / 2, 0))]
    else:
        mags = [Magnet("r", "ring", (R, 2 * R, 0.004), (0, 0, 1.2), rotvec_rad=(0, np.pi / 2, 0))]
    d = make_design(mags)
    # beam: 100 mm wide, bottom edge at z = -0.012, top edge far above the floater
    beam = BeamGate("b", height_m=0.038, beam_height_m=0.1, beam_width_m=0.1)
    gaps = np.linspace(0.0025, 0.0215, 9)
    got = beam_blocked_fraction(d, beam, gaps)
    dist = -0.012 - (-gaps)  # bottom edge height minus circle centre height
    ref = segment_area(R, dist)
    if body == "ring_face_on":
        ref = ref - segment_area(R / 2, dist)  # light passes through the hole
    assert np.allclose(got, ref / (0.1 * 0.1), rtol=1e-12, atol=1e-15)


def test_circle_rectangle_area_vs_quadrature():
    # chord length integrated by scipy quad, independently of the piecewise closed form
    rng = np.random.default_rng(5)
    for _ in range(20):
        cx, cy = rng.uniform(-1, 1, 2)
        R = rng.uniform(0.2, 1.5)
        x0, y0 = rng.uniform(-2, 1, 2)
        x1, y1 = x0 + rng.uniform(0.1, 2), y0 + rng.uniform(0.1, 2)

        def chord(y):
            c = np.sqrt(max(R * R - (y - cy) ** 2, 0.0))
            return max(0.0, min(x1, cx + c) - max(x0, cx - c))
        pts = [cy - R, cy + R] + [cy + s * np.sqrt(R * R - (x - cx) ** 2) for x in (x0, x1) for s in (-1, 1)
                                  if abs(x - cx) < R]
        lo, hi = max(y0, cy - R), min(y1, cy + R)
        ref = 0.0 if hi <= lo else integrate.quad(chord, lo, hi, points=[p for p in pts if lo < p < hi],
                                                  epsabs=1e-13, limit=200)[0]
        assert circle_rectangle_area(cx, cy, R, x0, x1, y0, y1) == pytest.approx(ref, abs=1e-11)


def test_overlapping_silhouettes_vs_lens_formula():
    # two spheres side by side along y (across the beam), overlapping: union = 2 pi R^2 - lens,
    # lens = 2 R^2 acos(s / 2R) - (s / 2) sqrt(4 R^2 - s^2) (CRC tables, circle-circle intersection)
    R, s = 0.005, 0.006
    mags = [Magnet("a", "sphere", (2 * R,), (0, 0, 1.2), position_m=(0, -s / 2, 0)),
            Magnet("b", "sphere", (2 * R,), (0, 0, 1.2), position_m=(0, s / 2, 0))]
    d = make_design(mags)
    beam = BeamGate("b", height_m=-0.01, beam_height_m=0.05, beam_width_m=0.05)
    got = beam_blocked_fraction(d, beam, [0.01])[0] * 0.05 * 0.05
    lens = 2 * R * R * np.arccos(s / (2 * R)) - s / 2 * np.sqrt(4 * R * R - s * s)
    assert got == pytest.approx(2 * np.pi * R * R - lens, rel=1e-8)


def test_vertical_disc_is_a_rectangle_with_linear_output():
    # disc of diameter 20 mm, height 5 mm, axis vertical: a 20 x 5 mm rectangle seen side-on; with a
    # 4 mm tall beam wider than the disc, the blocked fraction changes by (20/30)/4 per mm of gap
    # while the disc's lower face crosses the beam (gaps 7.5 to 11.5 mm)
    d = make_design([Magnet("disc", "cylinder", (0.02, 0.005), (0, 0, 1.3))])
    beam = BeamGate("b", height_m=-0.012, beam_height_m=0.004, beam_width_m=0.03)
    r = beam_response(d, beam, np.linspace(0.005, 0.02, 31), operating_gap_m=0.0095)
    top = -r.gaps_m + 0.0025
    bottom = -r.gaps_m - 0.0025
    overlap = np.clip(np.minimum(top, -0.010) - np.maximum(bottom, -0.014), 0, None)
    assert np.allclose(r.blocked_fraction, overlap * 0.02 / (0.004 * 0.03), atol=1e-13)
    assert r.gain_per_mm == pytest.approx(0.02 / 0.03 / 4.0, rel=1e-6)
    # the linear stretch ends at the kinks, 7.5 and 11.5 mm (the faces leave the beam): the edges are
    # found between grid points; within 2 um = twice the central-difference step, which smears a kink
    assert r.linear_range_m == pytest.approx((0.0075, 0.0115), abs=2e-6)
    assert r.lateral_slope_per_m[0] == 0.0  # along the beam: the beam is unbounded along its direction


def test_beam_direction_must_be_horizontal():
    d = make_design([Magnet("s", "sphere", (0.01,), (0, 0, 1.2))])
    with pytest.raises(InputError, match=r"sensor b: direction must be horizontal"):
        beam_blocked_fraction(d, BeamGate("b", 0.0, 0.01, 0.01, direction=(1.0, 0.0, 0.5)), [0.01])


# ---------------------------------------------------------------------------------- Hall

def montgomery_on_axis_T_per_A(a, b, h, N, z):
    """On-axis field of a thick uniform-current coil (Montgomery, Solenoid Magnet Design, 1969, ch. 1):
    B = mu0 j / 2 [ z2 ln((b + sqrt(b^2 + z2^2)) / (a + sqrt(a^2 + z2^2))) - (same at z1) ],
    z1, z2 the distances from the observer to the faces (signed), j = N / ((b - a) h)."""
    j = N / ((b - a) * h)

    def F(t):
        return t * np.log((b + np.sqrt(b * b + t * t)) / (a + np.sqrt(a * a + t * t)))
    return mu_0 * j / 2 * (F(z + h / 2) - F(z - h / 2))


def test_hall_coil_crosstalk_vs_montgomery():
    a, b, h, N = 0.01, 0.02, 0.015, 300
    c = Coil("c", a, b, h, N, (0, 0, 0.03), (0, 0, 1), 0.5, 1.0)
    d = make_design([Magnet("disc", "cylinder", (0.02, 0.005), (0, 0, 1.3))], coils=(c,))
    for zs in (0.0, 0.03, 0.045, 0.07):  # below, centre, face region outside the winding, above
        s = HallSensor("h", (0.0, 0.0, zs), (0.0, 0.0, 1.0), 1.0)
        r = hall_response(d, s, [0.01, 0.012])
        ref = montgomery_on_axis_T_per_A(a, b, h, N, zs - 0.03)
        assert r.coil_air_T_per_A[0] == pytest.approx(ref, rel=1e-10)
        assert np.allclose(r.coil_T_per_A[:, 0], ref, rtol=1e-10)  # no core: the same
        assert r.compensation_T_per_A[0] == pytest.approx(ref, rel=1e-10)


def test_hall_floater_and_offset_vs_magpylib_objects():
    import magpylib as magpy

    fm = Magnet("disc", "cylinder", (0.02, 0.005), (0, 0, 1.3))
    fixed = Magnet("base", "cuboid", (0.01, 0.01, 0.004), (0, 0, 1.2), position_m=(0.03, 0, -0.05))
    d = make_design([fm], magnets=(fixed,))
    s = HallSensor("h", (0.004, 0.002, -0.001), (0.2, 0.0, 1.0), 1.0)
    gaps = np.array([0.006, 0.01, 0.015])
    r = hall_response(d, s, gaps)
    ax = np.array([0.2, 0.0, 1.0]) / np.linalg.norm([0.2, 0.0, 1.0])
    base = magpy.magnet.Cuboid(polarization=(0, 0, 1.2), dimension=(0.01, 0.01, 0.004), position=(0.03, 0, -0.05))
    assert r.fixed_magnets_T == pytest.approx(base.getB(s.position_m) @ ax, rel=1e-12)
    for g, val in zip(gaps, r.floater_T):
        mag = magpy.magnet.Cylinder(polarization=(0, 0, 1.3), dimension=(0.02, 0.005), position=(0, 0, -g))
        assert val == pytest.approx(mag.getB(s.position_m) @ ax, rel=1e-12)
    assert np.allclose(r.reading_zero_current_T, r.floater_T + r.fixed_magnets_T, rtol=1e-12)


def test_hall_saturation_and_compensation():
    c = Coil("c", 0.01, 0.02, 0.015, 300, (0, 0, 0.03), (0, 0, 1), 0.5, 2.0)
    d = make_design([Magnet("disc", "cylinder", (0.02, 0.005), (0, 0, 1.3))], coils=(c,))
    s = HallSensor("h", (0.0, 0.0, 0.0), (0.0, 0.0, 1.0), 0.02)
    r = hall_response(d, s)
    sat = [n for n in r.notices if n.code == "hall_saturates"]
    assert r.saturates and len(sat) == 1 and sat[0].values["range_T"] == 0.02
    assert sat[0].values["worst_T"] == r.worst_case_T
    assert r.worst_case_T == pytest.approx(np.max(np.abs(r.reading_zero_current_T) + 2.0 * np.abs(r.coil_T_per_A[:, 0])))
    I = np.array([0.7])
    assert np.allclose(r.compensated_T(r.reading_T(I), I), r.reading_zero_current_T, rtol=1e-12)


def test_placement_table_sensitivity_vs_finite_difference():
    import magpylib as magpy

    c = Coil("c", 0.01, 0.02, 0.015, 300, (0, 0, 0.03), (0, 0, 1), 0.5, 1.0)
    d = make_design([Magnet("disc", "cylinder", (0.02, 0.005), (0, 0, 1.3))], coils=(c,))
    cands = np.array([[0.0, 0.0, 0.0], [0.015, 0.0, -0.005], [0.03, 0.0, -0.005], [0.03, 0.0, -0.01]])
    t = placement_table(d, cands, (0, 0, 1), 0.01)
    # on the floater's mid-plane B_z is even in the floater's height: no sensitivity, useless position
    assert abs(t.sensitivity_T_per_m[3]) < 1e-6 and t.worst_crosstalk_gap_m_per_A[3] > 1.0
    h = 1e-5
    for i, p in enumerate(cands[:3]):
        Bp = magpy.magnet.Cylinder(polarization=(0, 0, 1.3), dimension=(0.02, 0.005), position=(0, 0, -0.01 - h)).getB(p)[2]
        Bm = magpy.magnet.Cylinder(polarization=(0, 0, 1.3), dimension=(0.02, 0.005), position=(0, 0, -0.01 + h)).getB(p)[2]
        fd = (Bp - Bm) / (2 * h)  # second-order difference; truncation (h/gap)^2 ~ 1e-6
        assert t.sensitivity_T_per_m[i] == pytest.approx(fd, rel=1e-5)
        assert t.crosstalk_gap_m_per_A[i, 0] == pytest.approx(abs(t.crosstalk_T_per_A[i, 0] / t.sensitivity_T_per_m[i]))
    ok = np.isfinite(t.linear_half_width_m)
    assert ok[t.best_index] and t.linear_half_width_m[t.best_index] == np.nanmax(t.linear_half_width_m)
    assert len(t.rows()) == 4


# ----------------------------------------------------------------------------- inverse table

def test_inverse_table_roundtrip_and_non_monotone_error():
    gaps = np.linspace(0.005, 0.02, 31)
    reading = 0.1 / (1 + (gaps / 0.01) ** 3)  # a monotone invented curve
    t = inverse_table(gaps, reading)
    gq = np.array([0.0061, 0.0123, 0.019])
    assert np.allclose(t(0.1 / (1 + (gq / 0.01) ** 3)), gq, atol=2e-6)  # PCHIP on a 0.5 mm grid
    with pytest.raises(InputError, match="InverseTable: reading must be within"):
        t(1.0)
    with pytest.raises(SolverError, match="must be strictly monotone in the gap"):
        inverse_table(gaps, np.cos(gaps / 0.003))


# ------------------------------------------------------- continuous linear range, sideways sensitivity

def cylinder_on_axis(Br, R, L, z):
    """On-axis B_z of a uniformly magnetised cylinder (polarisation Br along +z), centre at z = 0, and its
    derivative: the equivalent finite solenoid of surface current Br / mu0, Biot-Savart on the axis
    (e.g. Griffiths, Introduction to Electrodynamics, 4th ed., problem 5.11; problem number from memory):
    B = Br/2 [(z + L/2) / sqrt(R^2 + (z + L/2)^2) - (z - L/2) / sqrt(R^2 + (z - L/2)^2)],
    dB/dz = Br/2 [R^2 / (R^2 + (z + L/2)^2)^1.5 - R^2 / (R^2 + (z - L/2)^2)^1.5]."""
    a, b = z + L / 2, z - L / 2
    B = Br / 2 * (a / np.sqrt(R * R + a * a) - b / np.sqrt(R * R + b * b))
    dB = Br / 2 * (R * R / (R * R + a * a) ** 1.5 - R * R / (R * R + b * b) ** 1.5)
    return B, dB


def test_linear_range_between_coarse_grid_points_vs_closed_form():
    from scipy.optimize import brentq

    Br, R, L, zs, g0 = 1.3, 0.01, 0.005, 0.002, 0.01
    d = make_design([Magnet("disc", "cylinder", (2 * R, L), (0, 0, Br))])
    gaps = np.array([0.005, 0.01, 0.015, 0.02])  # coarse: the range falls between grid points
    r = hall_response(d, HallSensor("h", (0.0, 0.0, zs), (0.0, 0.0, 1.0), 1.0), gaps, g0)

    def slope(g):  # the sensor sits zs + g above the disc's centre; d/dgap = d/dz there
        return cylinder_on_axis(Br, R, L, zs + g)[1]
    s0 = slope(g0)
    assert r.sensitivity_at_operating_T_per_m == pytest.approx(s0, rel=1e-7)  # FD step 1 um: (h/z)^2 ~ 1e-8
    assert r.reading_at_operating_T == pytest.approx(cylinder_on_axis(Br, R, L, zs + g0)[0], rel=1e-12)
    # both grid neighbours are outside the 10 % band: the grid-walking rule had no range at all here
    assert abs(slope(0.005) - s0) > 0.1 * abs(s0) and abs(slope(0.015) - s0) > 0.1 * abs(s0)
    m = lambda g: abs(slope(g) - s0) - 0.1 * abs(s0)  # noqa: E731
    ref = (brentq(m, 0.005, g0 - 1e-9, xtol=1e-14), brentq(m, g0 + 1e-9, 0.015, xtol=1e-14))
    # edge search: 4 rounds of 16 samples shrink a 5 mm bracket to 60 nm before the final linear zero
    assert r.linear_range_m == pytest.approx(ref, abs=5e-8)


def test_linear_range_none_only_without_slope():
    # a flat reading has no range (and says so); a constant slope fills the whole grid
    g = np.linspace(0.0, 1.0, 5)
    assert all(np.isnan(linear_range(g, np.zeros(5), 0.5, 0.0)))
    assert linear_range(g, np.ones(5), 0.5, 1.0) == (0.0, 1.0)


@pytest.mark.parametrize("axis_index", [0, 1])
def test_hall_sideways_sensitivity_vs_paraxial_expansion(axis_index):
    # near the axis of an axisymmetric field div B = 0 gives B_rho = -(rho / 2) dB_z/dz (paraxial expansion;
    # e.g. Jackson, Classical Electrodynamics, 3rd ed., sec. 5.7 problem set, from memory): moving the
    # floater by +dx puts the sensor at -dx in the floater's frame, so dB_x/dx = +1/2 dB_z/dz
    Br, R, L, zs, g0 = 1.3, 0.01, 0.005, 0.002, 0.01
    d = make_design([Magnet("disc", "cylinder", (2 * R, L), (0, 0, Br))])
    ax = np.eye(3)[axis_index]
    r = hall_response(d, HallSensor("h", (0.0, 0.0, zs), tuple(ax), 1.0), [0.008, 0.012], g0)
    dBz = cylinder_on_axis(Br, R, L, zs + g0)[1]
    assert r.lateral_sensitivity_T_per_m[axis_index] == pytest.approx(0.5 * dBz, rel=1e-6)
    assert abs(r.lateral_sensitivity_T_per_m[1 - axis_index]) < 1e-8 * abs(dBz)
    rz = hall_response(d, HallSensor("h", (0.0, 0.0, zs), (0.0, 0.0, 1.0), 1.0), [0.008, 0.012], g0)
    assert np.all(np.abs(rz.lateral_sensitivity_T_per_m) < 1e-6 * abs(dBz))  # B_z is even in the offset


def test_hall_sideways_sensitivity_off_axis_vs_magpylib():
    import magpylib as magpy

    d = make_design([Magnet("disc", "cylinder", (0.02, 0.005), (0, 0, 1.3))])
    p = (0.006, -0.004, 0.001)
    r = hall_response(d, HallSensor("h", p, (0.0, 0.0, 1.0), 1.0), [0.008, 0.012], 0.01)
    h = 1e-5
    for k in range(2):  # independent evaluation: magpylib's object interface, second-order differences
        e = np.eye(3)[k] * h
        Bp = magpy.magnet.Cylinder(polarization=(0, 0, 1.3), dimension=(0.02, 0.005), position=(0, 0, -0.01) + e).getB(p)[2]
        Bm = magpy.magnet.Cylinder(polarization=(0, 0, 1.3), dimension=(0.02, 0.005), position=(0, 0, -0.01) - e).getB(p)[2]
        assert r.lateral_sensitivity_T_per_m[k] == pytest.approx((Bp - Bm) / (2 * h), rel=1e-5)


def test_beam_sideways_slope_vs_chord_lengths():
    # a sphere set 3 mm off the gap axis (across the beam, +y): moving it by dy changes the blocked area by
    # (L(x0 - c) - L(x1 - c)) dy, L(u) = 2 sqrt(R^2 - u^2) the circle's chord (elementary geometry); the
    # beam (8 mm wide, 40 mm tall) covers the circle vertically
    R, c, w, H = 0.005, 0.003, 0.008, 0.04
    d = make_design([Magnet("s", "sphere", (2 * R,), (0, 0, 1.2), position_m=(0, c, 0))])
    r = beam_response(d, BeamGate("b", -0.01, H, w), [0.009, 0.011], 0.01)

    def chord(u):
        return 2 * np.sqrt(max(R * R - u * u, 0.0))
    ref = (chord(-w / 2 - c) - chord(w / 2 - c)) / (w * H)
    assert r.lateral_slope_per_m[1] == pytest.approx(ref, rel=1e-6)
    assert r.lateral_slope_per_m[0] == 0.0


# ------------------------------------------------------------------------------- placement studies

AIR = Path(__file__).resolve().parent / "data" / "air_suspension.toml"


def test_keepout_vs_disc_geometry():
    from fields.input.geometry import load

    d = load(AIR)  # coil underside at z = 70 mm (7 mm bore), N42 disc 12.7 x 6.35 mm below it, gaps 4 .. 30 mm
    pts = np.array([[0, 0, 0.060], [0.015, 0, 0.085], [0, 0, 0.085], [0.0095, 0, 0.050], [0, 0, 0.068]])
    k = keepout(d, pts)
    assert k.reason == ("floater_travel", "inside_body", "", "floater_travel", "")
    assert k.nearest_body[1] == "lift coil"
    # plane geometry: the disc's faces sweep z from its top at gap_min down to its bottom at gap_max (the
    # study's gap axis places the disc; the gap is its clearance to the bore's corner); on the axis at 60 mm
    # the deepest pose puts the point at the disc's mid-plane, 3.175 mm inside
    assert k.travel_distance_m[0] == pytest.approx(-0.003175, abs=1e-9)
    # 9.5 mm off the axis with the floater up to 6 mm sideways: 6.35 - (9.5 - 6) = 2.85 mm inside
    assert k.travel_distance_m[3] == pytest.approx(-0.00285, abs=1e-7)
    top = d.study.floater_origin_m([d.study.gap_min_m])[0, 2] + 0.003175
    assert k.travel_distance_m[4] == pytest.approx(0.068 - top, abs=1e-9)  # above the disc's top at gap_min
    k0 = keepout(d, pts[3:4], lateral_span_m=0.0)  # without sideways travel: 9.5 - 6.35 mm outside
    assert k0.reason == ("",) and k0.travel_distance_m[0] == pytest.approx(0.00315, abs=1e-9)


def test_placement_excludes_and_has_no_best_when_nothing_is_usable():
    from fields.input.geometry import load

    d = load(AIR)
    cands = np.array([[0, 0, 0.060], [0.015, 0, 0.085], [0, 0, 0.068], [0, 0, 0.069]])
    t = placement_table(d, cands, (0, 0, 1), range_T=0.1)
    # 68 and 69 mm read more than 100 mT with the coil at max current (the reading is > 0.3 T there)
    assert t.status == ("floater_travel", "inside_body", "saturates", "saturates")
    assert t.best_index is None and t.counts()["usable"] == 0
    t2 = placement_table(d, cands, (0, 0, 1))  # no range given: the two clear candidates compete
    assert t2.status[2:] == ("usable", "usable")
    assert t2.best_index == 2 + int(np.argmax(t2.linear_half_width_m[2:]))  # widest range (no 1 % tie here)
    assert abs(t2.linear_half_width_m[2] - t2.linear_half_width_m[3]) > 0.01 * t2.linear_half_width_m[2]


def test_beam_placement_vs_rectangle_geometry():
    # disc 20 x 5 mm seen side-on, 4 mm tall beam: the output is linear while one face is in the beam, so a
    # beam centred on a face's height at the operating gap has half-width 2 mm (plane geometry); a beam
    # between the faces is fully blocked (flat); a beam at the coil's height is crossed by the coil
    g0 = 0.0095
    c = Coil("c", 0.01, 0.02, 0.015, 300, (0, 0, 0.03), (0, 0, 1), 0.5, 1.0)
    d = make_design([Magnet("disc", "cylinder", (0.02, 0.005), (0, 0, 1.3))], coils=(c,))
    gate = BeamGate("b", 0.0, 0.004, 0.03)
    heights = np.array([-g0 - 0.0025, -g0, -g0 + 0.0025, -g0 - 0.0035, 0.03])
    t = beam_placement_table(d, gate, heights, g0, np.linspace(0.005, 0.02, 16))
    assert t.status == ("usable", "flat_output", "usable", "usable", "blocked_by_body")
    assert t.linear_half_width_m[[0, 2]] == pytest.approx([0.002, 0.002], abs=2e-6)
    assert t.linear_half_width_m[3] == pytest.approx(0.001, abs=2e-6)
    assert t.best_index in (0, 2) and abs(t.gain_per_mm[0]) == pytest.approx(0.02 / 0.03 / 4, rel=1e-6)


@pytest.mark.slow
def test_sensors_stage_writes_sideways_sensitivity_and_placement(tmp_path):
    import csv
    import json

    from fields.input.geometry import load
    from fields.studies.stages.sensors import run_sensors

    d = load(AIR)
    res = run_sensors(d, tmp_path)
    js = json.loads((tmp_path / "sensors.json").read_text())
    hall = next(s for s in js["sensors"] if s["kind"] == "hall")
    assert hall["lateral_sensitivity_T_per_m"] == list(res.halls[0].lateral_sensitivity_T_per_m)
    rows = list(csv.DictReader(line for line in (tmp_path / "sensors_operating.csv").read_text().splitlines()
                               if not line.startswith("#")))
    assert [r["sensor"] for r in rows] == ["beam gate", "hall under core"]
    assert float(rows[1]["d_output_d_gap_per_m"]) == pytest.approx(res.halls[0].sensitivity_at_operating_T_per_m)
    # the example's candidate line lies mostly inside the floater's travel: counted and said, no best
    pl = js["placement"]
    assert pl["counts"]["floater_travel"] == 11 and pl["excluded"] == 11 and "best_position_m" not in pl
    assert any("no candidate is usable" in w and "11 inside the floater's travel" in w for w in res.warnings)
    assert js["beam_placement"][0]["best_height_m"] is not None


def test_sideways_hall_sensors_get_no_gap_table_and_no_function_names(tmp_path):
    # the repulsive example's Hall sensors sense x and y: on the axis their reading does not
    # change with the gap (by symmetry: B_x = B_y = 0 on the axis of an axisymmetric floater;
    # common practice, no source), so there is no gap table to invert and the warning says why
    # in words, without an internal function name
    from fields.input.geometry import load
    from fields.studies.stages.sensors import run_sensors

    from helpers import REPULSIVE

    res = run_sensors(load(REPULSIVE), tmp_path)
    assert not any("no inverse table" in w for w in res.warnings)
    assert not any("inverse_table" in w or "hall_inverse_table" in w for w in res.warnings)
    side = [w for w in res.warnings if "does not change with the gap" in w]
    assert len(side) == 2 and all("sideways or tilt" in w for w in side)
    assert not list(tmp_path.glob("inverse_*.csv"))
