"""Tests of the sensor modules (fields.devices.beam, hall, placement, linearity): beam-gate occlusion against exact plane geometry, Hall readings against
closed-form coil fields and the general-purpose magpylib object interface."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import integrate
from scipy.constants import mu_0

from fields.devices.beam import beam_blocked_fraction, beam_response
from fields.devices.hall import hall_response
from fields.devices.linearity import inverse_table
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
    # the kinks at 7.5 and 11.5 mm have half the slope (central difference across a corner), so the
    # linear range is the grid points strictly inside: 8.0 .. 11.0 mm
    assert r.linear_range_m == pytest.approx((0.008, 0.011), abs=1e-12)


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
