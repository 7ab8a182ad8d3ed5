"""Tests of the solid model (fields.model.sdf, solids, clearance, meshes, outlines).

References are built independently of the code under test: closest points by clamping
(Ericson, *Real-Time Collision Detection*, 2005, 5.1.3), elementary volumes (pi r^2 h,
4/3 pi r^3), the area of a regular polygon ``(N/2) r^2 sin(2 pi / N)``, and scipy's cKDTree on
dense surface point clouds. All designs here are invented test scenarios.
"""

from __future__ import annotations

import numpy as np
import pytest
import trimesh
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial import cKDTree
from scipy.spatial.transform import Rotation

from fields.errors import GeometryError, InputError
from fields.input.tables import G_STANDARD
from fields.model import clearance as C
from fields.model import meshes as M
from fields.model import outlines as O
from fields.model import sdf as S
from fields.model import solids as B
from fields.model.design import Coil, Core, Design, Floater, Magnet, Study

# Tolerances (named, with the reason)
ROUND = 1e-12  # m; double rounding on millimetre geometry
VOLUME_REL = 1e-9  # exact-volume meshes must match to 1e-9 relative (a design choice; they are exact to ~1e-15)
LIPSCHITZ_SLACK = 1e-12  # m; rounding in |sdf(p) - sdf(q)| <= |p - q|

coord = st.floats(-0.03, 0.03, allow_nan=False)
point = st.tuples(coord, coord, coord)


# ----------------------------------------------------------------------------------------------
# tiny invented designs
# ----------------------------------------------------------------------------------------------


def make_study(gap_m=0.003):
    return Study(gap_min_m=0.001, gap_max_m=0.01, gap_points=5, gap_reference="base",
                 gap_origin_m=(0.0, 0.0, 0.0), gap_direction=(0.0, 0.0, 1.0), operating_gap_m=gap_m,
                 currents_A=(0.0,), lateral_span_m=0.0, lateral_points=1, tilt_span_rad=0.0,
                 tilt_points=1, gravity_m_per_s2=(0.0, 0.0, -G_STANDARD), supply_voltage_V=12.0)


def make_design(fixed=(), floater=(), coils=(), cores=(), gap_m=0.003):
    fl = Floater("floater", tuple(floater), 0.0, (0.0, 0.0, 0.0), 0.01, (0.0, 0.0, 0.0),
                 ((1.0, 0.0, 0.0), (0.0, 1.0, 0.0), (0.0, 0.0, 1.0)))
    return Design("invented", "invented test design", "test", tuple(coils), tuple(cores), tuple(fixed),
                  fl, (), make_study(gap_m))


def disc(name, d, h, z, **kw):
    return Magnet(name, "cylinder", (d, h), (0.0, 0.0, 1.2), position_m=(0.0, 0.0, z), **kw)


# ----------------------------------------------------------------------------------------------
# independent reference distances
# ----------------------------------------------------------------------------------------------


def ref_box2(u, v, u_lo, u_hi, v_lo, v_hi):
    """Signed distance to the rectangle [u_lo,u_hi] x [v_lo,v_hi] by clamping (Ericson 2005, 5.1.3).

    ``u_lo = 0`` is the axis of a solid of revolution, not a face, so it is not a distance there.
    """
    cu, cv = np.clip(u, u_lo, u_hi), np.clip(v, v_lo, v_hi)
    outside = np.hypot(u - cu, v - cv)
    inner = u - u_lo if u_lo > 0 else np.inf
    inside = np.minimum.reduce([np.broadcast_to(inner, np.shape(u)), u_hi - u, v - v_lo, v_hi - v])
    return np.where(outside > 0, outside, -inside)


def ref_ring(p, ri, ro, h):
    """Meridian-plane reduction: nearest point of a solid of revolution shares the point's plane."""
    return ref_box2(np.hypot(p[..., 0], p[..., 1]), p[..., 2], ri, ro, -h / 2, h / 2)


