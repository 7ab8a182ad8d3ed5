"""Closed-form fields of uniformly polarized bodies, through magpylib's functional kernels.

The kernels of ``magpylib.core`` are called once per body on stacked observer arrays, in chunks
of :data:`CHUNK` evaluations so that temporary memory stays bounded (about 100 MB); calling them
directly avoids the object layer (about twice as fast as ``getB`` on objects).
"""

from __future__ import annotations

import numpy as np

from fields.model.design import Magnet
from fields.physics.checks import input_error

#: number of kernel evaluations per outer chunk (bounds temporary memory to ~100 MB)
CHUNK = 200_000
#: rows per magpylib cylinder-kernel call inside a chunk: the kernels' temporaries then stay in
#: cache (magpylib's axial cylinder kernel measured 2.8 M rows/s in 200k-row calls and 5.2 M rows/s
#: in 6k-16k-row calls on a 2-core machine: benchmarks/bench_kernels.py)
KERNEL_ROWS = 16_384


def blocked(kernel, *columns) -> np.ndarray:
    """``kernel(*columns)`` evaluated in blocks of :data:`KERNEL_ROWS` rows and joined.

    ``kernel`` is a magpylib core kernel that takes 1-D arrays of equal length and returns
    shape (3, n); the result is identical to one call (the kernels are row-wise)."""
    n = columns[0].shape[0]
    if n <= KERNEL_ROWS:
        return kernel(*columns)
    return np.concatenate([kernel(*(c[i:i + KERNEL_ROWS] for c in columns)) for i in range(0, n, KERNEL_ROWS)],
                          axis=1)


def _cyl_to_cart(phi: np.ndarray, Br: np.ndarray, Bphi: np.ndarray, Bz: np.ndarray) -> np.ndarray:
    c, s = np.cos(phi), np.sin(phi)
    return np.stack((Br * c - Bphi * s, Br * s + Bphi * c, Bz), axis=-1)


def cylinder_field_own_T(points_own_m, radius_m, height_m, J_own_T) -> np.ndarray:
    """B of uniformly polarized cylinders in their own frame.

    Parameters
    ----------
    points_own_m : ndarray, shape (q, 3)
        Observers in the cylinder frame (axis z, centre at the origin) (m).
    radius_m, height_m : float or ndarray, shape (q,)
        Radius and height per observer (m).
    J_own_T : ndarray, shape (3,) or (q, 3)
        Polarization in the cylinder frame (T).

    Returns
    -------
    ndarray, shape (q, 3)
        B (T) in the cylinder frame. Observers exactly on an edge are not allowed.

    Notes
    -----
    Axial part: Derby and Olbert, Am. J. Phys. 78 (2010) 229 (``magnet_cylinder_axial_Bfield``);
    diametral part: Caciagli et al., JMMM 456 (2018) 423 (``magnet_cylinder_diametral_Hfield``,
    which returns ``mu0 H`` per unit polarization; ``J`` is added inside).
    """
    import magpylib as magpy

    p = np.asarray(points_own_m, dtype=float).reshape(-1, 3)
    q = p.shape[0]
    R = np.broadcast_to(np.asarray(radius_m, dtype=float), (q,))
    h = np.broadcast_to(np.asarray(height_m, dtype=float), (q,))
    J = np.broadcast_to(np.asarray(J_own_T, dtype=float), (q, 3))
    out = np.empty((q, 3))
    for s in range(0, q, CHUNK):
        sl = slice(s, s + CHUNK)
        x, y, z = p[sl].T
        r = np.hypot(x, y)
        phi = np.arctan2(y, x)
        Rs, hs, Js = R[sl], h[sl], J[sl]
        z0 = 0.5 * hs / Rs
        Bc = np.zeros((3, x.size))
        if np.any(Js[:, 2] != 0.0):
            Bc += blocked(magpy.core.magnet_cylinder_axial_Bfield, z0, r / Rs, z / Rs) * Js[:, 2]
        Jt = np.hypot(Js[:, 0], Js[:, 1])
        if np.any(Jt != 0.0):
            theta = np.arctan2(Js[:, 1], Js[:, 0])
            Bc += blocked(magpy.core.magnet_cylinder_diametral_Hfield, z0, r / Rs, z / Rs, phi - theta) * Jt
        B = _cyl_to_cart(phi, Bc[0], Bc[1], Bc[2])
        inside = (r < Rs) & (np.abs(z) < 0.5 * hs)
        B[inside, 0] += Js[inside, 0]
        B[inside, 1] += Js[inside, 1]
        out[sl] = B
    return out


