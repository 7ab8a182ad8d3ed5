"""Tolerance study: how robust is a design to its parts' spread, its temperature and its assembly?

The data flow:

- :func:`fields.input.tolerancefile.load_tolerances`: the bands (defaults, the geometry file's
  ``[tolerance]`` table, a ``--spec`` file);
- :func:`fields.studies.tolerance_inputs.tolerance_inputs`: the varied inputs; a seeded
  scrambled Sobol or Latin-hypercube sample of :mod:`scipy.stats.qmc` in the unit cube, mapped onto
  the bands (uniform, or normal with the band as 3 sigma);
- each sample is a set of geometry-file overrides evaluated by the sweep's engine
  (:func:`fields.studies.evaluate.evaluate_design`) through the sweep's executors (process pool
  or Dask, chunk files, resumable: :func:`fields.studies.executors.run_chunks`);
- :mod:`fields.studies.tolerance_control`: the nominal design's controller on each sample's plant;
- :mod:`fields.studies.tolerance_stats`: the spread of the outputs, the sensitivity ranking;
- the files: tolerance.csv (one row per sample), tolerance.json (the summary), tolerance.png,
  tolerance.html (the page: how often the nominal controller holds, the spread, the ranking).
"""

from __future__ import annotations

import hashlib
import math
import time
import tomllib
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from fields import __version__
from fields.errors import SolverError
from fields.input.sweepfile import RESULT_COLUMNS
from fields.input.tolerancefile import ToleranceSpec

#: the outputs whose spread the study reports (and plots), with (axis label, display scale)
OUTPUTS = {"hover_current_A": ("hover current (A)", 1.0), "kz_N_per_m": ("vertical stiffness k_z (N/m)", 1.0),
           "ki_N_per_A": ("force per ampere k_i (N/A)", 1.0), "coil_temperature_C": ("coil temperature (degC)", 1.0),
           "operating_gap_m": ("operating gap (mm)", 1e3), "coil_power_W": ("coil power (W)", 1.0),
           "unstable_pole_1_per_s": ("unstable pole (1/s)", 1.0), "payload_margin_kg": ("payload margin (g)", 1e3)}
#: the four the brief of the study names first: histograms and sensitivity
HEADLINE = ("hover_current_A", "kz_N_per_m", "ki_N_per_A", "coil_temperature_C")
CONTROL_COLUMNS = ("stabilised", "phase_margin_deg", "lower_gain_margin_dB", "upper_gain_margin_dB", "control_note",
                   "captured", "capture_note")


@dataclass(frozen=True)
class _Param:
    column: str
    kind: str = "number"


@dataclass(frozen=True)
class StudyRun:
    """What the sweep executors need to know of a tolerance study (the fields of a SweepSpec
    they read): the base file, its text, the chunk columns and the study id."""

    base_path: str
    base_text: str
    parameters: tuple[_Param, ...]
    sweep_id: str

    @property
    def columns(self) -> list[str]:
        return ["index"] + [q.column for q in self.parameters] + list(RESULT_COLUMNS) + ["failure"]


@dataclass(frozen=True)
class ToleranceResult:
    """What :func:`run_tolerance` produced (tolerance.json holds ``summary``)."""

    spec: ToleranceSpec
    inputs: tuple
    table: list = field(repr=False)
    nominal: dict = field(repr=False)
    summary: dict = field(repr=False)
    files: dict = field(default_factory=dict)
    evaluated: int = 0
    reused: int = 0
    seconds: float = 0.0


def unit_sample(n: int, dim: int, method: str, seed: int) -> np.ndarray:
    """(n, dim) points in the unit cube: scrambled Sobol or Latin hypercube (scipy.stats.qmc), seeded."""
    from scipy.stats import qmc

    if dim == 0:
        return np.zeros((n, 0))
    if method == "sobol":
        with warnings.catch_warnings():
            # balance needs a power of two; any count is still a valid low-discrepancy prefix
            warnings.filterwarnings("ignore", message=".*balance properties.*")
            return qmc.Sobol(dim, scramble=True, rng=seed).random(n)
    return qmc.LatinHypercube(dim, rng=seed).random(n)