def ref_cuboid(p, a):
    c = np.clip(p, -np.asarray(a) / 2, np.asarray(a) / 2)
    outside = np.linalg.norm(p - c, axis=-1)
    inside = np.min(np.asarray(a) / 2 - np.abs(p), axis=-1)
    return np.where(outside > 0, outside, -inside)


# ----------------------------------------------------------------------------------------------
# primitive SDFs
# ----------------------------------------------------------------------------------------------


@settings(max_examples=200, deadline=None)
@given(point)
def test_primitive_sdfs_equal_clamped_closest_point_distances(p):
    # Reference: closest point by clamping (Ericson 2005, 5.1.3) in 3-D or in the meridian plane.
    p = np.asarray(p)
    assert S.sdf_cylinder(p, 0.01, 0.012) == pytest.approx(ref_ring(p, 0.0, 0.01, 0.012), abs=ROUND)
    assert S.sdf_ring(p, 0.004, 0.015, 0.01) == pytest.approx(ref_ring(p, 0.004, 0.015, 0.01), abs=ROUND)
    assert S.sdf_cuboid(p, (0.02, 0.01, 0.006)) == pytest.approx(ref_cuboid(p, (0.02, 0.01, 0.006)), abs=ROUND)
    assert S.sdf_sphere(p, 0.007) == pytest.approx(np.linalg.norm(p) - 0.007, abs=ROUND)


@settings(max_examples=200, deadline=None)
@given(point, point)
def test_sdfs_are_1_lipschitz(p, q):
    # A Euclidean distance function is 1-Lipschitz (triangle inequality).
    p, q = np.asarray(p), np.asarray(q)
    dist = np.linalg.norm(p - q)
    for f in (lambda x: S.sdf_cylinder(x, 0.01, 0.012), lambda x: S.sdf_ring(x, 0.004, 0.015, 0.01),
              lambda x: S.sdf_cuboid(x, (0.02, 0.01, 0.006)), lambda x: S.sdf_sphere(x, 0.007)):
        assert abs(f(p) - f(q)) <= dist + LIPSCHITZ_SLACK


@settings(max_examples=200, deadline=None)
@given(point)
def test_sdf_sign_matches_independent_inside_test(p):
    # Inside decided from the defining inequalities of each solid.
    x, y, z = p
    r = np.hypot(x, y)
    p = np.asarray(p)
    d = S.sdf_ring(p, 0.004, 0.015, 0.01)
    inside = (0.004 < r < 0.015) and abs(z) < 0.005
    if abs(d) > ROUND:
        assert (d < 0) == inside
    d = S.sdf_cuboid(p, (0.02, 0.01, 0.006))
    inside = abs(x) < 0.01 and abs(y) < 0.005 and abs(z) < 0.003
    if abs(d) > ROUND:
        assert (d < 0) == inside


def test_ring_sdf_against_dense_surface_cloud():
    # Reference: distance to a dense point cloud on the exact ring surface (scipy cKDTree); the
    # cloud's spacing bounds the difference.
    ri, ro, h = 0.004, 0.015, 0.01
    t = np.linspace(0, 2 * np.pi, 720, endpoint=False)
    pts = []
    for r in np.linspace(ri, ro, 60):
        for z in (-h / 2, h / 2):
            pts.append(np.column_stack([r * np.cos(t), r * np.sin(t), np.full(t.size, z)]))
    for r in (ri, ro):
        for z in np.linspace(-h / 2, h / 2, 50):
            pts.append(np.column_stack([r * np.cos(t), r * np.sin(t), np.full(t.size, z)]))
    cloud = np.vstack(pts)
    spacing = max(2 * np.pi * ro / 720, (ro - ri) / 59, h / 49)
    rng = np.random.default_rng(0)
    q = rng.uniform(-0.025, 0.025, size=(300, 3))
    kd = cKDTree(cloud).query(q)[0]
    d = S.sdf_ring(q, ri, ro, h)
    assert np.all(np.abs(np.abs(d) - kd) <= spacing)


