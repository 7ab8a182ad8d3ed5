"""Stage "exports": tables and models for other tools (exports/: force/stiffness tables as CSV
and a C header, the inverse force table, a SPICE subcircuit of the plant, STL and GLB meshes)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fields.model.design import Design


@dataclass(frozen=True)
class ExportsResult:
    """What :func:`run_exports` wrote (exports/exports.json is this, serialised)."""

    files: tuple[str, ...]
    mesh_volume_m3: float
    mesh_watertight: bool


def _tables(design: Design, c, exp: Path) -> list[str]:
    """Force, stiffness, force-per-ampere and inverse tables on a (gap, current) grid: CSV + C header."""
    from fields.io import formats
    from fields.io.export import header_lines, write_atomic, write_long_csv

    files = []
    imax = c.max_current_A
    I = np.linspace(-imax, imax, 13)
    ok = ~c.contact
    g = c.gaps_m[ok]
    F0, f = c.F0_N[ok], c.ki_N_per_A[ok]
    kz0, dki = c.kz0_N_per_m[ok], c.dki_dh_N_per_A_m[ok]
    W = design.axial_load_N
    # the inverse table spans 0..3 x the axial load (the weight), or +-the weight where gravity
    # acts across an offset study's gap direction (the axial load is then zero)
    Fgrid = np.linspace(0.0, 3.0 * W, 13) if W != 0.0 else np.linspace(-design.weight_N, design.weight_N, 13)
    if getattr(c, "core_model", "none") == "cells":
        Fz, kz, ki, Iinv, eFz, ekz = _saturable_tables(design, g, I, Fgrid, c.pattern)
        fz_note = "error_Fz_N: the cell solve's |fine - coarse| plus interpolation tails at each gap and current"
        kz_note = "error_kz_N_per_m: error_Fz_N over min(gap, floater size)"
        hdr = header_lines(design.name, "soft-iron core solved by ring cells with its B-H curve: F_up(g, I) is not affine in "
                                        "current; ki = dF_up/dI (spline in current); k = -dF_up/dh; drive pattern "
                                        + str(c.pattern.tolist()))
    else:
        Fz = F0[:, None] + f[:, None] * I[None, :]
        kz = kz0[:, None] - dki[:, None] * I[None, :]
        ki = np.repeat(f[:, None], len(I), axis=1)
        # the basis force error at each gap (two-level estimate at the nominal current), for every current
        eFz = np.repeat(np.asarray(c.error_F_N)[ok][:, None], len(I), axis=1)
        ekz = _affine_kz_error(c, ok, I)
        fz_note = ("error_Fz_N: the basis force error estimate at each gap (difference from the next coarser rule "
                   "level, at the nominal current), the same for every current")
        kz_note = ("error_kz_N_per_m: the curves' k_z bar ("
                   + ("error_Fz_N over min(gap, floater size)" if design.cores else
                      "Richardson share of steps h and 2h plus the difference from the next coarser rule level")
                   + "), linear in current between the curves' currents")
        with np.errstate(divide="ignore", invalid="ignore"):
            Iinv = (Fgrid[None, :] - F0[:, None]) / f[:, None]
        hdr = header_lines(design.name, "affine in current (iron-free): F_up(g, I) = F0(g) + I ki(g); "
                                        "k = -dF_up/dh; drive pattern " + str(c.pattern.tolist()))
    reachable = np.isfinite(Iinv) & (np.abs(Iinv) <= imax)
    by_current = {"gap_m": g, "current_A": I}
    for name, values, what, axes in (
            ("table_Fz.csv", {"Fz_N": Fz, "error_Fz_N": eFz},
             "upward magnetic force Fz_N at each gap and current; " + fz_note, by_current),
            ("table_kz.csv", {"kz_N_per_m": kz, "error_kz_N_per_m": ekz},
             "axial stiffness kz_N_per_m at each gap and current; " + kz_note, by_current),
            ("table_ki.csv", {"ki_N_per_A": ki}, "force per ampere ki_N_per_A at each gap and current", by_current),
            ("table_I_of_F.csv", {"I_A": np.where(reachable, Iinv, np.nan)},
             "current I_A that gives the force force_N at each gap; empty where it would exceed +-max current",
             {"gap_m": g, "force_N": Fgrid})):
        write_long_csv(exp / name, axes, values, hdr + [what])
        files += [str(exp / name), str(exp / (Path(name).stem + ".meta.json"))]
    affine = getattr(c, "core_model", "none") != "cells"
    for fname, precision in (("tables.h", "double"), ("tables_float.h", "single")):
        write_atomic(exp / fname, formats.force_tables_header(design.name, g, I, Fgrid, Fz, kz, ki, Iinv, imax, W,
                                                              precision=precision, affine_in_current=affine,
                                                              error_Fz_N=eFz, error_kz_N_per_m=ekz))
        files.append(str(exp / fname))
    return files


def _saturable_tables(design: Design, g, I, Fgrid, pattern):
    """Fz, kz, ki = dF/dI and I(F) on the (gap, current) grid from the saturable family."""
    from scipy.interpolate import CubicSpline

    from fields import analysis

    fam = analysis.axial_curves(design, gaps_m=g, currents_A=I, pattern=pattern)
    Fz, kz = fam.Fup_N, fam.kz_N_per_m
    eFz = fam.error_Fup_N if fam.error_Fup_N is not None else np.repeat(fam.error_F_N[:, None], len(I), axis=1)
    ekz = fam.error_kz_N_per_m if fam.error_kz_N_per_m is not None else np.full_like(Fz, np.nan)
    ki = np.empty_like(Fz)
    Iinv = np.full((len(g), len(Fgrid)), np.nan)
    for i in range(len(g)):
        s = CubicSpline(I, Fz[i])
        ki[i] = s(I, 1)
        for j, F in enumerate(Fgrid):
            r = [x for x in s.solve(F, extrapolate=False) if I[0] <= x <= I[-1]]
            if r:  # the smallest current; of two equal ones (a soft-iron floater's even pull) the positive
                Iinv[i, j] = min(r, key=lambda x: (round(abs(x), 12), x < 0))
    return Fz, kz, ki, Iinv, eFz, ekz


def _affine_kz_error(c, ok, I) -> np.ndarray:
    """The curves' k_z bar (g, c) at the table's currents: linear in current between the curves'
    currents, held at the end values beyond them (nan without a bar)."""
    if c.error_kz_N_per_m is None or not len(c.currents_A):
        return np.full((int(np.sum(ok)), len(I)), np.nan)
    o = np.argsort(c.currents_A)
    return np.array([np.interp(I, c.currents_A[o], e[o]) for e in c.error_kz_N_per_m[ok]])


def _spice(design: Design, control, exp: Path) -> list[str]:
    """The control axis's plant as a SPICE subcircuit."""
    from fields.io import formats
    from fields.io.export import write_atomic

    t, prm = control.table, control.params
    sp = formats.spice_subcircuit(design.name, "hf_plant", t.positions_m, t.F0_N, t.Fk_N_per_A,
                                  prm.resistance_ohm, prm.inductance_H, prm.mass_kg,
                                  prm.gravity_m_per_s2 or 0.0, prm.axis_name,
                                  inductance_note=("soft-iron floater: the force is the tangent in current at the "
                                                   "bias current (F0 + I Fk about it), not the full F(s, I); L at the "
                                                   "operating gap and hover current" if design.floater.soft_iron else
                                                   "soft-iron core solved by ring cells at the hover current and "
                                                   "operating gap; the coil datasheet lists L(gap)") if
                                  (design.cores or design.floater.soft_iron) else "air coil")
    write_atomic(exp / "plant.sub", sp)
    return [str(exp / "plant.sub")]


