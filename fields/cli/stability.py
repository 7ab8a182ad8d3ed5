"""``hoverfield stability``: equilibrium, 6x6 stiffness, verdict, maps."""

from __future__ import annotations

from fields.cli.common import add_file_command, load_design, out_dir, print_files

HELP = "equilibrium, 6x6 stiffness, stability verdict, sideways and tilt maps"


def run(args) -> int:
    from fields.studies.stages.stability import run_stability

    design = load_design(args)
    s = run_stability(design, out_dir(args, design), with_maps=not args.no_maps)
    print(f"{design.name}: operating point: {s.operating_point}")
    print(f"equilibrium gap {s.equilibrium.gap_m * 1e3:.4g} mm over axes {', '.join(s.equilibrium.free_axes)}")
    for ln in s.verdict_lines:
        print("  " + ln)
    if s.allocation is not None:
        print(f"  current-to-force/torque matrix: {s.allocation.text}")
    print_files(s.files)
    return 0


def register(sub) -> None:
    sp = add_file_command(sub, "stability", run, HELP)
    sp.add_argument("--no-maps", action="store_true", help="skip the maps (faster)")
