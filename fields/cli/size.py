"""``hoverfield size``: a ranked short list of designs from a requirement file."""

from __future__ import annotations

from pathlib import Path

HELP = "propose ranked suspension designs (coil, wire, magnet) that meet a requirement file"


def summary_lines(r) -> list[str]:
    """What a finished size run (:class:`fields.studies.size.SizeResult`) prints."""
    req = r.requirement
    n_ok = sum(d.feasible for d in r.designs)
    lines = [f"size {req.name}: {len(r.designs)} designs on the short list, {n_ok} meet every limit; objective "
             f"{req.objective}; {r.evaluations} designs searched in {r.seconds:.1f} s"]
    lines += [f"  constraint: {c}" for c in r.constraints]
    lines += [f"  note: {n}" for n in r.notes]
    for d in r.designs:
        n = d.numbers
        c = d.candidate
        flag = "ok" if d.feasible else "fails " + ", ".join(d.failed_limits)
        lines.append(f"{d.rank}. {d.name} ({flag}): coil {c.inner_radius_m * 1e3:.1f}-{c.outer_radius_m * 1e3:.1f} mm x "
                     f"{c.height_m * 1e3:.1f} mm, {c.gauge}, {d.turns} turns; magnet {d.magnet_label}")
        lines.append(f"   {n['hover_current_A']:.3g} A at {n['coil_voltage_V']:.3g} V, {n['coil_power_W']:.3g} W, "
                     f"{n['coil_temperature_C']:.0f} C; k_z {n['kz_N_per_m']:.3g} N/m, k_i {n['ki_N_per_A']:.3g} N/A, "
                     f"sample rate >= {n['sample_rate_Hz']:.0f} Hz; total mass {n['total_mass_kg'] * 1e3:.0f} g")
    if not r.feasible:
        lines.append(f"no design meets the requirement: {r.binding}")
    from fields.io.wording import safety_text

    lines.append(safety_text())
    if r.files:
        lines.append("wrote " + ", ".join(r.files.values()))
    return lines


def run(args) -> int:
    from fields.input.requirement import load_requirement
    from fields.studies.size import run_size

    out = Path(args.out) if args.out else Path("out") / load_requirement(args.file).name / "size"
    r = run_size(args.file, out, workers=args.workers, seed=args.seed)
    for ln in summary_lines(r):
        print(ln)
    return 0 if r.feasible else 1


def register(sub) -> None:
    sp = sub.add_parser("size", help=HELP, description=HELP + "; writes size.csv, size.json and one geometry file per "
                        "design; exit status 1 when no design meets the requirement")
    sp.add_argument("file", help="requirement file (TOML)")
    sp.add_argument("-o", "--out", help="output folder (default: out/<requirement-name>/size/)")
    sp.add_argument("--workers", type=int, default=None, help="local worker processes (default: all cores)")
    sp.add_argument("--seed", type=int, default=None, help="seed of the search (default: the file's search.seed)")
    sp.set_defaults(func=run)
