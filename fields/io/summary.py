"""A plain summary of a design: bodies, sizes, masses, grades, coil windings.

Returns lines of text and a JSON-ready dict; printing is the CLI's business.
"""

from __future__ import annotations

import numpy as np

from fields.input import tables
from fields.model.design import Design, Magnet


def _mm(x: float) -> str:
    return f"{x * 1e3:.4g} mm"


def _vec_mm(v) -> str:
    return "(" + ", ".join(f"{c * 1e3:.4g}" for c in v) + ") mm"


def magnet_size_text(m: Magnet) -> str:
    d = m.dimensions_m
    if m.shape == "cylinder":
        return f"cylinder d {_mm(d[0])} x h {_mm(d[1])}"
    if m.shape == "ring":
        return f"ring {_mm(d[1])} OD / {_mm(d[0])} ID x h {_mm(d[2])}"
    if m.shape == "cuboid":
        return f"cuboid {_mm(d[0])} x {_mm(d[1])} x {_mm(d[2])}"
    if m.shape == "sphere":
        return f"sphere d {_mm(d[0])}"
    return f"mesh {m.mesh_file} ({len(m.mesh_faces)} triangles)"


def _grade_text(m: Magnet) -> str:
    if m.grade:
        g = tables.lookup_grade(m.grade)
        rng = f" (grade range {g.remanence_min_T:.2f}-{g.remanence_max_T:.2f} T)" if g else ""
        return f"{m.grade} -> Br {m.remanence_T:.3f} T{rng}"
    return f"Br {m.remanence_T:.3f} T (given)"


