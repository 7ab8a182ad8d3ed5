"""To-scale 2-D outlines of the solids: a side section (plane y = 0) and a top view.

Polygons are arrays (p, 2) in metres; outer boundaries run counter-clockwise, holes clockwise
(the plane-polygon tools are in :mod:`fields.model.polygon`). Pure numpy/scipy/trimesh.
"""

from __future__ import annotations

import numpy as np
import trimesh
from scipy.spatial import cKDTree

from fields.errors import GeometryError, InputError
from fields.model.design import Design
from fields.model.meshes import MESH_SEGMENTS, placed_meshes, solid_mesh
from fields.model.polygon import convex_clip, convex_hull, orient_loops, signed_area
from fields.model.sampling import circle_points
from fields.model.solids import Solid, floater_pose, world_placement


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


def _top_view(s: Solid, R: np.ndarray, t: np.ndarray, segments: int) -> list[np.ndarray]:
    if s.shape == "sphere":
        return [circle_points(s.size_m[0], segments, 0.0)[:, :2] + t[:2]]
    if s.shape in ("cylinder", "ring"):
        ro, h = (s.size_m[0], s.size_m[1]) if s.shape == "cylinder" else (s.size_m[1], s.size_m[2])
        rims = np.vstack([circle_points(ro, segments, -h / 2), circle_points(ro, segments, h / 2)]) @ R.T + t
        loops = [convex_hull(rims[:, :2])]
        if s.shape == "ring":
            ri = s.size_m[0]
            bottom = (circle_points(ri, segments, -h / 2) @ R.T + t)[:, :2]
            top = (circle_points(ri, segments, h / 2) @ R.T + t)[:, :2]
            if abs(signed_area(bottom)) > 1e-12 * ro * ro:
                if signed_area(bottom) < 0:
                    bottom, top = bottom[::-1], top[::-1]
                hole = convex_clip(bottom, top)
                if hole.shape[0] >= 3 and abs(signed_area(hole)) > 1e-12 * ro * ro:
                    loops.append(hole[::-1])  # clockwise: a hole
        return loops
    verts = (solid_mesh(s, segments, exact_volume=False).vertices @ R.T + t)[:, :2]
    return [convex_hull(verts)]


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
        raise InputError(f'section_outlines: plane must be "xz" or "xy"; got {plane!r}.')
    placed = placed_meshes(design, gap_m, segments, exact_volume=False)
    out: list[tuple[str, str, np.ndarray]] = []
    if plane == "xy":
        Rp, tp = floater_pose(design, gap_m)
        for s, _ in placed:
            R, t = world_placement(s, Rp, tp)
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
        out.extend((s.name, s.kind, lp) for lp in orient_loops(loops))
    return out
