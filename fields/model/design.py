"""The design model: frozen dataclasses in SI units.

Conventions (used in every module):

- World frame: right-handed x, y, z in metres. Gravity points along ``study.gravity_m_per_s2``
  (default ``(0, 0, -9.80665)``), so "up" is the opposite direction.
- A body's *own frame*: a cylinder, ring or coil has its axis along its own z and its centre at
  its own origin; a cuboid has its edges along its own axes. ``rotvec_rad`` (a rotation vector:
  axis times angle, radians) turns the own frame into the parent frame, then ``position_m``
  moves it. The parent is the world for fixed bodies and the floater frame for floater magnets.
- Polarization ``J = mu0 M`` in tesla, given in the magnet's own frame.
- Index letters in shape lines: ``n`` poses, ``k`` coils, ``q`` quadrature points, ``g`` gaps.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.spatial.transform import Rotation

from fields.errors import InputError

Vec3 = tuple[float, float, float]

MAGNET_SHAPES = ("cylinder", "ring", "cuboid", "sphere", "mesh")
CORE_SHAPES = ("cylinder", "ring", "cuboid")


def solid_volume_m3(shape: str, dimensions_m, mesh_vertices_m=None, mesh_faces=None) -> float:
    """Volume (m^3) of a body: the one volume formula of the model.

    Parameters
    ----------
    shape : str
        ``"cylinder"`` ``(d, h)``, ``"ring"`` ``(di, do, h)``, ``"cuboid"`` ``(x, y, z)``,
        ``"sphere"`` ``(d,)`` (diameters and edges, m) or ``"mesh"``.
    dimensions_m : sequence of float
        As above (ignored for a mesh).
    mesh_vertices_m, mesh_faces : ndarray, optional
        Closed, outward-oriented triangle mesh (mesh shape only).

    Notes
    -----
    Mesh: the divergence theorem summed over tetrahedra from the origin,
    ``V = sum a . (b x c) / 6`` (e.g. Zhang and Chen, "Efficient feature extraction for 2D/3D
    objects in mesh representation", ICIP 2001).

    Examples
    --------
    >>> round(solid_volume_m3("sphere", (2.0,)), 6)   # 4/3 pi
    4.18879
    """
    d = dimensions_m
    if shape == "cylinder":
        return float(np.pi * d[0] ** 2 / 4 * d[1])
    if shape == "ring":
        return float(np.pi * (d[1] ** 2 - d[0] ** 2) / 4 * d[2])
    if shape == "cuboid":
        return float(d[0] * d[1] * d[2])
    if shape == "sphere":
        return float(np.pi * d[0] ** 3 / 6)
    if shape == "mesh" and mesh_vertices_m is not None and mesh_faces is not None:
        v = np.asarray(mesh_vertices_m, dtype=float)[np.asarray(mesh_faces, dtype=np.intp)]
        return float(np.einsum("ij,ij->i", v[:, 0], np.cross(v[:, 1], v[:, 2])).sum() / 6.0)
    raise InputError(f"solid_volume_m3: shape must be cylinder, ring, cuboid, sphere or mesh (with its "
                     f"vertices and faces); got {shape!r}.")


def rotation_matrix(rotvec_rad) -> np.ndarray:
    """3x3 rotation matrix of a rotation vector (axis x angle, rad)."""
    return Rotation.from_rotvec(np.asarray(rotvec_rad, dtype=float)).as_matrix()


@dataclass(frozen=True, eq=False)
class Magnet:
    """A uniformly magnetized permanent magnet.

    Attributes
    ----------
    name : str
    shape : str
        One of :data:`MAGNET_SHAPES`.
    dimensions_m : tuple of float
        cylinder ``(diameter, height)``; ring ``(inner_diameter, outer_diameter, height)``;
        cuboid ``(x, y, z)`` edge lengths; sphere ``(diameter,)``; mesh ``()``.
    polarization_T : Vec3
        Polarization J = mu0 M in the magnet's own frame (T).
    position_m, rotvec_rad : Vec3
        Placement in the parent frame (world, or the floater frame for floater magnets).
    grade : str or None
        Grade name when the remanence came from the grade table.
    density_kg_per_m3 : float
    mesh_vertices_m, mesh_faces : ndarray or None
        Closed, outward-oriented triangle mesh in the magnet's own frame (mesh shape only).
    """

    name: str
    shape: str
    dimensions_m: tuple[float, ...]
    polarization_T: Vec3
    position_m: Vec3 = (0.0, 0.0, 0.0)
    rotvec_rad: Vec3 = (0.0, 0.0, 0.0)
    grade: str | None = None
    density_kg_per_m3: float = 7500.0
    mesh_vertices_m: np.ndarray | None = None
    mesh_faces: np.ndarray | None = None
    mesh_file: str | None = None

    @property
    def volume_m3(self) -> float:
        """Volume (m^3)."""
        return solid_volume_m3(self.shape, self.dimensions_m, self.mesh_vertices_m, self.mesh_faces)

    @property
    def mass_kg(self) -> float:
        return self.volume_m3 * self.density_kg_per_m3

    @property
    def remanence_T(self) -> float:
        return float(np.linalg.norm(self.polarization_T))

    @property
    def centroid_own_m(self) -> np.ndarray:
        """Centroid in the magnet's own frame (zero for all primitives)."""
        if self.shape != "mesh":
            return np.zeros(3)
        v = self.mesh_vertices_m[self.mesh_faces]
        w = np.einsum("ij,ij->i", v[:, 0], np.cross(v[:, 1], v[:, 2]))
        return (w[:, None] * v.sum(axis=1)).sum(axis=0) / (4.0 * w.sum())

    def inertia_own_kg_m2(self) -> np.ndarray:
        """Inertia tensor about the own-frame centroid, in the own frame (kg m^2)."""
        m = self.mass_kg
        d = self.dimensions_m
        if self.shape in ("cylinder", "ring"):
            ro = d[-2] / 2
            ri = d[0] / 2 if self.shape == "ring" else 0.0
            h = d[-1]
            izz = 0.5 * m * (ro**2 + ri**2)
            ixx = m * (3 * (ro**2 + ri**2) + h**2) / 12
            return np.diag([ixx, ixx, izz])
        if self.shape == "cuboid":
            a, b, c = d
            return m / 12 * np.diag([b * b + c * c, a * a + c * c, a * a + b * b])
        if self.shape == "sphere":
            return np.eye(3) * 0.4 * m * (d[0] / 2) ** 2
        # mesh: tetrahedra from the origin (Tonon 2004 style covariance integration)
        v = self.mesh_vertices_m[self.mesh_faces]
        det = np.einsum("ij,ij->i", v[:, 0], np.cross(v[:, 1], v[:, 2]))
        cov = np.zeros((3, 3))
        canon = np.array([[2, 1, 1], [1, 2, 1], [1, 1, 2]]) / 120.0
        for t in range(v.shape[0]):
            a = v[t]  # (3 vertices, 3 coords)
            cov += det[t] * a.T @ canon @ a
        c = self.centroid_own_m
        cov_c = cov * self.density_kg_per_m3 - m * np.outer(c, c)
        return np.trace(cov_c) * np.eye(3) - cov_c


@dataclass(frozen=True)
class Coil:
    """A thick multilayer solenoid winding with a rectangular cross-section.

    The winding fills ``inner_radius_m <= r <= outer_radius_m`` and ``|z| <= height_m / 2`` in its
    own frame; positive current circulates counter-clockwise seen from +axis (right-hand rule),
    so it makes a field along +axis inside.
    """

    name: str
    inner_radius_m: float
    outer_radius_m: float
    height_m: float
    turns: float
    position_m: Vec3
    axis: Vec3
    nominal_current_A: float
    max_current_A: float
    wire_diameter_m: float | None = None
    wire_gauge: str | None = None
    fill_factor: float | None = None
    insulation_class_C: float | None = None

    @property
    def rotvec_rad(self) -> Vec3:
        return tuple(axis_to_rotvec(self.axis))

    @property
    def winding_area_m2(self) -> float:
        return (self.outer_radius_m - self.inner_radius_m) * self.height_m


@dataclass(frozen=True)
class Core:
    """A soft-iron core (cylinder, ring or cuboid) and its B-H curve.

    The curve is ``bh_curve`` (points ``(H in A/m, B in T)``, from (0, 0), strictly increasing)
    when given; otherwise the Frohlich-Kennelly curve of ``relative_permeability`` (initial
    slope) and ``saturation_polarization_T``. With a table both numbers are derived from it
    (initial slope; ``B - mu0 H`` at the last point).
    """

    name: str
    shape: str
    dimensions_m: tuple[float, ...]
    position_m: Vec3
    axis: Vec3
    relative_permeability: float
    saturation_polarization_T: float
    bh_curve: tuple[tuple[float, float], ...] | None = None

    @property
    def rotvec_rad(self) -> Vec3:
        return tuple(axis_to_rotvec(self.axis))

    @property
    def volume_m3(self) -> float:
        return solid_volume_m3(self.shape, self.dimensions_m)


#: density of plain carbon steel (kg/m^3), the default of a soft-iron floater part (handbook value,
#: e.g. 7.85 g/cm^3 for low-carbon steel; from memory)
STEEL_DENSITY_KG_M3 = 7850.0
SOFT_IRON_SHAPES = ("sphere",)


@dataclass(frozen=True)
class SoftIronPart(Core):
    """A soft-iron part of the floater (a steel ball, a soft-iron disc or ring): no magnetization
    of its own, the fixed sources induce it. Placed in the floater frame on the floater's z axis.
    ``dimensions_m``: ``(d,)`` for a sphere, as a core otherwise."""

    density_kg_m3: float = STEEL_DENSITY_KG_M3

    @property
    def mass_kg(self) -> float:
        return self.density_kg_m3 * solid_volume_m3(self.shape, self.dimensions_m)


@dataclass(frozen=True)
class Floater:
    """The levitated rigid body: magnets placed in the floater frame plus a payload.

    ``mass_kg``, ``centre_of_mass_m`` (floater frame) and ``inertia_kg_m2`` (about the centre of
    mass, floater frame) are filled in by the loader from the magnets and payload unless the file
    overrides them.
    """

    name: str
    magnets: tuple[Magnet, ...]
    payload_mass_kg: float
    payload_position_m: Vec3
    mass_kg: float
    centre_of_mass_m: Vec3
    inertia_kg_m2: tuple[Vec3, Vec3, Vec3]
    mass_given: bool = False
    soft_iron: tuple[SoftIronPart, ...] = ()

    @property
    def magnet_mass_kg(self) -> float:
        """Mass of the floater's magnetic parts: magnets and soft iron (kg)."""
        return float(sum(m.mass_kg for m in self.magnets) + sum(p.mass_kg for p in self.soft_iron))


@dataclass(frozen=True)
class BeamGate:
    """An optical beam gate: a beam along ``direction`` whose centreline is at height ``height_m``.

    The beam has a rectangular cross-section ``beam_height_m`` (along the vertical) by
    ``beam_width_m`` (across, horizontal). The floater blocks a fraction of it. With
    ``output_span_V`` the receiver's signal is that voltage times the unblocked fraction.
    """

    name: str
    height_m: float
    beam_height_m: float
    beam_width_m: float
    direction: Vec3 = (1.0, 0.0, 0.0)
    output_span_V: float | None = None
    kind: str = "beam"


@dataclass(frozen=True)
class HallSensor:
    """A Hall point sensor measuring B along ``axis`` at ``position_m`` with full scale ``range_T``;
    ``sensitivity_V_per_T`` (optional) turns the field into the sensor's output voltage."""

    name: str
    position_m: Vec3
    axis: Vec3
    range_T: float
    sensitivity_V_per_T: float | None = None
    kind: str = "hall"


@dataclass(frozen=True)
class Study:
    """What to compute.

    The floater's frame origin sits at ``gap_origin_m + gap * gap_direction`` for a gap ``gap``
    (m), with its nominal orientation ``floater_rotvec_rad``; the loader derives ``gap_origin_m``
    and ``gap_direction`` from the body named in ``gap_reference`` (:func:`fields.model.gap.gap_axis`)
    so that at the operating gap ``gap`` is the floater's clearance to that body, as
    :func:`fields.model.clearance.floater_clearance_m` measures it (at every gap when flat faces face
    each other). With ``gap_mode = "offset"`` the gap is instead the signed displacement of the
    floater along ``gap_direction`` from ``gap_origin_m`` as given (any sign; e.g. the axial offset
    of a ring in a radial bearing, where gravity acts across the gap direction).
    """

    gap_min_m: float
    gap_max_m: float
    gap_points: int
    gap_reference: str
    gap_origin_m: Vec3
    gap_direction: Vec3
    operating_gap_m: float
    currents_A: tuple[float, ...]
    lateral_span_m: float
    lateral_points: int
    tilt_span_rad: float
    tilt_points: int
    gravity_m_per_s2: Vec3
    supply_voltage_V: float
    floater_rotvec_rad: Vec3 = (0.0, 0.0, 0.0)
    free_axes: tuple[str, ...] = ("x", "y", "z", "rx", "ry", "rz")
    ambient_temperature_C: float = 25.0
    convection_W_per_m2K: float = 10.0
    sensor_line: tuple[Vec3, Vec3, int] | None = None
    gap_mode: str = "clearance"

    def floater_origin_m(self, gaps_m) -> np.ndarray:
        """Floater frame origins (g, 3) for gaps (g,) in metres."""
        g = np.atleast_1d(np.asarray(gaps_m, dtype=float))
        return np.asarray(self.gap_origin_m)[None, :] + g[:, None] * np.asarray(self.gap_direction)[None, :]

    def gaps(self) -> np.ndarray:
        """The study's gap grid (m)."""
        return np.linspace(self.gap_min_m, self.gap_max_m, self.gap_points)


@dataclass(frozen=True)
class Design:
    """A whole design as read from one geometry file (all SI)."""

    name: str
    description: str
    source: str
    coils: tuple[Coil, ...]
    cores: tuple[Core, ...]
    magnets: tuple[Magnet, ...]
    floater: Floater
    sensors: tuple[BeamGate | HallSensor, ...]
    study: Study
    invented: bool = True
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def gravity_magnitude(self) -> float:
        return float(np.linalg.norm(self.study.gravity_m_per_s2))

    @property
    def up(self) -> np.ndarray:
        g = np.asarray(self.study.gravity_m_per_s2, dtype=float)
        return -g / np.linalg.norm(g)

    @property
    def weight_N(self) -> float:
        return self.floater.mass_kg * self.gravity_magnitude

    @property
    def axial(self) -> np.ndarray:
        """The direction of the axial curves, the hover current and the single-axis control: up,
        or with ``study.gap_mode = "offset"`` the gap direction (which gravity may cross)."""
        if self.study.gap_mode == "offset":
            d = np.asarray(self.study.gap_direction, dtype=float)
            return d / np.linalg.norm(d)
        return self.up

    @property
    def gravity_across_axial(self) -> bool:
        """Gravity acts across :attr:`axial` (an offset study of a horizontal shaft or a radial
        bearing): the axial force then carries none of the weight."""
        return abs(float(self.up @ self.axial)) <= 1e-12

    @property
    def z_vertical(self) -> bool:
        """Gravity acts along z (the usual stack): the mode names say "vertical" and "sideways";
        otherwise "axial z" and "radial"."""
        return abs(float(self.up[2])) > 0.999

    @property
    def axial_load_N(self) -> float:
        """The weight's share along :attr:`axial` that the axial force must carry (N): the weight,
        or zero where gravity acts across the gap direction."""
        return 0.0 if self.gravity_across_axial else self.weight_N * float(self.up @ self.axial)


def axis_to_rotvec(axis) -> np.ndarray:
    """Rotation vector that turns +z onto the unit vector ``axis``."""
    a = np.asarray(axis, dtype=float)
    a = a / np.linalg.norm(a)
    z = np.array([0.0, 0.0, 1.0])
    c = float(np.dot(z, a))
    if c > 1 - 1e-15:
        return np.zeros(3)
    if c < -1 + 1e-15:
        return np.array([np.pi, 0.0, 0.0])
    v = np.cross(z, a)
    return v / np.linalg.norm(v) * np.arccos(np.clip(c, -1, 1))
