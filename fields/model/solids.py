"""The solid model of a design: every body as a :class:`Solid` in its own frame, with its placement.

Every solid of a design is turned into a :class:`Solid`: the fixed magnets, the coil windings
(the annulus ``inner_radius_m <= r <= outer_radius_m``, ``|z| <= height_m / 2`` about the coil axis),
the cores and the floater's magnets. A solid knows its own frame (see :mod:`fields.model.design`:
axis on own z, centre at the own origin) and its placement in its parent frame (world for fixed
solids, the floater frame for floater magnets). Signed distances are in :mod:`fields.model.sdf`,
surface samples in :mod:`fields.model.sampling`, clearances in :mod:`fields.model.clearance`,
meshes in :mod:`fields.model.meshes` and 2-D outlines in :mod:`fields.model.outlines`.

Pure numpy: no printing, no file IO; SI units throughout.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.errors import GeometryError, InputError
from fields.model.design import Coil, Core, Design, Magnet, rotation_matrix, solid_volume_m3
from fields.model.sdf import primitive_sdf_xyz, sdf_mesh

SOLID_KINDS = ("magnet", "coil", "core", "floater")
"""``kind`` of a :class:`Solid`: fixed magnet, coil winding, core, or floater magnet."""


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
        return primitive_sdf_xyz(self.shape, self.size_m, p[..., 0], p[..., 1], p[..., 2])

    def sdf_xyz(self, x, y, z) -> np.ndarray:
        """Signed distance (m) at own-frame coordinates given as three arrays of one shape."""
        if self.shape == "mesh":
            return sdf_mesh(np.stack([x, y, z], axis=-1), self.vertices_m, self.faces)
        return primitive_sdf_xyz(self.shape, self.size_m, x, y, z)

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
    def dimensions_m(self) -> tuple[float, ...]:
        """The model's dimensions (diameters, as in :class:`fields.model.design.Magnet`) (m)."""
        s = self.size_m
        if self.shape == "cylinder":
            return (2.0 * s[0], s[1])
        if self.shape == "ring":
            return (2.0 * s[0], 2.0 * s[1], s[2])
        if self.shape == "sphere":
            return (2.0 * s[0],)
        return tuple(s)

    @property
    def volume_m3(self) -> float:
        """Exact volume of the solid (m^3), :func:`fields.model.design.solid_volume_m3`."""
        return solid_volume_m3(self.shape, self.dimensions_m, self.vertices_m, self.faces)

    def extent_along(self, rotation, position_m, direction) -> tuple[float, float]:
        """Least and greatest ``x . direction`` over the solid placed by ``rotation``, ``position_m``.

        Parameters
        ----------
        rotation : array_like, shape (3, 3)
            Own frame to world rotation of the placed solid.
        position_m : array_like, shape (3,)
            Own origin in the world (m).
        direction : array_like, shape (3,)
            Unit vector.

        Returns
        -------
        (lo_m, hi_m) : tuple of float
            Exact extents (m).

        Notes
        -----
        The support function ``h(u) = max_x x . u`` of each primitive in its own frame (Schneider,
        *Convex Bodies: The Brunn-Minkowski Theory*, 2nd ed., 2014, sec. 1.7): cylinder and ring
        ``R |u_xy| + h/2 |u_z|``, cuboid ``sum a_i/2 |u_i|``, sphere ``R``; a mesh uses its vertices.
        Every primitive is centrally symmetric, so ``lo = c . u - h(u)``.
        """
        R = np.asarray(rotation, dtype=float)
        t = np.asarray(position_m, dtype=float)
        d = np.asarray(direction, dtype=float)
        u = R.T @ d
        c = float(t @ d)
        s = self.size_m
        if self.shape == "mesh":
            h = self.vertices_m @ u
            return c + float(h.min()), c + float(h.max())
        if self.shape in ("cylinder", "ring"):
            r, hh = (s[0], s[1]) if self.shape == "cylinder" else (s[1], s[2])
            sup = r * float(np.hypot(u[0], u[1])) + 0.5 * hh * abs(float(u[2]))
        elif self.shape == "cuboid":
            sup = 0.5 * float(np.abs(u) @ np.asarray(s, dtype=float))
        else:
            sup = float(s[0])
        return c - sup, c + sup


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


