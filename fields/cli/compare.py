"""``hoverfield compare``: two or more designs side by side (compare.html, compare.csv)."""

from __future__ import annotations

from pathlib import Path

HELP = "two or more designs side by side: key numbers, verdicts, coil heat, control, force curves overlaid"


def run(args) -> int:
    from fields.io.wording import safety_text
    from fields.studies.compare import run_compare

    out = Path(args.out) if args.out else Path("out") / "compare"
    r = run_compare(args.files, out, threshold=args.threshold / 100.0)
    for d in r.data["designs"]:
        row = d["row"]
        print(f"{d['name']}: {d['verdict']}; hover current {row['hover_current_A']:.4g} A, k_z {row['kz_N_per_m']:.4g} N/m, "
              f"coil {row['coil_temperature_C']:.4g} degC")
    print("wrote " + ", ".join(r.files.values()))
    print(safety_text())
    return 0


def register(sub) -> None:
    sp = sub.add_parser("compare", help=HELP, description=HELP)
    sp.add_argument("files", nargs="+", help="geometry files (TOML), two or more; the first is the reference")
    sp.add_argument("-o", "--out", help="output folder (default: out/compare/)")
    sp.add_argument("--threshold", type=float, default=5.0,
                    help="highlight relative differences to the first design beyond this many percent (default 5)")
    sp.set_defaults(func=run)
