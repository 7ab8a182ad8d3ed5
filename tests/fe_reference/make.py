"""Regenerate the finite-element reference data: ``python -m tests.fe_reference.make [name ...]``.

Names: ``suspension``, ``short_wide_core``, ``sphere`` (default: all). Each writes
``tests/reference_data/fe_<name>.json``. Every table point is solved on mesh levels 0 and 1 (each
interval of level 0 halved); the stored force is the Richardson extrapolation with the
theoretical rate 4 of quadratic elements for an energy-type functional (confirmed by the
observed rates of the three-level study stored under ``"convergence"``), and the stored error
estimate is the size of that correction, ``|F1 - F0| / 15`` (a bound on the level-1 error, so
conservative for the extrapolated value), or the difference of the two force bands if larger.
"""

from __future__ import annotations

import datetime
import json
import sys
import time
from pathlib import Path

import numpy as np
import skfem

from fields.input.geometry import load
from fields.io.export import write_atomic

from .cases import SPHERE_RIG, design_case, sphere_case
from .material import FrohlichKennelly
from .solver import NEWTON_TOL, MeshSpec, Model

ROOT = Path(__file__).resolve().parents[2]
OUT = ROOT / "tests" / "reference_data"
#: theoretical convergence rate of the force (P2 elements, energy-type functional)
RATE = 4.0
#: the level-0 mesh of every stored table
SPEC = MeshSpec(h_min=2e-4, growth=0.5, h_max=3e-3, far_ratio=0.6, domain_m=2.0)
TABLE_LEVELS = (0, 1)

GAPS_M = [0.005, 0.0075, 0.010, 0.0125, 0.015, 0.0175, 0.020, 0.025]
CURRENTS_A = [-0.4, 0.0, 0.4, 0.8, 1.2, 3.0, 6.0]
SPHERE_GAPS_M = [0.004, 0.006, 0.008, 0.010, 0.012, 0.015, 0.020]
SPHERE_CURRENTS_A = [0.25, 0.5, 1.0, 2.0, 4.0]


def _continuation_order(currents):
    """Solve order: from the smallest |I| outwards, each start from the previous solution."""
    c = np.asarray(currents, dtype=float)
    return sorted(range(c.size), key=lambda i: (abs(c[i]), c[i] < 0))


def solve_point_table(case_of_gap, gaps, currents, levels=TABLE_LEVELS, spec=SPEC, coil_index=0):
    """Forces and flux linkages (nonlinear and linear iron) on each level: arrays (L, g, i)."""
    nl, ng, ni = len(levels), len(gaps), len(currents)
    F = np.zeros((nl, ng, ni))
    Fb = np.zeros((nl, ng, ni))   # the second band
    psi = np.zeros((nl, ng, ni))
    Fl = np.zeros((nl, ng, ni))
    psil = np.zeros((nl, ng, ni))
    dofs = np.zeros((nl, ng), dtype=int)
    iters = np.zeros((nl, ng, ni), dtype=int)
    order = _continuation_order(currents)
    for g, gap in enumerate(gaps):
        case = case_of_gap(gap)
        for li, L in enumerate(levels):
            m = Model(case, L, spec)
            dofs[li, g] = m.ndofs
            Am, Ac = m.linear_parts()
            for i, I in enumerate(currents):
                A = Am + sum(Ik * a for Ik, a in zip(np.atleast_1d(I), Ac))
                Fl[li, g, i] = m.forces_N(A)[0]
                psil[li, g, i] = m.flux_linkages_Wb(A)[coil_index]
            starts = {}
            for i in order:
                I = currents[i]
                prev = [j for j in starts if (currents[j] >= 0) == (I >= 0) or currents[j] == 0]
                start = starts[max(prev, key=lambda j: abs(currents[j]))] if prev else None
                s = m.solve([I], start=start)
                starts[i] = s.A
                f = m.forces_N(s.A)
                F[li, g, i], Fb[li, g, i] = f[0], f[-1]
                psi[li, g, i] = m.flux_linkages_Wb(s.A)[coil_index]
                iters[li, g, i] = s.newton_iterations
        print(f"  gap {gap * 1e3:.2f} mm: dofs {dofs[:, g].tolist()}, F {np.round(F[-1, g], 5).tolist()}",
              file=sys.stderr, flush=True)
    return dict(F=F, Fb=Fb, psi=psi, Fl=Fl, psil=psil, dofs=dofs, iters=iters)