def _meshes(design: Design, exp: Path):
    """Every body as one STL and as a GLB scene of named nodes; returns (files, the joined mesh)."""
    import trimesh

    from fields.io.export import write_atomic
    from fields.model import meshes as bodies

    meshes = bodies.body_meshes(design)
    scene = trimesh.Scene()
    for name, m in meshes.items():
        scene.add_geometry(m, node_name=name, geom_name=name)
    whole = trimesh.util.concatenate(list(meshes.values()))
    stl = exp / f"geometry_{bodies.STL_UNIT}.stl"
    write_atomic(stl, bodies.stl_text_mm(design))
    write_atomic(exp / "geometry.glb", scene.export(file_type="glb"))
    return [str(stl), str(exp / "geometry.glb")], whole


def run_exports(design: Design, out: Path, curves, control=None) -> ExportsResult:
    """Force/stiffness tables (CSV + C header), inverse table, SPICE subcircuit, meshes (STL, GLB).

    ``curves`` is the result of :func:`fields.studies.stages.curves.run_curves`, ``control`` of
    :func:`fields.studies.stages.control.run_control` (the SPICE plant needs it; left out without it)."""
    from fields.io.export import write_json

    exp = Path(out) / "exports"
    files = _tables(design, curves.curves, exp)
    if control is not None and getattr(control, "table", None) is not None:  # a single-axis plant exists
        files += _spice(design, control, exp)
    mesh_files, whole = _meshes(design, exp)
    files += mesh_files
    result = ExportsResult(files=tuple(files), mesh_volume_m3=float(whole.volume), mesh_watertight=bool(whole.is_watertight))
    write_json(exp / "exports.json", result)
    return result
