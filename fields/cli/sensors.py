"""``hoverfield sensors``: beam-gate and Hall sensor curves, cross-talk, placement, inverse tables."""

from __future__ import annotations

from fields.cli.common import add_file_command, load_design, out_dir, print_files, print_warnings

HELP = "beam-gate and Hall sensor curves, cross-talk, placement table, inverse tables"


def run(args) -> int:
    from fields.studies.stages.sensors import run_sensors

    design = load_design(args)
    s = run_sensors(design, out_dir(args, design))
    for b in s.beams:
        lo, hi = b.linear_range_m
        print(f"{b.name}: blocked {b.fraction_at_operating:.3g} of the beam at the operating gap, gain "
              f"{b.gain_per_mm:.3g} per mm, linear {lo * 1e3:.3g}..{hi * 1e3:.3g} mm")
    for h in s.halls:
        comp = ", ".join(f"{c.name} {v * 1e3:.3g} mT/A" for c, v in zip(design.coils, h.compensation_T_per_A))
        print(f"{h.name}: sensitivity {h.sensitivity_at_operating_T_per_m:.3g} mT/mm at the operating gap; "
              f"coil cross-talk to subtract: {comp}; worst reading {h.worst_case_T * 1e3:.3g} mT "
              f"(range {h.range_T * 1e3:g} mT)")
    if s.placement is not None:
        p = s.placement.best_position_m
        print(f"placement: best candidate at ({p[0] * 1e3:.3g}, {p[1] * 1e3:.3g}, {p[2] * 1e3:.3g}) mm (see placement.csv)")
    print_warnings(s.warnings)
    print_files(s.files)
    return 0


def register(sub) -> None:
    add_file_command(sub, "sensors", run, HELP)