def richardson(coarse, fine, rate=RATE):
    """Extrapolated value and the size of the correction (the error estimate)."""
    corr = (fine - coarse) / (2.0 ** rate - 1.0)
    return fine + corr, np.abs(corr)


def convergence_study(case, currents, levels=(0, 1, 2), spec=SPEC):
    """Force on three nested levels at given currents: observed rate and Richardson estimate."""
    rows = []
    models = [Model(case, L, spec) for L in levels]
    for I in currents:
        Fs, dofs = [], []
        for m in models:
            s = m.solve([I])
            Fs.append(m.forces_N(s.A)[0])
            dofs.append(int(m.ndofs))
        Fs = np.array(Fs)
        d1, d2 = Fs[1] - Fs[0], Fs[2] - Fs[1]
        p = float(np.log2(abs(d1 / d2))) if d2 != 0 else float("inf")
        est = abs(d2) / (2.0 ** p - 1.0) if np.isfinite(p) and p > 0 else float("nan")
        rows.append({"current_A": float(I), "dofs": dofs, "Fz_N": Fs.tolist(), "observed_rate": p,
                     "richardson_Fz_N": float(Fs[2] + np.sign(d2) * est) if np.isfinite(est) else None,
                     "richardson_error_N": est,
                     "table_scheme_Fz_N": float(richardson(Fs[0], Fs[1])[0]),
                     "table_scheme_error_N": float(richardson(Fs[0], Fs[1])[1])})
    return rows


def _provenance(tab, extra: dict, t0: float) -> dict:
    return {
        "method": ("axisymmetric magnetostatic finite elements in the (r, z) half-plane, unknown A_phi, "
                   "quadratic triangles (scikit-fem ElementTriP2), graded tensor-product mesh, A = 0 on a "
                   f"{SPEC.domain_m} m half-square domain; coil J = N I / A_w; magnet M = Br/mu0 (rigid); "
                   "Frohlich-Kennelly iron by Newton's method; force by the Maxwell stress tensor in the "
                   "weighted-volume (Coulomb/Arkkio) form over an air band around the floater"),
        "solver": "tests/fe_reference (solver.py, mesh.py, material.py, cases.py)",
        "regenerate": "python -m tests.fe_reference.make " + extra.pop("name"),
        "scikit_fem_version": skfem.__version__,
        "date": datetime.date.today().isoformat(),
        "mesh_level0": {"h_min_m": SPEC.h_min, "growth": SPEC.growth, "h_max_m": SPEC.h_max,
                        "far_ratio": SPEC.far_ratio, "domain_m": SPEC.domain_m},
        "mesh_levels": list(TABLE_LEVELS),
        "dofs_per_gap": tab["dofs"].tolist(),
        "newton_tolerance": f"max|dA| <= {NEWTON_TOL:g} max|A|",
        "newton_iterations_max": int(tab["iters"].max()),
        "stored_value": "Richardson extrapolation of levels 0 and 1 with rate 4",
        "error_estimate": ("|F1 - F0| / 15 (the Richardson correction), or the difference between two force "
                           "bands if larger; domain truncation below 1e-6 relative (see tests)"),
        "max_relative_error_estimate": None,
        "band_difference_max_N": float(np.abs(tab["F"][-1] - tab["Fb"][-1]).max()),
        "generation_seconds": round(time.time() - t0, 1),
        **extra,
    }


def _tables(tab):
    Fz, err = richardson(tab["F"][0], tab["F"][1])
    err = np.maximum(err, np.abs(tab["F"][-1] - tab["Fb"][-1]))
    Fl, errl = richardson(tab["Fl"][0], tab["Fl"][1])
    psi, psie = richardson(tab["psi"][0], tab["psi"][1])
    psil, _ = richardson(tab["psil"][0], tab["psil"][1])
    return Fz, err, Fl, errl, psi, psie, psil


def _plain(o):
    """JSON form of numpy scalars and arrays."""
    if isinstance(o, np.generic):
        return o.item()
    if isinstance(o, np.ndarray):
        return o.tolist()
    raise TypeError(f"not JSON serialisable: {type(o).__name__}")


def _write(name: str, record: dict) -> Path:
    path = OUT / f"fe_{name}.json"
    write_atomic(path, json.dumps(record, indent=1, default=_plain) + "\n")
    return path


