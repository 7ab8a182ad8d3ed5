"""Design sweeps: vary numbers of a geometry file, evaluate every design, rank them.

A *sweep file* (TOML, a companion of a geometry file) names which values of the geometry file vary
— by the geometry file's own key paths, e.g. ``floater.magnets[0].diameter`` — each as a range
(``start``, ``stop``, ``count``) or a list of ``values``; ``mode = "grid"`` takes every
combination, ``mode = "sample"`` a seeded space-filling sample (Sobol or Latin hypercube,
:mod:`scipy.stats.qmc`). It also names the objectives to rank by, the flags and limits that
reject a design, and the objectives of the Pareto front. The format is in README.md ("Sweep
file reference").

Every design is made by editing the *parsed* base geometry file (a dict; the file is never
touched), writing it back to TOML text and running the normal loader
(:func:`fields.input.geometry.loads`), so every design is validated exactly like a user's file. A
design that fails (any :class:`fields.errors.HoverfieldError`) keeps its one-line reason in the
``failure`` column; it never stops the sweep.

Layers
------
- :func:`load_sweep`, :func:`expand`: sweep file -> validated :class:`SweepSpec` -> designs.
- :func:`evaluate_design`: pure function, one :class:`fields.model.Design` -> dict of numbers.
- :func:`pareto_front`, :func:`rank`: pure array functions.
- :func:`run_sweep`: the shell — process pool or Dask cluster, resumable chunk files, merge,
  plots, the best design written back as a geometry file. :func:`sweep_command` wraps it for the
  CLI.

Ranking
-------
``ranking = "weighted"`` (default): each objective is scaled over the feasible designs to 0 (best)
.. 1 (worst) by min-max normalisation, and the score is the weighted mean (weights from the
sweep file, default 1); lower is better, ties go to the lower design index.
``ranking = "lexicographic"``: sort by the first objective, ties by the second, and so on
(exact comparison of the computed values).
"""

from __future__ import annotations

import copy
import csv
import difflib
import hashlib
import io
import itertools
import json
import math
import os
import re
import sys
import time
import tomllib
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from fields import __version__
from fields.errors import GeometryError, HoverfieldError
from fields.model.design import Design

# ============================================================================== result columns

#: every column evaluate_design returns, with the SI unit its limits are converted to (pint
#: spelling; None for plain numbers and flags) and what it means
RESULT_COLUMNS: dict[str, tuple[str | None, str]] = {
    "mass_kg": ("kg", "floater mass (magnets + payload)"),
    "payload_mass_kg": ("kg", "payload in the design"),
    "target_gap_m": ("m", "the study's operating gap"),
    "hover_current_A": ("A", "drive current that holds the floater at the operating gap (may exceed the limit)"),
    "at_target_gap": (None, "true: evaluated hovering at the operating gap; false: at the equilibrium at the nominal current"),
    "operating_gap_m": ("m", "gap of the evaluated pose"),
    "operating_current_A": ("A", "drive current at the evaluated pose"),
    "ki_N_per_A": ("N/A", "upward force per ampere of drive current at the evaluated pose"),
    "kz_N_per_m": ("N/m", "vertical stiffness -dF_up/dh (negative: unstable)"),
    "k_lateral_N_per_m": ("N/m", "mean horizontal stiffness"),
    "k_tilt_Nm_per_rad": ("N*m/rad", "mean tilt stiffness about the horizontal axes"),
    "unstable_pole_1_per_s": ("1/s", "sqrt(-k_z / m) when k_z < 0, else 0"),
    "fastest_growth_1_per_s": ("1/s", "largest growth rate of the unstable modes (0 if none)"),
    "axes_needing_control": (None, "unstable axes of the six-axis verdict"),
    "residual_lateral_force_N": ("N", "horizontal force left at the evaluated pose (0 for axisymmetric designs)"),
    "residual_torque_Nm": ("N*m", "torque left at the evaluated pose (0 for axisymmetric designs)"),
    "coil_resistance_20C_ohm": ("ohm", "sum over coils at 20 C"),
    "coil_power_W": ("W", "steady I^2 R(T) over all coils at the operating current"),
    "coil_temperature_C": ("degC", "hottest coil's steady average temperature (inf: runaway)"),
    "coil_temperature_rise_K": ("K", "hottest coil's steady rise above ambient"),
    "max_payload_kg": ("kg", "largest payload that hovers at the operating gap within the current limit"),
    "min_payload_kg": ("kg", "smallest payload that hovers there"),
    "payload_margin_kg": ("kg", "max_payload_kg minus the design's payload"),
    "force_error_N": ("N", "quadrature error estimate of the force at the evaluated pose (at the nominal current)"),
    "contact": (None, "flag: the floater touches a body at the evaluated poses"),
    "no_equilibrium": (None, "flag: hovering at the operating gap is out of reach and there is no equilibrium at the nominal current"),
    "core_saturation": (None, "flag: a core can reach saturation within +-max_current at the evaluated pose (the linear force model is approximate there)"),
    "too_hot": (None, "flag: a coil's steady temperature exceeds its insulation class, or runs away"),
    "over_current": (None, "flag: hovering at the operating gap needs more than max_current"),
}
FLAGS = ("contact", "no_equilibrium", "core_saturation", "too_hot", "over_current")
_BOOL_COLUMNS = set(FLAGS) | {"at_target_gap"}

#: gaps of the coarse gap grid used to bracket the equilibrium at the nominal current (the
#: root is then refined exactly by Brent's method, so the grid only has to separate roots)
FALLBACK_GAPS = 25
#: designs above this count are refused (a typo in a count should not start a month-long run)
MAX_DESIGNS = 1_000_000


# ============================================================================== one design


def _stiffness_and_basis(design: Design, position_m, rotvec_rad):
    """The stiffness stencil of :func:`fields.analysis.stiffness_matrix` in one force-basis call.

    Returns the basis (whose last pose is the unperturbed one) and a function currents -> the
    :class:`fields.analysis.Stiffness`, so one call serves the hover current, k_i and the 6x6.
    """
    from fields import analysis
    from fields.physics.wrench import wrench_basis

    P, Rv, finish = analysis.stiffness_stencil(design, position_m, rotvec_rad)
    b = wrench_basis(design, P, Rv)
    return b, (lambda currents_A: finish(b, currents_A))