# ----------------------------------------------------------------------------------------------
# meshes: winding number and mesh SDF
# ----------------------------------------------------------------------------------------------


def test_winding_number_inside_test_on_meshed_sphere_and_box():
    # trimesh's own `contains` needs rtree (not installed), so the reference is the analytic
    # inside test, away from the faceting band of the icosphere (its faces lie within
    # r (1 - cos(edge angle)) of the sphere; 0.5 mm margin on a 10 mm sphere is ample).
    rng = np.random.default_rng(1)
    sphere = trimesh.creation.icosphere(subdivisions=3, radius=0.01)
    q = rng.uniform(-0.015, 0.015, size=(400, 3))
    r = np.linalg.norm(q, axis=1)
    far = np.abs(r - 0.01) > 5e-4
    w = S.winding_number(q[far], sphere.vertices, sphere.faces)
    assert np.all((w > 0.5) == (r[far] < 0.01))
    assert np.all(np.abs(w - np.round(w)) < 1e-9)  # closed mesh: integer winding numbers
    box = trimesh.creation.box(extents=(0.02, 0.01, 0.006))
    inside = np.all(np.abs(q) < [0.01, 0.005, 0.003], axis=1)
    w = S.winding_number(q, box.vertices, box.faces)
    assert np.all((w > 0.5) == inside)


def test_mesh_sdf_of_a_box_mesh_equals_the_analytic_box_distance():
    # A box mesh is exact, so its SDF must equal the clamped-point box distance (Ericson 2005).
    rng = np.random.default_rng(2)
    box = trimesh.creation.box(extents=(0.02, 0.01, 0.006))
    q = rng.uniform(-0.02, 0.02, size=(300, 3))
    d = S.sdf_mesh(q, box.vertices, box.faces)
    np.testing.assert_allclose(d, ref_cuboid(q, (0.02, 0.01, 0.006)), atol=ROUND)


def test_point_triangle_distance_regions():
    # Hand-computed distances to the triangle (0,0,0), (1,0,0), (0,1,0): above the face, beyond an
    # edge and beyond a vertex (Ericson 2005, 5.1.5 regions).
    v = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0]])
    f = np.array([[0, 1, 2]])
    q = np.array([[0.2, 0.2, 0.5], [0.5, -1.0, 0.0], [-1.0, -1.0, 1.0], [1.0, 1.0, 0.0]])
    expected = [0.5, 1.0, np.sqrt(3.0), np.sqrt(0.5)]
    np.testing.assert_allclose(S.triangle_distance_m(q, v, f), expected, rtol=1e-14)


# ----------------------------------------------------------------------------------------------
# clearance
# ----------------------------------------------------------------------------------------------


@pytest.mark.parametrize("spin", [0.0, 0.37, 2.0])
def test_clearance_of_coaxial_discs_is_the_face_gap(spin):
    # Two coaxial discs: the clearance is the axial face-to-face distance (elementary geometry).
    base = disc("base", 0.03, 0.01, -0.005)  # top face at z = 0
    fm = disc("fm", 0.02, 0.005, 0.0025)  # floater frame origin on its bottom face
    d = make_design([base], [fm])
    gaps = np.linspace(1e-4, 0.02, 50)
    pos = np.column_stack([np.zeros(50), np.zeros(50), gaps])
    rv = np.tile([0.0, 0.0, spin], (50, 1))
    np.testing.assert_allclose(C.floater_clearance_m(d, pos, rv), gaps, rtol=0, atol=ROUND)
    # floater wider than the fixed disc, and a ring over a disc, stay exact
    d2 = make_design([disc("base", 0.01, 0.01, -0.005)],
                     [Magnet("fr", "ring", (0.006, 0.03, 0.004), (0, 0, 1.2), position_m=(0, 0, 0.002))])
    np.testing.assert_allclose(C.floater_clearance_m(d2, pos, rv), gaps, rtol=0, atol=ROUND)


