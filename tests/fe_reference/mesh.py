"""Graded tensor-product meshes of the (r, z) half-plane, optionally fitted to a sphere.

Every body of the reference cases is a rectangle in the (r, z) half-plane except the sphere
floater. A tensor-product mesh whose node lines contain every body edge fits the rectangles
exactly; the node spacing grows geometrically away from the edge lines (where the field has its
corner singularities) and linearly with the distance from the device in the far field. Mesh
levels refine by splitting every interval of level 0 into ``2^level`` equal parts, so the levels
are nested and the grading stays fixed (the usual setting for Richardson extrapolation).

A sphere of radius ``a`` is fitted by mapping: the half-square ``0 <= rho <= s``,
``|zeta| <= s`` (``rho, zeta`` relative to the centre) is mapped onto the half-disc of radius
``s`` by ``x -> x s / |x|`` for ``s <= a`` (the concentric square-to-disc map), blended
linearly in ``s`` to the identity at ``s = b`` and beyond. The map is applied to the vertices and
edge midpoints of a quadratic (isoparametric) mesh, so edges on the sphere are quadratic arcs
through three points of the circle. Cell diagonals point away from the centre, so no triangle has
two edges on the square's boundary (that triangle would collapse onto the circle).
"""

from __future__ import annotations

import numpy as np


def graded_nodes(lo: float, hi: float, refine_at, keep_at=(), h_min: float = 1e-4, growth: float = 0.3,
                 h_max: float = 1.5e-3, device=(0.0, 0.0), far_ratio: float = 0.35) -> np.ndarray:
    """Level-0 node coordinates on ``[lo, hi]`` (m).

    Parameters
    ----------
    refine_at : sequence of float
        Edge lines: nodes there, spacing ``h_min + growth * distance`` near them (m).
    keep_at : sequence of float
        Further lines that must be nodes, without refinement (m).
    h_min, growth, h_max : float
        Spacing at an edge line (m), its growth rate, and the cap inside the device (m).
    device : (float, float)
        Interval holding the bodies; outside it the cap grows as ``far_ratio * distance``.
    """
    refine = np.unique(np.clip(np.asarray(refine_at, dtype=float), lo, hi))
    breaks = np.unique(np.concatenate([[lo, hi], refine, np.clip(np.asarray(keep_at, dtype=float), lo, hi)]))

    def spacing(x):
        d_dev = np.maximum(np.maximum(device[0] - x, x - device[1]), 0.0)
        cap = np.maximum(h_max, far_ratio * d_dev)
        if refine.size:
            grade = h_min + growth * np.min(np.abs(x[:, None] - refine[None, :]), axis=1)
            return np.minimum(cap, grade)
        return cap

    nodes = [np.array([lo])]
    for x0, x1 in zip(breaks[:-1], breaks[1:]):
        if x1 - x0 <= 1e-12:
            continue
        xs = np.linspace(x0, x1, 4001)
        inv = 1.0 / spacing(xs)
        cum = np.concatenate([[0.0], np.cumsum(0.5 * (inv[1:] + inv[:-1]) * np.diff(xs))])
        n = max(1, int(np.ceil(cum[-1])))
        seg = np.interp(np.linspace(0.0, cum[-1], n + 1), cum, xs)
        seg[-1] = x1
        nodes.append(seg[1:])
    return np.concatenate(nodes)


def refine_nodes(nodes: np.ndarray, level: int) -> np.ndarray:
    """Split every interval of ``nodes`` into ``2**level`` equal parts (nested levels)."""
    k = 2 ** int(level)
    t = np.arange(k) / k
    inner = (nodes[:-1, None] + t[None, :] * np.diff(nodes)[:, None]).ravel()
    return np.concatenate([inner, nodes[-1:]])


def tensor_triangles(r_nodes: np.ndarray, z_nodes: np.ndarray, z_centre: float) -> tuple[np.ndarray, np.ndarray]:
    """Points (2, p) and counter-clockwise triangles (3, t) of the tensor mesh.

    Each cell is split by the diagonal that points away from ``(0, z_centre)``: the rising
    diagonal above ``z_centre``, the falling one below.
    """
    nr, nz = r_nodes.size, z_nodes.size
    R, Z = np.meshgrid(r_nodes, z_nodes, indexing="ij")
    p = np.vstack([R.ravel(), Z.ravel()])
    idx = np.arange(nr * nz).reshape(nr, nz)
    a = idx[:-1, :-1].ravel()   # (i, j)
    b = idx[1:, :-1].ravel()    # (i+1, j)
    c = idx[1:, 1:].ravel()     # (i+1, j+1)
    d = idx[:-1, 1:].ravel()    # (i, j+1)
    zc = 0.5 * (Z[:-1, :-1] + Z[:-1, 1:]).ravel()
    up = zc >= z_centre
    t1 = np.where(up, [a, b, c], [a, b, d])
    t2 = np.where(up, [a, c, d], [b, c, d])
    return p, np.hstack([t1, t2]).astype(np.int64)


def sphere_map(points: np.ndarray, z_centre: float, a: float, b: float) -> np.ndarray:
    """Map points (2, p) so that the half-square of half-width ``a`` becomes the half-disc.

    Identity for ``max(rho, |zeta|) >= b``; see the module notes.
    """
    rho = points[0]
    zeta = points[1] - z_centre
    s = np.maximum(np.abs(rho), np.abs(zeta))
    e = np.hypot(rho, zeta)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(e > 0, s / np.where(e > 0, e, 1.0), 1.0)
    t = np.clip((s - a) / (b - a), 0.0, 1.0)
    f = t + (1.0 - t) * ratio
    out = points.copy()
    out[0] = rho * f
    out[1] = z_centre + zeta * f
    return out