def evaluate_design(design: Design) -> dict:
    """Operating point, stiffness, stability, coil heat and payload envelope of one design.

    The floater is evaluated hovering at the study's operating gap (nominal orientation, on the
    study's lateral position) with the drive current that balances its weight there. When that
    current is beyond ``max_current`` (flag ``over_current``), the design is evaluated instead at
    the equilibrium at the nominal current nearest the operating gap (an axially stable one
    preferred, as :func:`fields.runs.operating_point` does); with no such equilibrium either the
    stiffness columns are NaN and ``no_equilibrium`` is set.

    Parameters
    ----------
    design : Design

    Returns
    -------
    dict
        Plain floats and bools keyed by :data:`RESULT_COLUMNS` (units in the names).

    Notes
    -----
    - Stiffness: the 6x6 matrix of :func:`fields.analysis.stiffness_matrix` (central differences
      with Richardson extrapolation) at that pose and current; ``kz = u^T K u`` with ``u`` up,
      ``k_lateral`` and ``k_tilt`` the means over the two horizontal directions (half the trace
      of the 3x3 block minus its vertical entry), the verdict of
      :func:`fields.analysis.stability_verdict`.
    - Unstable pole ``sqrt(-k_z / m)`` (s^-1), the growth rate of the linearised vertical motion
      ``m z'' = -k_z z``.
    - Coil heat: the lumped steady state of :func:`fields.coil.steady_temperature_C`.
    - Payload envelope: masses whose weight the force ``F0 +- |k_i| I_max`` can hold at the
      operating gap, as in :func:`fields.analysis.axial_curves`.
    """
    from fields import analysis
    from fields.devices import winding as coilmod
    from fields.devices.winding import DEFAULT_INSULATION_CLASS_C, steady_temperature_C
    from fields.input.tables import COPPER_ALPHA_20C_PER_K

    st = design.study
    up = design.up
    d = analysis.drive_pattern(design)
    k = len(design.coils)
    W = design.weight_N
    g = design.gravity_magnitude
    gop = float(st.operating_gap_m)
    out: dict[str, Any] = {"mass_kg": design.floater.mass_kg, "payload_mass_kg": design.floater.payload_mass_kg,
                           "target_gap_m": gop}
    p0, r0 = analysis.pose_at_gap(design, [gop])
    b, stiffness = _stiffness_and_basis(design, p0[0], r0[0])
    F0 = float(b.F0_N[-1] @ up)
    f = float((b.Fk_N_per_A[-1] @ up) @ d) if k else 0.0
    ih = (W - F0) / f if f != 0.0 else math.nan
    imax = design.coils[0].max_current_A if k else 0.0
    scale = float(np.max(np.abs(d))) if k else 1.0
    ilim = imax / scale if scale > 0 else 0.0
    over = not (math.isfinite(ih) and abs(ih) <= ilim * (1 + 1e-12))
    fmax, fmin = F0 + abs(f) * ilim, F0 - abs(f) * ilim
    mag = design.floater.magnet_mass_kg
    out["max_payload_kg"] = max(max(fmax, 0.0) / g - mag, 0.0)
    out["min_payload_kg"] = max(max(fmin, 0.0) / g - mag, 0.0)
    out["payload_margin_kg"] = out["max_payload_kg"] - design.floater.payload_mass_kg
    out["hover_current_A"] = ih
    contact = bool(np.any(b.contact))
    no_eq = False
    if not over:
        I_drive, gap, stiff, b_pose = ih, gop, stiffness(ih * d), b
        ki = f
    else:
        I_nom = design.coils[0].nominal_current_A if k else 0.0
        gaps = np.linspace(st.gap_min_m, st.gap_max_m, FALLBACK_GAPS)
        curves = analysis.axial_curves(design, gaps_m=gaps, currents_A=[I_nom])
        eqs = analysis.axial_equilibria(design, I_nom, curves)
        stable = [e for e in eqs if e.stable]
        if eqs:
            pick = min(stable or eqs, key=lambda e: abs(e.gap_m - gop))
            I_drive, gap = I_nom, pick.gap_m
            pe, re_ = analysis.pose_at_gap(design, [gap])
            be, stiffness_e = _stiffness_and_basis(design, pe[0], re_[0])
            b_pose = be
            stiff = stiffness_e(I_nom * d)
            ki = float((be.Fk_N_per_A[-1] @ up) @ d) if k else 0.0
            contact = contact or bool(np.any(be.contact))
        else:
            no_eq = True
            I_drive, gap, stiff, ki = I_nom, math.nan, None, math.nan
    out.update(at_target_gap=not over, operating_gap_m=gap, operating_current_A=I_drive, ki_N_per_A=ki)
    nan = math.nan
    if stiff is not None and not contact:
        K = stiff.K
        kz = float(up @ K[:3, :3] @ up)
        out["kz_N_per_m"] = kz
        out["k_lateral_N_per_m"] = 0.5 * (float(np.trace(K[:3, :3])) - kz)
        out["k_tilt_Nm_per_rad"] = 0.5 * (float(np.trace(K[3:, 3:])) - float(up @ K[3:, 3:] @ up))
        out["unstable_pole_1_per_s"] = math.sqrt(-kz / design.floater.mass_kg) if kz < 0 else 0.0
        v = analysis.stability_verdict(design, stiff)
        rates = [1.0 / m.growth_time_s for m in v.modes if not m.stable and m.growth_time_s]
        out["fastest_growth_1_per_s"] = max(rates) if rates else 0.0
        out["axes_needing_control"] = float(v.unstable_count)
        Fres = stiff.force_N + np.asarray(st.gravity_m_per_s2) * design.floater.mass_kg
        out["residual_lateral_force_N"] = float(np.linalg.norm(Fres - (Fres @ up) * up))
        out["residual_torque_Nm"] = float(np.linalg.norm(stiff.torque_Nm))
        out["core_saturation"] = bool(b_pose.core_saturated[-1])
        out["force_error_N"] = float(b_pose.error_F_N[-1])
    else:
        for c in ("kz_N_per_m", "k_lateral_N_per_m", "k_tilt_Nm_per_rad", "unstable_pole_1_per_s",
                  "fastest_growth_1_per_s", "axes_needing_control", "residual_lateral_force_N",
                  "residual_torque_Nm", "force_error_N"):
            out[c] = nan
        out["core_saturation"] = False
    # coil heat at the operating current (every coil carries I * d_k)
    R_sum = P_sum = 0.0
    T_hot, rise, too_hot = -math.inf, -math.inf, False
    for i, c in enumerate(design.coils):
        R20, G = coilmod.resistance_and_cooling(design, i)
        Ii = I_drive * d[i] if math.isfinite(I_drive) else math.nan
        T, run = steady_temperature_C([Ii], R20, G, float(st.ambient_temperature_C))
        T = float(T[0])
        R_sum += R20
        P_sum += Ii * Ii * R20 * (1.0 + COPPER_ALPHA_20C_PER_K * (T - 20.0)) if not run[0] else math.inf
        ins = c.insulation_class_C if c.insulation_class_C is not None else DEFAULT_INSULATION_CLASS_C
        too_hot = too_hot or bool(run[0]) or T > ins
        T_hot = max(T_hot, T)
        rise = max(rise, T - float(st.ambient_temperature_C))
    out["coil_resistance_20C_ohm"] = R_sum
    out["coil_power_W"] = P_sum
    out["coil_temperature_C"] = T_hot if k else float(st.ambient_temperature_C)
    out["coil_temperature_rise_K"] = rise if k else 0.0
    out.update(contact=contact, no_equilibrium=no_eq, too_hot=too_hot, over_current=over)
    return {c: _plain(out[c]) for c in RESULT_COLUMNS}


def _plain(v):
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    return float(v)


# ============================================================================== sweep file


_KEY_RE = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*(\[\d+\])*$")
_NUM_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
SWEEP_KEYS = ("name", "description", "invented", "base", "mode", "parameters", "sample", "objectives",
              "ranking", "pareto", "constraints")


@dataclass(frozen=True)
class Parameter:
    """One varied value of the geometry file.

    ``choices`` holds every value it can take as ``(toml_value, si_value)`` pairs: the value as
    written into the geometry dict (e.g. ``"10.5 mm"``, ``"N42"``, ``[0, 0, 1]``) and its SI
    number (NaN for text and directions). For ``sample`` mode ranges ``choices`` is empty and
    ``start_si``/``stop_si`` bound the continuous range.
    """

    key: str
    column: str
    kind: str  # "quantity", "integer", "number", "text"
    unit_kind: str | None
    unit_text: str | None
    unit_factor: float
    start: float
    stop: float
    count: int
    spacing: str
    choices: tuple = ()
    is_range: bool = False

    def value_at(self, u: float) -> tuple[Any, float]:
        """The (toml_value, si_value) at a fraction ``u`` in [0, 1] of the range or list."""
        if not self.is_range:
            j = min(int(math.floor(u * len(self.choices))), len(self.choices) - 1)
            return self.choices[j]
        if self.spacing == "log":
            x = math.exp(math.log(self.start) + u * (math.log(self.stop) - math.log(self.start)))
        else:
            x = self.start + u * (self.stop - self.start)
        return self._make(x)

    def _make(self, x: float) -> tuple[Any, float]:
        if self.kind == "integer":
            n = int(round(x))
            return n, float(n)
        if self.kind == "number":
            return float(x), float(x)
        text = f"{x:.12g} {self.unit_text}"
        if self.unit_kind == "temperature":
            from fields.input.units import parse

            return text, parse(text, "temperature")
        return text, x * self.unit_factor

    def grid(self) -> tuple:
        """Every grid value as (toml_value, si_value) pairs."""
        if not self.is_range:
            return self.choices
        if self.count == 1:
            return (self._make(self.start),)
        if self.spacing == "log":
            xs = np.geomspace(self.start, self.stop, self.count)
        else:
            xs = np.linspace(self.start, self.stop, self.count)
        return tuple(self._make(float(x)) for x in xs)