def test_clearance_of_sphere_floater_equals_centre_distance_minus_radius():
    # A sphere's distance to a solid it does not overlap is (distance of its centre) - radius,
    # exactly; the centre distance comes from the clamping references above. The sampled result
    # must never be below it and at most tolerance_m above it; the measured error is far smaller
    # (asserted < 1e-7 m; 3e-8 m measured). Overlapping poses must come out negative.
    rng = np.random.default_rng(3)
    ring = Magnet("ring", "ring", (0.01, 0.03, 0.01), (0, 0, 1.2), position_m=(0, 0, -0.005))
    block = Magnet("block", "cuboid", (0.03, 0.02, 0.01), (0, 0, 1.2), position_m=(0.06, 0, -0.005),
                   rotvec_rad=(0.0, 0.0, 0.4))
    ball = Magnet("ball", "sphere", (0.008,), (0, 0, 1.2), position_m=(0.001, 0.0, 0.004))
    d = make_design([ring, block], [ball])
    n = 300
    pos = np.column_stack([rng.uniform(-0.02, 0.08, n), rng.uniform(-0.02, 0.02, n), rng.uniform(0, 0.01, n)])
    rv = rng.normal(size=(n, 3))
    centres = pos + Rotation.from_rotvec(rv).apply([0.001, 0.0, 0.004])
    to_block = Rotation.from_rotvec([0.0, 0.0, 0.4]).inv().apply(centres - [0.06, 0, -0.005])
    exact = np.minimum(ref_ring(centres - [0, 0, -0.005], 0.005, 0.015, 0.01),
                       ref_cuboid(to_block, (0.03, 0.02, 0.01))) - 0.004
    det = C.clearance_detail(d, pos, rv)
    apart = exact > 0
    assert 50 < apart.sum() < n  # both cases are exercised
    err = det.clearance_m[apart] - exact[apart]
    assert err.min() >= -1e-10
    assert err.max() <= det.tolerance_m
    assert err.max() < 1e-7
    assert np.all(det.clearance_m[exact < -1e-6] < 0)
    # the nearest body is named correctly where the two distances differ clearly
    ring_d = ref_ring(centres - [0, 0, -0.005], 0.005, 0.015, 0.01)
    block_d = ref_cuboid(to_block, (0.03, 0.02, 0.01))
    clear = np.abs(ring_d - block_d) > 1e-3
    expect = np.where(ring_d < block_d, "ring", "block")
    assert np.all(np.asarray(det.fixed_body)[clear] == expect[clear])
    assert set(det.floater_body) == {"ball"}


def test_clearance_negative_when_overlapping_and_rejects_bad_shapes():
    base = disc("base", 0.03, 0.01, -0.005)
    d = make_design([base], [disc("fm", 0.02, 0.005, 0.0025)])
    c = C.floater_clearance_m(d, [[0, 0, -0.001]], [[0, 0, 0]])
    assert c[0] == pytest.approx(-0.001, abs=ROUND)  # 1 mm interpenetration of coaxial faces
    with pytest.raises(InputError, match=r"clearance_detail: positions_m must be an array of shape \(n, 3\)"):
        C.floater_clearance_m(d, np.zeros((4, 2)), np.zeros((4, 2)))
    with pytest.raises(InputError, match="clearance_detail: positions_m and rotvecs_rad must be finite"):
        C.floater_clearance_m(d, [[0, 0, np.nan]], [[0, 0, 0]])


# ----------------------------------------------------------------------------------------------
# overlaps at the nominal pose
# ----------------------------------------------------------------------------------------------


