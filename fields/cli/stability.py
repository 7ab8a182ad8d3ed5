"""``hoverfield stability``: equilibrium, 6x6 stiffness, verdict, maps."""

from __future__ import annotations

from fields.cli.common import add_file_command, load_design, out_dir, parse_option, print_files

HELP = "equilibrium, 6x6 stiffness, stability verdict, sideways and tilt maps"


def run(args) -> int:
    from fields.studies.stages.stability import run_stability

    design = load_design(args)
    gap = current = None
    if args.gap is not None:
        gap = parse_option(args, "--gap", args.gap, "length")
    if args.current is not None:
        current = parse_option(args, "--current", args.current, "current")
    s = run_stability(design, out_dir(args, design), with_maps=not args.no_maps, at_gap_m=gap, at_current_A=current)
    print(f"{design.name}: operating point: {s.operating_point}")
    if s.chosen_point:
        print(f"chosen pose at gap {s.equilibrium.gap_m * 1e3:.4g} mm (stiffness and verdict there)")
    else:
        print(f"equilibrium gap {s.equilibrium.gap_m * 1e3:.4g} mm over axes {', '.join(s.equilibrium.free_axes)}")
    for ln in s.verdict_lines:
        print("  " + ln)
    if s.map_grid:
        print(f"  {s.map_grid}")
    if s.allocation is not None:
        print(f"  current-to-force/torque matrix: {s.allocation.text}")
    print_files(s.files)
    return 0


def register(sub) -> None:
    sp = add_file_command(sub, "stability", run, HELP)
    sp.add_argument("--no-maps", action="store_true", help="skip the maps (faster)")
    sp.add_argument("--gap", help="analyse at this gap instead of the operating point, e.g. '12 mm'")
    sp.add_argument("--current", help="drive current at --gap along the drive pattern, e.g. '0.5 A' "
                                      "(default: the hover current there)")