@dataclass(frozen=True)
class Objective:
    column: str
    sense: str  # "min" or "max"
    weight: float = 1.0


@dataclass(frozen=True)
class Limit:
    column: str
    minimum: float | None
    maximum: float | None
    text: str


@dataclass(frozen=True)
class SweepSpec:
    """A validated sweep description bound to its base geometry file.

    Attributes
    ----------
    file : str
        The sweep file.
    base_path : str
        The base geometry file.
    base_text : str
        Its content (the designs are made from this, never from the file again).
    name : str
    parameters : tuple of Parameter
    mode : str
        ``"grid"`` or ``"sample"``.
    sample_count, sample_method, seed
        Sample mode: number of designs, ``"sobol"`` or ``"latin_hypercube"``, integer seed.
    objectives : tuple of Objective
    ranking : str
        ``"weighted"`` or ``"lexicographic"``.
    pareto : tuple of str
        Two or three objective columns of the Pareto front.
    reject_flags : tuple of str
        Flags that make a design infeasible.
    limits : tuple of Limit
    sweep_id : str
        SHA-256 of the tool version, the base file's content and the sweep file's content.
    invented : bool
    """

    file: str
    base_path: str
    base_text: str
    name: str
    parameters: tuple[Parameter, ...]
    mode: str
    sample_count: int
    sample_method: str
    seed: int
    objectives: tuple[Objective, ...]
    ranking: str
    pareto: tuple[str, ...]
    reject_flags: tuple[str, ...]
    limits: tuple[Limit, ...]
    sweep_id: str
    invented: bool = False

    @property
    def n_designs(self) -> int:
        if self.mode == "sample":
            return self.sample_count
        return int(np.prod([len(p.grid()) for p in self.parameters]))


def _err(file: str, path: str, rule: str, got: Any, what: str = "the value") -> GeometryError:
    return GeometryError(f"{file}: {path}", what, rule, _show(got))


def _show(v: Any) -> str:
    from fields.input.geometry import _show as show

    return show(v)


def _check_keys(data: dict, allowed: tuple[str, ...], file: str, path: str) -> None:
    for key in data:
        if key not in allowed:
            near = difflib.get_close_matches(key, allowed, n=1, cutoff=0.5)
            hint = f"; did you mean \"{near[0]}\"" if near else ""
            where = f"{path}.{key}" if path else key
            raise GeometryError(f"{file}: {where}", "this key", "one the sweep format knows" + hint, "an unknown key")


def _parse_path(path: str) -> list[str | int] | None:
    out: list[str | int] = []
    for seg in path.split("."):
        if not _KEY_RE.match(seg):
            return None
        name = seg.split("[", 1)[0]
        out.append(name)
        out += [int(i) for i in re.findall(r"\[(\d+)\]", seg)]
    return out


def _leaf_paths(node: Any, prefix: str = "") -> list[str]:
    """Every addressable value path of a parsed geometry file (tables and arrays of tables excluded)."""
    out = []
    if isinstance(node, dict):
        for k, v in node.items():
            out += _leaf_paths(v, f"{prefix}.{k}" if prefix else k)
    elif isinstance(node, list) and node and all(isinstance(x, dict) for x in node):
        for i, v in enumerate(node):
            out += _leaf_paths(v, f"{prefix}[{i}]")
    else:
        out.append(prefix)
        if isinstance(node, list):
            out += [f"{prefix}[{i}]" for i in range(len(node)) if not isinstance(node[i], (list, dict))]
    return out


def _get(data: dict, tokens: list[str | int]) -> tuple[bool, Any]:
    node: Any = data
    for t in tokens:
        if isinstance(t, int):
            if not isinstance(node, list) or t >= len(node):
                return False, None
            node = node[t]
        else:
            if not isinstance(node, dict) or t not in node:
                return False, None
            node = node[t]
    return True, node


def _set(data: dict, path: str, value: Any) -> None:
    tokens = _parse_path(path)
    node: Any = data
    for t in tokens[:-1]:
        node = node[t]
    node[tokens[-1]] = value


def _quantity_kind(value: str) -> str | None:
    from fields.input.units import KINDS, UnitParseError, parse

    for kind in KINDS:
        try:
            parse(value, kind)
            return kind
        except UnitParseError:
            continue
    return None


_SI_SUFFIX = {"length": "m", "mass": "kg", "current": "A", "flux_density": "T", "angle": "rad", "voltage": "V",
              "acceleration": "m_per_s2", "density": "kg_per_m3", "heat_transfer": "W_per_m2K",
              "temperature": "C", "time": "s", "frequency": "Hz", "power": "W", "force": "N",
              "resistance": "ohm", "inductance": "H"}


