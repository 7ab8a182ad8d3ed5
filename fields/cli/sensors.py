"""``hoverfield sensors``: beam-gate and Hall sensor curves, cross-talk, placement, inverse tables."""

from __future__ import annotations

from fields.cli.common import add_file_command, load_design, out_dir, print_files, print_warnings

HELP = "beam-gate and Hall sensor curves, cross-talk, placement table, inverse tables"


def run(args) -> int:
    from fields.studies.stages.sensors import run_sensors

    design = load_design(args)
    s = run_sensors(design, out_dir(args, design))
    from fields.io.wording import linear_range_text

    for b in s.beams:
        print(f"{b.name}: blocked {b.fraction_at_operating:.3g} of the beam at the operating gap, gain "
              f"{b.gain_per_mm:.3g} per mm, sideways x {b.lateral_slope_per_m[0] * 1e-3:.3g}, "
              f"y {b.lateral_slope_per_m[1] * 1e-3:.3g} per mm, linear {linear_range_text(*b.linear_range_m)}")
    for h in s.halls:
        comp = ", ".join(f"{c.name} {v * 1e3:.3g} mT/A" for c, v in zip(design.coils, h.compensation_T_per_A))
        dx, dy = h.lateral_sensitivity_T_per_m
        print(f"{h.name}: sensitivity {h.sensitivity_at_operating_T_per_m:.3g} mT/mm vertical, sideways x {dx:.3g}, "
              f"y {dy:.3g} mT/mm at the operating gap; linear {linear_range_text(*h.linear_range_m)}; "
              f"coil cross-talk to subtract: {comp}; worst reading {h.worst_case_T * 1e3:.3g} mT "
              f"(range {h.range_T * 1e3:g} mT)")
    if s.placement is not None:
        c = s.placement.counts
        p = s.placement.best_position_m
        best = ("no candidate is usable" if p is None else
                f"best candidate at ({p[0] * 1e3:.3g}, {p[1] * 1e3:.3g}, {p[2] * 1e3:.3g}) mm ({s.placement.rule})")
        print(f"Hall placement: {best}; {c['usable']} of {sum(c.values())} usable, {s.placement.excluded} excluded "
              f"(inside a body {c['inside_body']}, inside the floater's travel {c['floater_travel']}) "
              "(see placement.csv)")
    for bp in s.beam_placement:
        best = ("no height is usable" if bp.best_height_m is None
                else f"best beam height {bp.best_height_m * 1e3:.4g} mm ({bp.rule})")
        print(f"beam placement for {bp.sensor}: {best}; {bp.counts['usable']} of {sum(bp.counts.values())} heights usable")
    print_warnings(s.warnings)
    print_files(s.files)
    return 0


def register(sub) -> None:
    add_file_command(sub, "sensors", run, HELP)
