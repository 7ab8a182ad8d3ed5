"""Soft iron in a geometry file: the B-H law of a core or floater part, and soft-iron floater parts."""

from __future__ import annotations

import numpy as np
from scipy.constants import mu_0 as MU_0

from fields.errors import GeometryError
from fields.input.csvtable import TomlTable as _Table
from fields.input.units import UnitParseError, parse
from fields.model.design import SOFT_IRON_SHAPES, STEEL_DENSITY_KG_M3, SoftIronPart

SOFT_IRON_KEYS = ("name", "shape", "diameter", "height", "inner_diameter", "outer_diameter", "position",
                  "relative_permeability", "saturation_polarization", "bh_curve", "density")


def bh_curve(t: _Table) -> tuple[tuple[float, float], ...]:
    """``bh_curve = [["0 A/m", "0 T"], ["100 A/m", "0.5 T"], ...]``: pairs with units, from (0, 0),
    H and B strictly increasing, B - mu0 H non-decreasing (the rules of a table B-H curve)."""
    v = t.raw("bh_curve")
    if isinstance(v, str):
        raise t.fail("bh_curve", "a list of [H, B] pairs with units, e.g. [[\"0 A/m\", \"0 T\"], [\"100 A/m\", \"0.5 T\"]] "
                     "(no named curves are built in)", v)
    if not isinstance(v, list) or len(v) < 3:
        raise t.fail("bh_curve", "a list of at least 3 [H, B] pairs with units", v)
    pts = []
    for j, p in enumerate(v):
        where = f"bh_curve[{j}]"
        if not isinstance(p, list) or len(p) != 2:
            raise t.fail(where, "a pair [\"<H> A/m\", \"<B> T\"]", p)
        try:
            H = parse(p[0], "field_strength")
            B = parse(p[1], "flux_density")
        except UnitParseError as e:
            raise t.fail(where, e.rule, p) from None
        pts.append((float(H), float(B)))
    H = np.array([a for a, _ in pts])
    B = np.array([b for _, b in pts])
    if H[0] != 0.0 or B[0] != 0.0:
        raise t.fail("bh_curve[0]", "the point [\"0 A/m\", \"0 T\"]", v[0])
    for j in range(1, len(pts)):
        if not (H[j] > H[j - 1] and B[j] > B[j - 1]):
            raise t.fail(f"bh_curve[{j}]", f"above the previous point in both H and B ({v[j - 1]})", v[j])
        if (B[j] - MU_0 * H[j]) < (B[j - 1] - MU_0 * H[j - 1]):
            raise t.fail(f"bh_curve[{j}]", "a slope of B of at least mu0 from the previous point (B - mu0 H "
                         "must not fall)", v[j])
    return tuple(pts)


def iron_law(t: _Table, what: str) -> tuple[float, float, tuple | None]:
    """``(relative permeability, saturation polarization (T), bh_curve or None)`` of a table: either
    ``bh_curve`` or the two-parameter Frohlich-Kennelly curve of ``relative_permeability`` and
    ``saturation_polarization``. ``what`` names the body in the error for mu_r = 1."""
    if t.has("bh_curve"):
        for k in ("relative_permeability", "saturation_polarization"):
            if t.has(k):
                raise t.fail(k, "left out when bh_curve is given (the table sets the curve)", t.data[k])
        curve = bh_curve(t)
        # the first segment's slope and the last point's polarization (the solver uses the table)
        return curve[1][1] / (MU_0 * curve[1][0]), curve[-1][1] - MU_0 * curve[-1][0], curve
    mur = t.number("relative_permeability", minimum=1.0)
    if mur <= 1.0:  # mu_r = 1 is air: the iron solve has nothing to magnetize
        raise t.fail("relative_permeability", f"greater than 1 ({what})", mur)
    return mur, t.quantity("saturation_polarization", "flux_density", positive=True), None


def soft_iron_part(t: _Table, j: int) -> SoftIronPart:
    """One ``[[floater.soft_iron]]`` entry: a sphere (``diameter``), cylinder (``diameter``,
    ``height``) or ring (``inner_diameter``, ``outer_diameter``, ``height``) of soft iron on the
    floater's z axis (``position = [0, 0, z]`` in the floater frame), its B-H law and ``density``
    (default: carbon steel)."""
    t.done(SOFT_IRON_KEYS)
    name = t.string("name", f"soft iron {j + 1}")
    shape = t.string("shape", choices=SOFT_IRON_SHAPES)
    if shape == "sphere":
        dims = (t.quantity("diameter", "length", positive=True),)
    elif shape == "cylinder":
        dims = (t.quantity("diameter", "length", positive=True), t.quantity("height", "length", positive=True))
    else:
        di = t.quantity("inner_diameter", "length", positive=True)
        do = t.quantity("outer_diameter", "length", positive=True)
        if di >= do:
            raise t.fail("inner_diameter", f"smaller than outer_diameter ({t.data['outer_diameter']})", t.data["inner_diameter"])
        dims = (di, do, t.quantity("height", "length", positive=True))
    pos = t.vector("position", "length", (0.0, 0.0, 0.0))
    if abs(pos[0]) > 0.0 or abs(pos[1]) > 0.0:
        raise GeometryError(t._where("position"), "the value", "on the floater's z axis ([\"0 mm\", \"0 mm\", z]: "
                            "soft-iron floaters are solved on the axis)", str(t.data.get("position")))
    mur, jsat, curve = iron_law(t, "soft iron; 1 is air")
    rho = t.quantity("density", "density", STEEL_DENSITY_KG_M3, positive=True) if t.has("density") else STEEL_DENSITY_KG_M3
    return SoftIronPart(name=name, shape=shape, dimensions_m=tuple(float(d) for d in dims), position_m=pos,
                        axis=(0.0, 0.0, 1.0), relative_permeability=float(mur), saturation_polarization_T=float(jsat),
                        bh_curve=curve, density_kg_m3=float(rho))


def part_inertia_kg_m2(p: SoftIronPart) -> np.ndarray:
    """Inertia (3, 3) of a uniform part about its own centre, axis along z (kg m^2)."""
    m = p.mass_kg
    d = p.dimensions_m
    if p.shape == "sphere":
        return np.eye(3) * 0.4 * m * (d[0] / 2) ** 2
    ri2 = 0.0 if p.shape == "cylinder" else (d[0] / 2) ** 2
    ro2, h = (d[-2] / 2) ** 2, d[-1]
    izz = 0.5 * m * (ri2 + ro2)
    ixx = m * (3 * (ri2 + ro2) + h * h) / 12
    return np.diag([ixx, ixx, izz])