def _parameter(t: dict, i: int, base: dict, base_name: str, file: str, mode: str) -> Parameter:
    from fields.input.units import UnitParseError, parse

    where = f"parameters[{i}]"
    if not isinstance(t, dict):
        raise _err(file, where, "a table written [[parameters]]", t, "this entry")
    _check_keys(t, ("key", "start", "stop", "count", "values", "spacing"), file, where)
    key = t.get("key")
    if not isinstance(key, str):
        raise _err(file, f"{where}.key", "a key path of the geometry file in quotes, e.g. \"floater.magnets[0].diameter\"", key)
    tokens = _parse_path(key)
    ok, cur = _get(base, tokens) if tokens is not None else (False, None)
    leaves = _leaf_paths(base)
    if not ok or isinstance(cur, dict) or (isinstance(cur, list) and cur and all(isinstance(x, dict) for x in cur)):
        near = difflib.get_close_matches(key, leaves, n=1, cutoff=0.0)
        hint = f" (nearest valid: \"{near[0]}\")" if near else ""
        raise _err(file, f"{where}.key", f"a key path that exists in {base_name}{hint}", key, "the key path")
    has_range = any(x in t for x in ("start", "stop", "count"))
    if has_range and "values" in t:
        raise _err(file, f"{where}.values", "given alone (a range start/stop/count or a list of values, not both)", t["values"])
    spacing = t.get("spacing", "linear")
    if spacing not in ("linear", "log"):
        raise _err(file, f"{where}.spacing", "\"linear\" or \"log\"", spacing)
    # what kind of value lives there
    if isinstance(cur, bool):
        kind, unit_kind = "text", None
    elif isinstance(cur, int):
        kind, unit_kind = "integer", None
    elif isinstance(cur, float):
        kind, unit_kind = "number", None
    elif isinstance(cur, str):
        unit_kind = _quantity_kind(cur)
        kind = "quantity" if unit_kind is not None else "text"
    else:
        kind, unit_kind = "text", None
    column = key + (f"_{_SI_SUFFIX[unit_kind]}" if unit_kind else "")
    common = dict(key=key, column=column, kind=kind, unit_kind=unit_kind)
    if not has_range:
        if "values" not in t:
            raise _err(file, where, "given a range (start, stop, count) or a list of values", "neither", "a parameter")
        vals = t["values"]
        if not isinstance(vals, list) or not vals:
            raise _err(file, f"{where}.values", "a non-empty list", vals)
        choices = []
        for j, v in enumerate(vals):
            w = f"{where}.values[{j}]"
            if kind == "quantity":
                try:
                    si = parse(v, unit_kind)
                except UnitParseError as e:
                    raise _err(file, w, e.rule + f" like the geometry file's {_show(cur)}", v) from None
                choices.append((v, si))
            elif kind == "integer":
                if isinstance(v, bool) or not isinstance(v, int):
                    raise _err(file, w, f"a whole number like the geometry file's {cur}", v)
                choices.append((v, float(v)))
            elif kind == "number":
                if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                    raise _err(file, w, f"a plain number like the geometry file's {cur}", v)
                choices.append((float(v), float(v)))
            else:
                if type(v) is not type(cur) or (isinstance(cur, list) and len(v) != len(cur)):
                    raise _err(file, w, f"a value of the same type as the geometry file's {_show(cur)}", v)
                choices.append((v, math.nan))
        return Parameter(**common, unit_text=None, unit_factor=1.0, start=math.nan, stop=math.nan,
                         count=len(choices), spacing="linear", choices=tuple(choices), is_range=False)
    if kind not in ("quantity", "integer", "number"):
        raise _err(file, f"{where}.start", f"absent: {key} holds {_show(cur)}, which only a list of values can vary", t.get("start"))
    for req in ("start", "stop") + (("count",) if mode == "grid" else ()):
        if req not in t:
            raise _err(file, f"{where}.{req}", "present (a range needs start, stop" + (" and count)" if mode == "grid" else ")"), "nothing", "this key")
    count = t.get("count", 2)
    if isinstance(count, bool) or not isinstance(count, int) or count < 1:
        raise _err(file, f"{where}.count", "a whole number of at least 1", count)
    if kind == "quantity":
        vals = []
        for nm in ("start", "stop"):
            try:
                vals.append(parse(t[nm], unit_kind))
            except UnitParseError as e:
                raise _err(file, f"{where}.{nm}", e.rule + f" like the geometry file's {_show(cur)}", t[nm]) from None
        m = _NUM_UNIT.match(t["start"])
        unit_text = m.group(2) if m and m.group(2) else None
        if unit_text is None:
            raise _err(file, f"{where}.start", "a number followed by a unit", t["start"])
        x0 = float(m.group(1))
        # the stop value in the start's unit (ranges are spaced in the unit the user wrote)
        from fields.input.units import registry

        ureg = registry()
        x1 = float(ureg.Quantity(t["stop"].replace("^", "**")).to(ureg.Quantity(1, unit_text).units).magnitude) \
            if unit_kind != "temperature" else float(ureg.Quantity(t["stop"]).to(unit_text).magnitude)
        factor = vals[0] / x0 if x0 != 0 else parse(f"1 {unit_text}", unit_kind)
    else:
        for nm in ("start", "stop"):
            v = t[nm]
            bad = isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v)
            if bad or (kind == "integer" and not isinstance(v, int)):
                raise _err(file, f"{where}.{nm}", ("a whole number" if kind == "integer" else "a plain number") +
                           f" like the geometry file's {cur}", v)
        x0, x1, unit_text, factor = float(t["start"]), float(t["stop"]), None, 1.0
    if spacing == "log" and not (x0 > 0 and x1 > 0):
        raise _err(file, f"{where}.start", "positive (with spacing = \"log\") as is stop", t["start"])
    p = Parameter(**common, unit_text=unit_text, unit_factor=factor, start=x0, stop=x1, count=count,
                  spacing=spacing, is_range=True)
    if kind == "integer" and mode == "grid":
        ints = [v for v, _ in p.grid()]
        if len(set(ints)) != len(ints):
            raise _err(file, f"{where}.count", f"at most {abs(int(x1) - int(x0)) + 1} (whole numbers from {int(x0)} to {int(x1)})", count)
    return p