def plan(path, spec: ToleranceSpec):
    """(design, parsed file, inputs, input values (n, d), overrides per sample) of a study."""
    from fields.input import geometry
    from fields.studies.tolerance_inputs import sample_overrides, tolerance_inputs

    p = Path(path)
    text = p.read_text(encoding="utf-8")
    design = geometry.loads(text, file=str(path), base_dir=p.parent)
    data = tomllib.loads(text)
    inputs = tolerance_inputs(design, data, spec)
    U = unit_sample(spec.samples, len(inputs), spec.method, spec.seed)
    V = np.array([[q.value(float(u), spec.distribution) for q, u in zip(inputs, row)] for row in U]).reshape(
        spec.samples, len(inputs))
    overrides = [sample_overrides(design, spec, inputs, V[i]) for i in range(spec.samples)]
    return text, design, inputs, V, overrides


def _study_id(text: str, spec: ToleranceSpec) -> str:
    return hashlib.sha256(f"{__version__}\n{text}\n{spec.digest}".encode()).hexdigest()


def run_tolerance(path, out_dir, spec: ToleranceSpec, workers: int | None = None, scheduler_address: str | None = None,
                  progress: bool = True, chunk_size: int | None = None, on_estimate=None) -> ToleranceResult:
    """Run a tolerance study of the geometry file ``path`` and write its files into ``out_dir``.

    Parameters
    ----------
    path : str or Path
        The geometry file (never written to).
    out_dir : str or Path
        tolerance_chunks/ (finished chunks, reused on a rerun), tolerance.csv, tolerance.json,
        tolerance.png.
    spec : ToleranceSpec
    workers, scheduler_address, progress, chunk_size
        As :func:`fields.studies.sweep.run_sweep`.
    on_estimate : callable, optional
        Called with ``(seconds of the nominal evaluation, samples still to evaluate)`` before the
        samples run (the CLI prints the expected time).
    """
    from fields.studies.evaluate import evaluate_design
    from fields.studies.executors import convert_row, default_chunk, done_rows, run_chunks

    t0 = time.perf_counter()
    out = Path(out_dir)
    text, design, inputs, V, overrides = plan(path, spec)
    t_nom = time.perf_counter()
    nominal = evaluate_design(design)
    t_nom = time.perf_counter() - t_nom
    run = StudyRun(str(path), text, tuple(_Param(q.column) for q in inputs), _study_id(text, spec))
    chunk_dir = out / "tolerance_chunks"
    done = done_rows(chunk_dir, run)
    todo = [(i, overrides[i]) for i in range(spec.samples) if i not in done]
    if on_estimate is not None:
        on_estimate(t_nom, len(todo))
    cs = chunk_size or default_chunk(spec.samples)
    chunks = [todo[a:a + cs] for a in range(0, len(todo), cs)]
    evaluated = 0
    if chunks:
        si = {i: tuple(float(x) for x in V[i]) for i in range(spec.samples)}
        evaluated = run_chunks(run, chunks, chunk_dir, si, spec.samples, workers, scheduler_address, progress,
                               desc="tolerance")
        done = done_rows(chunk_dir, run)
    missing = [i for i in range(spec.samples) if i not in done]
    if missing:
        raise SolverError(f"tolerance: samples {missing[:5]} have no result after the run; run it again to resume")
    table = [convert_row(run, done[i]) for i in range(spec.samples)]
    control = _control(design, nominal, table, (text, str(path), overrides))
    summary = _summary(path, design, spec, inputs, V, table, nominal, control, evaluated, t_nom)
    files = _write(out, design, spec, inputs, table, nominal, summary)
    seconds = time.perf_counter() - t0
    summary["seconds"] = seconds
    from fields.io.export import write_atomic, write_json
    from fields.io.tolerance_page import tolerance_html

    files["tolerance.html"] = str(out / "tolerance.html")
    summary["files"] = dict(files)
    write_json(out / "tolerance.json", summary)
    write_atomic(out / "tolerance.html", tolerance_html(summary, out))
    return ToleranceResult(spec, tuple(inputs), table, nominal, summary, files, evaluated, spec.samples - evaluated, seconds)


