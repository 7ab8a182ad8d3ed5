"""``hoverfield size``: a ranked short list of suspension designs from a requirement file.

Search (mixed integer): the magnet (an index into the standard sizes x grades, or the one given)
is an integer of :func:`scipy.optimize.differential_evolution` (``integrality``, seeded, deferred
updating so the result does not depend on the number of workers); the winding shape ``(h, b, t)``
(:mod:`fields.studies.size_model`) is continuous; the wire gauge is enumerated exactly inside each
evaluation (one force call per shape serves every gauge, the force being proportional to the
turns). The best (magnet, gauge) pairs of the final population are then refined one by one with
a bounded Powell search on the shape, and each refined design is written as a geometry file,
read back by the normal loader and evaluated by :func:`fields.studies.evaluate.evaluate_design`
(the sweep's evaluation): the short list shows those verified numbers.

With a soft-iron core in the requirement every evaluation is a ring-cell solve (about 20 s), so
the search runs iron-free (the bore then counts as not cooled) and only the short list is
evaluated with the core, then re-ranked on those numbers.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from fields.errors import HoverfieldError
from fields.input.requirement import Requirement, load_requirement
from fields.studies import size_model as sm

#: population of the evolution per searched number (scipy's popsize)
POPULATION_PER_DIMENSION = 8
#: function evaluations of each local refinement
REFINE_EVALUATIONS = 300
#: two designs of the same magnet and gauge count as alternatives when a dimension differs by this (m)
DISTINCT_M = 1e-3


@dataclass(frozen=True)
class SizedDesign:
    """One design of the short list: what it is, its verified numbers and its geometry file."""

    rank: int
    name: str
    candidate: sm.Candidate
    magnet_label: str
    turns: int
    feasible: bool
    failed_limits: tuple[str, ...]
    row: dict                    # evaluate_design's columns (at the operating gap)
    numbers: dict                # the short list's own columns (SI, units in the names)
    text: str                    # the geometry file
    file: str = ""
    violations: tuple[float, ...] = ()   # per size_model.LIMIT_NAMES, normalised
    limit_values: tuple[float, ...] = ()


@dataclass(frozen=True)
class SizeResult:
    requirement: Requirement
    designs: tuple[SizedDesign, ...]
    feasible: bool
    binding: str | None
    constraints: tuple[str, ...]
    notes: tuple[str, ...]
    evaluations: int
    seconds: float
    files: dict = field(default_factory=dict)


class _Search:
    """The objective of the evolution (picklable for worker processes)."""

    def __init__(self, req: Requirement):
        self.req = req
        self.n_mag = len(req.magnets)

    def split(self, z) -> tuple[int, np.ndarray]:
        if self.n_mag > 1:
            return int(round(float(z[0]))), np.asarray(z[1:], float)
        return 0, np.asarray(z, float)

    def shapes(self, z) -> list[sm.Quick]:
        magnet, x = self.split(z)
        try:
            return sm.evaluate_shape(self.req, magnet, x)
        except HoverfieldError:
            return []

    def __call__(self, z) -> float:
        qs = self.shapes(z)
        return min((sm.objective_value(self.req, q) for q in qs), default=1e15)


class _Refine:
    """Local refinement of one (magnet, gauge) pair from a start shape (picklable)."""

    def __init__(self, req: Requirement):
        self.req = req

    def value(self, magnet: int, gauge: str, x) -> tuple[float, sm.Quick | None]:
        try:
            q = sm.evaluate_shape(self.req, magnet, x, (gauge,))[0]
        except HoverfieldError:
            return 1e15, None
        return sm.objective_value(self.req, q), q

    def __call__(self, task) -> tuple[float, sm.Quick | None, int]:
        from scipy.optimize import minimize

        magnet, gauge, x0 = task
        bounds = sm.bounds_of(self.req)
        best = [*self.value(magnet, gauge, x0), np.asarray(x0, float)]
        count = [1]

        def f(x):
            count[0] += 1
            v, q = self.value(magnet, gauge, x)
            if v < best[0]:
                best[:] = [v, q, np.asarray(x, float)]
            return v

        minimize(f, np.asarray(x0, float), method="Powell", bounds=bounds,
                 options={"maxfev": REFINE_EVALUATIONS, "xtol": 1e-4, "ftol": 1e-7})
        # a winding that ends close to the envelope usually does best on it: try the bound
        x = best[2].copy()
        for i, (lo, hi) in enumerate(bounds):
            for edge in (lo, hi):
                if abs(x[i] - edge) <= 0.02 * (hi - lo) and x[i] != edge:
                    y = x.copy()
                    y[i] = edge
                    f(y)
                    x = best[2].copy()
        return best[0], best[1], count[0]


def _pool(workers: int):
    if workers <= 1:
        return None
    import multiprocessing

    from fields.physics.parallel import serial_worker

    return multiprocessing.get_context("fork").Pool(workers, initializer=serial_worker)


def _envelope_start(req: Requirement, n_mag: int) -> np.ndarray:
    """The full envelope (tallest, widest, smallest bore) with the strongest magnet: a start."""
    x = [req.max_height_m, req.max_outer_radius_m, 0.0]
    if n_mag > 1:
        from fields.input.tables import lookup_grade

        strength = [m.volume_m3 * lookup_grade(m.grade).remanence_nominal_T for m in req.magnets]
        return np.asarray([float(int(np.argmax(strength)))] + x)
    return np.asarray(x)


def _evolve(req: Requirement, pool, seed: int) -> tuple[list[sm.Quick], int]:
    """The evolution; returns the quick numbers of every gauge of the final population."""
    from scipy.optimize import differential_evolution

    search = _Search(req)
    bounds = ([(0.0, float(search.n_mag - 1))] if search.n_mag > 1 else []) + sm.bounds_of(req)
    integrality = [search.n_mag > 1] + [False] * 3 if search.n_mag > 1 else None
    res = differential_evolution(search, bounds, maxiter=req.generations, popsize=POPULATION_PER_DIMENSION,
                                 tol=1e-4, rng=seed, polish=False, updating="deferred", init="sobol",
                                 workers=pool.map if pool is not None else 1, integrality=integrality,
                                 x0=_envelope_start(req, search.n_mag))
    members = [np.asarray(z, float) for z in res.population]
    members.append(np.asarray(res.x, float))
    mapper = pool.map if pool is not None else map
    quick = [q for qs in mapper(search.shapes, members) for q in qs]
    return quick, int(res.nfev) + len(members)


def _pick(req: Requirement, quick: list[sm.Quick], n: int) -> list[sm.Quick]:
    """Start points of the refinement: the best of each (magnet, gauge) pair, then alternatives
    of the best pairs (other shapes), up to ``n``."""
    order = sorted(quick, key=lambda q: (sm.objective_value(req, q), q.candidate.key()))
    picked: list[sm.Quick] = []
    seen_pairs: set = set()
    for q in order:
        pair = (q.candidate.magnet, q.candidate.gauge)
        if pair not in seen_pairs:
            seen_pairs.add(pair)
            picked.append(q)
    picked = picked[:n]
    for q in order:
        if len(picked) >= n:
            break
        if not any(_close(q.candidate, p.candidate) for p in picked):
            picked.append(q)
    return picked


def _close(c: sm.Candidate, d: sm.Candidate) -> bool:
    return (c.magnet, c.gauge) == (d.magnet, d.gauge) and max(
        abs(c.height_m - d.height_m), abs(c.outer_radius_m - d.outer_radius_m),
        abs(c.inner_radius_m - d.inner_radius_m)) <= DISTINCT_M


def _distinct(req: Requirement, quick: list[sm.Quick]) -> list[sm.Quick]:
    """Best first; a design within :data:`DISTINCT_M` of a better one of the same pair is dropped
    (refinements from nearby starts end on the same design)."""
    out: list[sm.Quick] = []
    for q in sorted(quick, key=lambda q: (sm.objective_value(req, q), q.candidate.key())):
        if not any(_close(q.candidate, p.candidate) for p in out):
            out.append(q)
    return out


def _shape_x(req: Requirement, c: sm.Candidate) -> np.ndarray:
    """``(h, b, t)`` of a candidate (inverse of :func:`fields.studies.size_model.geometry_of`)."""
    amin = sm.geometry_of(req, c.magnet, c.gauge, (c.height_m, c.outer_radius_m, 0.0)).inner_radius_m
    free = c.outer_radius_m - sm.MIN_BUILD_M - amin
    return np.asarray([c.height_m, c.outer_radius_m, (c.inner_radius_m - amin) / free if free > 0 else 0.0])


def _verify(req: Requirement, q: sm.Quick, name: str, with_core: bool) -> SizedDesign:
    """Write the candidate as a geometry file, load it and evaluate it as the sweep does."""
    from fields import analysis
    from fields.control.plant import nominal_rules
    from fields.devices import winding
    from fields.input.geometry import loads
    from fields.input.tables import COPPER_ALPHA_20C_PER_K
    from fields.studies.evaluate import evaluate_design
    from fields.studies.expand import toml_text

    c = q.candidate
    # the driver's reach: what the supply pushes through the coil at its worst-gap temperature
    R_hot = q.resistance_20C_ohm * (1 + COPPER_ALPHA_20C_PER_K * (q.coil_temperature_C - 20.0)) \
        if math.isfinite(q.coil_temperature_C) else q.resistance_20C_ohm
    i_max = float(f"{req.supply_voltage_V / R_hot:.4g}")
    i_hover = q.hover_current_A if math.isfinite(q.hover_current_A) else i_max
    i_nom = float(np.clip(i_hover, -i_max, i_max))
    data = sm.design_dict(req, c, name=name, hover_A=i_nom, max_A=i_max, with_core=with_core)
    m = req.magnets[c.magnet]
    comments = ("hoverfield geometry file, GENERATED by hoverfield size from the requirement " + Path(req.file).name + ".",
                "INVENTED EXAMPLE: a computed proposal, not a measured device; check it before building.",
                f"Coil {c.gauge}, {q.turns} turns; floater {m.label}; nominal_current is the hover current"
                + (" of the iron-free search (the core lowers it)" if with_core else "") + ".")
    text = toml_text(data, comments)
    design = loads(text, file=f"{name}.toml")
    row = evaluate_design(design)
    # the hover current at every gap (with one gap this is the call evaluate_design made: cached)
    cv = analysis.axial_curves(design, gaps_m=list(req.gaps_m), currents_A=[0.0])
    i_op = row["hover_current_A"]
    i_w = float(np.max(np.abs(cv.hover_current_A)))
    R20, G = winding.resistance_and_cooling(design, 0)
    T_w = float(winding.steady_temperature_C([i_w], R20, G, req.ambient_C)[0][0]) if math.isfinite(i_w) else math.inf
    Rw = R20 * (1 + COPPER_ALPHA_20C_PER_K * (T_w - 20.0))
    Vs = req.supply_voltage_V
    head = Vs - i_w * Rw
    gaps_I = np.abs(cv.hover_current_A)
    P_drv = float(np.max((Vs - gaps_I * Rw) * gaps_I)) if math.isfinite(i_w) else math.inf
    J = i_w / sm.wire_area_m2(c.gauge)
    ki_min = float(np.min(cv.ki_N_per_A))
    viol, values = sm.check_limits(req, T_w, J, head, P_drv, ki_min)
    kz = row["kz_N_per_m"]
    mass = row["mass_kg"]
    fs = nominal_rules(math.sqrt(-kz / mass))[1] if math.isfinite(kz) and kz < 0 else math.nan
    numbers = {
        "magnet_diameter_m": m.diameter_m, "magnet_height_m": m.height_m, "grade": m.grade, "wire_gauge": c.gauge,
        "turns": q.turns, "inner_radius_m": c.inner_radius_m, "outer_radius_m": c.outer_radius_m, "height_m": c.height_m,
        "coil_bottom_height_m": req.coil_bottom_height_m, "core": with_core,
        "hover_current_A": i_op, "coil_voltage_V": row["coil_voltage_V"], "coil_power_W": row["coil_power_W"],
        "coil_temperature_C": row["coil_temperature_C"], "worst_gap_temperature_C": T_w,
        "current_density_A_per_m2": J, "voltage_headroom_V": head, "driver_dissipation_W": P_drv,
        "resistance_20C_ohm": row["coil_resistance_20C_ohm"], "max_current_A": i_max,
        "kz_N_per_m": kz, "ki_N_per_A": row["ki_N_per_A"], "unstable_pole_1_per_s": row["unstable_pole_1_per_s"],
        "sample_rate_Hz": fs, "floater_mass_kg": mass, "total_mass_kg": q.total_mass_kg, "magnet_volume_m3": m.volume_m3,
    }
    failed = tuple(sm.LIMIT_NAMES[i] for i, v in enumerate(viol) if v > 0)
    if row["no_equilibrium"] or row["contact"]:
        failed += ("no operating point" if row["no_equilibrium"] else "contact",)
    return SizedDesign(rank=0, name=name, candidate=c, magnet_label=m.label, turns=q.turns, feasible=not failed,
                       failed_limits=failed, row=row, numbers=numbers, text=text, violations=viol, limit_values=values)


class _Verify:
    """:func:`_verify` of ``(quick, name)`` with the requirement's core choice (picklable)."""

    def __init__(self, req: Requirement):
        self.req = req

    def __call__(self, task) -> SizedDesign:
        q, name = task
        return _verify(self.req, q, name, self.req.has_core)


