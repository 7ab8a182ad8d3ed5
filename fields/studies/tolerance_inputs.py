"""The varied inputs of a tolerance study and the geometry-file overrides of each sample.

A sample is made like a sweep design: key paths of the parsed geometry file get new values
(:func:`fields.studies.expand.apply_overrides`), and the normal loader validates the result. Only
inputs with a non-zero band are varied; a key whose input is not varied is never written, so a
study with every band zero evaluates exactly the file's own design.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.spatial.transform import Rotation

from fields.input.tables import REMANENCE_TEMPERATURE_COEFFICIENT_PER_K, lookup_grade, magnet_family
from fields.input.tolerancefile import ToleranceSpec
from fields.model.design import Design

_SIZE_KEYS = {"cylinder": ("diameter", "height"), "ring": ("inner_diameter", "outer_diameter", "height"),
              "cuboid": ("size[0]", "size[1]", "size[2]"), "sphere": ("diameter",), "mesh": ()}


@dataclass(frozen=True)
class ToleranceInput:
    """One varied input.

    Attributes
    ----------
    column : str
        CSV column (SI unit in the name).
    kind : str
        ``"dimension"``, ``"remanence"``, ``"ambient"``, ``"offset"``, ``"tilt"``,
        ``"magnetization"`` or ``"permeability"``.
    target : str
        Key path of the body (``floater.magnets[0]``, ``cores[1]``) or of the value.
    axis : int
        Component (offsets, tilts: 0 x, 1 y; magnetization: 0, 1 the two directions across it).
    nominal : float
        Centre of the band (the file's value; 0 for offsets and angles).
    half_width : float
        The band is ``nominal +- half_width`` (uniform), or ``+-3 sigma`` (normal).
    """

    column: str
    kind: str
    target: str
    axis: int
    nominal: float
    half_width: float
    source: str = ""

    def value(self, u: float, distribution: str) -> float:
        """The input at the unit-interval point ``u``."""
        if distribution == "normal":
            from scipy.stats import norm

            return self.nominal + self.half_width / 3.0 * float(norm.ppf(min(max(u, 1e-12), 1.0 - 1e-12)))
        return self.nominal + self.half_width * (2.0 * u - 1.0)

    @property
    def mean_std(self) -> tuple[float, float]:
        """Mean and standard deviation of the uniform distribution (Bedford band ``(b-a)/sqrt(12)``)."""
        return self.nominal, self.half_width / math.sqrt(3.0)


def _magnets(design: Design):
    for i, m in enumerate(design.floater.magnets):
        yield f"floater.magnets[{i}]", m, True
    for i, m in enumerate(design.magnets):
        yield f"magnets[{i}]", m, False


def _file_table(data: dict, target: str) -> dict:
    from fields.input.keypaths import get_path, parse_path

    return get_path(data, parse_path(target))[1]


def tolerance_inputs(design: Design, data: dict, spec: ToleranceSpec) -> list[ToleranceInput]:
    """The inputs a study of ``design`` (parsed file ``data``) varies, in column order."""
    out: list[ToleranceInput] = []
    for target, m, on_floater in _magnets(design):
        table = _file_table(data, target)
        if spec.dimension_m > 0:
            for j, key in enumerate(_SIZE_KEYS[m.shape]):
                name = key.replace("[", "_").replace("]", "")
                out.append(ToleranceInput(f"{target}.{name}_m", "dimension", f"{target}.{key}", j, m.dimensions_m[j],
                                          spec.dimension_m))
        if spec.remanence == "grade":
            g = lookup_grade(m.grade) if m.grade else None
            if "remanence" not in table and g is not None:
                lo, hi = g.remanence_min_T, g.remanence_max_T
                out.append(ToleranceInput(f"{target}.remanence_T", "remanence", target, 0, 0.5 * (lo + hi),
                                          0.5 * (hi - lo), f"grade {g.name} range {lo:g}-{hi:g} T"))
            elif spec.remanence_spread > 0:
                br = m.remanence_T
                out.append(ToleranceInput(f"{target}.remanence_T", "remanence", target, 0, br, spec.remanence_spread * br,
                                          f"+-{spec.remanence_spread:g} of the file's remanence"))
        if spec.magnetization_angle_rad > 0:
            for a in (0, 1):
                out.append(ToleranceInput(f"{target}.magnetization_tilt_{'ab'[a]}_rad", "magnetization", target, a, 0.0,
                                          spec.magnetization_angle_rad))
        if on_floater and spec.mounting_offset_m > 0:
            for a in (0, 1):
                out.append(ToleranceInput(f"{target}.offset_{'xy'[a]}_m", "offset", target, a, 0.0, spec.mounting_offset_m))
        if on_floater and spec.mounting_tilt_rad > 0:
            for a in (0, 1):
                out.append(ToleranceInput(f"{target}.tilt_{'xy'[a]}_rad", "tilt", target, a, 0.0, spec.mounting_tilt_rad))
    if spec.ambient_max_C > spec.ambient_min_C:
        c = 0.5 * (spec.ambient_min_C + spec.ambient_max_C)
        out.append(ToleranceInput("ambient_temperature_C", "ambient", "study.ambient_temperature", 0, c,
                                  0.5 * (spec.ambient_max_C - spec.ambient_min_C)))
    if spec.core_permeability > 0:
        for i, core in enumerate(design.cores):
            if core.bh_curve is None:
                mu = core.relative_permeability
                out.append(ToleranceInput(f"cores[{i}].relative_permeability", "permeability", f"cores[{i}]", 0, mu,
                                          spec.core_permeability * mu))
    return out


def _across(direction: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Two unit vectors perpendicular to ``direction`` and to each other."""
    helper = np.array([1.0, 0.0, 0.0]) if abs(direction[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    a = np.cross(direction, helper)
    a /= np.linalg.norm(a)
    return a, np.cross(direction, a)


def _length(x: float) -> str:
    return f"{x!r} m"


def sample_overrides(design: Design, spec: ToleranceSpec, inputs: list[ToleranceInput],
                     values: np.ndarray) -> dict:
    """The key-path overrides of one sample (``values``: one per input, in order).

    The remanence written is the sampled value at the file's ambient temperature times
    ``1 + alpha (T - T_file)`` (the family's reversible coefficient, :data:`fields.input.tables.
    REMANENCE_TEMPERATURE_COEFFICIENT_PER_K`): the file's remanence (or grade mid-range) is taken
    as the value at the file's ambient temperature."""
    by = {}
    for q, v in zip(inputs, values):
        by.setdefault((q.kind, q.target), {})[q.axis] = float(v)
    over: dict = {}
    ambient_file = float(design.study.ambient_temperature_C)
    T = by.get(("ambient", "study.ambient_temperature"), {}).get(0)
    if T is None and spec.ambient_min_C == spec.ambient_max_C != ambient_file:
        T = spec.ambient_min_C
    if T is not None:
        over["study.ambient_temperature"] = f"{T!r} degC"
    dT = 0.0 if T is None else T - ambient_file
    for q, v in zip(inputs, values):
        if q.kind == "dimension":
            over[q.target] = _length(float(v))
        elif q.kind == "permeability":
            over[f"{q.target}.relative_permeability"] = float(v)
    for target, m, _ in _magnets(design):
        br = by.get(("remanence", target), {}).get(0)
        if br is not None or dT != 0.0:
            base = m.remanence_T if br is None else br
            alpha = REMANENCE_TEMPERATURE_COEFFICIENT_PER_K[magnet_family(m.grade, m.remanence_T)]
            over[f"{target}.remanence"] = f"{base * (1.0 + alpha * dT)!r} T"
        mag = by.get(("magnetization", target))
        if mag:
            d = np.asarray(m.polarization_T, float) / m.remanence_T
            a, b = _across(d)
            rv = mag.get(0, 0.0) * a + mag.get(1, 0.0) * b
            over[f"{target}.magnetization"] = [float(c) for c in Rotation.from_rotvec(rv).apply(d)]
        off = by.get(("offset", target))
        if off:
            p = np.asarray(m.position_m, float)
            p[0] += off.get(0, 0.0)
            p[1] += off.get(1, 0.0)
            over[f"{target}.position"] = [_length(float(c)) for c in p]
        tilt = by.get(("tilt", target))
        if tilt:
            r = Rotation.from_rotvec([tilt.get(0, 0.0), tilt.get(1, 0.0), 0.0]) * Rotation.from_rotvec(m.rotvec_rad)
            rv = r.as_rotvec()
            ang = float(np.linalg.norm(rv))
            if ang > 0.0:
                over[f"{target}.rotate_axis"] = [float(c) for c in rv / ang]
                over[f"{target}.rotate_angle"] = f"{ang!r} rad"
    return over