def magnet_solid(magnet: Magnet, on_floater: bool) -> Solid:
    """The :class:`Solid` of a fixed magnet (``on_floater=False``) or of a floater magnet.

    Raises
    ------
    GeometryError
        If the shape is unknown, a dimension is not positive or a mesh magnet lacks its mesh.
    """
    m = magnet
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
        kind="floater" if on_floater else "magnet",
        shape=m.shape,
        size_m=size,
        rotation=rotation_matrix(m.rotvec_rad),
        position_m=np.asarray(m.position_m, dtype=float),
        on_floater=on_floater,
        vertices_m=v,
        faces=f,
    )


def coil_solid(coil: Coil) -> Solid:
    """The :class:`Solid` of a coil winding: a ring (a cylinder when the bore is zero)."""
    c = coil
    ri, ro, h = float(c.inner_radius_m), float(c.outer_radius_m), float(c.height_m)
    if not (0 <= ri < ro) or h <= 0:
        raise GeometryError(f"coils.{c.name}", "winding", "0 <= inner_radius < outer_radius and height > 0",
                            (ri, ro, h))
    return Solid(c.name, "coil", "ring" if ri > 0 else "cylinder", (ri, ro, h) if ri > 0 else (ro, h),
                 rotation_matrix(c.rotvec_rad), np.asarray(c.position_m, dtype=float), False)


def core_solid(core: Core) -> Solid:
    """The :class:`Solid` of a soft-iron core."""
    size = _shape_size(f"cores.{core.name}", core.shape, core.dimensions_m, ("cylinder", "ring", "cuboid"))
    return Solid(core.name, "core", core.shape, size, rotation_matrix(core.rotvec_rad),
                 np.asarray(core.position_m, dtype=float), False)


def floater_solids(floater) -> list[Solid]:
    """Solids of the floater: its magnets, then its soft-iron parts (floater frame)."""
    out = [magnet_solid(m, True) for m in floater.magnets]
    for p in getattr(floater, "soft_iron", ()):
        size = _shape_size(f"floater.soft_iron.{p.name}", p.shape, p.dimensions_m, ("sphere", "cylinder", "ring"))
        out.append(Solid(p.name, "floater", p.shape, size, np.eye(3), np.asarray(p.position_m, dtype=float), True))
    return out


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
    out: list[Solid] = [magnet_solid(m, False) for m in design.magnets]
    out.extend(coil_solid(c) for c in design.coils)
    out.extend(core_solid(k) for k in design.cores)
    out.extend(floater_solids(design.floater))
    seen: set[str] = set()
    for s in out:
        if s.name in seen:
            raise GeometryError("design", "body names", "unique across magnets, coils, cores and floater",
                                s.name)
        seen.add(s.name)
    return tuple(out)


def floater_pose(design: Design, gap_m: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Rotation (3, 3) and origin (3,) of the floater frame at a gap (default: operating gap).

    Raises
    ------
    InputError
        If ``gap_m`` is not finite.
    """
    g = design.study.operating_gap_m if gap_m is None else gap_m
    if not np.isfinite(g):
        raise InputError(f"floater_pose: gap_m must be finite; got {g!r}.")
    return rotation_matrix(design.study.floater_rotvec_rad), design.study.floater_origin_m(g)[0]


def world_placement(solid: Solid, pose_rotation, pose_position) -> tuple[np.ndarray, np.ndarray]:
    """World rotation (3, 3) and position (3,) of a solid with the floater at the given pose."""
    if not solid.on_floater:
        return solid.rotation, solid.position_m
    return pose_rotation @ solid.rotation, pose_rotation @ solid.position_m + pose_position