def _objective_of(req: Requirement, d: SizedDesign) -> float:
    n = d.numbers
    if req.objective == "coil_power":
        return n["coil_power_W"]
    if req.objective == "coil_temperature":
        return n["coil_temperature_C"]
    if req.objective == "total_mass":
        return n["total_mass_kg"]
    return n["magnet_volume_m3"] * 1e6 + 1e-4 * n["coil_power_W"]


def constraint_lines(req: Requirement) -> tuple[str, ...]:
    """The constraints the search applies, as sentences."""
    lim = sm.limits_of(req)
    gaps = ", ".join(f"{g * 1e3:g} mm" for g in req.gaps_m)
    lines = [
        f"hover at every gap of {gaps} (objective at {req.operating_gap_m * 1e3:g} mm) on {req.supply_voltage_V:g} V",
        f"coil inside outer radius {req.max_outer_radius_m * 1e3:g} mm, height {req.max_height_m * 1e3:g} mm, "
        f"bore at least {req.min_inner_radius_m * 1e3:g} mm, lower face at {req.coil_bottom_height_m * 1e3:g} mm",
        f"wire {', '.join(req.gauges)} at copper fill {lim.fill_factor:g}",
        f"steady winding temperature at most {lim.max_winding_temperature_C:g} C (insulation class "
        f"{req.insulation_class_C:g} C), ambient {req.ambient_C:g} C, convection {req.convection_W_per_m2K:g} W/m^2K",
        f"current density at most {lim.max_current_density_A_per_m2 / 1e6:g} A/mm^2",
        f"supply headroom at least {lim.min_headroom_V:.3g} V at the hot coil",
    ]
    if math.isfinite(lim.max_driver_dissipation_W):
        lines.append(f"linear driver dissipation at most {lim.max_driver_dissipation_W:g} W")
    return tuple(lines)