def test_overlapping_pairs_names_the_pair():
    coil = Coil("coil", 0.006, 0.012, 0.01, 100, (0, 0, -0.005), (0, 0, 1), 1.0, 2.0)
    touching = Core("core", "cylinder", (0.012, 0.01), (0, 0, -0.005), (0, 0, 1), 1000.0, 1.5)
    fat = Core("core", "cylinder", (0.014, 0.01), (0, 0, -0.005), (0, 0, 1), 1000.0, 1.5)
    fm = disc("fm", 0.02, 0.005, 0.0025)
    assert C.overlapping_pairs(make_design([], [fm], [coil], [touching])) == []
    pairs = C.overlapping_pairs(make_design([], [fm], [coil], [fat]))
    assert [(a, b) for a, b, _ in pairs] == [("coil", "core")]
    assert pairs[0][2] == pytest.approx(-0.001, abs=1e-9)  # radial overlap 7 mm - 6 mm
    # floater pushed into the coil by a negative operating gap
    pairs = C.overlapping_pairs(make_design([], [fm], [coil], [touching], gap_m=-0.002))
    assert {(a, b) for a, b, _ in pairs} == {("coil", "fm"), ("core", "fm")}


# ----------------------------------------------------------------------------------------------
# meshes for export
# ----------------------------------------------------------------------------------------------


def test_body_meshes_are_watertight_with_the_exact_volumes():
    # Volumes: pi r^2 h, pi (ro^2 - ri^2) h, a b c, 4/3 pi r^3 (elementary geometry).
    coil = Coil("coil", 0.006, 0.012, 0.01, 100, (0, 0, -0.005), (1, 1, 1), 1.0, 2.0)
    core = Core("core", "ring", (0.002, 0.01, 0.01), (0.05, 0, 0), (0, 1, 0), 1000.0, 1.5)
    box = Magnet("box", "cuboid", (0.01, 0.02, 0.005), (0, 0, 1), position_m=(0, 0.05, 0),
                 rotvec_rad=(0.3, 0.2, 0.1))
    ball = Magnet("ball", "sphere", (0.008,), (0, 0, 1), position_m=(-0.04, 0, 0))
    fm = disc("fm", 0.02, 0.005, 0.0025)
    d = make_design([box, ball], [fm], [coil], [core])
    expected = {
        "coil": np.pi * (0.012**2 - 0.006**2) * 0.01,
        "core": np.pi * (0.005**2 - 0.001**2) * 0.01,
        "box": 0.01 * 0.02 * 0.005,
        "ball": 4 / 3 * np.pi * 0.004**3,
        "fm": np.pi * 0.01**2 * 0.005,
    }
    meshes = M.body_meshes(d)
    assert set(meshes) == set(expected)
    for name, mesh in meshes.items():
        assert mesh.is_watertight, name
        assert mesh.volume == pytest.approx(expected[name], rel=VOLUME_REL), name
    # the floater sits at the operating gap (3 mm above the reference face at z = 0)
    assert meshes["fm"].bounds[0, 2] == pytest.approx(0.003, abs=ROUND)


def test_polygon_radius_gives_the_circle_area():
    # Regular N-gon area (N/2) r^2 sin(2 pi / N) (elementary geometry) equals pi r^2.
    for n in (6, 24, 96):
        rp = M.polygon_radius_m(0.01, n)
        assert n / 2 * rp**2 * np.sin(2 * np.pi / n) == pytest.approx(np.pi * 0.01**2, rel=1e-14)


# ----------------------------------------------------------------------------------------------
# outlines
# ----------------------------------------------------------------------------------------------


def polygon_area(p):
    return 0.5 * (np.dot(p[:, 0], np.roll(p[:, 1], -1)) - np.dot(np.roll(p[:, 0], -1), p[:, 1]))


