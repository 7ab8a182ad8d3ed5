"""Closed triangle meshes of the solids (for export and for plane sections).

Pure numpy/trimesh, SI units inside; :func:`stl_text_mm` writes millimetres for CAD.
"""

from __future__ import annotations

import numpy as np
import trimesh

from fields.model.design import Design
from fields.model.solids import Solid, design_solids, floater_pose, world_placement

MESH_SEGMENTS = 96
"""Segments around round bodies in :func:`body_meshes` and in the section outlines."""

SPHERE_SUBDIVISIONS = 4
"""Icosphere subdivisions for spheres in :func:`body_meshes` (5120 triangles)."""


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


def placed_meshes(design: Design, gap_m: float | None, segments: int = MESH_SEGMENTS,
                  exact_volume: bool = True) -> list[tuple[Solid, trimesh.Trimesh]]:
    """Every solid with its :func:`solid_mesh` placed in the world, the floater at ``gap_m``.

    ``gap_m=None`` uses ``study.operating_gap_m``; ``exact_volume`` as in :func:`solid_mesh`.
    """
    Rp, tp = floater_pose(design, gap_m)
    out = []
    for s in design_solids(design):
        R, t = world_placement(s, Rp, tp)
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
    return {s.name: m for s, m in placed_meshes(design, gap_m, segments, True)}


#: how the STL export names its unit (file name and header): millimetres, as CAD and slicers read STL
STL_UNIT = "mm"


def stl_solid_name(body_name: str) -> str:
    """A body name as an STL solid name (one word: white space and other characters become ``_``).

    >>> stl_solid_name("lift coil")
    'lift_coil'
    """
    s = "".join(ch if (ch.isalnum() or ch in "-_.") else "_" for ch in body_name.strip())
    return s or "body"


def stl_text_mm(design: Design, gap_m: float | None = None, segments: int = MESH_SEGMENTS) -> str:
    """Every body as an ASCII STL solid of its own (named after the body), in millimetres.

    STL carries no unit; most CAD tools and slicers read its numbers as millimetres, so the
    coordinates are the model's metres times 1000, and the exporter names the file for its unit
    (``geometry_mm.stl``, :data:`STL_UNIT`). One ``solid <name> ... endsolid <name>`` block per body
    (the ASCII STL grammar of 3D Systems' *StereoLithography Interface Specification*, 1988;
    several solids in one file is the common multi-body extension that trimesh and most CAD
    importers read). Facet normals are the outward unit normals of :func:`body_meshes`.
    """
    meshes = body_meshes(design, gap_m, segments)
    out: list[str] = []
    used: set[str] = set()
    for name, m in meshes.items():
        sname = stl_solid_name(name)
        k = 2
        while sname in used:
            sname = f"{stl_solid_name(name)}_{k}"
            k += 1
        used.add(sname)
        v = np.asarray(m.vertices, float) * 1e3
        out.append(f"solid {sname}")
        for f, nrm in zip(np.asarray(m.faces), np.asarray(m.face_normals, float)):
            out.append(f"  facet normal {nrm[0]:.9e} {nrm[1]:.9e} {nrm[2]:.9e}")
            out.append("    outer loop")
            for i in f:
                out.append(f"      vertex {v[i, 0]:.9e} {v[i, 1]:.9e} {v[i, 2]:.9e}")
            out.append("    endloop")
            out.append("  endfacet")
        out.append(f"endsolid {sname}")
    return "\n".join(out) + "\n"
