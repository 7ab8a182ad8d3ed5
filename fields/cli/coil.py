"""``hoverfield coil``: the coil datasheet, heat at the operating point, drive headroom."""

from __future__ import annotations

from fields.cli.common import add_file_command, load_design, out_dir, print_files, print_warnings
from fields.io.wording import COIL_SHEET_ROWS

HELP = "coil datasheet: winding, resistance, inductance, heat at the hover current, drive headroom"

def _print_sheet(sheet) -> None:
    d = sheet.datasheet
    print(f"  {d.name}:")
    for label, key, unit, scale in COIL_SHEET_ROWS:
        v = getattr(d, key, None)
        if v is not None:
            print(f"    {label:<34} {v * scale:>10.4g} {unit}")
    op = sheet.at_operating_point
    print(f"    {'at the operating point, gap ' + format(op.gap_m * 1e3, '.3g') + ' mm':<34} {op.current_A:>10.4g} A, "
          f"{op.power_W:.3g} W, winding {op.temperature_C:.3g} C (rise {op.temperature_rise_K:.3g} K), "
          f"hot resistance {op.resistance_hot_ohm:.4g} ohm")
    hr = sheet.drive_headroom
    if hr is not None:
        print(f"    {'supply needed (R I + L dI/dt)':<34} {hr.voltage_required_V:>10.4g} V "
              f"of {hr.supply_voltage_V:g} V (headroom {hr.headroom_V:.3g} V)")
        print(f"    {'linear driver dissipation at hover':<34} {hr.linear_driver_dissipation_W:>10.4g} W")


def run(args) -> int:
    from fields.io.wording import safety_text
    from fields.studies.stages.coil import run_coil
    from fields.studies.stages.curves import run_curves

    design = load_design(args)
    out = out_dir(args, design)
    s = run_coil(design, out, curves=run_curves(design, out))
    for ln in s.heat_alerts:  # a too hot operating point first
        print(ln)
    print(f"{design.name}: coil datasheet (control axis: {s.control_axis})")
    for sheet in s.coils:
        _print_sheet(sheet)
    print_warnings(s.warnings)
    print(safety_text())
    print_files(s.files)
    return 0


def register(sub) -> None:
    add_file_command(sub, "coil", run, HELP)