def test_side_section_of_coaxial_stack_is_exact_rectangles():
    base = Magnet("base", "ring", (0.01, 0.03, 0.01), (0, 0, 1.2), position_m=(0, 0, -0.005))
    fm = disc("fm", 0.02, 0.005, 0.0025)
    out = O.section_outlines(make_design([base], [fm]), "xz")
    by = {}
    for name, kind, poly in out:
        by.setdefault(name, []).append((kind, poly))
    # a ring cut through its axis: two 10 mm x 10 mm rectangles; the disc: one 20 x 5 mm rectangle
    assert len(by["base"]) == 2 and len(by["fm"]) == 1
    for kind, poly in by["base"]:
        assert kind == "magnet"
        assert polygon_area(poly) == pytest.approx(1e-4, rel=1e-6)
    kind, poly = by["fm"][0]
    assert kind == "floater"
    np.testing.assert_allclose(poly.min(axis=0), [-0.01, 0.003], atol=1e-8)
    np.testing.assert_allclose(poly.max(axis=0), [0.01, 0.008], atol=1e-8)
    assert polygon_area(poly) == pytest.approx(0.02 * 0.005, rel=1e-6)


def test_top_view_of_ring_has_a_clockwise_hole_and_tilted_ring_bore_shrinks():
    # Inscribed 96-gons: area (N/2) r^2 sin(2 pi / N) for the outer boundary and the hole.
    n = 96
    ring = Magnet("ring", "ring", (0.01, 0.03, 0.004), (0, 0, 1.2), position_m=(0, 0, -0.002))
    fm = disc("fm", 0.02, 0.005, 0.0025)
    out = [(k, p) for name, k, p in O.section_outlines(make_design([ring], [fm]), "xy") if name == "ring"]
    areas = sorted(polygon_area(p) for _, p in out)
    poly_area = lambda r: n / 2 * r**2 * np.sin(2 * np.pi / n)  # noqa: E731
    assert areas[0] == pytest.approx(-poly_area(0.005), rel=1e-9)  # hole, clockwise
    assert areas[1] == pytest.approx(poly_area(0.015), rel=1e-9)
    # tilted by 0.3 rad: the see-through bore is the overlap of two ellipses, each of area
    # pi ri^2 cos(0.3), offset by h sin(0.3); so it is smaller than pi ri^2 cos(0.3).
    tilted = Magnet("ring", "ring", (0.01, 0.03, 0.004), (0, 0, 1.2), position_m=(0, 0, -0.002),
                    rotvec_rad=(0.3, 0.0, 0.0))
    out = [p for name, _, p in O.section_outlines(make_design([tilted], [fm]), "xy") if name == "ring"]
    hole = [-polygon_area(p) for p in out if polygon_area(p) < 0]
    assert len(hole) == 1 and 0 < hole[0] < np.pi * 0.005**2 * np.cos(0.3)


def test_section_outlines_rejects_unknown_plane():
    d = make_design([], [disc("fm", 0.02, 0.005, 0.0025)])
    with pytest.raises(InputError, match='section_outlines: plane must be "xz" or "xy"; got \'yz\'.'):
        O.section_outlines(d, "yz")


def test_duplicate_names_are_rejected():
    d = make_design([disc("a", 0.01, 0.01, -0.005)], [disc("a", 0.01, 0.01, 0.005)])
    with pytest.raises(GeometryError, match="body names must be unique"):
        B.design_solids(d)


# ----------------------------------------------------------------------------------------------
# plane polygons, poses, extents
# ----------------------------------------------------------------------------------------------


