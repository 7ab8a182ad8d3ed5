"""Geometry file (TOML) -> validated :class:`fields.model.Design` in SI units.

The file format is documented in README.md ("Geometry file reference"). Every dimensional value
carries its unit; a bare number where a unit is needed is an error. Unknown keys are errors with
the nearest valid key suggested. Every error is a :class:`fields.errors.GeometryError` whose
message names the file, the key path, the value and what was expected.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from pathlib import Path

import numpy as np

from fields.input import tables
from fields.errors import GeometryError, SolverError
from fields.model.design import (
    CORE_SHAPES,
    MAGNET_SHAPES,
    BeamGate,
    Coil,
    Core,
    Design,
    Floater,
    HallSensor,
    Magnet,
    Study,
    rotation_matrix,
)
from fields.input.csvtable import TomlTable as _Table, show_value as _show
from fields.input.ironparts import iron_law, part_inertia_kg_m2, soft_iron_part
from fields.input.units import UnitParseError, parse
from fields.model.clearance import overlapping_pairs
from fields.model.gap import GAP_MODES, gap_axis, nearest_reference
from fields.model.solids import Solid, coil_solid, core_solid, floater_solids, magnet_solid

# --------------------------------------------------------------------------------------------
# sections


def _pose(t: _Table) -> tuple[tuple[float, float, float], tuple[float, float, float]]:
    pos = t.vector("position", "length", (0.0, 0.0, 0.0))
    rot = (0.0, 0.0, 0.0)
    if t.has("rotate_axis") or t.has("rotate_angle"):
        axis = t.direction("rotate_axis")
        ang = t.quantity("rotate_angle", "angle")
        rot = tuple(float(a * ang) for a in axis)
    return pos, rot


_MAGNET_SIZE_KEYS = {
    "cylinder": ("diameter", "height"),
    "ring": ("inner_diameter", "outer_diameter", "height"),
    "cuboid": ("size",),
    "sphere": ("diameter",),
    "mesh": ("file", "mesh_unit"),
}
_MAGNET_COMMON = ("name", "shape", "grade", "remanence", "magnetization", "position", "rotate_axis",
                  "rotate_angle", "density")


def _magnet(t: _Table, default_name: str, base_dir: Path) -> Magnet:
    t.done(_MAGNET_COMMON + tuple(k for keys in _MAGNET_SIZE_KEYS.values() for k in keys))
    name = t.string("name", default_name)
    shape = t.string("shape", choices=MAGNET_SHAPES)
    if shape in ("cylinder", "sphere"):
        dims = tuple(t.quantity(k, "length", positive=True) for k in _MAGNET_SIZE_KEYS[shape])
    elif shape == "ring":
        di = t.quantity("inner_diameter", "length", positive=True)
        do = t.quantity("outer_diameter", "length", positive=True)
        h = t.quantity("height", "length", positive=True)
        if di >= do:
            raise t.fail("inner_diameter", f"smaller than outer_diameter ({t.data['outer_diameter']})", t.data["inner_diameter"])
        dims = (di, do, h)
    elif shape == "cuboid":
        size = t.vector("size", "length")
        for i, s in enumerate(size):
            if not s > 0:
                raise GeometryError(t._where(f"size[{i}]"), "the value", "positive", _show(t.data["size"][i]))
        dims = size
    else:
        dims = ()
    # grade / remanence
    grade_name = None
    density = None
    if t.has("remanence"):
        br = t.quantity("remanence", "flux_density", positive=True)
        if t.has("grade"):
            grade_name = t.string("grade")
            g = tables.lookup_grade(grade_name)
            if g is None:
                raise t.fail("grade", "a grade from the table (" + ", ".join(tables.GRADES) + ")", grade_name)
            density = g.density_kg_per_m3
    elif t.has("grade"):
        grade_name = t.string("grade")
        g = tables.lookup_grade(grade_name)
        if g is None:
            near = difflib.get_close_matches(grade_name.upper(), list(tables.GRADES), n=1)
            hint = f" (did you mean \"{near[0]}\"?)" if near else ""
            raise t.fail("grade", "a grade from the table (" + ", ".join(tables.GRADES) + ") or use remanence = \"1.3 T\"" + hint, grade_name)
        br = g.remanence_nominal_T
        density = g.density_kg_per_m3
    else:
        raise GeometryError(t._where("grade"), "a magnet", "given a grade (e.g. \"N42\") or a remanence (e.g. \"1.3 T\")", "neither")
    if t.has("density"):
        density = t.quantity("density", "density", positive=True)
    if density is None:
        density = tables.NDFEB_DENSITY if br > 0.6 else tables.FERRITE_DENSITY
    mdir = t.direction("magnetization", (0.0, 0.0, 1.0))
    pos, rot = _pose(t)
    verts = faces = None
    mesh_file = None
    if shape == "mesh":
        mesh_file = t.string("file")
        unit = t.string("mesh_unit", "mm")
        try:
            scale = parse(f"1 {unit}", "length")
        except UnitParseError:
            raise t.fail("mesh_unit", "a length unit such as \"mm\" or \"in\"", unit) from None
        verts, faces = _load_mesh(t, mesh_file, base_dir, scale)
    t.done(_MAGNET_COMMON + _MAGNET_SIZE_KEYS[shape])
    return Magnet(name=name, shape=shape, dimensions_m=tuple(float(d) for d in dims),
                  polarization_T=tuple(float(br * c) for c in mdir), position_m=pos, rotvec_rad=rot,
                  grade=grade_name, density_kg_per_m3=float(density), mesh_vertices_m=verts,
                  mesh_faces=faces, mesh_file=mesh_file)


def _load_mesh(t: _Table, rel: str, base_dir: Path, scale: float):
    import trimesh

    path = (base_dir / rel) if not Path(rel).is_absolute() else Path(rel)
    if not path.is_file():
        raise t.fail("file", f"an existing mesh file (STL, OBJ or PLY) relative to the geometry file (looked for {path})", rel)
    try:
        mesh = trimesh.load(str(path), force="mesh")
    except Exception as e:  # trimesh raises many types on bad files
        raise t.fail("file", f"a readable STL/OBJ/PLY mesh ({type(e).__name__})", rel) from None
    if not isinstance(mesh, trimesh.Trimesh) or len(mesh.faces) == 0:
        raise t.fail("file", "a triangle mesh with at least one face", rel)
    mesh.merge_vertices()
    if not mesh.is_watertight:
        raise t.fail("file", "a closed (watertight) triangle mesh", rel)
    mesh.fix_normals()
    if mesh.volume <= 0:
        raise t.fail("file", "a mesh enclosing a positive volume", rel)
    return np.asarray(mesh.vertices, dtype=float) * scale, np.asarray(mesh.faces, dtype=np.int64)


def _coil(t: _Table, i: int) -> Coil:
    t.done(("name", "inner_radius", "outer_radius", "height", "turns", "wire_gauge", "wire_diameter",
            "fill_factor", "position", "axis", "nominal_current", "max_current", "insulation_class"))
    name = t.string("name", f"coil {i + 1}")
    a = t.quantity("inner_radius", "length", nonnegative=True)
    b = t.quantity("outer_radius", "length", positive=True)
    if a >= b:
        raise t.fail("inner_radius", f"smaller than outer_radius ({t.data['outer_radius']})", t.data["inner_radius"])
    h = t.quantity("height", "length", positive=True)
    wire_d = None
    gauge = None
    if t.has("wire_gauge") and t.has("wire_diameter"):
        raise t.fail("wire_diameter", "given alone (give wire_gauge or wire_diameter, not both)", t.data["wire_diameter"])
    if t.has("wire_gauge"):
        gauge = t.raw("wire_gauge")
        gtxt = str(gauge) if isinstance(gauge, (int, str)) and not isinstance(gauge, bool) else None
        try:
            n = tables.parse_gauge(gtxt if gtxt is not None else "x")
        except ValueError:
            raise t.fail("wire_gauge", "an AWG size such as \"AWG 26\"", gauge) from None
        gauge = f"AWG {gtxt.upper().replace('AWG', '').strip()}"
        wire_d = tables.awg_diameter_m(n)
    elif t.has("wire_diameter"):
        wire_d = t.quantity("wire_diameter", "length", positive=True)
    fill = t.number("fill_factor", None, positive=True, maximum=tables.HEXAGONAL_FILL) if t.has("fill_factor") else None
    area = (b - a) * h
    if t.has("turns"):
        turns = t.number("turns", positive=True, integer=True)
        if wire_d is not None:
            copper = turns * math.pi * wire_d**2 / 4
            implied = copper / area
            # hexagonal packing of round wire is the densest possible
            if implied > tables.HEXAGONAL_FILL:
                raise t.fail("turns", f"at most {int(tables.HEXAGONAL_FILL * area / (math.pi * wire_d**2 / 4))} for this winding "
                              f"cross-section and wire (copper would fill {implied:.0%} of it; round wire packs "
                              "at most 90.7 %)", turns)
            if fill is not None and abs(implied - fill) > 0.02:
                raise t.fail("turns", f"consistent with fill_factor {fill} and the wire (that gives "
                              f"{round(fill * area / (math.pi * wire_d**2 / 4))} turns)", turns)
            fill = implied
    else:
        if wire_d is None:
            raise GeometryError(t._where("turns"), "a coil", "given turns, or a wire (wire_gauge or wire_diameter) with a fill_factor", "neither")
        if fill is None:
            raise GeometryError(t._where("fill_factor"), "a coil given by its wire", "given a fill_factor (copper area / winding area, e.g. 0.6)", "nothing")
        turns = max(1, int(round(fill * area / (math.pi * wire_d**2 / 4))))
    pos = t.vector("position", "length", (0.0, 0.0, 0.0))
    axis = t.direction("axis", (0.0, 0.0, 1.0))
    i_nom = t.quantity("nominal_current", "current")
    i_max = t.quantity("max_current", "current", positive=True)
    if abs(i_nom) > i_max:
        raise t.fail("nominal_current", f"within max_current ({t.data['max_current']})", t.data["nominal_current"])
    ins = None
    if t.has("insulation_class"):
        ins = t.quantity("insulation_class", "temperature")
        if ins not in tables.THERMAL_CLASSES_C:
            raise t.fail("insulation_class", "a thermal class in degrees C: " + ", ".join(f"\"{c:g} degC\"" for c in tables.THERMAL_CLASSES_C), t.data["insulation_class"])
    t.done(("name", "inner_radius", "outer_radius", "height", "turns", "wire_gauge", "wire_diameter",
            "fill_factor", "position", "axis", "nominal_current", "max_current", "insulation_class"))
    return Coil(name=name, inner_radius_m=a, outer_radius_m=b, height_m=h, turns=float(turns), position_m=pos,
                axis=axis, nominal_current_A=i_nom, max_current_A=i_max, wire_diameter_m=wire_d,
                wire_gauge=gauge, fill_factor=fill, insulation_class_C=ins)


CORE_KEYS = ("name", "shape", "diameter", "height", "inner_diameter", "outer_diameter", "size", "position",
             "axis", "relative_permeability", "saturation_polarization", "bh_curve")


def _core(t: _Table, i: int) -> Core:
    t.done(CORE_KEYS)
    name = t.string("name", f"core {i + 1}")
    shape = t.string("shape", choices=CORE_SHAPES)
    if shape == "cylinder":
        dims = (t.quantity("diameter", "length", positive=True), t.quantity("height", "length", positive=True))
    elif shape == "ring":
        di = t.quantity("inner_diameter", "length", positive=True)
        do = t.quantity("outer_diameter", "length", positive=True)
        if di >= do:
            raise t.fail("inner_diameter", f"smaller than outer_diameter ({t.data['outer_diameter']})", t.data["inner_diameter"])
        dims = (di, do, t.quantity("height", "length", positive=True))
    else:
        size = t.vector("size", "length")
        for j, s in enumerate(size):
            if not s > 0:
                raise GeometryError(t._where(f"size[{j}]"), "the value", "positive", _show(t.data["size"][j]))
        dims = size
    pos = t.vector("position", "length", (0.0, 0.0, 0.0))
    axis = t.direction("axis", (0.0, 0.0, 1.0))
    mur, jsat, curve = iron_law(t, "a soft-iron core; 1 is air: leave the core out")
    t.done(CORE_KEYS)
    return Core(name=name, shape=shape, dimensions_m=tuple(float(d) for d in dims), position_m=pos, axis=axis,
                relative_permeability=float(mur), saturation_polarization_T=float(jsat), bh_curve=curve)


def _floater(t: _Table, base_dir: Path) -> Floater:
    keys = ("name", "magnets", "soft_iron", "payload_mass", "payload_position", "mass", "centre_of_mass")
    t.done(keys)
    name = t.string("name", "floater")
    irons = [soft_iron_part(p, j) for j, p in enumerate(t.array("soft_iron"))] if t.has("soft_iron") else []
    mags = [_magnet(m, f"floater magnet {j + 1}", base_dir)
            for j, m in enumerate(t.array("magnets", required=not irons))] if (t.has("magnets") or not irons) else []
    if not mags and not irons:
        raise GeometryError(t._where("magnets"), "the floater", "made of at least one magnet ([[floater.magnets]]) "
                            "or one soft-iron part ([[floater.soft_iron]])", "none")
    if irons and (mags or len(irons) > 1):
        raise GeometryError(t._where("soft_iron"), "the floater", "one soft-iron part and no magnets (magnets and "
                            "several parts on a soft-iron floater are not modelled)",
                            f"{len(irons)} soft-iron part(s) and {len(mags)} magnet(s)")
    payload = t.quantity("payload_mass", "mass", 0.0, nonnegative=True)
    ppos = t.vector("payload_position", "length", (0.0, 0.0, 0.0))
    # rigid-body mass properties from the magnets (each a uniform solid) plus a point payload
    masses, coms, inertias = [], [], []
    for m in mags:
        r = rotation_matrix(m.rotvec_rad)
        masses.append(m.mass_kg)
        coms.append(np.asarray(m.position_m) + r @ m.centroid_own_m)
        inertias.append(r @ m.inertia_own_kg_m2() @ r.T)
    for p in irons:
        masses.append(p.mass_kg)
        coms.append(np.asarray(p.position_m))
        inertias.append(part_inertia_kg_m2(p))
    masses.append(payload)
    coms.append(np.asarray(ppos))
    inertias.append(np.zeros((3, 3)))
    mtot = float(sum(masses))
    com = sum(mi * ci for mi, ci in zip(masses, coms)) / mtot if mtot > 0 else np.zeros(3)
    inertia = np.zeros((3, 3))
    for mi, ci, ii in zip(masses, coms, inertias):
        d = ci - com
        inertia += ii + mi * (np.dot(d, d) * np.eye(3) - np.outer(d, d))
    mass_given = t.has("mass")
    if mass_given:
        mtot_file = t.quantity("mass", "mass", positive=True)
        if mtot > 0:
            inertia *= mtot_file / mtot
        mtot = mtot_file
    if t.has("centre_of_mass"):
        com = np.asarray(t.vector("centre_of_mass", "length"))
    t.done(keys)
    return Floater(name=name, magnets=tuple(mags), soft_iron=tuple(irons), payload_mass_kg=payload, payload_position_m=ppos,
                   mass_kg=mtot, centre_of_mass_m=tuple(float(c) for c in com),
                   inertia_kg_m2=tuple(tuple(float(x) for x in row) for row in inertia), mass_given=mass_given)


def _sensor(t: _Table, i: int):
    t.done(("type", "name", "height", "beam_height", "beam_width", "direction", "position", "axis", "range",
            "output_span", "sensitivity"))
    kind = t.string("type", choices=("beam", "hall"))
    name = t.string("name", f"sensor {i + 1}")
    if kind == "beam":
        s = BeamGate(name=name, height_m=t.quantity("height", "length"),
                     beam_height_m=t.quantity("beam_height", "length", positive=True),
                     beam_width_m=t.quantity("beam_width", "length", positive=True),
                     direction=t.direction("direction", (1.0, 0.0, 0.0)),
                     output_span_V=t.quantity("output_span", "voltage", None, positive=True))
        if abs(s.direction[2]) > 1e-9:
            raise t.fail("direction", "horizontal (its z component zero), e.g. [1, 0, 0]", t.data["direction"])
    else:
        s = HallSensor(name=name, position_m=t.vector("position", "length"), axis=t.direction("axis", (0.0, 0.0, 1.0)),
                       range_T=t.quantity("range", "flux_density", positive=True),
                       sensitivity_V_per_T=t.quantity("sensitivity", "volt_per_tesla", None, positive=True))
    t.done(("type", "name", "height", "beam_height", "beam_width", "direction", "position", "axis", "range",
            "output_span", "sensitivity"))
    return s


# --------------------------------------------------------------------------------------------


def _study(t: _Table, fixed: tuple[Solid, ...], floater: Floater, file: str, has_coils: bool = True) -> Study:
    t.done(("gap_min", "gap_max", "gap_points", "operating_gap", "gap_reference", "gap_side", "currents",
            "lateral_span", "lateral_points", "tilt_span", "tilt_points", "gravity", "gravity_direction",
            "supply_voltage", "floater_tilt_axis", "floater_tilt_angle", "floater_lateral_position",
            "free_axes", "ambient_temperature", "convection_coefficient", "sensor_line_start",
            "sensor_line_end", "sensor_line_points", "gap_mode", "gap_direction", "offset_origin"))
    g_dir = t.direction("gravity_direction", (0.0, 0.0, -1.0))
    g_mag = t.quantity("gravity", "acceleration", tables.G_STANDARD, positive=True)
    gravity = tuple(float(g_mag * c) for c in g_dir)
    up = -np.asarray(g_dir)
    mode = t.string("gap_mode", "clearance", choices=GAP_MODES)
    offset = mode == "offset"
    if offset:
        for key in ("gap_reference", "gap_side", "floater_lateral_position"):
            if t.has(key):
                raise t.fail(key, 'absent with gap_mode = "offset" (the floater sits at offset_origin + gap x '
                                  'gap_direction)', t.data[key])
    elif t.has("gap_direction") or t.has("offset_origin"):
        key = "gap_direction" if t.has("gap_direction") else "offset_origin"
        raise t.fail(key, 'absent unless gap_mode = "offset" (a clearance gap moves along gravity from '
                          'gap_reference)', t.data[key])
    gmin = t.quantity("gap_min", "length", positive=not offset)
    gmax = t.quantity("gap_max", "length", positive=not offset)
    if gmin >= gmax:
        raise t.fail("gap_min", f"smaller than gap_max ({t.data['gap_max']})", t.data["gap_min"])
    npts = int(t.number("gap_points", 101, integer=True, minimum=3, maximum=100000))
    op = t.quantity("operating_gap", "length", 0.5 * (gmin + gmax), positive=not offset)
    if not gmin <= op <= gmax:
        raise t.fail("operating_gap", f"inside gap_min..gap_max ({t.data['gap_min']} .. {t.data['gap_max']})", t.data["operating_gap"])
    tilt_rot = (0.0, 0.0, 0.0)
    if t.has("floater_tilt_axis") or t.has("floater_tilt_angle"):
        ax = t.direction("floater_tilt_axis")
        ang = t.quantity("floater_tilt_angle", "angle")
        tilt_rot = tuple(float(a * ang) for a in ax)
    lateral = t.vector("floater_lateral_position", "length", (0.0, 0.0, 0.0))
    if not fixed:
        raise GeometryError(f"{file}: study.gap_reference", "a design", "given at least one fixed body (coil, core or magnet) to measure the gap from", "none")
    names = [s.name for s in fixed]
    floater_solid_list = floater_solids(floater)
    if offset:
        origin = np.asarray(t.vector("offset_origin", "length", (0.0, 0.0, 0.0)), dtype=float)
        direction = np.asarray(t.direction("gap_direction", tuple(float(c) for c in up)), dtype=float)
        ref = "offset"
    elif t.has("gap_reference"):
        ref = t.string("gap_reference")
        if ref not in names:
            near = difflib.get_close_matches(ref, names, n=1)
            hint = f" (did you mean \"{near[0]}\"?)" if near else ""
            raise t.fail("gap_reference", "the name of a coil, core or magnet: " + ", ".join(f'"{n}"' for n in names) + hint, ref)
        side = t.string("gap_side", "auto", choices=("auto", "above", "below"))
    else:
        side = t.string("gap_side", "above", choices=("auto", "above", "below"))
        # the body over (under) the floater whose underside is lowest is the ceiling (suspension
        # designs); the one whose top is highest is the floor (repulsive bases)
        ref = nearest_reference(fixed, floater_solid_list, up, side if side != "auto" else "above", lateral, tilt_rot)
    if not offset:
        if side == "auto":
            side = "above"
        try:
            axis = gap_axis(fixed, floater_solid_list, ref, side, up, lateral, tilt_rot, op)
        except SolverError as e:
            raise GeometryError(f"{file}: study.operating_gap", "the floater", f"able to reach the operating gap from "
                                f"gap_reference \"{ref}\" moving along gravity ({e})",
                                t.data.get("operating_gap", "default")) from None
        origin, direction = axis.origin_m, axis.direction
    currents = ()
    if t.has("currents"):
        v = t.raw("currents")
        if not isinstance(v, list):
            raise t.fail("currents", "a list of currents, e.g. [\"0.2 A\", \"0.5 A\"]", v)
        cs = []
        for j, c in enumerate(v):
            try:
                cs.append(parse(c, "current"))
            except UnitParseError as e:
                raise GeometryError(f"{file}: study.currents[{j}]", "the value", e.rule, _show(c)) from None
        currents = tuple(cs)
    free = ("x", "y", "z", "rx", "ry", "rz")
    if t.has("free_axes"):
        v = t.raw("free_axes")
        if not isinstance(v, list) or not v or not all(isinstance(a, str) and a in free for a in v):
            raise t.fail("free_axes", "a list drawn from \"x\", \"y\", \"z\", \"rx\", \"ry\", \"rz\"", v)
        free = tuple(a for a in free if a in v)
    line = None
    if t.has("sensor_line_start") or t.has("sensor_line_end"):
        line = (t.vector("sensor_line_start", "length"), t.vector("sensor_line_end", "length"),
                int(t.number("sensor_line_points", 21, integer=True, minimum=2, maximum=10000)))
    st = Study(
        gap_min_m=gmin, gap_max_m=gmax, gap_points=npts, gap_reference=ref,
        gap_origin_m=tuple(float(c) for c in origin), gap_direction=tuple(float(c) for c in direction),
        operating_gap_m=op, currents_A=currents,
        lateral_span_m=t.quantity("lateral_span", "length", 0.25 * (gmax - gmin), positive=True),
        lateral_points=int(t.number("lateral_points", 41, integer=True, minimum=3, maximum=100000)),
        tilt_span_rad=t.quantity("tilt_span", "angle", math.radians(10.0), positive=True),
        tilt_points=int(t.number("tilt_points", 41, integer=True, minimum=3, maximum=100000)),
        gravity_m_per_s2=gravity,
        # a design without coils drives nothing: it needs no supply (NaN stands for "none")
        supply_voltage_V=t.quantity("supply_voltage", "voltage", math.nan if not has_coils else ..., positive=True),
        floater_rotvec_rad=tilt_rot, free_axes=free,
        ambient_temperature_C=t.quantity("ambient_temperature", "temperature", 25.0),
        convection_W_per_m2K=t.quantity("convection_coefficient", "heat_transfer", 10.0, positive=True),
        sensor_line=line, gap_mode=mode,
    )
    t.done(("gap_min", "gap_max", "gap_points", "operating_gap", "gap_reference", "gap_side", "currents",
            "lateral_span", "lateral_points", "tilt_span", "tilt_points", "gravity", "gravity_direction",
            "supply_voltage", "floater_tilt_axis", "floater_tilt_angle", "floater_lateral_position",
            "free_axes", "ambient_temperature", "convection_coefficient", "sensor_line_start",
            "sensor_line_end", "sensor_line_points", "gap_mode", "gap_direction", "offset_origin"))
    return st


# "tolerance" is read by fields.input.tolerancefile (the tolerance command), not by this loader
TOP_KEYS = ("name", "description", "invented", "coils", "cores", "magnets", "floater", "sensors", "study", "tolerance")


def loads(text: str, file: str = "<string>", base_dir: str | Path = ".", check_overlaps: bool = True) -> Design:
    """Parse geometry-file text into a validated :class:`Design` (SI units).

    Raises
    ------
    GeometryError
        With file, key path, value and the rule, for every invalid input.
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        msg = str(e)
        raise GeometryError(file, "the file", "valid TOML", msg) from None
    root = _Table(data, "", file)
    root.done(TOP_KEYS)
    base = Path(base_dir)
    name = root.string("name", Path(file).stem if file != "<string>" else "design")
    if not name.strip() or any(c in name for c in '/\\:*?"<>|'):
        raise root.fail("name", "a design name usable as a folder name (no / \\ : * ? \" < > |)", name)
    description = root.string("description", "")
    invented = root.boolean("invented", False)
    coils = tuple(_coil(c, i) for i, c in enumerate(root.array("coils")))
    cores = tuple(_core(c, i) for i, c in enumerate(root.array("cores")))
    magnets = tuple(_magnet(m, f"magnet {i + 1}", base) for i, m in enumerate(root.array("magnets")))
    if "floater" not in data:
        raise GeometryError(f"{file}: floater", "a design", "given a [floater] section with at least one [[floater.magnets]]", "none")
    floater = _floater(root.sub("floater"), base)
    sensors = tuple(_sensor(s, i) for i, s in enumerate(root.array("sensors")))
    for i, s in enumerate(sensors):
        if floater.soft_iron and s.kind == "hall":
            raise GeometryError(f"{file}: sensors[{i}].type", "a sensor beside a soft-iron floater",
                                "a beam gate (the field of the floater's induced magnetization at a Hall sensor is "
                                "not modelled yet)", "hall")
    # names must be unique (they key outputs and the gap reference)
    seen: dict[str, str] = {}
    for kind, objs in (("coils", coils), ("cores", cores), ("magnets", magnets), ("sensors", sensors)):
        for i, o in enumerate(objs):
            if o.name in seen:
                raise GeometryError(f"{file}: {kind}[{i}].name", "each body name", f"unique (also used by {seen[o.name]})", f'"{o.name}"')
            seen[o.name] = f"{kind}[{i}]"
    # the gap is placed by the solid model (the clearance the contact checks use)
    fixed = tuple(coil_solid(c) for c in coils) + tuple(core_solid(c) for c in cores) + tuple(
        magnet_solid(m, False) for m in magnets)
    if "study" not in data:
        raise GeometryError(f"{file}: study", "a design", "given a [study] section (gap_min, gap_max, supply_voltage, ...)", "none")
    study = _study(root.sub("study"), fixed, floater, file, has_coils=bool(coils))
    root.done(TOP_KEYS)
    design = Design(name=name, description=description, source=file, coils=coils, cores=cores,
                    magnets=magnets, floater=floater, sensors=sensors, study=study, invented=invented)
    if check_overlaps:
        _check_overlaps(design, file)
    return design


def _check_overlaps(design: Design, file: str) -> None:
    pairs = overlapping_pairs(design)
    if pairs:
        a, b, depth = pairs[0]
        raise GeometryError(f"{file}: {a} / {b}", "solids at the operating gap", "apart (they overlap)",
                            f"{depth * 1e3:.3g} mm of overlap")


def load(path: str | Path, check_overlaps: bool = True) -> Design:
    """Read and validate a geometry file.

    Examples
    --------
    >>> from pathlib import Path
    >>> d = load(Path(__file__).parents[2] / "geometries" / "suspension.toml")
    >>> d.floater.magnets[0].shape
    'cylinder'
    """
    p = Path(path)
    if not p.is_file():
        raise GeometryError(str(path), "the geometry file", "an existing file", "no such file")
    try:
        text = p.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as e:
        raise GeometryError(str(path), "the geometry file", "readable UTF-8 text", type(e).__name__) from None
    return loads(text, file=str(path), base_dir=p.parent, check_overlaps=check_overlaps)
