"""Reference cases: hoverfield designs placed in the (r, z) half-plane, and the invented rigs.

A design is read with the public loader :func:`fields.input.geometry.load`; its coils, cores and
magnets must be coaxial with the z axis (axis along z, centred on x = y = 0) and the floater must
carry one axially magnetized cylinder or ring. The floater sits on the axis at the study's gap
(clear distance from the ``gap_reference`` body's face to the floater's facing surface).
"""

from __future__ import annotations

import numpy as np

from .material import FrohlichKennelly
from .solver import Case, CoilBody, IronBody, MagnetBody, Rect, Sphere

_AXIS_TOL = 1e-12


def _coaxial(where: str, position_m, axis, rotvec=None) -> None:
    p = np.asarray(position_m, dtype=float)
    a = np.asarray(axis, dtype=float) / np.linalg.norm(axis)
    if abs(p[0]) > _AXIS_TOL or abs(p[1]) > _AXIS_TOL or abs(abs(a[2]) - 1.0) > _AXIS_TOL:
        raise ValueError(f"{where}: must be coaxial with the z axis; got position {p.tolist()}, axis {a.tolist()}")


def _section(where: str, shape: str, dims, zc: float) -> Rect:
    if shape == "cylinder":
        return Rect(0.0, dims[0] / 2, zc - dims[1] / 2, zc + dims[1] / 2)
    if shape == "ring":
        return Rect(dims[0] / 2, dims[1] / 2, zc - dims[2] / 2, zc + dims[2] / 2)
    raise ValueError(f"{where}: shape must be cylinder or ring; got {shape!r}")


def _magnet_body(where: str, m, origin_m) -> MagnetBody:
    J = np.asarray(m.polarization_T, dtype=float)
    if np.any(np.abs(m.rotvec_rad) > _AXIS_TOL) or abs(J[0]) > 0 or abs(J[1]) > 0:
        raise ValueError(f"{where}: polarization must be axial and the magnet untilted")
    pos = np.asarray(origin_m, dtype=float) + np.asarray(m.position_m, dtype=float)
    _coaxial(where, pos, (0, 0, 1))
    return MagnetBody(_section(where, m.shape, m.dimensions_m, float(pos[2])), float(J[2]))


def design_case(design, gap_m: float, material: FrohlichKennelly | None = None, cores: bool = True) -> Case:
    """The axisymmetric case of a hoverfield design at one gap (m).

    ``material`` overrides every core's B-H law (default: each core's ``relative_permeability``
    and ``saturation_polarization_T``); ``cores=False`` drops the cores.
    """
    coils = []
    for c in design.coils:
        _coaxial(f"coil {c.name!r}", c.position_m, c.axis)
        s = float(np.sign(c.axis[2]))
        zc = float(c.position_m[2])
        coils.append(CoilBody(Rect(c.inner_radius_m, c.outer_radius_m, zc - c.height_m / 2, zc + c.height_m / 2),
                              s * float(c.turns)))
    irons = []
    if cores:
        for c in design.cores:
            _coaxial(f"core {c.name!r}", c.position_m, c.axis)
            mat = material or FrohlichKennelly(c.relative_permeability, c.saturation_polarization_T)
            irons.append(IronBody(_section(f"core {c.name!r}", c.shape, c.dimensions_m, float(c.position_m[2])), mat))
    magnets = [_magnet_body(f"magnet {m.name!r}", m, (0, 0, 0)) for m in design.magnets]
    if len(design.floater.magnets) != 1:
        raise ValueError("floater: exactly one magnet is supported by the reference solver")
    origin = design.study.floater_origin_m([gap_m])[0]
    magnets.append(_magnet_body(f"floater magnet {design.floater.magnets[0].name!r}",
                                design.floater.magnets[0], origin))
    return Case(tuple(coils), tuple(magnets), tuple(irons), ("magnet", len(magnets) - 1))


# --------------------------------------------------------------------------- invented rigs

#: INVENTED EXAMPLE: a steel-ball levitation rig (dimensions made up, SI). An iron-cored coil
#: above a soft-iron ball; gap = clear distance from the core's bottom face to the ball's top.
SPHERE_RIG = {
    "invented": True,
    "note": "INVENTED EXAMPLE: steel-ball levitation rig; every dimension is made up",
    "ball_diameter_m": 0.0254,
    "core": {"shape": "cylinder", "diameter_m": 0.020, "height_m": 0.050, "bottom_z_m": 0.0},
    "coil": {"inner_radius_m": 0.0105, "outer_radius_m": 0.030, "height_m": 0.045, "bottom_z_m": 0.002,
             "turns": 1500},
    "frame": "z up along the axis; origin on the axis at the core's bottom face",
}


def sphere_case(gap_m: float, ball: FrohlichKennelly, core: FrohlichKennelly, rig: dict = SPHERE_RIG) -> Case:
    """The steel-ball rig at a gap (m): the ball is body ``("iron", 1)``."""
    c, w = rig["core"], rig["coil"]
    core_rect = Rect(0.0, c["diameter_m"] / 2, c["bottom_z_m"], c["bottom_z_m"] + c["height_m"])
    coil = CoilBody(Rect(w["inner_radius_m"], w["outer_radius_m"], w["bottom_z_m"], w["bottom_z_m"] + w["height_m"]),
                    float(w["turns"]))
    a = rig["ball_diameter_m"] / 2
    ball_body = IronBody(Sphere(c["bottom_z_m"] - gap_m - a, a), ball)
    return Case((coil,), (), (IronBody(core_rect, core), ball_body), ("iron", 1))


def coil_only_sphere_case(gap_m: float, ball: FrohlichKennelly, rig: dict = SPHERE_RIG) -> Case:
    """The rig without its core (for the multipole check of the ball's force)."""
    case = sphere_case(gap_m, ball, ball, rig)
    return Case(case.coils, (), (case.irons[1],), ("iron", 0))


def slab_image_case(magnet_diameter_m: float, magnet_height_m: float, Jz_T: float, height_m: float,
                    slab: FrohlichKennelly, slab_depth_m: float = 1.0, slab_radius_m: float = 2.0) -> Case:
    """An axially magnetized cylinder magnet ``height_m`` above the face z = 0 of a permeable slab.

    The slab fills ``r <= slab_radius_m``, ``-slab_depth_m <= z <= 0``; with the defaults it
    reaches the outer boundary of the 2 m domain, i.e. it is the half space up to the domain
    truncation.
    """
    mag = MagnetBody(Rect(0.0, magnet_diameter_m / 2, height_m, height_m + magnet_height_m), Jz_T)
    body = IronBody(Rect(0.0, slab_radius_m, -slab_depth_m, 0.0), slab)
    return Case((), (mag,), (body,), ("magnet", 0))
