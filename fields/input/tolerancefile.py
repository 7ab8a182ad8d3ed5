"""Tolerance description -> validated :class:`ToleranceSpec`.

The tolerances of a robustness study (``hoverfield tolerance``) come from, in this order: the
defaults below, the optional ``[tolerance]`` table of the geometry file, and a small TOML file
passed with ``--spec`` (its keys at the top level or under ``[tolerance]``), each overriding the
one before. Every error names file, key path, value and what was expected. The format is in
README.md ("Tolerance study").

Defaults (each a symmetric band ``+-value`` around the file's nominal value, the limits of the
distribution; common practice for small machined and sintered parts, no source):

- ``dimension = "0.1 mm"``: every size of every magnet (diameter, height, ring diameters, cuboid
  edges), each drawn independently;
- ``mounting_offset = "0.2 mm"``: each floater magnet's position in the floater frame, x and y;
- ``mounting_tilt = "1 deg"``: each floater magnet's rotation in the floater frame, about x and y;
- ``magnetization_angle = "1 deg"``: each magnet's magnetization direction, about two axes
  across it;
- ``remanence = "grade"``: uniform over the grade's published range (a magnet without a grade:
  ``+-remanence_spread`` relative, default 0.015); ``remanence = "none"`` keeps it nominal;
- ``ambient_min``/``ambient_max``: the file's ambient temperature -10 K / +10 K; the remanence
  follows with the family's reversible temperature coefficient and the coil heat (and its copper
  resistance) is solved at that ambient;
- ``core_permeability = 0.2``: relative band of each core's initial permeability (cores given by
  a B-H table are not varied).

``distribution = "uniform"`` (default: the band is the range) or ``"normal"`` (the band is
``+-3 sigma``); ``method = "sobol"`` (scrambled, default) or ``"latin_hypercube"``;
``samples`` (default 64) and ``seed`` (default 1).
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import asdict, dataclass

from fields.input.csvtable import TomlTable, check_keys, file_error, read_toml

TOLERANCE_KEYS = ("samples", "seed", "method", "distribution", "dimension", "mounting_offset", "mounting_tilt",
                  "magnetization_angle", "remanence", "remanence_spread", "ambient_min", "ambient_max",
                  "core_permeability")
METHODS = ("sobol", "latin_hypercube")
DISTRIBUTIONS = ("uniform", "normal")
#: at most this many samples (a typo in a count should not start a week-long run)
MAX_SAMPLES = 100_000


@dataclass(frozen=True)
class ToleranceSpec:
    """The tolerances of one study (SI: m, rad, degC; relative bands as fractions).

    Attributes
    ----------
    samples, seed : int
    method : str
        ``"sobol"`` or ``"latin_hypercube"`` (scipy.stats.qmc).
    distribution : str
        ``"uniform"`` (band = range) or ``"normal"`` (band = 3 sigma).
    dimension_m, mounting_offset_m, mounting_tilt_rad, magnetization_angle_rad : float
        Half-widths of the bands.
    remanence : str
        ``"grade"`` or ``"none"``.
    remanence_spread : float
        Relative half-width for magnets without a grade.
    ambient_min_C, ambient_max_C : float
    core_permeability : float
        Relative half-width of the cores' initial permeability.
    sources : tuple of str
        Where the values came from (``"defaults"``, the geometry file's table, the spec file).
    """

    samples: int
    seed: int
    method: str
    distribution: str
    dimension_m: float
    mounting_offset_m: float
    mounting_tilt_rad: float
    magnetization_angle_rad: float
    remanence: str
    remanence_spread: float
    ambient_min_C: float
    ambient_max_C: float
    core_permeability: float
    sources: tuple[str, ...] = ()

    @property
    def digest(self) -> str:
        """SHA-256 of the values (not the sources): names the study's chunk files."""
        d = asdict(self)
        d.pop("sources")
        return hashlib.sha256(json.dumps(d, sort_keys=True).encode()).hexdigest()


def _defaults(ambient_C: float) -> dict:
    import math

    return {"samples": 64, "seed": 1, "method": "sobol", "distribution": "uniform", "dimension_m": 1e-4,
            "mounting_offset_m": 2e-4, "mounting_tilt_rad": math.radians(1.0),
            "magnetization_angle_rad": math.radians(1.0), "remanence": "grade", "remanence_spread": 0.015,
            "ambient_min_C": ambient_C - 10.0, "ambient_max_C": ambient_C + 10.0, "core_permeability": 0.2}


def _read_table(t: TomlTable, values: dict) -> None:
    """Overwrite ``values`` with the keys present in the table ``t`` (validated)."""
    check_keys(t.data, TOLERANCE_KEYS, t.file, t.path, "a tolerance table")
    if t.has("samples"):
        values["samples"] = int(t.number("samples", integer=True, minimum=1, maximum=MAX_SAMPLES))
    if t.has("seed"):
        values["seed"] = int(t.number("seed", integer=True, minimum=0))
    if t.has("method"):
        values["method"] = t.string("method", choices=METHODS)
    if t.has("distribution"):
        values["distribution"] = t.string("distribution", choices=DISTRIBUTIONS)
    for key, kind in (("dimension", "length"), ("mounting_offset", "length"), ("mounting_tilt", "angle"),
                      ("magnetization_angle", "angle")):
        if t.has(key):
            suffix = "_m" if kind == "length" else "_rad"
            values[key + suffix] = t.quantity(key, kind, nonnegative=True)
    if t.has("remanence"):
        values["remanence"] = t.string("remanence", choices=("grade", "none"))
    if t.has("remanence_spread"):
        values["remanence_spread"] = t.number("remanence_spread", minimum=0.0, maximum=0.5)
    if t.has("core_permeability"):
        values["core_permeability"] = t.number("core_permeability", minimum=0.0, maximum=0.9)
    for key in ("ambient_min", "ambient_max"):
        if t.has(key):
            values[key + "_C"] = t.quantity(key, "temperature")
    lo, hi = values["ambient_min_C"], values["ambient_max_C"]
    if lo > hi:
        raise file_error(t.file, f"{t.path}.ambient_max" if t.path else "ambient_max",
                         f"at least ambient_min ({lo:g} degC)", t.data.get("ambient_max", f"{hi:g} degC"))


def load_tolerances(geometry_file: str, ambient_C: float, spec_file: str | None = None) -> ToleranceSpec:
    """The tolerances of a study of ``geometry_file`` (its ``[tolerance]`` table, if any), overridden
    by ``spec_file`` when given.

    Parameters
    ----------
    geometry_file : str
        The geometry file (read for its ``[tolerance]`` table only).
    ambient_C : float
        The design's ambient temperature (the default band is centred on it).
    spec_file : str, optional
        A TOML file with the tolerance keys at the top level or in a ``[tolerance]`` table.

    Raises
    ------
    GeometryError
        One line naming file, key path, value and rule.
    """
    values = _defaults(ambient_C)
    sources = ["defaults"]
    _, data = read_toml(geometry_file, "the geometry file")
    if "tolerance" in data:
        _read_table(TomlTable(data["tolerance"], "tolerance", geometry_file), values)
        sources.append(f"{geometry_file} [tolerance]")
    if spec_file is not None:
        _, sdata = read_toml(spec_file, "the tolerance file")
        if "tolerance" in sdata:
            check_keys(sdata, ("tolerance",), spec_file, "", "a tolerance file")
            _read_table(TomlTable(sdata["tolerance"], "tolerance", spec_file), values)
        else:
            _read_table(TomlTable(sdata, "", spec_file), values)
        sources.append(spec_file)
    return ToleranceSpec(sources=tuple(sources), **values)


def zero_tolerances(ambient_C: float, samples: int = 4, seed: int = 1) -> ToleranceSpec:
    """Every band zero, the ambient fixed at ``ambient_C``: each sample is the nominal design."""
    v = _defaults(ambient_C)
    v.update(samples=samples, seed=seed, dimension_m=0.0, mounting_offset_m=0.0, mounting_tilt_rad=0.0,
             magnetization_angle_rad=0.0, remanence="none", remanence_spread=0.0, ambient_min_C=ambient_C,
             ambient_max_C=ambient_C, core_permeability=0.0)
    return ToleranceSpec(sources=("zero",), **v)