def run_size(path: str | Path, out: str | Path, *, workers: int | None = None, seed: int | None = None,
             write: bool = True) -> SizeResult:
    """Size a levitator from a requirement file and write the short list into ``out``.

    Parameters
    ----------
    path : requirement file (TOML, :func:`fields.input.requirement.load_requirement`)
    out : output folder (``size.csv``, ``size.json``, one ``<name>-<rank>.toml`` per design)
    workers : worker processes (default: the machine's core count)
    seed : overrides the file's ``search.seed``
    write : write the files (False: return the result only)
    """
    import os

    t0 = time.perf_counter()
    req = load_requirement(path)
    seed = req.seed if seed is None else int(seed)
    workers = max(1, int(workers if workers is not None else (os.cpu_count() or 1)))
    pool = _pool(workers)
    try:
        quick, nfev = _evolve(req, pool, seed)
        starts = _pick(req, quick, req.shortlist)
        tasks = [(q.candidate.magnet, q.candidate.gauge, _shape_x(req, q.candidate)) for q in starts]
        mapper = pool.map if pool is not None else map
        refined = list(mapper(_Refine(req), tasks))
        nfev += sum(r[2] for r in refined)
        cands = _distinct(req, [q for _, q, _ in refined if q is not None])
        if not cands:  # every refinement failed to build: fall back on the population
            cands = sorted(quick, key=lambda q: (sm.objective_value(req, q), q.candidate.key()))[:req.shortlist]
        verified = list(mapper(_Verify(req), [(q, f"{req.name}-{i + 1}") for i, q in enumerate(cands)]))
    finally:
        if pool is not None:
            pool.close()
            pool.join()
    verified.sort(key=lambda d: (not d.feasible, _objective_of(req, d) if d.feasible else _violation(d),
                                 d.candidate.key()))
    designs = []
    for i, d in enumerate(verified):
        name = f"{req.name}-{i + 1}"
        text = d.text.replace(f'name = "{d.name}"', f'name = "{name}"', 1)
        designs.append(replace(d, rank=i + 1, name=name, text=text))
    feasible = any(d.feasible for d in designs)
    binding = None if feasible else _binding(req, verified, quick)
    notes = [f"searched {nfev} designs: differential evolution (seed {seed}) over the magnet and the winding shape, "
             "the wire gauge enumerated in each, then a local refinement of the best magnet and gauge pairs"]
    if req.has_core:
        notes.append("the core was left out of the search (each evaluation with it is a ring-cell solve of about 20 s); "
                     "the short list was evaluated and re-ranked with the core")
    res = SizeResult(requirement=req, designs=tuple(designs), feasible=feasible, binding=binding,
                     constraints=constraint_lines(req), notes=tuple(notes), evaluations=nfev,
                     seconds=time.perf_counter() - t0)
    if write:
        from fields.studies.size_files import write_size

        res = write_size(res, Path(out))
    return res