def design_summary(design: Design) -> tuple[list[str], dict]:
    """Human-readable lines and a JSON-ready dict describing ``design``."""
    from fields.devices.coil import coil_datasheet  # electrical numbers of each winding

    lines: list[str] = []
    out: dict = {"name": design.name, "description": design.description, "source": design.source,
                 "invented": design.invented}
    lines.append(f"design: {design.name}" + ("   (invented example)" if design.invented else ""))
    if design.description:
        lines.append(f"  {design.description}")
    lines.append(f"coils: {len(design.coils)}")
    out["coils"] = []
    for ci, c in enumerate(design.coils):
        w = coil_datasheet(design, ci)
        wire = ""
        if c.wire_diameter_m is not None:
            wire = f", wire {c.wire_gauge + ' ' if c.wire_gauge else ''}{c.wire_diameter_m * 1e3:.3f} mm, fill {c.fill_factor:.2f}"
        r = (f", R(20 C) {w.resistance_20C_ohm:.3g} ohm, L {w.inductance_H * 1e3:.3g} mH, wire {w.wire_length_m:.3g} m, "
             f"copper {w.copper_mass_kg * 1e3:.3g} g")
        lines.append(f"  {c.name}: r {_mm(c.inner_radius_m)}..{_mm(c.outer_radius_m)}, h {_mm(c.height_m)}, "
                     f"{c.turns:.0f} turns{wire}{r}; at {_vec_mm(c.position_m)}, axis {tuple(round(a, 3) for a in c.axis)}; "
                     f"I nominal {c.nominal_current_A:g} A, max {c.max_current_A:g} A")
        out["coils"].append({"name": c.name, "inner_radius_m": c.inner_radius_m, "outer_radius_m": c.outer_radius_m,
                             "height_m": c.height_m, "turns": c.turns, "wire_diameter_m": c.wire_diameter_m,
                             "fill_factor": c.fill_factor, "resistance_20C_ohm": w.resistance_20C_ohm,
                             "wire_length_m": w.wire_length_m, "inductance_H": w.inductance_H,
                             "copper_mass_kg": w.copper_mass_kg, "nominal_current_A": c.nominal_current_A,
                             "max_current_A": c.max_current_A})
    if design.cores:
        lines.append(f"iron cores: {len(design.cores)} (iron-free approximation: uniformly magnetized equivalent body)")
    out["cores"] = []
    for c in design.cores:
        lines.append(f"  {c.name}: {c.shape} {' x '.join(_mm(d) for d in c.dimensions_m)}, mu_r {c.relative_permeability:g}, "
                     f"Js {c.saturation_polarization_T:g} T, at {_vec_mm(c.position_m)}")
        out["cores"].append({"name": c.name, "shape": c.shape, "dimensions_m": c.dimensions_m,
                             "relative_permeability": c.relative_permeability,
                             "saturation_polarization_T": c.saturation_polarization_T})
    lines.append(f"fixed magnets: {len(design.magnets)}")
    out["magnets"] = []
    for m in design.magnets:
        lines.append(f"  {m.name}: {magnet_size_text(m)}, {_grade_text(m)}, {m.mass_kg * 1e3:.3g} g, at {_vec_mm(m.position_m)}")
        out["magnets"].append({"name": m.name, "shape": m.shape, "dimensions_m": m.dimensions_m,
                               "remanence_T": m.remanence_T, "grade": m.grade, "mass_kg": m.mass_kg})
    f = design.floater
    lines.append(f"floater: {f.name}, mass {f.mass_kg * 1e3:.4g} g ({'given' if f.mass_given else 'magnets + payload'}; "
                 f"payload {f.payload_mass_kg * 1e3:.3g} g), weight {design.weight_N:.4g} N, "
                 f"centre of mass {_vec_mm(f.centre_of_mass_m)} in the floater frame")
    for m in f.magnets:
        lines.append(f"  {m.name}: {magnet_size_text(m)}, {_grade_text(m)}, {m.mass_kg * 1e3:.3g} g, "
                     f"magnetized along {tuple(round(x / m.remanence_T, 3) for x in m.polarization_T)}")
    out["floater"] = {"name": f.name, "mass_kg": f.mass_kg, "payload_mass_kg": f.payload_mass_kg,
                      "weight_N": design.weight_N, "centre_of_mass_m": f.centre_of_mass_m,
                      "magnets": [{"name": m.name, "shape": m.shape, "dimensions_m": m.dimensions_m,
                                   "remanence_T": m.remanence_T, "grade": m.grade, "mass_kg": m.mass_kg}
                                  for m in f.magnets]}
    lines.append(f"sensors: {len(design.sensors)}")
    out["sensors"] = []
    for s in design.sensors:
        if s.kind == "beam":
            lines.append(f"  {s.name}: optical beam gate at height {_mm(s.height_m)}, beam {_mm(s.beam_height_m)} high x {_mm(s.beam_width_m)} wide")
        else:
            lines.append(f"  {s.name}: Hall sensor at {_vec_mm(s.position_m)}, axis {tuple(round(a, 3) for a in s.axis)}, range {s.range_T * 1e3:g} mT")
        out["sensors"].append({"name": s.name, "kind": s.kind})
    st = design.study
    where = (f"from '{st.gap_reference}'" if st.gap_mode == "clearance" else
             f"as an offset along {tuple(round(float(a), 3) for a in design.axial)} from {_vec_mm(st.gap_origin_m)}")
    lines.append(f"study: gap {_mm(st.gap_min_m)}..{_mm(st.gap_max_m)} ({st.gap_points} points) {where}, "
                 f"operating gap {_mm(st.operating_gap_m)}, " + (f"supply {st.supply_voltage_V:g} V" if np.isfinite(st.supply_voltage_V) else "no supply (no coils)") + f", g {design.gravity_magnitude:.5g} m/s^2"
                 f" along {tuple(round(float(a), 3) for a in -design.up)}")
    out["study"] = {"gap_min_m": st.gap_min_m, "gap_max_m": st.gap_max_m, "gap_points": st.gap_points,
                    "gap_reference": st.gap_reference, "gap_mode": st.gap_mode, "gap_direction": st.gap_direction,
                    "operating_gap_m": st.operating_gap_m,
                    "supply_voltage_V": st.supply_voltage_V, "currents_A": st.currents_A,
                    "lateral_span_m": st.lateral_span_m, "tilt_span_rad": st.tilt_span_rad,
                    "gravity_m_per_s2": st.gravity_m_per_s2, "free_axes": st.free_axes}
    p = st.floater_origin_m(st.operating_gap_m)[0]
    lines.append(f"  floater origin at the operating gap: {_vec_mm(p)}")
    return lines, out