def _captures(samples, table: list[dict], drive, ctrl) -> list:
    """:func:`fields.studies.tolerance_control.capture_of_row` of every sample (its design rebuilt
    from the overrides), the samples split over the cores."""
    from fields.input import geometry
    from fields.physics.parallel import map_chunks
    from fields.studies import tolerance_control as tc
    from fields.studies.expand import apply_overrides, toml_text

    text, path, overrides = samples
    base = tomllib.loads(text)

    def part(sl: slice) -> list:
        out = []
        for i in range(sl.start, sl.stop):
            r = table[i]
            if not r["stabilised"]:  # the linear loop already fails: no release to simulate
                out.append(tc.CaptureCheck(False, "the linearised loop is unstable"))
                continue
            d = geometry.loads(toml_text(apply_overrides(base, overrides[i])), file=f"{Path(path).name} (sample {i})",
                               base_dir=str(Path(path).parent))
            out.append(tc.capture_of_row(r, d, drive, ctrl))
        return out

    return [c for p in map_chunks(part, len(table), min_items_per_worker=4) for c in p]


def _control(design, nominal: dict, table: list[dict], samples=None) -> dict:
    """The nominal controller on every sample (adds the control columns to ``table``); with
    ``samples`` = (geometry text, its path, the overrides per sample) the nonlinear releases too."""
    from fields.errors import HoverfieldError
    from fields.studies import tolerance_control as tc

    reason = None
    if not design.coils:
        reason = "the design has no coils (nothing to control)"
    elif nominal["no_equilibrium"]:
        reason = "the nominal design has no operating point"
    ctrl = None
    if reason is None:
        try:
            drive = tc.drive_model(design)
            ctrl = tc.nominal_controller(tc.plant_of_row(nominal, drive))
        except HoverfieldError as e:
            reason = f"no nominal controller: {e}"
    if reason is not None:
        for r in table:
            r.update(stabilised=False, phase_margin_deg=math.nan, lower_gain_margin_dB=math.nan,
                     upper_gain_margin_dB=math.nan, control_note="not checked", captured=False,
                     capture_note="not checked")
        return {"checked": False, "reason": reason}
    for r in table:
        c = tc.check_row(r, drive, ctrl)
        r.update(stabilised=c.stabilised, phase_margin_deg=c.phase_margin_deg, lower_gain_margin_dB=c.lower_gain_margin_dB,
                 upper_gain_margin_dB=c.upper_gain_margin_dB, control_note=c.reason)
    n = len(table)
    held = sum(1 for r in table if r["stabilised"])
    capture = {"computed": False, "reason": "the sample designs were not given"}
    if samples is not None:
        caps = _captures(samples, table, drive, ctrl)
        for r, c in zip(table, caps):
            r.update(captured=c.captured, capture_note=c.reason)
        got = sum(1 for c in caps if c.captured)
        capture = {"computed": True, "captured_count": got, "captured_share": got / n if n else None,
                   "starts_m": list(tc.CAPTURE_STARTS_M), "t_end_s": tc.CAPTURE_T_END_S,
                   "rule": "released at rest at each start from the sample's operating point; captured: every start "
                           "ends at rest within 1 % of the force table's span without leaving it",
                   "model": "the sample's own axial force curve F0(s) + I k_i(s) across the gap range (affine in "
                            "current), the nominal PD sampled with a zero-order hold, voltage and current limits, "
                            "the coil's R-L, the bias at the sample's hover current (trimmed)"}
    else:
        for r in table:
            r.update(captured=False, capture_note="not checked")
    return {"checked": True, "axis": "vertical", "drive": "voltage", "controller": "PD starting design on the nominal plant",
            "sample_time_s": ctrl.sample_time_s, "crossover_rad_per_s": ctrl.crossover_rad_per_s,
            "stabilised_count": held, "stabilised_share": held / n if n else None,
            "phase_margin_deg": _spread([r["phase_margin_deg"] for r in table]),
            "approximations": ["ideal position sensor, the same for every sample (sensor tolerances not studied)",
                               "inductance of the nominal design (exact without cores: a rigid magnet does not change "
                               "an air coil's inductance)",
                               "drive resistance: the nominal pattern's 20 C resistance at each sample's hottest coil "
                               "temperature (copper, IEC 60028)"],
            "nonlinear_capture": capture}