def _design_record(name: str, geometry_file: str, material: FrohlichKennelly, gaps, currents,
                   study_points) -> dict:
    t0 = time.time()
    design = load(ROOT / geometry_file)
    tab = solve_point_table(lambda g: design_case(design, g, material), gaps, currents)
    Fz, err, Fl, errl, psi, psie, psil = _tables(tab)
    conv = [{"gap_m": g, "rows": convergence_study(design_case(design, g, material), Is)} for g, Is in study_points]
    prov = _provenance(tab, {"name": name, "convergence": conv}, t0)
    prov["max_relative_error_estimate"] = float(np.max(err / np.maximum(np.abs(Fz), 1e-3 * np.abs(Fz).max())))
    prov["generation_seconds"] = round(time.time() - t0, 1)
    c = design.coils[0]
    return {
        "case": name,
        "provenance": prov,
        "geometry": {"file": geometry_file, "coil_turns": float(c.turns),
                     "gap": "clear distance from the core's bottom face to the floater's top face; floater on the axis",
                     "floater_magnet_centre_z_m": [float(design.study.floater_origin_m([g])[0, 2]) for g in gaps]},
        "bh": {"model": "frohlich-kennelly", "mu_r": material.mu_r, "Js_T": material.Js_T},
        "gaps_m": list(gaps),
        "currents_A": list(currents),
        "Fz_N": Fz.tolist(),
        "Fz_error_N": err.tolist(),
        "flux_linkage_Wb": psi.tolist(),
        "flux_linkage_error_Wb": psie.tolist(),
        "Fz_linear_N": Fl.tolist(),
        "Fz_linear_error_N": errl.tolist(),
        "flux_linkage_linear_Wb": psil.tolist(),
    }


def make_suspension() -> Path:
    rec = _design_record("suspension", "geometries/suspension.toml", FrohlichKennelly(1000.0, 1.6),
                         GAPS_M, CURRENTS_A, [(0.005, [0.0, 1.2]), (0.015, [6.0])])
    return _write("suspension", rec)


def make_short_wide_core() -> Path:
    rec = _design_record("short_wide_core", "tests/data/short_wide_core.toml", FrohlichKennelly(1000.0, 1.6),
                         GAPS_M, CURRENTS_A, [(0.005, [1.2])])
    return _write("short_wide_core", rec)


def make_sphere() -> Path:
    t0 = time.time()
    mat = FrohlichKennelly(1000.0, 1.6)
    tab = solve_point_table(lambda g: sphere_case(g, mat, mat), SPHERE_GAPS_M, SPHERE_CURRENTS_A)
    Fz, err, Fl, errl, psi, psie, psil = _tables(tab)
    conv = [{"gap_m": 0.008, "rows": convergence_study(sphere_case(0.008, mat, mat), [1.0])}]
    prov = _provenance(tab, {"name": "sphere", "convergence": conv}, t0)
    prov["max_relative_error_estimate"] = float(np.max(err / np.abs(Fz)))
    prov["generation_seconds"] = round(time.time() - t0, 1)
    geo = dict(SPHERE_RIG)
    geo["gap"] = "clear distance from the core's bottom face to the ball's top; ball on the axis"
    geo["ball_material"] = geo["core_material"] = "the bh entry (both bodies)"
    return _write("sphere", {
        "case": "sphere", "provenance": prov, "geometry": geo,
        "bh": {"model": "frohlich-kennelly", "mu_r": mat.mu_r, "Js_T": mat.Js_T},
        "gaps_m": SPHERE_GAPS_M, "currents_A": SPHERE_CURRENTS_A,
        "Fz_N": Fz.tolist(), "Fz_error_N": err.tolist(), "flux_linkage_Wb": psi.tolist(),
        "flux_linkage_error_Wb": psie.tolist(), "Fz_linear_N": Fl.tolist(), "Fz_linear_error_N": errl.tolist(),
        "flux_linkage_linear_Wb": psil.tolist()})


MAKERS = {"suspension": make_suspension, "short_wide_core": make_short_wide_core, "sphere": make_sphere}


def main(argv=None) -> int:
    names = list(argv if argv is not None else sys.argv[1:]) or list(MAKERS)
    for n in names:
        if n not in MAKERS:
            print(f"make: unknown case {n!r}; expected one of {', '.join(MAKERS)}", file=sys.stderr)
            return 2
        t = time.time()
        print(f"{n}: solving", file=sys.stderr, flush=True)
        path = MAKERS[n]()
        print(f"{n}: wrote {path.relative_to(ROOT)} in {time.time() - t:.0f} s", file=sys.stderr, flush=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