def shape_field_own_T(shape: str, dimensions_m, J_own_T, points_own_m, mesh_triangles_m=None) -> np.ndarray:
    """B (q, 3) of a uniformly polarized body in its own frame.

    Parameters
    ----------
    shape : str
        ``cylinder``, ``ring``, ``cuboid``, ``sphere`` or ``mesh``.
    dimensions_m : tuple of float
        As in :class:`fields.model.design.Magnet`.
    J_own_T : ndarray, shape (3,) or (q, 3)
        Polarization (T), own frame.
    points_own_m : ndarray, shape (q, 3)
    mesh_triangles_m : ndarray, shape (t, 3, 3), optional
        Outward-oriented triangles (mesh shape).

    Notes
    -----
    The mesh field is the field of the surface charges (Guptasarma and Singh, Geophysics 64 (1999)
    70, magpylib ``triangle_Bfield``); it equals B outside the body only.
    """
    import magpylib as magpy

    p = np.asarray(points_own_m, dtype=float).reshape(-1, 3)
    q = p.shape[0]
    J = np.broadcast_to(np.asarray(J_own_T, dtype=float), (q, 3))
    d = dimensions_m
    if shape == "cylinder":
        return cylinder_field_own_T(p, d[0] / 2, d[1], J)
    if shape == "ring":
        return cylinder_field_own_T(p, d[1] / 2, d[2], J) - cylinder_field_own_T(p, d[0] / 2, d[2], J)
    out = np.empty((q, 3))
    if shape == "cuboid":
        dims = np.broadcast_to(np.asarray(d, dtype=float), (min(q, CHUNK), 3))
        for s in range(0, q, CHUNK):
            sl = slice(s, s + CHUNK)
            m = p[sl].shape[0]
            out[sl] = magpy.core.magnet_cuboid_Bfield(p[sl], dims[:m], np.ascontiguousarray(J[sl]))
        return out
    if shape == "sphere":
        for s in range(0, q, CHUNK):
            sl = slice(s, s + CHUNK)
            m = p[sl].shape[0]
            out[sl] = magpy.core.magnet_sphere_Bfield(p[sl], np.full(m, float(d[0])), np.ascontiguousarray(J[sl]))
        return out
    if shape == "mesh":
        tri = np.asarray(mesh_triangles_m, dtype=float)
        t = tri.shape[0]
        out[:] = 0.0
        step = max(1, CHUNK // max(t, 1))
        for s in range(0, q, step):
            sl = slice(s, s + step)
            m = p[sl].shape[0]
            obs = np.repeat(p[sl], t, axis=0)
            pol = np.repeat(J[sl], t, axis=0)
            verts = np.tile(tri, (m, 1, 1))
            out[sl] = magpy.core.triangle_Bfield(obs, verts, pol).reshape(m, t, 3).sum(axis=1)
        return out
    raise input_error("shape_field_own_T", "shape", "one of cylinder, ring, cuboid, sphere, mesh", shape)


def mesh_triangles(magnet: Magnet) -> np.ndarray | None:
    """Outward-oriented triangles (t, 3, 3) of a mesh magnet (own frame, m); None for other shapes."""
    if magnet.shape != "mesh":
        return None
    if magnet.mesh_vertices_m is None or magnet.mesh_faces is None:
        raise input_error(f"magnet {magnet.name}", "mesh_vertices_m and mesh_faces", "given for a mesh magnet")
    return np.asarray(magnet.mesh_vertices_m, dtype=float)[np.asarray(magnet.mesh_faces)]



def to_own_frame(points_m: np.ndarray, position_m, R: np.ndarray) -> np.ndarray:
    """Points (q, 3) from the world frame into a body frame at ``position_m`` with rotation R (own -> world)."""
    return (points_m - np.asarray(position_m, dtype=float)) @ R
