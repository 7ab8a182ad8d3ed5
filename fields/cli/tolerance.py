"""``hoverfield tolerance``: robustness of a design to part spread, temperature and assembly (Monte Carlo)."""

from __future__ import annotations

import sys
from pathlib import Path

HELP = "Monte Carlo robustness: spread of hover current, stiffness, coil heat and control over the tolerances"


def summary_lines(r) -> list[str]:
    """What a finished study (:class:`fields.studies.tolerance.ToleranceResult`) prints."""
    s = r.summary
    lines = [f"tolerance {s['design']}: {s['samples']} samples ({s['method']}, seed {s['seed']}, {s['distribution']}); "
             f"{r.evaluated} evaluated now, {r.reused} reused; {s['failed']} failed; {r.seconds:.1f} s",
             f"{len(r.inputs)} varied inputs: " + (", ".join(q.column for q in r.inputs) or "none")]
    for c in ("hover_current_A", "kz_N_per_m", "ki_N_per_A", "coil_temperature_C"):
        o = s["outputs"][c]
        if o["mean"] is None:
            lines.append(f"  {c}: no finite values")
            continue
        lines.append(f"  {c}: nominal {o['nominal']:.4g}, mean {o['mean']:.4g}, std {o['std']:.3g}, "
                     f"5/50/95 % {o['p5']:.4g} / {o['p50']:.4g} / {o['p95']:.4g}")
        sens = s["sensitivity"]["outputs"][c]
        if sens["ranking"]:
            lines.append(f"    most sensitive to ({sens['method']}, R^2 {sens['r2']:.2f}): " + ", ".join(sens["ranking"][:3]))
    ctl = s["control"]
    if ctl["checked"]:
        lines.append(f"nominal controller stabilises {ctl['stabilised_count']} of {s['samples']} samples "
                     f"({100 * ctl['stabilised_share']:.1f} %, linearised vertical loop)")
        cap = ctl["nonlinear_capture"]
        if cap.get("computed"):
            lines.append(f"and captures {cap['captured_count']} of {s['samples']} "
                         f"({100 * cap['captured_share']:.1f} %) when released at "
                         + " and ".join(f"{a * 1e3:+g} mm" for a in cap["starts_m"]) + " (nonlinear simulation)")
    else:
        lines.append(f"control not checked: {ctl['reason']}")
    lines.append("wrote " + ", ".join(r.files.values()))
    return lines


def run(args) -> int:
    import dataclasses

    from fields.input.geometry import load
    from fields.input.tolerancefile import load_tolerances
    from fields.io.wording import safety_text
    from fields.studies.tolerance import run_tolerance

    design = load(args.file)
    spec = load_tolerances(args.file, float(design.study.ambient_temperature_C), args.spec)
    if args.samples is not None:
        spec = dataclasses.replace(spec, samples=args.samples)
    if args.seed is not None:
        spec = dataclasses.replace(spec, seed=args.seed)
    out = Path(args.out) if args.out else Path("out") / design.name / "tolerance"
    workers = args.workers

    def estimate(t_nominal: float, todo: int) -> None:
        if todo and not args.quiet:
            w = max(1, workers if workers else 1) if workers is not None else None
            import os

            w = w or (os.cpu_count() or 1)
            print(f"nominal evaluation took {t_nominal:.2g} s; {todo} samples on {w} worker(s): roughly "
                  f"{t_nominal * todo / w / 60:.1f} min or more (tilted or offset samples lose the closed-form "
                  f"on-axis route)", file=sys.stderr)

    r = run_tolerance(args.file, out, spec, workers=workers, scheduler_address=args.scheduler,
                      progress=not args.quiet, on_estimate=estimate)
    for ln in summary_lines(r):
        print(ln)
    print(safety_text())
    return 0


def register(sub) -> None:
    sp = sub.add_parser("tolerance", help=HELP, description=HELP + "; resumable (finished chunks are kept in "
                        "OUT/tolerance_chunks)")
    sp.add_argument("file", help="geometry file (TOML); its optional [tolerance] table sets the bands")
    sp.add_argument("-o", "--out", help="output folder (default: out/<design-name>/tolerance/)")
    sp.add_argument("--spec", default=None, help="tolerance file (TOML) overriding the geometry file's [tolerance]")
    sp.add_argument("--samples", type=int, default=None, help="number of samples (default 64, or the file's)")
    sp.add_argument("--seed", type=int, default=None, help="seed of the scrambled sample (default 1, or the file's)")
    sp.add_argument("--workers", type=int, default=None, help="local worker processes (default: all cores; 0: this process)")
    sp.add_argument("--scheduler", default=None, help="address of a Dask scheduler, e.g. tcp://127.0.0.1:8786")
    sp.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    sp.set_defaults(func=run)