def load_sweep(path: str | Path, base_path: str | Path | None = None) -> SweepSpec:
    """Read and validate a sweep file against its base geometry file.

    Parameters
    ----------
    path : str or Path
        The sweep file (TOML).
    base_path : str or Path, optional
        The base geometry file; default the sweep file's ``base`` (relative to the sweep file).

    Returns
    -------
    SweepSpec

    Raises
    ------
    GeometryError
        One line naming the file, the key path, the value and the rule. The base file itself is
        validated by the normal loader.

    Examples
    --------
    >>> from pathlib import Path
    >>> root = Path(__file__).parents[2] / "geometries"
    >>> spec = load_sweep(root / "sweeps" / "suspension_magnet.toml", root / "suspension.toml")
    >>> spec.mode, spec.n_designs, [p.column for p in spec.parameters]
    ('grid', 64, ['floater.magnets[0].diameter_m', 'floater.magnets[0].height_m'])
    """
    from fields.input import geometry

    p = Path(path)
    file = str(path)
    if not p.is_file():
        raise GeometryError(file, "the sweep file", "an existing file", "no such file")
    text = p.read_text(encoding="utf-8")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as e:
        raise GeometryError(file, "the file", "valid TOML", str(e)) from None
    _check_keys(data, SWEEP_KEYS, file, "")
    if base_path is None:
        if not isinstance(data.get("base"), str):
            raise _err(file, "base", "the base geometry file (or pass it explicitly)", data.get("base"), "this key")
        base_path = p.parent / data["base"]
    bp = Path(base_path)
    base_design = geometry.load(bp)  # the base itself must be a valid design
    base_text = bp.read_text(encoding="utf-8")
    base = tomllib.loads(base_text)
    mode = data.get("mode", "grid")
    if mode not in ("grid", "sample"):
        raise _err(file, "mode", "\"grid\" (every combination) or \"sample\" (a space-filling sample)", mode)
    params_raw = data.get("parameters")
    if not isinstance(params_raw, list) or not params_raw:
        raise _err(file, "parameters", "at least one [[parameters]] table", params_raw, "this section")
    params = tuple(_parameter(t, i, base, bp.name, file, mode) for i, t in enumerate(params_raw))
    seen = {}
    for i, q in enumerate(params):
        if q.key in seen:
            raise _err(file, f"parameters[{i}].key", f"different from parameters[{seen[q.key]}].key", q.key)
        seen[q.key] = i
    sample = data.get("sample", {})
    if not isinstance(sample, dict):
        raise _err(file, "sample", "a table [sample]", sample, "this section")
    _check_keys(sample, ("count", "method", "seed"), file, "sample")
    n_sample = sample.get("count", 0)
    method = sample.get("method", "sobol")
    seed = sample.get("seed", 0)
    if mode == "sample":
        if isinstance(n_sample, bool) or not isinstance(n_sample, int) or not 1 <= n_sample <= MAX_DESIGNS:
            raise _err(file, "sample.count", f"a whole number from 1 to {MAX_DESIGNS}", n_sample)
        if method not in ("sobol", "latin_hypercube"):
            raise _err(file, "sample.method", "\"sobol\" or \"latin_hypercube\"", method)
        if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
            raise _err(file, "sample.seed", "a whole number of at least 0", seed)
    elif sample:
        raise _err(file, "sample", "absent with mode = \"grid\"", "a [sample] table", "this section")
    # objectives
    obj_raw = data.get("objectives", [])
    if not isinstance(obj_raw, list):
        raise _err(file, "objectives", "a list of [[objectives]] tables", obj_raw, "this section")
    objectives = []
    for i, o in enumerate(obj_raw):
        w = f"objectives[{i}]"
        if not isinstance(o, dict):
            raise _err(file, w, "a table written [[objectives]]", o, "this entry")
        _check_keys(o, ("column", "sense", "weight"), file, w)
        col = o.get("column")
        _check_column(col, file, f"{w}.column", numeric=True)
        sense = o.get("sense")
        if sense not in ("min", "max"):
            raise _err(file, f"{w}.sense", "\"min\" or \"max\"", sense)
        wt = o.get("weight", 1.0)
        if isinstance(wt, bool) or not isinstance(wt, (int, float)) or not (math.isfinite(wt) and wt > 0):
            raise _err(file, f"{w}.weight", "a positive plain number", wt)
        objectives.append(Objective(col, sense, float(wt)))
    if not objectives:
        raise _err(file, "objectives", "at least one [[objectives]] table (column and sense)", "none", "this section")
    if len({o.column for o in objectives}) != len(objectives):
        raise _err(file, "objectives", "each column once", [o.column for o in objectives], "the objectives")
    ranking = data.get("ranking", "weighted")
    if ranking not in ("weighted", "lexicographic"):
        raise _err(file, "ranking", "\"weighted\" or \"lexicographic\"", ranking)
    pareto = data.get("pareto", [o.column for o in objectives[:3]])
    names = [o.column for o in objectives]
    if (not isinstance(pareto, list) or not 2 <= len(pareto) <= 3 or len(set(pareto)) != len(pareto)
            or not all(c in names for c in pareto)):
        if len(objectives) < 2 and "pareto" not in data:
            pareto = []
        else:
            raise _err(file, "pareto", "a list of two or three different objective columns (" + ", ".join(names) + ")", pareto)
    cons = data.get("constraints", {})
    if not isinstance(cons, dict):
        raise _err(file, "constraints", "a table [constraints]", cons, "this section")
    _check_keys(cons, ("reject_flags", "limits"), file, "constraints")
    flags = cons.get("reject_flags", list(FLAGS))
    if not isinstance(flags, list) or not all(isinstance(f_, str) for f_ in flags):
        raise _err(file, "constraints.reject_flags", "a list drawn from " + ", ".join(f'"{f_}"' for f_ in FLAGS), flags)
    for j, f_ in enumerate(flags):
        if f_ not in FLAGS:
            near = difflib.get_close_matches(f_, FLAGS, n=1)
            hint = f" (did you mean \"{near[0]}\"?)" if near else ""
            raise _err(file, f"constraints.reject_flags[{j}]", "one of " + ", ".join(f'"{x}"' for x in FLAGS) + hint, f_)
    limits = []
    lim_raw = cons.get("limits", [])
    if not isinstance(lim_raw, list):
        raise _err(file, "constraints.limits", "a list of [[constraints.limits]] tables", lim_raw, "this section")
    for i, lt in enumerate(lim_raw):
        w = f"constraints.limits[{i}]"
        if not isinstance(lt, dict):
            raise _err(file, w, "a table written [[constraints.limits]]", lt, "this entry")
        _check_keys(lt, ("column", "min", "max"), file, w)
        col = lt.get("column")
        _check_column(col, file, f"{w}.column", numeric=True)
        if "min" not in lt and "max" not in lt:
            raise _err(file, w, "given min, max or both", "neither", "a limit")
        lo = _limit_value(lt.get("min"), col, file, f"{w}.min") if "min" in lt else None
        hi = _limit_value(lt.get("max"), col, file, f"{w}.max") if "max" in lt else None
        limits.append(Limit(col, lo, hi, ", ".join(f"{k_} {lt[k_]}" for k_ in ("min", "max") if k_ in lt)))
    for k_ in ("name", "description"):
        if k_ in data and not isinstance(data[k_], str):
            raise _err(file, k_, "a string in quotes", data[k_])
    invented = data.get("invented", False)
    if not isinstance(invented, bool):
        raise _err(file, "invented", "true or false", invented)
    h = hashlib.sha256()
    for part in (__version__, base_text, json.dumps(data, sort_keys=True, default=str)):
        h.update(part.encode("utf-8"))
        h.update(b"\0")
    spec = SweepSpec(file=file, base_path=str(bp), base_text=base_text, name=data.get("name", p.stem),
                     parameters=params, mode=mode, sample_count=int(n_sample) if mode == "sample" else 0,
                     sample_method=method, seed=int(seed), objectives=tuple(objectives), ranking=ranking,
                     pareto=tuple(pareto), reject_flags=tuple(flags), limits=tuple(limits),
                     sweep_id=h.hexdigest(), invented=invented or base_design.invented)
    if spec.n_designs > MAX_DESIGNS:
        raise _err(file, "parameters", f"at most {MAX_DESIGNS} designs in all", spec.n_designs, "the grid")
    return spec


def _check_column(col: Any, file: str, where: str, numeric: bool) -> None:
    cols = [c for c in RESULT_COLUMNS if not (numeric and c in _BOOL_COLUMNS)]
    if col not in cols:
        near = difflib.get_close_matches(str(col), cols, n=1, cutoff=0.0)
        hint = f" (did you mean \"{near[0]}\"?)" if near else ""
        raise _err(file, where, "a result column such as " + ", ".join(cols[:4]) + ", ..." + hint, col)


def _limit_value(v: Any, col: str, file: str, where: str) -> float:
    unit = RESULT_COLUMNS[col][0]
    if unit is None:
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise _err(file, where, f"a plain number ({col} has no unit)", v)
        return float(v)
    from fields.input.units import registry

    ureg = registry()
    if not isinstance(v, str):
        raise _err(file, where, f"a quantity with a unit convertible to {unit}, e.g. \"1 {unit}\"", v)
    try:
        q = ureg.Quantity(v.strip().replace("^", "**"))
        return float(q.to(unit).magnitude)
    except Exception:  # pint raises many types for bad or mismatched units
        raise _err(file, where, f"a quantity with a unit convertible to {unit}, e.g. \"1 {unit}\"", v) from None


# ============================================================================== expansion


def _unit_samples(spec: SweepSpec) -> np.ndarray:
    from scipy.stats import qmc

    dim = len(spec.parameters)
    if spec.sample_method == "sobol":
        eng = qmc.Sobol(dim, scramble=True, rng=spec.seed)
        with warnings.catch_warnings():
            # balance needs a power of two; any count is still a valid low-discrepancy prefix
            warnings.filterwarnings("ignore", message=".*balance properties.*")
            return eng.random(spec.sample_count)
    return qmc.LatinHypercube(dim, rng=spec.seed).random(spec.sample_count)


def _expand_full(spec: SweepSpec) -> list[tuple[int, dict, tuple[float, ...]]]:
    if spec.mode == "grid":
        grids = [q.grid() for q in spec.parameters]
        combos = itertools.product(*grids)
    else:
        U = _unit_samples(spec)
        combos = ([q.value_at(float(u)) for q, u in zip(spec.parameters, row)] for row in U)
    out = []
    for i, combo in enumerate(combos):
        over = {q.key: v for q, (v, _) in zip(spec.parameters, combo)}
        si = tuple(s for _, s in combo)
        out.append((i, over, si))
    return out


def expand(spec: SweepSpec) -> list[tuple[int, dict]]:
    """Every design of the sweep as ``(index, overrides)``.

    ``overrides`` maps key paths of the base geometry file to the values written there (e.g.
    ``{"floater.magnets[0].diameter": "10.5 mm"}``). Grid mode: the first parameter varies
    slowest. Sample mode: the seeded Sobol (scrambled) or Latin-hypercube sample of scipy.stats.qmc
    mapped onto the ranges (lists: equal shares of [0, 1); whole numbers rounded).
    """
    return [(i, o) for i, o, _ in _expand_full(spec)]


# ============================================================================== TOML text


_BARE = re.compile(r"^[A-Za-z0-9_-]+$")


def _tkey(k: str) -> str:
    return k if _BARE.match(k) else json.dumps(k, ensure_ascii=False)


