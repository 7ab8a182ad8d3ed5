"""``hoverfield sweep``: vary a design over a grid or sample, rank the designs, find the front."""

from __future__ import annotations

from pathlib import Path

HELP = "vary a design over a grid or sample, rank designs, find the trade-off front"


def summary_lines(r) -> list[str]:
    """What a finished sweep (:class:`fields.studies.sweep.SweepResult`) prints."""
    n = len(r.table)
    lines = [f"sweep {r.spec.name}: {n} designs of {Path(r.spec.base_path).name} ({r.spec.mode}); "
             f"{r.evaluated} evaluated now, {r.reused} reused; {r.failed} failed, {int(r.feasible.sum())} feasible, "
             f"{len(r.front)} on the Pareto front; {r.seconds:.1f} s"]
    if r.best_index is not None:
        row = r.table[r.best_index]
        lines.append(f"best design {r.best_index}: " + ", ".join(f"{k} = {v}" for k, v in r.best_overrides().items()))
        lines.append("  " + ", ".join(f"{o.column} {row[o.column]:.4g}" for o in r.spec.objectives))
    else:
        lines.append("no feasible design (see ranked.csv, column rejected_by)")
    lines.append("wrote " + ", ".join(r.files.values()))
    return lines


def run(args) -> int:
    from fields.studies.sweep import run_sweep

    out = Path(args.out) if args.out else None
    if out is None:
        from fields.input.geometry import load

        out = Path("out") / load(args.file).name / "sweep"
    r = run_sweep(args.file, args.sweep, out, workers=args.workers, scheduler_address=args.scheduler,
                  progress=not args.quiet)
    for ln in summary_lines(r):
        print(ln)
    return 0


def register(sub) -> None:
    sp = sub.add_parser("sweep", help=HELP, description=HELP + "; resumable (finished chunks are kept in OUT/sweep_chunks)")
    sp.add_argument("file", help="base geometry file (TOML)")
    sp.add_argument("sweep", help="sweep description file (TOML)")
    sp.add_argument("-o", "--out", help="output folder (default: out/<design-name>/sweep/)")
    sp.add_argument("--workers", type=int, default=None, help="local worker processes (default: all cores)")
    sp.add_argument("--scheduler", default=None, help="address of a Dask scheduler, e.g. tcp://127.0.0.1:8786")
    sp.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    sp.set_defaults(func=run)
