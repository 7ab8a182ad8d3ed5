"""Solids of a design: signed distances, floater clearance, overlap checks, meshes and outlines.

Every solid of a design is turned into a :class:`Solid`: the fixed magnets, the coil windings
(the annulus ``inner_radius_m <= r <= outer_radius_m``, ``|z| <= height_m / 2`` about the coil axis),
the cores and the floater's magnets. A solid knows its own frame (see :mod:`fields.model`: axis on
own z, centre at the own origin) and its placement in its parent frame (world for fixed solids, the
floater frame for floater magnets).

Signed distance functions (SDF) are negative inside, zero on the surface and positive outside. The
primitive ones are exact Euclidean distances; the mesh one is exact too (distance to the nearest
triangle, sign from the generalized winding number).

Shape letters: ``n`` poses, ``q`` query points, ``s`` surface samples, ``f`` triangles,
``p`` polygon vertices. ``...`` means any leading shape.

Pure numpy/scipy/trimesh: no printing, no file IO; SI units throughout.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
import trimesh
from scipy.spatial import ConvexHull, cKDTree
from scipy.spatial.transform import Rotation

from fields.errors import GeometryError
from fields.model.design import Design, rotation_matrix

SOLID_KINDS = ("magnet", "coil", "core", "floater")
"""``kind`` of a :class:`Solid`: fixed magnet, coil winding, core, or floater magnet."""

CLEARANCE_SEGMENTS = 24
"""Default angular samples around a round body for :func:`floater_clearance_m` (rims get 4x)."""

OVERLAP_SEGMENTS = 96
"""Angular samples used by :func:`overlapping_pairs` (a one-off check, so denser)."""

MESH_SEGMENTS = 96
"""Segments around round bodies in :func:`body_meshes` and :func:`section_outlines`."""

SPHERE_SUBDIVISIONS = 4
"""Icosphere subdivisions for spheres in :func:`body_meshes` (5120 triangles)."""

RIM_FACTOR = 3
"""Rims and edges are sampled this many times more densely than faces."""

POLISH_STEPS = 2
"""Alternating-projection steps that refine the best samples of each pair (0: samples only)."""

_CHUNK_ELEMENTS = 40_000
"""Largest number of (point, sample) or (point, triangle) pairs held in memory at once."""


# ----------------------------------------------------------------------------------------------
# Signed distance functions in a solid's own frame
# ----------------------------------------------------------------------------------------------


def _box2(u, v):
    """Exact SDF of the 2-D set ``u <= 0 and v <= 0`` given the per-axis excesses ``u, v``."""
    pu = np.maximum(u, 0.0)
    pv = np.maximum(v, 0.0)
    return np.sqrt(pu * pu + pv * pv) + np.minimum(np.maximum(u, v), 0.0)


def _sdf_xyz(shape: str, size, x, y, z):
    """Primitive SDFs on separate coordinate arrays (the fast path of the public functions)."""
    if shape == "cylinder":
        return _box2(np.sqrt(x * x + y * y) - size[0], np.abs(z) - 0.5 * size[1])
    if shape == "ring":
        rc = 0.5 * (size[0] + size[1])
        w = 0.5 * (size[1] - size[0])
        return _box2(np.abs(np.sqrt(x * x + y * y) - rc) - w, np.abs(z) - 0.5 * size[2])
    if shape == "cuboid":
        qx = np.abs(x) - 0.5 * size[0]
        qy = np.abs(y) - 0.5 * size[1]
        qz = np.abs(z) - 0.5 * size[2]
        px, py, pz = np.maximum(qx, 0.0), np.maximum(qy, 0.0), np.maximum(qz, 0.0)
        return np.sqrt(px * px + py * py + pz * pz) + np.minimum(np.maximum(np.maximum(qx, qy), qz), 0.0)
    # sphere
    return np.sqrt(x * x + y * y + z * z) - size[0]


def sdf_cylinder(points_m, radius_m: float, height_m: float) -> np.ndarray:
    """Signed distance to a solid cylinder in its own frame (axis z, centre at origin).

    Parameters
    ----------
    points_m : array_like, shape (..., 3)
        Query points in the cylinder's own frame (m).
    radius_m, height_m : float
        Radius and full height (m).

    Returns
    -------
    ndarray, shape (...)
        Signed distance (m), negative inside.

    Notes
    -----
    The nearest surface point of a solid of revolution lies in the meridian half-plane through the
    query point, so the 3-D distance is the 2-D distance in ``(r, z)`` to the rectangle
    ``[0, R] x [-h/2, h/2]``: ``d = |max(q, 0)| + min(max(q_r, q_z), 0)`` with
    ``q = (r - R, |z| - h/2)`` (the exact box distance, e.g. Quilez, "Distance functions", 2008).
    """
    p = np.asarray(points_m, dtype=float)
    return _sdf_xyz("cylinder", (radius_m, height_m), p[..., 0], p[..., 1], p[..., 2])


def sdf_ring(points_m, inner_radius_m: float, outer_radius_m: float, height_m: float) -> np.ndarray:
    """Signed distance to a ring (annular cylinder) in its own frame (axis z, centre at origin).

    Parameters
    ----------
    points_m : array_like, shape (..., 3)
        Query points in the ring's own frame (m).
    inner_radius_m, outer_radius_m, height_m : float
        Bore radius, outer radius and full height (m). ``inner_radius_m = 0`` gives a cylinder.

    Returns
    -------
    ndarray, shape (...)
        Signed distance (m), negative inside the material.

    Notes
    -----
    Meridian-plane reduction as in :func:`sdf_cylinder`, to the rectangle
    ``[r_i, r_o] x [-h/2, h/2]``; the mirror image of the section (at ``-r``) is never nearer,
    so the result is exact.
    """
    p = np.asarray(points_m, dtype=float)
    return _sdf_xyz("ring", (inner_radius_m, outer_radius_m, height_m), p[..., 0], p[..., 1], p[..., 2])


def sdf_cuboid(points_m, dimensions_m) -> np.ndarray:
    """Signed distance to a cuboid in its own frame (edges on the axes, centre at origin).

    Parameters
    ----------
    points_m : array_like, shape (..., 3)
        Query points (m).
    dimensions_m : array_like, shape (3,)
        Edge lengths along own x, y, z (m).

    Returns
    -------
    ndarray, shape (...)
        Signed distance (m), negative inside.

    Notes
    -----
    ``q = |p| - a/2``; ``d = |max(q, 0)| + min(max_i q_i, 0)`` (exact box distance; outside it is
    the distance to the clamped point, Ericson, *Real-Time Collision Detection*, 2005, 5.1.3).
    """
    p = np.asarray(points_m, dtype=float)
    a = [float(x) for x in np.asarray(dimensions_m, dtype=float)]
    return _sdf_xyz("cuboid", a, p[..., 0], p[..., 1], p[..., 2])


def sdf_sphere(points_m, radius_m: float) -> np.ndarray:
    """Signed distance ``|p| - R`` to a sphere centred at the origin (m); shape (...)."""
    p = np.asarray(points_m, dtype=float)
    return np.linalg.norm(p, axis=-1) - radius_m


def winding_number(points_m, vertices_m, faces) -> np.ndarray:
    """Generalized winding number of a closed triangle mesh at query points.

    Parameters
    ----------
    points_m : array_like, shape (..., 3)
        Query points (m).
    vertices_m : array_like, shape (v, 3)
        Mesh vertices (m).
    faces : array_like of int, shape (f, 3)
        Triangles, counter-clockwise seen from outside (outward normals).

    Returns
    -------
    ndarray, shape (...)
        Winding number: 1 inside, 0 outside a closed outward-oriented mesh (0.5 on the surface).

    Notes
    -----
    The solid angle of each triangle seen from the point by Van Oosterom and Strackee,
    "The solid angle of a plane triangle", IEEE Trans. Biomed. Eng. 30(2), 1983:
    ``tan(Omega/2) = a.(b x c) / (|a||b||c| + (a.b)|c| + (a.c)|b| + (b.c)|a|)``, summed and divided
    by ``4 pi`` (Jacobson, Kavan and Sorkine-Hornung, "Robust inside-outside segmentation using
    generalized winding numbers", ACM TOG 32(4), 2013).
    """
    p = np.asarray(points_m, dtype=float)
    shape = p.shape[:-1]
    flat = p.reshape(-1, 3)
    tri = np.asarray(vertices_m, dtype=float)[np.asarray(faces, dtype=np.intp)]
    out = np.empty(flat.shape[0])
    step = max(1, _CHUNK_ELEMENTS // max(1, tri.shape[0]))
    for i in range(0, flat.shape[0], step):
        q = flat[i : i + step, None, :]
        a = tri[None, :, 0, :] - q
        b = tri[None, :, 1, :] - q
        c = tri[None, :, 2, :] - q
        la = np.linalg.norm(a, axis=-1)
        lb = np.linalg.norm(b, axis=-1)
        lc = np.linalg.norm(c, axis=-1)
        num = np.einsum("...i,...i->...", a, np.cross(b, c))
        den = (
            la * lb * lc
            + np.einsum("...i,...i->...", a, b) * lc
            + np.einsum("...i,...i->...", a, c) * lb
            + np.einsum("...i,...i->...", b, c) * la
        )
        out[i : i + step] = 2.0 * np.arctan2(num, den).sum(axis=1) / (4.0 * np.pi)
    return out.reshape(shape)


def triangle_distance_m(points_m, vertices_m, faces) -> np.ndarray:
    """Unsigned distance from points to the nearest triangle of a mesh.

    Parameters
    ----------
    points_m : array_like, shape (..., 3)
    vertices_m : array_like, shape (v, 3)
    faces : array_like of int, shape (f, 3)

    Returns
    -------
    ndarray, shape (...)
        Distance (m) to the nearest point of any triangle.

    Notes
    -----
    For each triangle: if the point's projection on the triangle's plane falls inside the triangle
    (barycentric coordinates all >= 0) the distance is the plane distance, otherwise the nearest
    point is on the boundary and the distance is the least of the three point-segment distances
    (the region analysis of Ericson, *Real-Time Collision Detection*, 2005, 5.1.5). Brute force
    over all triangles, chunked: cost ``q * f``.
    """
    p = np.asarray(points_m, dtype=float)
    shape = p.shape[:-1]
    flat = p.reshape(-1, 3)
    tri = np.asarray(vertices_m, dtype=float)[np.asarray(faces, dtype=np.intp)]
    A, B, C = tri[:, 0], tri[:, 1], tri[:, 2]
    e0, e1 = B - A, C - A
    n = np.cross(e0, e1)
    nn = np.einsum("ij,ij->i", n, n)
    d00 = np.einsum("ij,ij->i", e0, e0)
    d01 = np.einsum("ij,ij->i", e0, e1)
    d11 = np.einsum("ij,ij->i", e1, e1)
    den = d00 * d11 - d01 * d01
    ok = den > 1e-300
    inv_den = np.where(ok, 1.0 / np.where(ok, den, 1.0), 0.0)
    inv_nn = np.where(nn > 1e-300, 1.0 / np.where(nn > 1e-300, nn, 1.0), 0.0)
    segs = ((A, B - A), (B, C - B), (C, A - C))
    out = np.empty(flat.shape[0])
    step = max(1, _CHUNK_ELEMENTS // max(1, tri.shape[0]))
    for i in range(0, flat.shape[0], step):
        q = flat[i : i + step, None, :]
        v = q - A[None]
        d20 = np.einsum("qfi,fi->qf", v, e0)
        d21 = np.einsum("qfi,fi->qf", v, e1)
        beta = (d11 * d20 - d01 * d21) * inv_den
        gamma = (d00 * d21 - d01 * d20) * inv_den
        inside = (beta >= 0) & (gamma >= 0) & (beta + gamma <= 1) & ok
        vn = np.einsum("qfi,fi->qf", v, n)
        plane2 = vn * vn * inv_nn
        edge2 = np.full(plane2.shape, np.inf)
        for P0, D in segs:
            w = q - P0[None]
            dd = np.einsum("fi,fi->f", D, D)
            t = np.clip(np.einsum("qfi,fi->qf", w, D) / np.where(dd > 0, dd, 1.0), 0.0, 1.0)
            r = w - t[..., None] * D[None]
            edge2 = np.minimum(edge2, np.einsum("qfi,qfi->qf", r, r))
        d2 = np.where(inside, plane2, edge2)
        out[i : i + step] = np.sqrt(d2.min(axis=1))
    return out.reshape(shape)


def sdf_mesh(points_m, vertices_m, faces) -> np.ndarray:
    """Signed distance to a closed, outward-oriented triangle mesh.

    Parameters
    ----------
    points_m : array_like, shape (..., 3)
    vertices_m : array_like, shape (v, 3)
    faces : array_like of int, shape (f, 3)

    Returns
    -------
    ndarray, shape (...)
        :func:`triangle_distance_m`, negated where :func:`winding_number` exceeds 1/2.
    """
    d = triangle_distance_m(points_m, vertices_m, faces)
    w = winding_number(points_m, vertices_m, faces)
    return np.where(w > 0.5, -d, d)


# ----------------------------------------------------------------------------------------------
# Solids of a design
# ----------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Solid:
    """One solid body of a design, in its own frame, with its placement in its parent frame.

    Attributes
    ----------
    name : str
        The body's name in the design.
    kind : str
        One of :data:`SOLID_KINDS`.
    shape : str
        ``"cylinder"``, ``"ring"``, ``"cuboid"``, ``"sphere"`` or ``"mesh"``.
    size_m : tuple of float
        cylinder ``(radius, height)``; ring ``(inner_radius, outer_radius, height)``; cuboid
        ``(x, y, z)`` edges; sphere ``(radius,)``; mesh ``()``. Radii, not the model's diameters.
    rotation : ndarray, shape (3, 3)
        Own frame to parent frame rotation.
    position_m : ndarray, shape (3,)
        Own origin in the parent frame (m).
    on_floater : bool
        True when the parent frame is the floater frame.
    vertices_m, faces : ndarray or None
        Own-frame mesh (mesh shape only).
    """

    name: str
    kind: str
    shape: str
    size_m: tuple[float, ...]
    rotation: np.ndarray
    position_m: np.ndarray
    on_floater: bool
    vertices_m: np.ndarray | None = None
    faces: np.ndarray | None = None

    def sdf(self, points_own_m) -> np.ndarray:
        """Signed distance (m) at points (..., 3) given in the solid's own frame; shape (...)."""
        if self.shape == "mesh":
            return sdf_mesh(points_own_m, self.vertices_m, self.faces)
        p = np.asarray(points_own_m, dtype=float)
        return _sdf_xyz(self.shape, self.size_m, p[..., 0], p[..., 1], p[..., 2])

    def sdf_xyz(self, x, y, z) -> np.ndarray:
        """Signed distance (m) at own-frame coordinates given as three arrays of one shape."""
        if self.shape == "mesh":
            return sdf_mesh(np.stack([x, y, z], axis=-1), self.vertices_m, self.faces)
        return _sdf_xyz(self.shape, self.size_m, x, y, z)

    def sdf_parent(self, points_m) -> np.ndarray:
        """Signed distance (m) at points (..., 3) given in the parent frame; shape (...)."""
        p = np.asarray(points_m, dtype=float)
        return self.sdf((p - self.position_m) @ self.rotation)

    @property
    def bounding_radius_m(self) -> float:
        """Radius of a sphere about the own origin that contains the solid (m)."""
        s = self.size_m
        if self.shape == "cylinder":
            return float(np.hypot(s[0], 0.5 * s[1]))
        if self.shape == "ring":
            return float(np.hypot(s[1], 0.5 * s[2]))
        if self.shape == "cuboid":
            return float(0.5 * np.linalg.norm(s))
        if self.shape == "sphere":
            return float(s[0])
        return float(np.linalg.norm(self.vertices_m, axis=1).max())

    @property
    def volume_m3(self) -> float:
        """Exact volume of the solid (m^3)."""
        s = self.size_m
        if self.shape == "cylinder":
            return float(np.pi * s[0] ** 2 * s[1])
        if self.shape == "ring":
            return float(np.pi * (s[1] ** 2 - s[0] ** 2) * s[2])
        if self.shape == "cuboid":
            return float(s[0] * s[1] * s[2])
        if self.shape == "sphere":
            return float(4.0 / 3.0 * np.pi * s[0] ** 3)
        v = self.vertices_m[self.faces]
        return float(np.einsum("ij,ij->i", v[:, 0], np.cross(v[:, 1], v[:, 2])).sum() / 6.0)


def _shape_size(where: str, shape: str, dims, allowed) -> tuple[float, ...]:
    if shape not in allowed:
        raise GeometryError(where, "shape", f"one of {', '.join(allowed)}", shape)
    d = tuple(float(x) for x in dims)
    need = {"cylinder": 2, "ring": 3, "cuboid": 3, "sphere": 1, "mesh": 0}[shape]
    if len(d) != need:
        raise GeometryError(where, f"dimensions of a {shape}", f"{need} numbers", d)
    if any(not np.isfinite(x) or x <= 0 for x in d):
        raise GeometryError(where, "dimensions", "positive and finite", d)
    if shape == "cylinder":
        return (0.5 * d[0], d[1])
    if shape == "ring":
        if d[0] >= d[1]:
            raise GeometryError(where, "ring inner diameter", "smaller than the outer diameter", d)
        return (0.5 * d[0], 0.5 * d[1], d[2])
    if shape == "sphere":
        return (0.5 * d[0],)
    return d


def _magnet_solid(m, kind: str, on_floater: bool) -> Solid:
    where = f"{'floater' if on_floater else 'magnets'}.{m.name}"
    size = _shape_size(where, m.shape, m.dimensions_m, ("cylinder", "ring", "cuboid", "sphere", "mesh"))
    v = f = None
    if m.shape == "mesh":
        if m.mesh_vertices_m is None or m.mesh_faces is None:
            raise GeometryError(where, "a mesh magnet", "given vertices and faces", None)
        v = np.asarray(m.mesh_vertices_m, dtype=float)
        f = np.asarray(m.mesh_faces, dtype=np.intp)
    return Solid(
        name=m.name,
        kind=kind,
        shape=m.shape,
        size_m=size,
        rotation=rotation_matrix(m.rotvec_rad),
        position_m=np.asarray(m.position_m, dtype=float),
        on_floater=on_floater,
        vertices_m=v,
        faces=f,
    )


def design_solids(design: Design) -> tuple[Solid, ...]:
    """All solids of a design: fixed magnets, coil windings, cores, then floater magnets.

    Parameters
    ----------
    design : Design

    Returns
    -------
    tuple of Solid

    Raises
    ------
    GeometryError
        If two solids share a name, a shape is unknown or a dimension is not positive.
    """
    out: list[Solid] = [_magnet_solid(m, "magnet", False) for m in design.magnets]
    for c in design.coils:
        where = f"coils.{c.name}"
        ri, ro, h = float(c.inner_radius_m), float(c.outer_radius_m), float(c.height_m)
        if not (0 <= ri < ro) or h <= 0:
            raise GeometryError(where, "winding", "0 <= inner_radius < outer_radius and height > 0",
                                (ri, ro, h))
        out.append(Solid(c.name, "coil", "ring" if ri > 0 else "cylinder",
                         (ri, ro, h) if ri > 0 else (ro, h),
                         rotation_matrix(c.rotvec_rad), np.asarray(c.position_m, dtype=float), False))
    for k in design.cores:
        size = _shape_size(f"cores.{k.name}", k.shape, k.dimensions_m, ("cylinder", "ring", "cuboid"))
        out.append(Solid(k.name, "core", k.shape, size, rotation_matrix(k.rotvec_rad),
                         np.asarray(k.position_m, dtype=float), False))
    out.extend(_magnet_solid(m, "floater", True) for m in design.floater.magnets)
    seen: set[str] = set()
    for s in out:
        if s.name in seen:
            raise GeometryError("design", "body names", "unique across magnets, coils, cores and floater",
                                s.name)
        seen.add(s.name)
    return tuple(out)


def _nominal_pose(design: Design, gap_m: float | None) -> tuple[np.ndarray, np.ndarray]:
    g = design.study.operating_gap_m if gap_m is None else gap_m
    if not np.isfinite(g):
        raise GeometryError("bodies", "gap_m", "finite", g)
    return rotation_matrix(design.study.floater_rotvec_rad), design.study.floater_origin_m(g)[0]


def _world_placement(s: Solid, pose_rotation, pose_position) -> tuple[np.ndarray, np.ndarray]:
    if not s.on_floater:
        return s.rotation, s.position_m
    return pose_rotation @ s.rotation, pose_rotation @ s.position_m + pose_position


# ----------------------------------------------------------------------------------------------
# Surface sampling
# ----------------------------------------------------------------------------------------------


def _circle(radius: float, count: int, z: float) -> np.ndarray:
    t = 2.0 * np.pi * np.arange(count) / count
    return np.column_stack([radius * np.cos(t), radius * np.sin(t), np.full(count, z)])


def _revolved_samples(ri: float, ro: float, h: float, segments: int) -> tuple[np.ndarray, float]:
    """Samples on a cylinder (``ri = 0``) or ring, and their covering-radius bound."""
    H = 0.5 * h
    step = 2.0 * np.pi * ro / segments
    n_rim = RIM_FACTOR * segments
    pts = []
    bound = 0.0
    # rims (edges), dense
    for r in (ri, ro) if ri > 0 else (ro,):
        m = max(8, int(np.ceil(n_rim * r / ro)))
        pts += [_circle(r, m, -H), _circle(r, m, H)]
        bound = max(bound, np.pi * r / m)
    # caps: rings between the rims (plus the centre of a full disc)
    n_r = max(1, int(np.ceil((ro - ri) / step)))
    radii = np.linspace(ri, ro, n_r + 1)
    if ri == 0:
        pts.append(np.array([[0.0, 0.0, -H], [0.0, 0.0, H]]))
    for r in radii[1:-1]:
        m = max(6, int(np.ceil(segments * r / ro)))
        pts += [_circle(r, m, -H), _circle(r, m, H)]
    # ring arcs are at most ``step`` long (m >= segments r / ro)
    bound = max(bound, 0.5 * np.hypot(step, (ro - ri) / n_r))
    # sides: rows between the rims
    n_z = max(1, int(np.ceil(h / step)))
    for r in (ri, ro) if ri > 0 else (ro,):
        m = max(6, int(np.ceil(segments * r / ro)))
        for z in np.linspace(-H, H, n_z + 1)[1:-1]:
            pts.append(_circle(r, m, z))
    bound = max(bound, 0.5 * np.hypot(step, h / n_z))
    return np.vstack(pts), float(bound)


def _grid_face(u_len: float, v_len: float, nu: int, nv: int) -> np.ndarray:
    u = np.linspace(-0.5 * u_len, 0.5 * u_len, nu + 1)
    v = np.linspace(-0.5 * v_len, 0.5 * v_len, nv + 1)
    U, V = np.meshgrid(u, v, indexing="ij")
    return np.column_stack([U.ravel(), V.ravel()])


def _cuboid_samples(dims, segments: int) -> tuple[np.ndarray, float]:
    a = np.asarray(dims, dtype=float)
    step = 2.0 * np.pi * (0.5 * a.max()) / segments
    counts = np.maximum(1, np.ceil(a / step).astype(int))
    pts = []
    for ax in range(3):
        u_ax, v_ax = [i for i in range(3) if i != ax]
        uv = _grid_face(a[u_ax], a[v_ax], counts[u_ax], counts[v_ax])
        for sgn in (-1.0, 1.0):
            p = np.zeros((uv.shape[0], 3))
            p[:, u_ax], p[:, v_ax], p[:, ax] = uv[:, 0], uv[:, 1], sgn * 0.5 * a[ax]
            pts.append(p)
    # edges, dense
    edge_counts = np.maximum(1, np.ceil(a / (step / RIM_FACTOR)).astype(int))
    for ax in range(3):
        t = np.linspace(-0.5 * a[ax], 0.5 * a[ax], edge_counts[ax] + 1)
        o1, o2 = [i for i in range(3) if i != ax]
        for s1 in (-1.0, 1.0):
            for s2 in (-1.0, 1.0):
                p = np.zeros((t.size, 3))
                p[:, ax], p[:, o1], p[:, o2] = t, s1 * 0.5 * a[o1], s2 * 0.5 * a[o2]
                pts.append(p)
    cell = a / counts
    bound = 0.5 * max(np.hypot(cell[i], cell[j]) for i, j in ((0, 1), (0, 2), (1, 2)))
    return np.unique(np.vstack(pts), axis=0), float(bound)


def _sphere_samples(r: float, segments: int) -> tuple[np.ndarray, float]:
    step = 2.0 * np.pi * r / segments
    m = max(12, int(np.ceil(4.0 * np.pi * r * r / (step * step) * 1.2)))
    # Fibonacci lattice (Gonzalez, "Measurement of areas on a sphere using Fibonacci and
    # latitude-longitude lattices", Math. Geosci. 42, 2010)
    i = np.arange(m) + 0.5
    z = 1.0 - 2.0 * i / m
    phi = np.pi * (1.0 + np.sqrt(5.0)) * i
    rho = np.sqrt(1.0 - z * z)
    pts = r * np.column_stack([rho * np.cos(phi), rho * np.sin(phi), z])
    # covering radius measured against a dense lattice (the lattice has no closed-form bound)
    k = 20 * m
    j = np.arange(k) + 0.5
    zz = 1.0 - 2.0 * j / k
    pp = np.pi * (1.0 + np.sqrt(5.0)) * j * 1.0000001
    rr = np.sqrt(1.0 - zz * zz)
    dense = r * np.column_stack([rr * np.cos(pp), rr * np.sin(pp), zz])
    bound = float(cKDTree(pts).query(dense)[0].max() * 1.05)
    return pts, bound


def _mesh_samples(v: np.ndarray, f: np.ndarray, segments: int) -> tuple[np.ndarray, float]:
    step = 2.0 * np.pi * float(np.linalg.norm(v - v.mean(axis=0), axis=1).max()) / segments
    tri = v[f]
    pts = [v]
    # edges, dense
    edges = np.unique(np.sort(np.concatenate([f[:, [0, 1]], f[:, [1, 2]], f[:, [2, 0]]]), axis=1), axis=0)
    p0, p1 = v[edges[:, 0]], v[edges[:, 1]]
    lengths = np.linalg.norm(p1 - p0, axis=1)
    for n_e in np.unique(np.maximum(1, np.ceil(lengths * RIM_FACTOR / step).astype(int))):
        sel = np.maximum(1, np.ceil(lengths * RIM_FACTOR / step).astype(int)) == n_e
        t = np.arange(1, n_e) / n_e
        if t.size:
            pts.append((p0[sel, None] + t[None, :, None] * (p1 - p0)[sel, None]).reshape(-1, 3))
    # face interiors: barycentric grid of level L, sub-edges <= step
    longest = np.max(np.linalg.norm(tri - np.roll(tri, 1, axis=1), axis=2), axis=1)
    levels = np.maximum(1, np.ceil(longest / step).astype(int))
    bound = 0.0
    for L in np.unique(levels):
        sel = levels == L
        ij = np.array([(i, j) for i in range(L + 1) for j in range(L + 1 - i) if 0 < i and 0 < j and i + j < L])
        if ij.size:
            b = ij / L
            w = np.column_stack([1.0 - b.sum(axis=1), b])
            pts.append(np.einsum("kc,tci->tki", w, tri[sel]).reshape(-1, 3))
        # any point of a triangle with edges <= e lies within e / sqrt(3) of a vertex
        bound = max(bound, float(longest[sel].max()) / L / np.sqrt(3.0))
    return np.vstack(pts), bound


def surface_samples(solid: Solid, segments: int = CLEARANCE_SEGMENTS) -> tuple[np.ndarray, float]:
    """Fixed surface sample points of a solid in its own frame.

    Parameters
    ----------
    solid : Solid
    segments : int
        Samples around the largest circumference of a round body; faces use that spacing
        ``step = 2 pi R / segments`` (``R``: outer radius, half the longest cuboid edge, or the mesh's
        radius), rims and edges ``RIM_FACTOR`` times finer. Cap centres and all vertices/corners
        are included.

    Returns
    -------
    points_m : ndarray, shape (s, 3)
        Points on the surface (own frame, m).
    covering_m : float
        Bound on the distance from any surface point to the nearest sample (m).
    """
    if int(segments) < 6:
        raise GeometryError("surface_samples", "segments", "an integer >= 6", segments)
    s = solid.size_m
    if solid.shape == "cylinder":
        return _revolved_samples(0.0, s[0], s[1], int(segments))
    if solid.shape == "ring":
        return _revolved_samples(s[0], s[1], s[2], int(segments))
    if solid.shape == "cuboid":
        return _cuboid_samples(s, int(segments))
    if solid.shape == "sphere":
        return _sphere_samples(s[0], int(segments))
    return _mesh_samples(solid.vertices_m, solid.faces, int(segments))


# ----------------------------------------------------------------------------------------------
# Pair clearance
# ----------------------------------------------------------------------------------------------


def _project(solid: Solid, points_own: np.ndarray) -> np.ndarray:
    """Nearest surface points (k, 3) of a solid to own-frame points (k, 3): ``p - sdf(p) grad sdf(p)``.

    The gradient is a central difference (step ``1e-7`` of the solid's size); where it is not
    defined (on the medial axis) the point is returned unchanged.
    """
    h = 1e-7 * solid.bounding_radius_m
    offs = np.vstack([np.zeros(3), h * np.eye(3), -h * np.eye(3)])
    d = solid.sdf(points_own[:, None, :] + offs[None])  # (k, 7)
    g = (d[:, 1:4] - d[:, 4:7]) / (2.0 * h)
    gn = np.sqrt(np.einsum("ki,ki->k", g, g))
    ok = gn > 0.5
    g = g / np.where(ok, gn, 1.0)[:, None]
    return np.where(ok[:, None], points_own - d[:, :1] * g, points_own)


_LINE_STEPS = 2.0 ** -np.arange(0, 8)
"""Trial step lengths, as fractions of the solid's bounding radius, of the surface line search."""


def _surface_descent(sa: Solid, sb: Solid, a: np.ndarray, to_b) -> np.ndarray:
    """One line-search step that lowers ``sdf_B`` along A's surface, from A-frame points a (k, 3).

    The descent direction is the gradient of ``sdf_B`` (central differences) less its component
    along A's normal; trial points ``a - t g`` are projected back onto A and the best is kept
    (the current point is among the candidates, so the value never rises).
    """
    k = a.shape[0]
    h = 1e-7 * sb.bounding_radius_m
    ha = 1e-7 * sa.bounding_radius_m
    offs = np.vstack([h * np.eye(3), -h * np.eye(3)])
    gb = sb.sdf(to_b(np.repeat(a, 6, axis=0) + np.tile(offs, (k, 1)))).reshape(k, 6)
    g = (gb[:, :3] - gb[:, 3:]) / (2.0 * h)  # gradient of sdf_B o to_b in A's frame (rigid map)
    offa = np.vstack([ha * np.eye(3), -ha * np.eye(3)])
    da = sa.sdf(a[:, None, :] + offa[None]).reshape(k, 6)
    na = (da[:, :3] - da[:, 3:]) / (2.0 * ha)
    na /= np.maximum(np.linalg.norm(na, axis=1), 1e-300)[:, None]
    gt = g - np.einsum("ki,ki->k", g, na)[:, None] * na
    t = sa.bounding_radius_m * _LINE_STEPS
    trial = (a[:, None, :] - t[None, :, None] * gt[:, None, :]).reshape(-1, 3)
    trial = np.concatenate([a[:, None, :], _project(sa, trial).reshape(k, -1, 3)], axis=1)
    val = sb.sdf(to_b(trial.reshape(-1, 3))).reshape(k, -1)
    return trial[np.arange(k), val.argmin(axis=1)]


def _affine_rows(M: np.ndarray, m: np.ndarray, pT: np.ndarray) -> list[np.ndarray]:
    """Rows x, y, z (each (k, s)) of ``M @ p + m`` for (k, 3, 3) ``M``, (k, 3) ``m``, (3, s) ``pT``."""
    out = []
    for r in range(3):
        row = M[:, r, 0, None] * pT[0]
        row += M[:, r, 1, None] * pT[1]
        row += M[:, r, 2, None] * pT[2]
        row += m[:, r, None]
        out.append(row)
    return out


def _pair_clearance(sa: Solid, pa: np.ndarray, sb: Solid, pb: np.ndarray, M: np.ndarray, m: np.ndarray,
                    polish: int = 0) -> np.ndarray:
    """Sampled clearance of solids A and B at ``n`` relative placements, shape (n,).

    ``M`` (n, 3, 3), ``m`` (n, 3) map A's own frame into B's own frame: ``x_b = M x_a + m``;
    ``pa`` (sa, 3), ``pb`` (sb, 3) are surface samples in the own frames. The value is
    ``min(sdf_B over A's samples, sdf_A over B's samples)``, then improved by ``polish``
    alternating projections (von Neumann 1950; Cheney and Goldstein 1959) started from the best
    sample of each side: each iterate ``a`` (near A's surface) contributes
    ``sdf_B(a) + |sdf_A(a)|``, which is never below the exact clearance, so polishing can only
    bring the value down towards it.
    """
    n = M.shape[0]
    out = np.empty(n)
    step = max(1, _CHUNK_ELEMENTS // max(pa.shape[0], pb.shape[0]))
    paT, pbT = np.ascontiguousarray(pa.T), np.ascontiguousarray(pb.T)
    for i in range(0, n, step):
        Mi, mi = M[i : i + step], m[i : i + step]
        k = Mi.shape[0]
        rows = np.arange(k)
        MiT = Mi.transpose(0, 2, 1)
        mi_a = np.einsum("kij,kj->ki", MiT, mi)  # B's frame origin offset seen in A's frame
        # explicit multiply-adds on (k, s) rows: no BLAS threads for these thin products
        va = sb.sdf_xyz(*_affine_rows(Mi, mi, paT))
        vb = sa.sdf_xyz(*_affine_rows(MiT, -mi_a, pbT))
        ia, ib = va.argmin(axis=1), vb.argmin(axis=1)
        best = np.minimum(va[rows, ia], vb[rows, ib])
        if polish:
            def to_b(x, Mi=Mi, mi=mi):  # (k*c, 3) A-frame points -> B frame, c per pose
                c = x.shape[0] // Mi.shape[0]
                return (np.einsum("kij,kcj->kci", Mi, x.reshape(-1, c, 3)) + mi[:, None]).reshape(-1, 3)

            def to_a(x, MiT=MiT, mi_a=mi_a):
                c = x.shape[0] // MiT.shape[0]
                return (np.einsum("kij,kcj->kci", MiT, x.reshape(-1, c, 3)) - mi_a[:, None]).reshape(-1, 3)
            a = pa[ia]  # start on A, in A's frame
            b = pb[ib]  # start on B, in B's frame
            for _ in range(polish):
                a = _surface_descent(sa, sb, _project(sa, to_a(_project(sb, to_b(a)))), to_b)
                b = _surface_descent(sb, sa, _project(sb, to_b(_project(sa, to_a(b)))), to_a)
                best = np.minimum(best, sb.sdf(to_b(a)) + np.abs(sa.sdf(a)))
                best = np.minimum(best, sa.sdf(to_a(b)) + np.abs(sb.sdf(b)))
        out[i : i + step] = best
    return out


@dataclass(frozen=True)
class ClearanceDetail:
    """Clearance of the floater at many poses, with the nearest pair of bodies.

    Attributes
    ----------
    clearance_m : ndarray, shape (n,)
        Least signed clearance over all pairs (m); negative means overlap.
    floater_body, fixed_body : tuple of str, length n
        Names of the floater magnet and of the fixed solid of the nearest pair at each pose.
    pair_names : tuple of (str, str)
        (floater magnet, fixed solid) for each column of ``pair_clearance_m``.
    pair_clearance_m : ndarray, shape (n, pairs)
        Clearance of every pair at every pose (m).
    tolerance_m : float
        Sampling bound: each returned clearance is at most this much above the exact clearance
        (never below it).
    """

    clearance_m: np.ndarray
    floater_body: tuple[str, ...]
    fixed_body: tuple[str, ...]
    pair_names: tuple[tuple[str, str], ...]
    pair_clearance_m: np.ndarray
    tolerance_m: float


class _ClearanceModel:
    """Solids and their sample sets, prepared once per (design, segments)."""

    def __init__(self, design: Design, segments: int) -> None:
        solids = design_solids(design)
        self.floater = [s for s in solids if s.on_floater]
        self.fixed = [s for s in solids if not s.on_floater]
        if not self.floater:
            raise GeometryError("floater", "magnets", "at least one magnet", 0)
        self.samples = {s.name: surface_samples(s, segments) for s in solids}
        self.tolerance_m = max((c for _, c in self.samples.values()), default=0.0)

    def pairs(self, positions_m: np.ndarray, rotations: np.ndarray, polish: int) -> np.ndarray:
        n = positions_m.shape[0]
        out = np.empty((n, len(self.floater) * len(self.fixed)))
        col = 0
        for a in self.floater:
            Ra = np.einsum("nij,jk->nik", rotations, a.rotation)  # (n, 3, 3) own -> world
            ta = np.einsum("nij,j->ni", rotations, a.position_m) + positions_m
            for b in self.fixed:
                M = np.einsum("ji,njk->nik", b.rotation, Ra)
                m = np.einsum("nj,ji->ni", ta - b.position_m, b.rotation)
                out[:, col] = _pair_clearance(a, self.samples[a.name][0], b, self.samples[b.name][0], M, m,
                                               polish)
                col += 1
        return out


@functools.lru_cache(maxsize=8)
def _cached_model(design: Design, segments: int) -> _ClearanceModel:
    return _ClearanceModel(design, segments)


def _model(design: Design, segments: int) -> _ClearanceModel:
    try:
        return _cached_model(design, int(segments))
    except TypeError:  # an unhashable design (lists inside): build without caching
        return _ClearanceModel(design, int(segments))


def _poses(where: str, positions_m, rotvecs_rad) -> tuple[np.ndarray, np.ndarray]:
    p = np.atleast_2d(np.asarray(positions_m, dtype=float))
    r = np.atleast_2d(np.asarray(rotvecs_rad, dtype=float))
    if p.ndim != 2 or p.shape[1] != 3:
        raise GeometryError(where, "positions_m", "an array of shape (n, 3)", p.shape)
    if r.shape != p.shape:
        raise GeometryError(where, "rotvecs_rad", f"an array of shape {p.shape} like positions_m", r.shape)
    if not (np.isfinite(p).all() and np.isfinite(r).all()):
        raise GeometryError(where, "poses", "finite", "NaN or inf")
    return p, Rotation.from_rotvec(r).as_matrix().reshape(-1, 3, 3)


def clearance_detail(design: Design, positions_m, rotvecs_rad, segments: int = CLEARANCE_SEGMENTS,
                     polish: int = POLISH_STEPS) -> ClearanceDetail:
    """Signed clearance of the floater at many poses, naming the nearest bodies.

    Parameters and method as :func:`floater_clearance_m`.

    Returns
    -------
    ClearanceDetail
    """
    model = _model(design, segments)
    p, R = _poses("clearance_detail", positions_m, rotvecs_rad)
    names = tuple((a.name, b.name) for a in model.floater for b in model.fixed)
    n = p.shape[0]
    if not names:
        return ClearanceDetail(np.full(n, np.inf), ("",) * n, ("",) * n, (), np.zeros((n, 0)),
                               model.tolerance_m)
    pc = model.pairs(p, R, int(polish))
    k = pc.argmin(axis=1)
    return ClearanceDetail(
        clearance_m=pc[np.arange(n), k],
        floater_body=tuple(names[i][0] for i in k),
        fixed_body=tuple(names[i][1] for i in k),
        pair_names=names,
        pair_clearance_m=pc,
        tolerance_m=model.tolerance_m,
    )


def floater_clearance_m(design: Design, positions_m, rotvecs_rad, segments: int = CLEARANCE_SEGMENTS,
                        polish: int = POLISH_STEPS) -> np.ndarray:
    """Signed clearance between the posed floater and every fixed solid.

    Parameters
    ----------
    design : Design
    positions_m : array_like, shape (n, 3)
        Floater frame origins in the world (m).
    rotvecs_rad : array_like, shape (n, 3)
        Floater orientations as rotation vectors (rad).
    segments : int
        Sampling density (see :func:`surface_samples`).

    Returns
    -------
    ndarray, shape (n,)
        Least clearance (m) over all (floater magnet, fixed solid) pairs: the distance between the
        bodies when apart, ~0 touching, negative (minus a penetration depth) when they overlap;
        ``inf`` when the design has no fixed solid.

    Notes
    -----
    For a pair (A, B) the exact clearance is ``c = min(min_{a on dA} sdf_B(a), min_{b on dB} sdf_A(b))``;
    for disjoint solids it equals their Euclidean distance, and it is negative whenever the
    solids overlap. The function evaluates the exact SDFs at a fixed set of surface samples of
    each solid (cap centres, faces at spacing ``2 pi R / segments``, rims and edges
    ``RIM_FACTOR`` times denser), both ways, in one vectorised pass per pair, then refines the
    best sample of each side by ``polish`` steps, each an alternating projection (nearest point
    on B, back to A) followed by a line search for lower ``sdf_B`` along A's surface.

    Tolerance: every value used is an exact SDF value at a point on (or, after polishing, within
    ``|sdf_A|`` of, which is added) a surface, so the result is never below ``c``; since SDFs are
    1-Lipschitz it is at most the sampling covering radius ``ClearanceDetail.tolerance_m`` above
    ``c`` (about ``0.7 * 2 pi R / segments``; 2.6 mm for a 30 mm ring at the default 24 segments;
    subtract it for a guaranteed lower bound). That bound is far from what happens:

    - coaxial flat faces (the usual levitation stack, any gap, any spin about the axis): exact to
      rounding, since a cap centre is a sample;
    - an 8 mm ball against a ring and a block at 300 random poses (tests/test_bodies.py, exact
      reference): error below 1e-7 m (3e-8 m measured; 5e-5 m without polishing);
    - a 20 x 5 mm disc with random offsets (up to 15 mm) and tilts (~0.3 rad rms), clearances
      -0.1..7 mm, over a 30/10 x 10 mm ring and over a 30 x 20 x 10 mm block, 400 poses each,
      against 384 segments with 8 steps: at most 4e-5 m, 99 % below 1.6e-5 m (0.2 % of the
      disc radius); edge-to-face contacts converge slowest;
    - deep overlaps: the depth converges only at first order; its sign is what matters.

    Timing (2-core machine shared with other jobs, numpy): 200 poses of one primitive pair take
    about 1.5-3 ms with ``polish=0`` and 5-7 ms at the defaults; cost grows with the number of
    (floater magnet, fixed solid) pairs. Mesh solids cost ``samples x triangles`` per pose.
    """
    return clearance_detail(design, positions_m, rotvecs_rad, segments, polish).clearance_m


# ----------------------------------------------------------------------------------------------
# Overlap check at the nominal pose
# ----------------------------------------------------------------------------------------------


def overlapping_pairs(design: Design, tolerance_m: float = 1e-9, segments: int = OVERLAP_SEGMENTS,
                      polish: int = POLISH_STEPS) -> list[tuple[str, str, float]]:
    """Pairs of solids that overlap with the floater at the operating gap.

    Parameters
    ----------
    design : Design
        The floater is placed at ``study.floater_origin_m(study.operating_gap_m)`` with
        ``study.floater_rotvec_rad``.
    tolerance_m : float
        Pairs whose clearance is below ``-tolerance_m`` are reported (touching is allowed).
    segments : int
        Sampling density (see :func:`surface_samples`).

    Returns
    -------
    list of (str, str, float)
        ``(name_a, name_b, clearance_m)`` for each overlapping pair, most negative first; empty
        when nothing overlaps. Covers fixed-fixed, floater-fixed and floater-floater pairs.

    Notes
    -----
    Same sampled clearance as :func:`floater_clearance_m` (denser), so a reported overlap is
    certain (the value is never below the exact one); an overlap shallower than the sampling
    covering radius that falls between samples and escapes the polishing could be missed (the
    bound at 96 segments is 0.05 R; in practice far less).
    """
    if not np.isfinite(tolerance_m) or tolerance_m < 0:
        raise GeometryError("overlapping_pairs", "tolerance_m", "non-negative", tolerance_m)
    solids = design_solids(design)
    Rp, tp = _nominal_pose(design, None)
    placed = [(s, *_world_placement(s, Rp, tp)) for s in solids]
    samples: dict[str, np.ndarray] = {}
    out = []
    for i, (a, Ra, ta) in enumerate(placed):
        for b, Rb, tb in placed[i + 1 :]:
            if np.linalg.norm(ta - tb) > a.bounding_radius_m + b.bounding_radius_m + tolerance_m:
                continue
            for s in (a, b):
                if s.name not in samples:
                    samples[s.name] = surface_samples(s, segments)[0]
            M = (Rb.T @ Ra)[None]
            m = ((ta - tb) @ Rb)[None]
            c = float(_pair_clearance(a, samples[a.name], b, samples[b.name], M, m, polish)[0])
            if c < -tolerance_m:
                out.append((a.name, b.name, c))
    return sorted(out, key=lambda t: t[2])


# ----------------------------------------------------------------------------------------------
# Meshes
# ----------------------------------------------------------------------------------------------


def polygon_radius_m(radius_m: float, segments: int) -> float:
    """Circumradius of a regular ``segments``-gon whose area equals that of a circle of ``radius_m``.

    ``r_poly = r sqrt(2 pi / (N sin(2 pi / N)))``, from the area of a regular N-gon
    ``(N / 2) r_poly^2 sin(2 pi / N)`` (e.g. Zwillinger, *CRC Standard Mathematical Tables*).
    """
    return float(radius_m * np.sqrt(2.0 * np.pi / (segments * np.sin(2.0 * np.pi / segments))))


def solid_mesh(solid: Solid, segments: int = MESH_SEGMENTS, exact_volume: bool = True) -> trimesh.Trimesh:
    """Closed triangle mesh of a solid in its own frame.

    Parameters
    ----------
    solid : Solid
    segments : int
        Segments around round bodies (icosphere level :data:`SPHERE_SUBDIVISIONS` for spheres).
    exact_volume : bool
        True: round bodies use the equal-area polygon radius (:func:`polygon_radius_m`) and spheres
        are scaled so that the mesh volume equals the exact volume (to rounding). False: vertices lie
        on the true surface (the mesh is inscribed), as for outlines.

    Returns
    -------
    trimesh.Trimesh
        Watertight, outward-oriented.
    """
    s = solid.size_m
    fix = (lambda r: polygon_radius_m(r, segments)) if exact_volume else (lambda r: r)
    if solid.shape == "cylinder":
        mesh = trimesh.creation.cylinder(radius=fix(s[0]), height=s[1], sections=segments)
    elif solid.shape == "ring":
        mesh = trimesh.creation.annulus(r_min=fix(s[0]), r_max=fix(s[1]), height=s[2], sections=segments)
    elif solid.shape == "cuboid":
        mesh = trimesh.creation.box(extents=s)
    elif solid.shape == "sphere":
        mesh = trimesh.creation.icosphere(subdivisions=SPHERE_SUBDIVISIONS, radius=s[0])
        if exact_volume:
            mesh.apply_scale((solid.volume_m3 / mesh.volume) ** (1.0 / 3.0))
    else:
        mesh = trimesh.Trimesh(vertices=solid.vertices_m.copy(), faces=solid.faces.copy(), process=False)
    return mesh


def _placed_meshes(design: Design, gap_m, segments: int, exact_volume: bool) -> list[tuple[Solid, trimesh.Trimesh]]:
    Rp, tp = _nominal_pose(design, gap_m)
    out = []
    for s in design_solids(design):
        R, t = _world_placement(s, Rp, tp)
        T = np.eye(4)
        T[:3, :3], T[:3, 3] = R, t
        mesh = solid_mesh(s, segments, exact_volume)
        mesh.apply_transform(T)
        out.append((s, mesh))
    return out


def body_meshes(design: Design, gap_m: float | None = None,
                segments: int = MESH_SEGMENTS) -> dict[str, trimesh.Trimesh]:
    """A closed triangle mesh of every solid, in world coordinates.

    Parameters
    ----------
    design : Design
    gap_m : float, optional
        Gap at which the floater is placed (m); default ``study.operating_gap_m``.
    segments : int
        Segments around round bodies.

    Returns
    -------
    dict of str to trimesh.Trimesh
        Keyed by body name (fixed magnets, coils, cores, floater magnets). Each mesh is watertight
        and has the model's exact volume: round bodies use the equal-area polygon radius of
        :func:`polygon_radius_m` (the faceted radius is larger by ``(2 pi / N)^2 / 12`` relative,
        1.2e-4 at 96 segments, while the volume is exact), spheres are scaled to the exact
        volume, cuboids and mesh magnets are exact.
    """
    return {s.name: m for s, m in _placed_meshes(design, gap_m, segments, True)}


# ----------------------------------------------------------------------------------------------
# Outlines for 2-D pictures
# ----------------------------------------------------------------------------------------------


def _signed_area(poly: np.ndarray) -> float:
    x, y = poly[:, 0], poly[:, 1]
    return 0.5 * float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y))