def _tval(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, list):
        return "[" + ", ".join(_tval(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_tkey(k)} = {_tval(x)}" for k, x in v.items()) + "}"
    raise GeometryError("sweep TOML writer", "a value", "a string, number, boolean, list or table", type(v).__name__)


def _is_aot(v: Any) -> bool:
    return isinstance(v, list) and bool(v) and all(isinstance(x, dict) for x in v)


def toml_text(data: dict, comments: tuple[str, ...] = ()) -> str:
    """TOML text of a parsed geometry file (tables, arrays of tables, inline values).

    ``tomllib.loads(toml_text(d)) == d`` for every dict of strings, numbers, booleans, lists
    and tables (no dates).
    """
    buf = io.StringIO()
    for c in comments:
        buf.write(f"# {c}\n")

    def table(d: dict, path: str) -> None:
        for k, v in d.items():
            if not isinstance(v, dict) and not _is_aot(v):
                buf.write(f"{_tkey(k)} = {_tval(v)}\n")
        for k, v in d.items():
            sub = f"{path}.{_tkey(k)}" if path else _tkey(k)
            if isinstance(v, dict):
                buf.write(f"\n[{sub}]\n")
                table(v, sub)
            elif _is_aot(v):
                for item in v:
                    buf.write(f"\n[[{sub}]]\n")
                    table(item, sub)

    table(data, "")
    return buf.getvalue()


def design_text(base_text: str, overrides: dict, comments: tuple[str, ...] = ()) -> str:
    """Geometry-file text of the base with ``overrides`` applied to its parsed dict."""
    data = tomllib.loads(base_text)
    for key, v in overrides.items():
        _set(data, key, copy.deepcopy(v))
    return toml_text(data, comments)


# ============================================================================== chunks (workers)


def _run_chunk(task: tuple) -> list[dict]:
    """Evaluate a chunk of designs (runs in a worker process or on a Dask worker)."""
    from fields.input import geometry

    base_text, label, base_dir, items = task
    base = tomllib.loads(base_text)
    rows = []
    for index, over in items:
        data = copy.deepcopy(base)
        for key, v in over.items():
            _set(data, key, copy.deepcopy(v))
        row: dict[str, Any] = {"index": index}
        try:
            design = geometry.loads(toml_text(data), file=f"{label} (sweep design {index})", base_dir=base_dir)
            row.update(evaluate_design(design))
            row["failure"] = ""
        except HoverfieldError as e:
            row.update({c: (False if c in _BOOL_COLUMNS else math.nan) for c in RESULT_COLUMNS})
            row["failure"] = str(e).replace("\n", " ")
        rows.append(row)
    return rows


def _columns(spec: SweepSpec) -> list[str]:
    return ["index"] + [q.column for q in spec.parameters] + list(RESULT_COLUMNS) + ["failure"]


def _chunk_name(spec: SweepSpec, first: int, last: int) -> str:
    return f"{spec.sweep_id[:16]}_{first:07d}_{last:07d}.csv"


def _write_chunk(path: Path, spec: SweepSpec, rows: list[dict], si: dict[int, tuple]) -> None:
    from fields.io.export import csv_text, write_atomic

    cols = _columns(spec)
    body = []
    for r in rows:
        vals = si[r["index"]]
        body.append([r["index"], *vals, *(r[c] for c in RESULT_COLUMNS), r["failure"]])
    write_atomic(path, csv_text(cols, body, [f"# hoverfield {__version__} sweep chunk", f"# sweep_id: {spec.sweep_id}"]))


def _read_table(path: Path) -> tuple[list[str], list[list[str]], list[str]]:
    lines = path.read_text(encoding="utf-8").splitlines()
    comments = [ln for ln in lines if ln.startswith("#")]
    body = [ln for ln in lines if ln and not ln.startswith("#")]
    rows = list(csv.reader(body))
    return (rows[0] if rows else []), rows[1:], comments


def _done_rows(chunk_dir: Path, spec: SweepSpec) -> dict[int, list[str]]:
    """Rows already computed for this sweep (by design index), from complete chunk files."""
    done: dict[int, list[str]] = {}
    if not chunk_dir.is_dir():
        return done
    cols = _columns(spec)
    for f in sorted(chunk_dir.glob(f"{spec.sweep_id[:16]}_*.csv")):
        try:
            head, rows, comments = _read_table(f)
        except (OSError, UnicodeDecodeError, csv.Error):
            continue
        if head != cols or f"# sweep_id: {spec.sweep_id}" not in comments:
            continue
        for r in rows:
            if len(r) == len(cols):
                done[int(r[0])] = r
    return done


# ============================================================================== ranking


def pareto_front(values, senses) -> np.ndarray:
    """Indices of the non-dominated rows.

    Parameters
    ----------
    values : array_like, shape (n, m)
        Objective values of n designs; rows with a NaN take no part.
    senses : sequence of str, length m
        ``"min"`` or ``"max"`` per column.

    Returns
    -------
    ndarray of int
        Sorted row indices of the designs no other design dominates (at least as good in every
        objective and better in one). Equal rows do not dominate each other.

    Examples
    --------
    >>> pareto_front([[1, 5], [2, 2], [3, 3], [5, 1]], ["min", "min"]).tolist()
    [0, 1, 3]
    """
    V = np.asarray(values, float)
    if V.ndim != 2 or V.shape[1] != len(senses):
        raise GeometryError("pareto_front", "values", f"an array of shape (n, {len(senses)})", V.shape)
    for s in senses:
        if s not in ("min", "max"):
            raise GeometryError("pareto_front", "each sense", "\"min\" or \"max\"", s)
    sign = np.array([1.0 if s == "min" else -1.0 for s in senses])
    ok = np.flatnonzero(np.all(np.isfinite(V), axis=1))
    X = V[ok] * sign
    keep = np.ones(len(X), bool)
    block = 512
    for a in range(0, len(X), block):
        A = X[a:a + block]
        le = np.all(X[None, :, :] <= A[:, None, :], axis=2)  # (block, n): row j at least as good
        lt = np.any(X[None, :, :] < A[:, None, :], axis=2)
        keep[a:a + block] = ~np.any(le & lt, axis=1)
    return ok[keep]


def rank(values, senses, weights=None, method: str = "weighted") -> tuple[np.ndarray, np.ndarray]:
    """Order of rows by the objectives (best first) and each row's score.

    Parameters
    ----------
    values : array_like, shape (n, m)
    senses : sequence of "min"/"max", length m
    weights : sequence of float, length m, optional (weighted only; default equal)
    method : "weighted" or "lexicographic"

    Returns
    -------
    order : ndarray of int, shape (n,)
    score : ndarray, shape (n,)
        Weighted: mean of the min-max scaled objectives (0 best, 1 worst). Lexicographic: the
        position in the order (0 best).
    """
    V = np.asarray(values, float)
    n, m = V.shape
    sign = np.array([1.0 if s == "min" else -1.0 for s in senses])
    X = V * sign
    if method == "lexicographic":
        order = np.lexsort(tuple([np.arange(n)] + [X[:, j] for j in reversed(range(m))]))
        score = np.empty(n)
        score[order] = np.arange(n, dtype=float)
        return order, score
    if method != "weighted":
        raise GeometryError("rank", "method", "\"weighted\" or \"lexicographic\"", method)
    w = np.ones(m) if weights is None else np.asarray(weights, float)
    lo, hi = X.min(axis=0) if n else np.zeros(m), X.max(axis=0) if n else np.ones(m)
    span = np.where(hi > lo, hi - lo, 1.0)
    score = ((X - lo) / span) @ w / w.sum()
    order = np.lexsort((np.arange(n), score))
    return order, score


# ============================================================================== run


