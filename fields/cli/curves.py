"""``hoverfield curves``: axial force versus gap, hover current, equilibria, payload envelope."""

from __future__ import annotations

from fields.cli.common import add_file_command, load_design, out_dir, print_warnings

HELP = "axial force versus gap for a family of currents, hover current, equilibria, payload envelope"


def run(args) -> int:
    from fields.studies.stages.curves import run_curves

    design = load_design(args)
    s = run_curves(design, out_dir(args, design))
    print(f"{design.name}: weight {s.weight_N:.4g} N ({s.mass_kg * 1e3:.4g} g)"
          + ("; gravity acts across the gap direction: the axial force balances zero" if s.gravity_across_axis else ""))
    op = s.at_operating_gap
    if design.coils:
        print(f"at the operating gap {op.gap_m * 1e3:.4g} mm: hover current {op.hover_current_A:.4g} A, "
              f"k_i {op.ki_N_per_A:.4g} N/A, k_z {op.kz_at_hover_N_per_m:.4g} N/m (k = -dF/dh; < 0 is unstable)")
    else:
        f0 = op.F0_N if abs(op.F0_N) > 1e-12 * s.weight_N else 0.0  # a zero by symmetry prints as 0
        print(f"at the operating gap {op.gap_m * 1e3:.4g} mm: no coils (no hover current); axial force {f0:.4g} N")
    for e in s.equilibria:
        print(f"  equilibrium at {e.current_A:g} A: gap {e.gap_m * 1e3:.4g} mm, {e.label} (k_z {e.kz_N_per_m:.4g} N/m)")
    print_warnings(s.warnings)
    print(f"force error estimate: {s.max_force_error_N:.2g} N; wrote " + ", ".join(s.files))
    return 0


def register(sub) -> None:
    add_file_command(sub, "curves", run, HELP)