def _spread(values) -> dict:
    from fields.studies.tolerance_stats import spread

    return spread(values)


def _summary(path, design, spec: ToleranceSpec, inputs, V, table, nominal, control, evaluated, t_nom) -> dict:
    from dataclasses import asdict

    from fields.input.tables import REMANENCE_TEMPERATURE_SOURCE
    from fields.studies.tolerance_stats import sensitivity

    ok = [r for r in table if not r["failure"]]
    outputs = {c: {**_spread([r[c] for r in ok]), "nominal": nominal[c], "unit": RESULT_COLUMNS[c][0],
                   "meaning": RESULT_COLUMNS[c][1]} for c in OUTPUTS}
    names = [q.column for q in inputs]
    Xok = np.array([V[r["index"]] for r in ok], float).reshape(len(ok), len(inputs))
    sens = {c: sensitivity(Xok, np.array([r[c] for r in ok], float), names) for c in HEADLINE}
    flags = {f: sum(1 for r in ok if r[f]) for f in ("no_equilibrium", "contact", "over_current", "too_hot",
                                                     "supply_short", "core_saturation")}
    return {
        "design": design.name, "file": str(path), "tool": f"hoverfield {__version__}", "invented": design.invented,
        "samples": spec.samples, "failed": len(table) - len(ok), "method": spec.method, "seed": spec.seed,
        "distribution": spec.distribution,
        "tolerances": {k: v for k, v in asdict(spec).items() if k not in ("samples", "seed", "method", "distribution")},
        "inputs": [{"column": q.column, "kind": q.kind, "nominal": q.nominal, "half_width": q.half_width,
                    "source": q.source, "sampled": _spread(V[:, j])} for j, q in enumerate(inputs)],
        "remanence_temperature": REMANENCE_TEMPERATURE_SOURCE + "; the file's remanence is taken at the file's "
                                 "ambient temperature",
        "outputs": outputs, "flags": flags, "control": control,
        "sensitivity": {"method": "standardized regression coefficients (SRC, with R^2) and Spearman rank correlation; "
                                  "ranking by |SRC| when R^2 >= 0.7, else by |rho| (Saltelli et al., Global Sensitivity "
                                  "Analysis: The Primer, 2008)", "outputs": sens},
        "nominal_seconds": t_nom, "evaluated_this_run": evaluated, "reused_from_chunks": spec.samples - evaluated,
    }


def _write(out: Path, design, spec, inputs, table, nominal, summary) -> dict:
    from fields.io import plots_tolerance
    from fields.io.export import header_lines, write_csv, write_png

    cols = ["index"] + [q.column for q in inputs] + list(RESULT_COLUMNS) + list(CONTROL_COLUMNS) + ["failure"]
    files = {"tolerance.csv": str(write_csv(out / "tolerance.csv", cols, [[r[c] for c in cols] for r in table],
                                            header_lines(design.name, f"tolerance study, {spec.samples} samples "
                                                         f"({spec.method}, seed {spec.seed}); inputs in SI units, then "
                                                         "the evaluated results and the nominal controller's loop")))}
    fig = plots_tolerance.output_histograms({c: [r[c] for r in table if not r["failure"]] for c in OUTPUTS},
                                            nominal, OUTPUTS, title=f"{design.name}: spread over {spec.samples} samples")
    files["tolerance.png"] = str(write_png(out / "tolerance.png", fig))
    plots_tolerance.close(fig)
    files["tolerance.json"] = str(out / "tolerance.json")
    return files
