"""Fixed surface samples of the solids, with a bound on their covering radius.

The clearance (:mod:`fields.model.clearance`) evaluates exact signed distances at these points.
Shape letters: ``s`` surface samples. Pure numpy/scipy, SI units.
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from fields.errors import InputError
from fields.model.solids import Solid

CLEARANCE_SEGMENTS = 24
"""Default angular samples around a round body for the clearance (rims get ``RIM_FACTOR`` times more)."""

RIM_FACTOR = 3
"""Rims and edges are sampled this many times more densely than faces."""


def circle_points(radius: float, count: int, z: float) -> np.ndarray:
    """``count`` points (count, 3) evenly spaced on the circle of ``radius`` about z at height ``z``."""
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
        pts += [circle_points(r, m, -H), circle_points(r, m, H)]
        bound = max(bound, np.pi * r / m)
    # caps: rings between the rims (plus the centre of a full disc)
    n_r = max(1, int(np.ceil((ro - ri) / step)))
    radii = np.linspace(ri, ro, n_r + 1)
    if ri == 0:
        pts.append(np.array([[0.0, 0.0, -H], [0.0, 0.0, H]]))
    for r in radii[1:-1]:
        m = max(6, int(np.ceil(segments * r / ro)))
        pts += [circle_points(r, m, -H), circle_points(r, m, H)]
    # ring arcs are at most ``step`` long (m >= segments r / ro)
    bound = max(bound, 0.5 * np.hypot(step, (ro - ri) / n_r))
    # sides: rows between the rims
    n_z = max(1, int(np.ceil(h / step)))
    for r in (ri, ro) if ri > 0 else (ro,):
        m = max(6, int(np.ceil(segments * r / ro)))
        for z in np.linspace(-H, H, n_z + 1)[1:-1]:
            pts.append(circle_points(r, m, z))
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
        raise InputError(f"surface_samples: segments must be an integer >= 6; got {segments!r}.")
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