def _point_in_polygon(pt: np.ndarray, poly: np.ndarray) -> bool:
    x, y = poly[:, 0], poly[:, 1]
    x2, y2 = np.roll(x, -1), np.roll(y, -1)
    cross = (y > pt[1]) != (y2 > pt[1])
    with np.errstate(divide="ignore", invalid="ignore"):
        xi = x + (pt[1] - y) * (x2 - x) / (y2 - y)
    return bool(np.count_nonzero(cross & (pt[0] < xi)) % 2)


def _orient(loops: list[np.ndarray]) -> list[np.ndarray]:
    """Orient loops: outer boundaries counter-clockwise, holes (odd nesting depth) clockwise."""
    out = []
    for i, lp in enumerate(loops):
        depth = sum(_point_in_polygon(lp[0], other) for j, other in enumerate(loops) if j != i)
        ccw = _signed_area(lp) > 0
        out.append(lp if ccw == (depth % 2 == 0) else lp[::-1])
    return out


def _chain_segments(where: str, segs: np.ndarray, tol: float) -> list[np.ndarray]:
    """Join 2-D segments (m, 2, 2) into closed loops."""
    pts = segs.reshape(-1, 2)
    parent = np.arange(pts.shape[0])

    def find(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i, j in cKDTree(pts).query_pairs(tol):
        ri, rj = find(i), find(j)
        if ri != rj:
            parent[max(ri, rj)] = min(ri, rj)
    ids = np.array([find(i) for i in range(pts.shape[0])]).reshape(-1, 2)
    ids = ids[ids[:, 0] != ids[:, 1]]
    ids = np.unique(np.sort(ids, axis=1), axis=0)
    adj: dict[int, list[int]] = {}
    for a, b in ids:
        adj.setdefault(int(a), []).append(int(b))
        adj.setdefault(int(b), []).append(int(a))
    bad = [k for k, v in adj.items() if len(v) != 2]
    if bad:
        raise GeometryError(where, "the section of a closed mesh", "a set of closed loops",
                            f"{len(bad)} open ends")
    loops, seen = [], set()
    for start in adj:
        if start in seen:
            continue
        loop, prev, cur = [start], None, start
        seen.add(start)
        while True:
            a, b = adj[cur]
            nxt = a if a != prev else b
            if nxt == start:
                break
            loop.append(nxt)
            seen.add(nxt)
            prev, cur = cur, nxt
        loops.append(pts[loop])
    return loops


def _convex_clip(subject: np.ndarray, clip: np.ndarray) -> np.ndarray:
    """Intersection of two convex counter-clockwise polygons (Sutherland and Hodgman 1974)."""
    out = subject
    for i in range(clip.shape[0]):
        if out.shape[0] == 0:
            break
        a, b = clip[i], clip[(i + 1) % clip.shape[0]]
        e = b - a
        side = e[0] * (out[:, 1] - a[1]) - e[1] * (out[:, 0] - a[0])
        res = []
        for k in range(out.shape[0]):
            p, q, sp, sq = out[k], out[(k + 1) % out.shape[0]], side[k], side[(k + 1) % out.shape[0]]
            if sp >= 0:
                res.append(p)
            if (sp >= 0) != (sq >= 0):
                res.append(p + (q - p) * (sp / (sp - sq)))
        out = np.array(res).reshape(-1, 2)
    return out


def _hull(points2: np.ndarray) -> np.ndarray:
    return points2[ConvexHull(points2).vertices]  # counter-clockwise in 2-D


def _top_view(s: Solid, R: np.ndarray, t: np.ndarray, segments: int) -> list[np.ndarray]:
    if s.shape == "sphere":
        return [_circle(s.size_m[0], segments, 0.0)[:, :2] + t[:2]]
    if s.shape in ("cylinder", "ring"):
        ro, h = (s.size_m[0], s.size_m[1]) if s.shape == "cylinder" else (s.size_m[1], s.size_m[2])
        rims = np.vstack([_circle(ro, segments, -h / 2), _circle(ro, segments, h / 2)]) @ R.T + t
        loops = [_hull(rims[:, :2])]
        if s.shape == "ring":
            ri = s.size_m[0]
            bottom = (_circle(ri, segments, -h / 2) @ R.T + t)[:, :2]
            top = (_circle(ri, segments, h / 2) @ R.T + t)[:, :2]
            if abs(_signed_area(bottom)) > 1e-12 * ro * ro:
                if _signed_area(bottom) < 0:
                    bottom, top = bottom[::-1], top[::-1]
                hole = _convex_clip(bottom, top)
                if hole.shape[0] >= 3 and abs(_signed_area(hole)) > 1e-12 * ro * ro:
                    loops.append(hole[::-1])  # clockwise: a hole
        return loops
    verts = (solid_mesh(s, segments, exact_volume=False).vertices @ R.T + t)[:, :2]
    return [_hull(verts)]


def section_outlines(design: Design, plane: str = "xz", gap_m: float | None = None,
                     segments: int = MESH_SEGMENTS) -> list[tuple[str, str, np.ndarray]]:
    """To-scale outlines of every solid for a 2-D picture.

    Parameters
    ----------
    design : Design
    plane : {"xz", "xy"}
        ``"xz"``: the section by the plane ``y = 0`` (side view), polygons in ``(x, z)``.
        ``"xy"``: the projection along z (top view), polygons in ``(x, y)``.
    gap_m : float, optional
        Floater gap (m); default ``study.operating_gap_m``.
    segments : int
        Segments around round bodies.

    Returns
    -------
    list of (name, kind, polygon)
        ``polygon`` has shape (p, 2), metres, not repeating its first vertex. Outer boundaries run
        counter-clockwise, holes clockwise: draw all polygons of one name as one compound path
        (e.g. a ring cut across its axis, or seen through its bore). ``kind`` is one of
        :data:`SOLID_KINDS`. Solids the plane does not cut are left out of ``"xz"``.

    Notes
    -----
    ``"xz"``: the plane section of each solid's inscribed mesh (vertices on the true surface;
    ``trimesh.intersections.mesh_plane``), cut at ``y = 1e-9 * scale`` to stay off mesh edges, the
    segments joined into loops. Any orientation is handled; round edges are polygons of
    ``segments`` sides. ``"xy"``: the exact silhouette hull for cylinders, cuboids and spheres
    (convex); for a ring the outer hull minus the see-through bore, which is the intersection of
    the projected bore circles of its two end faces; for a mesh magnet its convex hull (a
    non-convex mesh's concavities are not drawn).
    """
    if plane not in ("xz", "xy"):
        raise GeometryError("section_outlines", "plane", '"xz" or "xy"', plane)
    placed = _placed_meshes(design, gap_m, segments, exact_volume=False)
    out: list[tuple[str, str, np.ndarray]] = []
    if plane == "xy":
        Rp, tp = _nominal_pose(design, gap_m)
        for s, _ in placed:
            R, t = _world_placement(s, Rp, tp)
            out.extend((s.name, s.kind, lp) for lp in _top_view(s, R, t, segments))
        return out
    scale = max(float(np.abs(m.bounds).max()) for _, m in placed) if placed else 1.0
    eps = 1e-9 * scale
    for s, mesh in placed:
        lo, hi = mesh.bounds[:, 1]
        if not (lo < eps < hi):
            continue
        segs = trimesh.intersections.mesh_plane(mesh, plane_normal=[0.0, 1.0, 0.0],
                                                plane_origin=[0.0, eps, 0.0])
        if len(segs) == 0:
            continue
        loops = _chain_segments(f"section_outlines({s.name})", segs[:, :, [0, 2]], 1e-9 * scale)
        out.extend((s.name, s.kind, lp) for lp in _orient(loops))
    return out
