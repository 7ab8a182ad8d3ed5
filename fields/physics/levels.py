"""Rule levels of the force quadrature: how many coil layers and surface nodes to use.

A level fixes every discretisation knob of :func:`fields.physics.wrench.wrench_basis` at once.
The named levels are ordered from coarse to fine; the two-level error estimate of a named level
is its difference from the next coarser one. A :class:`RuleLevel` can also be passed directly
(e.g. for convergence studies); it then has no coarser neighbour and no error estimate.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType

from fields.physics.checks import input_error
from fields.physics.coils import LAYER_GRADE_WITHIN


@dataclass(frozen=True)
class RuleLevel:
    """Discretisation of the force quadrature.

    Attributes
    ----------
    layers : int
        Gauss-Legendre layers per coil winding.
    nr, na : int
        Radial and angular nodes of the plain cap (disc, annulus) rule; ``nr + 4`` polar nodes on
        spheres.
    nz : int
        Axial nodes on cylinder sides and nodes per edge on cuboid faces.
    sub : int
        Subdivisions (each into 4) of a mesh's triangles.
    gm : int
        Gauss nodes per panel of the graded near-field cap rule.
    layer_grade_within : float
        Observers beyond a winding's end face closer than this fraction of its radial
        half-thickness get observer-graded coil layers (0 switches the grading off).
    """

    layers: int
    nr: int
    na: int
    nz: int
    sub: int
    gm: int
    layer_grade_within: float = LAYER_GRADE_WITHIN


#: the named levels, coarse to fine (read-only)
LEVELS = MappingProxyType({
    "coarse": RuleLevel(layers=6, nr=4, na=8, nz=4, sub=0, gm=4),
    "fast": RuleLevel(layers=8, nr=4, na=10, nz=5, sub=0, gm=5),
    "standard": RuleLevel(layers=10, nr=5, na=12, nz=6, sub=1, gm=6),
    "high": RuleLevel(layers=14, nr=8, na=24, nz=10, sub=2, gm=8),
    "reference": RuleLevel(layers=24, nr=14, na=48, nz=14, sub=3, gm=12),
})
#: level names in order, coarse to fine
LEVEL_NAMES = tuple(LEVELS)


def rule_level(order: str | RuleLevel, where: str = "rule level") -> RuleLevel:
    """The :class:`RuleLevel` of a level name, or the level itself."""
    if isinstance(order, RuleLevel):
        return order
    if order not in LEVELS:
        raise input_error(where, "order", f"one of {', '.join(LEVEL_NAMES)} or a RuleLevel", order)
    return LEVELS[order]


def coarser_level(order: str, where: str = "rule level") -> RuleLevel:
    """The next coarser named level (the partner of the two-level error estimate)."""
    if not isinstance(order, str) or order not in LEVELS or order == LEVEL_NAMES[0]:
        raise input_error(where, "order", f"one of {', '.join(LEVEL_NAMES[1:])} for an error estimate", order)
    return LEVELS[LEVEL_NAMES[LEVEL_NAMES.index(order) - 1]]