@dataclass(frozen=True)
class SweepResult:
    """What :func:`run_sweep` produced.

    Attributes
    ----------
    spec : SweepSpec
    columns : list of str
        Columns of ``table`` (units in the names).
    table : list of dict
        Every design's row, by index (floats, bools, the failure text).
    feasible : ndarray of bool, shape (n,)
    order : ndarray of int
        Feasible design indices, best first.
    front : ndarray of int
        Pareto-front design indices (feasible designs only).
    best_index : int or None
        None when no design is feasible.
    evaluated : int
        Designs computed in this call (0 when every chunk already existed).
    reused : int
        Designs read back from existing chunk files.
    files : dict of str to str
    seconds : float
    """

    spec: SweepSpec
    columns: list[str]
    table: list[dict]
    feasible: np.ndarray
    order: np.ndarray
    front: np.ndarray
    best_index: int | None
    evaluated: int
    reused: int
    files: dict = field(default_factory=dict)
    seconds: float = 0.0

    def column(self, name: str) -> np.ndarray:
        """One numeric column over all designs (n,)."""
        return np.array([float(r[name]) for r in self.table])


def _default_chunk(n: int) -> int:
    """Designs per task: up to 32 (amortises task overhead), fewer for small sweeps so both cores work."""
    return max(1, min(32, math.ceil(n / 16)))


def _convert_row(spec: SweepSpec, raw: list[str]) -> dict:
    cols = _columns(spec)
    kinds = {q.column: q.kind for q in spec.parameters}
    out: dict[str, Any] = {}
    for c, v in zip(cols, raw):
        if c == "index":
            out[c] = int(v)
        elif c == "failure":
            out[c] = v
        elif c in _BOOL_COLUMNS:
            out[c] = v == "true"
        elif c in kinds and kinds[c] == "text":
            out[c] = v
        else:
            out[c] = math.nan if v == "" else float(v)
    return out


def _reasons(spec: SweepSpec, row: dict) -> list[str]:
    if row["failure"]:
        return ["failed"]
    why = [f for f in spec.reject_flags if row[f]]
    for lim in spec.limits:
        v = row[lim.column]
        if not math.isfinite(v) or (lim.minimum is not None and v < lim.minimum) or (lim.maximum is not None and v > lim.maximum):
            why.append(f"{lim.column} outside {lim.text}")
    for o in spec.objectives:
        if not math.isfinite(row[o.column]):
            why.append(f"{o.column} not finite")
    return why


def _open_executor(workers: int | None, scheduler_address: str | None):
    """(executor, closer): a process pool, or a Dask cluster's concurrent.futures executor."""
    if scheduler_address:
        from distributed import Client

        client = Client(scheduler_address, set_as_default=False)
        ex = client.get_executor(pure=False)

        def close():
            ex.shutdown(wait=True)
            client.close()

        return ex, close
    from concurrent.futures import ProcessPoolExecutor

    n = (os.cpu_count() or 1) if workers is None else workers
    ex = ProcessPoolExecutor(max_workers=n)
    return ex, lambda: ex.shutdown(wait=True, cancel_futures=True)


def run_sweep(base_path, sweep_path, out_dir, workers: int | None = None, scheduler_address: str | None = None,
              progress: bool = True, chunk_size: int | None = None) -> SweepResult:
    """Run a sweep: evaluate every design (resumably), rank, write the tables, plots and best design.

    Parameters
    ----------
    base_path : str or Path
        The base geometry file (never written to).
    sweep_path : str or Path
        The sweep file.
    out_dir : str or Path
        Output folder: ``sweep_chunks/`` (one CSV per finished chunk), ``sweep.csv``,
        ``ranked.csv``, ``front.csv``, ``sweep.json``, ``front.png``, ``objectives.png``,
        ``best_design.toml``.
    workers : int, optional
        Local worker processes (default ``os.cpu_count()``); ``0`` evaluates in this process.
    scheduler_address : str, optional
        ``"tcp://host:port"`` of a Dask scheduler: the chunks run on that cluster instead (the
        workers need ``fields`` installed; files are written here, by this process).
    progress : bool
        A tqdm bar on stderr (designs, rate, time left).
    chunk_size : int, optional
        Designs per task (default up to 32, see :func:`_default_chunk`).

    Returns
    -------
    SweepResult

    Notes
    -----
    Chunk files are named by the sweep id (a hash of the tool version, the base file's content
    and the sweep file's content) and the design indices they hold, and written atomically as
    each chunk finishes: an interrupted sweep resumes where it stopped, a finished one recomputes
    nothing, and a changed base or sweep file never reuses stale rows.
    """
    t0 = time.perf_counter()
    spec = load_sweep(sweep_path, base_path)
    out = Path(out_dir)
    base_abs = Path(spec.base_path).resolve()
    for name in ("best_design.toml", "sweep.csv"):
        if (out / name).resolve() == base_abs or (out / name).resolve() == Path(sweep_path).resolve():
            raise GeometryError(str(out), "the output folder", "one that does not hold the input files", str(out))
    chunk_dir = out / "sweep_chunks"
    full = _expand_full(spec)
    si = {i: s for i, _, s in full}
    done = _done_rows(chunk_dir, spec)
    todo = [(i, o) for i, o, _ in full if i not in done]
    cs = chunk_size or _default_chunk(len(full))
    chunks = [todo[a:a + cs] for a in range(0, len(todo), cs)]
    label = Path(spec.base_path).name
    base_dir = str(Path(spec.base_path).parent)
    evaluated = 0
    if chunks:
        from tqdm import tqdm

        bar = tqdm(total=len(full), initial=len(full) - len(todo), file=sys.stderr, disable=not progress,
                   unit="design", desc="sweep", dynamic_ncols=True)
        try:
            if workers == 0 and not scheduler_address:
                for ch in chunks:
                    rows = _run_chunk((spec.base_text, label, base_dir, ch))
                    _write_chunk(chunk_dir / _chunk_name(spec, ch[0][0], ch[-1][0]), spec, rows, si)
                    evaluated += len(rows)
                    bar.update(len(rows))
            else:
                from concurrent.futures import as_completed

                ex, close = _open_executor(workers, scheduler_address)
                try:
                    futs = {ex.submit(_run_chunk, (spec.base_text, label, base_dir, ch)): ch for ch in chunks}
                    for fut in as_completed(futs):
                        ch = futs[fut]
                        rows = fut.result()
                        _write_chunk(chunk_dir / _chunk_name(spec, ch[0][0], ch[-1][0]), spec, rows, si)
                        evaluated += len(rows)
                        bar.update(len(rows))
                finally:
                    close()
        finally:
            bar.close()
        done = _done_rows(chunk_dir, spec)
    missing = [i for i, _, _ in full if i not in done]
    if missing:
        from fields.errors import SolverError

        raise SolverError(f"sweep: designs {missing[:5]} have no result after the run; run it again to resume")
    table = [_convert_row(spec, done[i]) for i, _, _ in full]
    return _finish(spec, out, full, table, evaluated, len(full) - evaluated, t0)


