"""Signed distance functions of the primitive solids and of closed triangle meshes.

Signed distances are negative inside, zero on the surface and positive outside. The primitive ones
are exact Euclidean distances; the mesh one is exact too (distance to the nearest triangle, sign
from the generalized winding number). All take points in the solid's own frame (axis on own z,
centre at the own origin). Shape letters: ``q`` query points, ``f`` triangles; ``...`` any leading
shape. Pure numpy, SI units.
"""

from __future__ import annotations

import numpy as np

CHUNK_ELEMENTS = 40_000
"""Largest number of (point, sample) or (point, triangle) pairs held in memory at once."""

PRIMITIVE_SHAPES = ("cylinder", "ring", "cuboid", "sphere")
"""Shapes :func:`primitive_sdf_xyz` knows; their ``size`` tuples are described there."""


def _box2(u, v):
    """Exact SDF of the 2-D set ``u <= 0 and v <= 0`` given the per-axis excesses ``u, v``."""
    pu = np.maximum(u, 0.0)
    pv = np.maximum(v, 0.0)
    return np.sqrt(pu * pu + pv * pv) + np.minimum(np.maximum(u, v), 0.0)


def primitive_sdf_xyz(shape: str, size, x, y, z):
    """Signed distance of a primitive at own-frame coordinates given as three arrays of one shape.

    ``size``: cylinder ``(radius, height)``; ring ``(inner_radius, outer_radius, height)``; cuboid
    ``(x, y, z)`` edges; sphere ``(radius,)`` (m). The fast path of the ``sdf_*`` functions.
    """
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
    """Signed distance (...) to a solid cylinder of ``radius_m`` and full ``height_m`` at points (..., 3)
    in its own frame (axis z, centre at origin).

    Notes
    -----
    The nearest surface point of a solid of revolution lies in the meridian half-plane through the
    query point, so the 3-D distance is the 2-D distance in ``(r, z)`` to the rectangle
    ``[0, R] x [-h/2, h/2]``: ``d = |max(q, 0)| + min(max(q_r, q_z), 0)`` with
    ``q = (r - R, |z| - h/2)`` (the exact box distance, e.g. Quilez, "Distance functions", 2008).
    """
    p = np.asarray(points_m, dtype=float)
    return primitive_sdf_xyz("cylinder", (radius_m, height_m), p[..., 0], p[..., 1], p[..., 2])


def sdf_ring(points_m, inner_radius_m: float, outer_radius_m: float, height_m: float) -> np.ndarray:
    """Signed distance (...) to a ring (annular cylinder) at points (..., 3) in its own frame (axis z,
    centre at origin): bore radius ``inner_radius_m`` (0 gives a cylinder), ``outer_radius_m``, full
    ``height_m``; negative inside the material.

    Notes
    -----
    Meridian-plane reduction as in :func:`sdf_cylinder`, to the rectangle
    ``[r_i, r_o] x [-h/2, h/2]``; the mirror image of the section (at ``-r``) is never nearer,
    so the result is exact.
    """
    p = np.asarray(points_m, dtype=float)
    return primitive_sdf_xyz("ring", (inner_radius_m, outer_radius_m, height_m), p[..., 0], p[..., 1], p[..., 2])


def sdf_cuboid(points_m, dimensions_m) -> np.ndarray:
    """Signed distance (...) to a cuboid of edges ``dimensions_m`` (3,) along own x, y, z at points
    (..., 3) in its own frame (edges on the axes, centre at origin).

    Notes
    -----
    ``q = |p| - a/2``; ``d = |max(q, 0)| + min(max_i q_i, 0)`` (exact box distance; outside it is
    the distance to the clamped point, Ericson, *Real-Time Collision Detection*, 2005, 5.1.3).
    """
    p = np.asarray(points_m, dtype=float)
    a = [float(x) for x in np.asarray(dimensions_m, dtype=float)]
    return primitive_sdf_xyz("cuboid", a, p[..., 0], p[..., 1], p[..., 2])


def sdf_sphere(points_m, radius_m: float) -> np.ndarray:
    """Signed distance ``|p| - R`` to a sphere centred at the origin (m); shape (...)."""
    p = np.asarray(points_m, dtype=float)
    return np.linalg.norm(p, axis=-1) - radius_m


def _per_point_over_triangles(points_m, vertices_m, faces, kernel) -> np.ndarray:
    """``kernel(q, tri)`` over chunks of points: q (c, 1, 3), tri (f, 3, 3) -> (c,); shape (...)."""
    p = np.asarray(points_m, dtype=float)
    flat = p.reshape(-1, 3)
    tri = np.asarray(vertices_m, dtype=float)[np.asarray(faces, dtype=np.intp)]
    out = np.empty(flat.shape[0])
    step = max(1, CHUNK_ELEMENTS // max(1, tri.shape[0]))
    for i in range(0, flat.shape[0], step):
        out[i : i + step] = kernel(flat[i : i + step, None, :], tri)
    return out.reshape(p.shape[:-1])


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
    def solid_angles(q, tri):
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
        return 2.0 * np.arctan2(num, den).sum(axis=1) / (4.0 * np.pi)

    return _per_point_over_triangles(points_m, vertices_m, faces, solid_angles)


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

    def nearest(q, _tri):
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
        return np.sqrt(np.where(inside, plane2, edge2).min(axis=1))

    return _per_point_over_triangles(points_m, vertices_m, faces, nearest)


def sdf_mesh(points_m, vertices_m, faces) -> np.ndarray:
    """Signed distance (...) to a closed, outward-oriented triangle mesh (arguments as
    :func:`triangle_distance_m`): the distance, negated where :func:`winding_number` exceeds 1/2."""
    d = triangle_distance_m(points_m, vertices_m, faces)
    w = winding_number(points_m, vertices_m, faces)
    return np.where(w > 0.5, -d, d)
