"""``hoverfield control``: multi-axis plant, structural checks, both controller forms, margins,
nonlinear releases, capture region, on/off control through a real switch (and the single-loop
results where the unstable motion is one loop)."""

from __future__ import annotations

from fields.cli.common import add_file_command, load_design, out_dir, print_files

HELP = ("multi-axis plant, structural checks, controllers, margins, releases, capture region, "
        "on/off control through a switch")


def run(args) -> int:
    from fields.studies.stages.control import run_control

    design = load_design(args)
    s = run_control(design, out_dir(args, design), switch=args.switch, with_capture=not args.quick)
    for line in s.summary:
        print(line)
    print_files(s.files)
    # a loop that cannot be closed is a result, but not a usable design: exit 1
    return 1 if s.status == "refused" else 0


def register(sub) -> None:
    sp = add_file_command(sub, "control", run, HELP)
    sp.add_argument("--switch", choices=("auto", "low_side", "h_bridge"), default="auto",
                    help="on/off study's switch stage: low-side switch with flyback diode, H-bridge, or "
                         "auto (low-side when the bias current is positive, else H-bridge)")
    sp.add_argument("--quick", action="store_true",
                    help="plant, checks, controllers and margins only (no releases, capture region or on/off study)")