def _violation(d: SizedDesign) -> float:
    return float(sum(d.violations)) if d.violations else math.inf


def _binding(req: Requirement, verified: list[SizedDesign], quick: list[sm.Quick]) -> str:
    """The limit that stops the best candidate, and by how much."""
    pool: list[tuple[float, tuple, tuple]] = [(_violation(d), d.violations, d.limit_values) for d in verified
                                              if d.violations]
    pool += [(q.violation, q.violations, q.values) for q in quick]
    _, viol, values = min(pool, key=lambda p: p[0])
    i = int(np.argmax(viol))
    return sm.limit_text(req, i, values[i])


def result_dict(res: SizeResult) -> dict[str, Any]:
    """The JSON content of a size run."""
    req = res.requirement
    return {"requirement": req.file, "name": req.name, "invented": req.invented, "objective": req.objective,
            "objective_column": req.objective_column, "seed": req.seed, "feasible": res.feasible,
            "binding_limit": res.binding, "constraints": list(res.constraints), "notes": list(res.notes),
            "evaluations": res.evaluations, "seconds": res.seconds,
            "designs": [{"rank": d.rank, "name": d.name, "file": d.file, "magnet": d.magnet_label, "feasible": d.feasible,
                         "failed_limits": list(d.failed_limits), **d.numbers, "evaluation": d.row} for d in res.designs]}