def test_polygon_toolkit_against_elementary_geometry():
    from fields.model import polygon as P

    # shoelace area of a 3-4-5 right triangle is 6 and positive counter-clockwise
    tri = np.array([[0.0, 0.0], [4.0, 0.0], [0.0, 3.0]])
    assert P.signed_area(tri) == pytest.approx(6.0, rel=1e-15)
    assert P.signed_area(tri[::-1]) == pytest.approx(-6.0, rel=1e-15)
    assert P.point_in_polygon([1.0, 1.0], tri) and not P.point_in_polygon([3.0, 3.0], tri)
    # two unit squares offset by (0.5, 0.25) overlap in a 0.5 x 0.75 rectangle
    sq = np.array([[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]])
    assert P.polygon_area(P.convex_clip(sq, sq + [0.5, 0.25])) == pytest.approx(0.375, rel=1e-14)
    assert P.polygon_area(P.clip_to_rectangle(tri, 0.0, 2.0, 0.0, 10.0)) == pytest.approx(6.0 - 1.5, rel=1e-14)
    # the hull of a regular hexagon plus interior points is the hexagon, area (3 sqrt 3 / 2) r^2
    t = np.arange(6) * np.pi / 3
    hexagon = np.column_stack([np.cos(t), np.sin(t)])
    hull = P.convex_hull(np.vstack([hexagon, 0.3 * hexagon, [[0.0, 0.0]]]))
    assert hull.shape == (6, 2) and P.signed_area(hull) == pytest.approx(1.5 * np.sqrt(3.0), rel=1e-14)
    # a hole inside an outer loop is turned clockwise, the outer loop counter-clockwise
    outer, hole = sq * 4.0, sq + 1.0
    o, h = P.orient_loops([outer[::-1], hole])
    assert P.signed_area(o) > 0 > P.signed_area(h)
    # disc fully inside the rectangle: pi r^2; half of it: pi r^2 / 2
    assert P.circle_rectangle_area(0, 0, 0.5, -1, 1, -1, 1) == pytest.approx(np.pi / 4, rel=1e-14)
    assert P.circle_rectangle_area(0, 0, 0.5, 0, 1, -1, 1) == pytest.approx(np.pi / 8, rel=1e-14)


def test_pose_check_broadcasts_and_rejects():
    from fields.model.pose import check_poses

    P, R = check_poses(np.zeros((4, 3)), [0.0, 0.0, 0.1], "f")
    assert P.shape == R.shape == (4, 3) and np.all(R[:, 2] == 0.1)
    with pytest.raises(InputError, match=r"f: rotvecs_rad must be an array of shape \(n, 3\) or \(3,\); got shape \(1, 2\)"):
        check_poses(np.zeros((4, 3)), [0.0, 0.0], "f")
    with pytest.raises(InputError, match="f: positions_m and rotvecs_rad must have the same number of rows; got 4 and 2"):
        check_poses(np.zeros((4, 3)), np.zeros((2, 3)), "f")
    with pytest.raises(InputError, match="f: positions_m and rotvecs_rad must be finite"):
        check_poses([[0.0, np.inf, 0.0]], [0.0, 0.0, 0.0], "f")


@pytest.mark.parametrize("shape, dims", [("cylinder", (0.02, 0.01)), ("ring", (0.01, 0.03, 0.004)),
                                         ("cuboid", (0.01, 0.02, 0.005)), ("sphere", (0.008,))])
def test_extent_along_is_the_extreme_of_the_surface(shape, dims):
    # The support function must equal the extreme of x . u over a dense surface sampling (within
    # the sampling's covering radius); the samples come from the independent mesh of trimesh.
    m = Magnet("m", shape, dims, (0, 0, 1.2), position_m=(0.01, -0.02, 0.03), rotvec_rad=(0.3, -0.5, 0.2))
    s = B.magnet_solid(m, False)
    mesh = M.solid_mesh(s, 720, exact_volume=False)  # vertices on the true surface
    world = mesh.vertices @ s.rotation.T + s.position_m
    u = np.array([0.2, -0.4, 0.9]) / np.linalg.norm([0.2, -0.4, 0.9])
    lo, hi = s.extent_along(s.rotation, s.position_m, u)
    h = world @ u
    # inscribed 720-gons fall short of the circle by r (1 - cos(pi / 720)) < 1e-7 m; a level-4
    # icosphere (edges of about 4 deg) by less than r (1 - cos(2 deg)) = 6e-4 r
    tol = 1e-7 if shape != "sphere" else 1e-3 * dims[0] / 2
    assert h.max() <= hi + 1e-12 and hi - h.max() < tol
    assert h.min() >= lo - 1e-12 and h.min() - lo < tol