def _finish(spec: SweepSpec, out: Path, full, table: list[dict], evaluated: int, reused: int, t0: float) -> SweepResult:
    from fields.input import geometry
    from fields.io.export import csv_text, write_atomic, write_json, write_png

    cols = _columns(spec)
    n = len(table)
    reasons = [_reasons(spec, r) for r in table]
    feasible = np.array([not r for r in reasons], bool)
    fidx = np.flatnonzero(feasible)
    names = [o.column for o in spec.objectives]
    senses = [o.sense for o in spec.objectives]
    V = np.array([[table[i][c] for c in names] for i in range(n)], float).reshape(n, len(names))
    order_f, score_f = rank(V[fidx], senses, [o.weight for o in spec.objectives], spec.ranking)
    order = fidx[order_f]
    score = np.full(n, math.nan)
    score[fidx] = score_f
    if spec.pareto:
        pcols = [names.index(c) for c in spec.pareto]
        front = fidx[pareto_front(V[np.ix_(fidx, pcols)], [senses[j] for j in pcols])]
    else:
        front = np.array([], int)
    best = int(order[0]) if len(order) else None
    head = [f"# hoverfield {__version__} sweep {spec.name}", f"# base: {spec.base_path}", f"# sweep file: {spec.file}",
            f"# sweep_id: {spec.sweep_id}"]

    def row_vals(r):
        return [r[c] for c in cols]

    files = {}
    files["sweep.csv"] = str(write_atomic(out / "sweep.csv", csv_text(cols, [row_vals(r) for r in table],
                                                                      head + ["# every design, by index; failure: why it could not be evaluated"])))
    rank_of = {int(i): j + 1 for j, i in enumerate(order)}
    rcols = ["rank", "score"] + cols + ["rejected_by"]
    infeas = [i for i in range(n) if not feasible[i]]
    rrows = [[rank_of[int(i)], score[i], *row_vals(table[i]), ""] for i in order]
    rrows += [["", math.nan, *row_vals(table[i]), "; ".join(reasons[i])] for i in infeas]
    method = ("weighted mean of min-max scaled objectives, 0 best" if spec.ranking == "weighted"
              else "lexicographic: first objective, ties by the next")
    files["ranked.csv"] = str(write_atomic(out / "ranked.csv", csv_text(rcols, rrows, head + [
        f"# ranking: {method}; objectives " + ", ".join(f"{o.column} ({o.sense}, weight {o.weight:g})" for o in spec.objectives),
        "# feasible designs first, by rank; then the rejected ones with the reason"])))
    files["front.csv"] = str(write_atomic(out / "front.csv", csv_text(cols, [row_vals(table[i]) for i in front], head + [
        "# Pareto front (non-dominated feasible designs) over " + ", ".join(spec.pareto)])))
    # plots
    from fields.io import plots as plots_sweep

    if len(fidx):
        pf = plots_sweep.front_scatter(V[fidx][:, [names.index(c) for c in spec.pareto]] if spec.pareto else V[fidx][:, :1],
                                       np.searchsorted(fidx, front), list(spec.pareto or names[:1]),
                                       [s for c, s in zip(names, senses) if c in (spec.pareto or names[:1])],
                                       best=int(np.searchsorted(fidx, best)) if best is not None else None,
                                       title=f"{spec.name}: Pareto front ({len(front)} of {len(fidx)} feasible designs)")
        files["front.png"] = str(write_png(out / "front.png", pf))
        plots_sweep.close(pf)
    par = {q.column: [r[q.column] for r in table] for q in spec.parameters}
    objv = {c: V[:, j] for j, c in enumerate(names)}
    po = plots_sweep.objectives_vs_parameters(par, objv, feasible, front_mask=np.isin(np.arange(n), front),
                                              title=f"{spec.name}: objectives versus parameters")
    files["objectives.png"] = str(write_png(out / "objectives.png", po))
    plots_sweep.close(po)
    # the best design as a new geometry file
    best_info = None
    if best is not None:
        over = full[best][1]
        data = tomllib.loads(spec.base_text)
        for key, v in over.items():
            _set(data, key, copy.deepcopy(v))
        base_name = data.get("name", Path(spec.base_path).stem)
        data["name"] = f"{base_name}-sweep-best"
        comments = (f"hoverfield geometry file: best design (index {best}) of sweep \"{spec.name}\" of {Path(spec.base_path).name}",
                    "written by hoverfield sweep; changed: " + "; ".join(f"{k} = {_tval(v)}" for k, v in over.items()))
        if spec.invented:
            comments += ("INVENTED EXAMPLE: derived from an invented base design.",)
        text = toml_text(data, comments)
        geometry.loads(text, file=str(out / "best_design.toml"), base_dir=Path(spec.base_path).parent)
        files["best_design.toml"] = str(write_atomic(out / "best_design.toml", text))
        best_info = {"index": best, "overrides": over,
                     "objectives": {c: table[best][c] for c in names},
                     "row": {c: table[best][c] for c in cols}}
    seconds = time.perf_counter() - t0
    summary = {
        "sweep": spec.name, "sweep_file": spec.file, "base": spec.base_path, "sweep_id": spec.sweep_id,
        "mode": spec.mode, "designs": n, "failed": int(sum(1 for r in table if r["failure"])),
        "feasible": int(feasible.sum()), "front_size": int(len(front)), "evaluated_this_run": evaluated,
        "reused_from_chunks": reused, "seconds": seconds,
        "designs_per_second": (evaluated / seconds) if evaluated and seconds > 0 else None,
        "ranking": method, "objectives": [{"column": o.column, "sense": o.sense, "weight": o.weight} for o in spec.objectives],
        "pareto": list(spec.pareto), "reject_flags": list(spec.reject_flags),
        "limits": [{"column": lim.column, "min": lim.minimum, "max": lim.maximum} for lim in spec.limits],
        "parameters": [{"key": q.key, "column": q.column, "values": len(q.grid()) if spec.mode == "grid" else None}
                       for q in spec.parameters],
        "best": best_info, "front_indices": [int(i) for i in front],
        "failures": [{"index": r["index"], "reason": r["failure"]} for r in table if r["failure"]][:20],
    }
    files["sweep.json"] = str(out / "sweep.json")
    summary["files"] = dict(files)
    write_json(out / "sweep.json", summary)
    return SweepResult(spec=spec, columns=cols, table=table, feasible=feasible, order=order, front=front,
                       best_index=best, evaluated=evaluated, reused=reused, files=files, seconds=seconds)


def sweep_command(base_path, sweep_path, out_dir, workers: int | None = None, scheduler_address: str | None = None,
                  progress: bool = True) -> dict:
    """Run a sweep for the CLI; returns a JSON-ready summary (the CLI prints it).

    Keys: ``lines`` (human-readable lines to print), ``designs``, ``failed``, ``feasible``,
    ``front_size``, ``evaluated_this_run``, ``reused_from_chunks``, ``seconds``, ``best`` (index,
    overrides, objectives) and ``files``.
    """
    r = run_sweep(base_path, sweep_path, out_dir, workers=workers, scheduler_address=scheduler_address,
                  progress=progress)
    n = len(r.table)
    failed = sum(1 for row in r.table if row["failure"])
    lines = [f"sweep {r.spec.name}: {n} designs of {Path(r.spec.base_path).name} ({r.spec.mode}); "
             f"{r.evaluated} evaluated now, {r.reused} reused; {failed} failed, {int(r.feasible.sum())} feasible, "
             f"{len(r.front)} on the Pareto front; {r.seconds:.1f} s"]
    best = None
    if r.best_index is not None:
        row = r.table[r.best_index]
        over = dict(expand_one(r.spec, r.best_index))
        lines.append(f"best design {r.best_index}: " + ", ".join(f"{k} = {v}" for k, v in over.items()))
        lines.append("  " + ", ".join(f"{o.column} {row[o.column]:.4g}" for o in r.spec.objectives))
        best = {"index": r.best_index, "overrides": over, "objectives": {o.column: row[o.column] for o in r.spec.objectives}}
    else:
        lines.append("no feasible design (see ranked.csv, column rejected_by)")
    lines.append("wrote " + ", ".join(r.files.values()))
    return {"lines": lines, "designs": n, "failed": failed, "feasible": int(r.feasible.sum()),
            "front_size": len(r.front), "evaluated_this_run": r.evaluated, "reused_from_chunks": r.reused,
            "seconds": r.seconds, "best": best, "files": dict(r.files)}


def expand_one(spec: SweepSpec, index: int) -> dict:
    """The overrides of one design (same as ``dict(expand(spec))[index]``)."""
    return _expand_full(spec)[index][1]
