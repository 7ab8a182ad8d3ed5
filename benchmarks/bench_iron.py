"""Benchmark: soft-iron cores by the ring-cell solve, the old uniform core and finite elements.

Scenario: the invented suspension example (geometries/suspension.toml, iron-cored coil above a
disc floater) and the invented short wide pole disc (tests/data/short_wide_core.toml).

Compared in the same run:
- the FE route (tests/fe_reference: axisymmetric A_phi finite elements, scikit-fem, Newton on the
  Frohlich-Kennelly iron), timed on a few gaps at its coarse mesh level;
- the uniform-magnetization core (``core_model="uniform"``) and the cell solve (default), errors
  against the stored, converged FE data at every stored point up to the rated current;
- the cell solve's error estimate (``|fine - coarse|``) against its actual error;
- timings: the 131-gap curve family with the core, one general (offset and tilted) pose, the
  operating point's hover current, k_i and forces against the FE data.

- the steel-ball rig of the FE reference (a soft-iron floater): the joint cell solve of core and
  ball against the stored FE forces at every gap and current (deep saturation included), its
  timing per height, and the FE route's time per gap.

Run: ``OPENBLAS_NUM_THREADS=1 PYTHONPATH=. python benchmarks/bench_iron.py`` (a few minutes).
Prints markdown tables.
"""

from __future__ import annotations

import json
import resource
import sys
import time
from pathlib import Path

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.optimize import brentq

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(ROOT))

from fields.analysis.curves import axial_curves  # noqa: E402
from fields.input.geometry import load  # noqa: E402
from fields.physics.iron import iron_model  # noqa: E402
from fields.physics.wrench import wrench_basis  # noqa: E402

CASES = ("suspension", "short_wide_core")


def reference(name):
    return json.loads((ROOT / "tests" / "reference_data" / f"fe_{name}.json").read_text())


def fe_route_seconds(design, gaps, current_A):
    """Seconds per (gap, current) of the FE route at its coarse mesh level, and its forces."""
    from fe_reference.cases import design_case
    from fe_reference.make import SPEC
    from fe_reference.material import FrohlichKennelly
    from fe_reference.solver import Model

    c = design.cores[0]
    out, t0 = [], time.perf_counter()
    for g in gaps:
        m = Model(design_case(design, g, FrohlichKennelly(c.relative_permeability, c.saturation_polarization_T)), 0, SPEC)
        out.append(m.forces_N(m.solve([current_A]).A)[0])
    return (time.perf_counter() - t0) / len(gaps), np.array(out)


def errors(design, ref, core_model):
    I = np.array(ref["currents_A"])
    rated = np.abs(I) <= design.coils[0].max_current_A + 1e-12
    t0 = time.perf_counter()
    c = axial_curves(design, gaps_m=ref["gaps_m"], currents_A=I[rated], core_model=core_model)
    dt = time.perf_counter() - t0
    F = np.array(ref["Fz_N"])[:, rated]
    err = np.abs(c.Fup_N - F)
    scale = np.abs(F).max(axis=1, keepdims=True)
    return c, err, err / scale, dt


def summary(design, I, F):
    """Hover current, k_i there and F at 0, nominal, max current from a spline in current."""
    s = CubicSpline(I, F)
    c = design.coils[0]
    ih = brentq(lambda x: s(x) - design.weight_N, I[0], I[-1])
    return np.array([ih, s(ih, 1), s(0.0), s(c.nominal_current_A), s(c.max_current_A)])


def main():
    rows = []
    acc = []
    for name in CASES:
        ref = reference(name)
        d = load(ROOT / ref["geometry"]["file"])
        t0 = time.perf_counter()
        iron_model(d, "fine")
        iron_model(d, "coarse")
        t_build = time.perf_counter() - t0
        c, err, rel, t_pts = errors(d, ref, "cells")
        _, err_u, rel_u, _ = errors(d, ref, "uniform")
        E = np.array(ref["Fz_error_N"])[:, : rel.shape[1]]
        bound = float(np.max(err / (c.error_Fup_N + E)))
        acc.append((name, float(rel.max()), float(rel_u.max()), float(np.max(c.error_Fup_N / np.abs(c.Fup_N).max(axis=1,
                    keepdims=True))), bound))
        if name == "suspension":
            t0 = time.perf_counter()
            fam = axial_curves(d)
            t_fam = time.perf_counter() - t0
            fam_u_t0 = time.perf_counter()
            axial_curves(d, core_model="uniform")
            t_fam_u = time.perf_counter() - fam_u_t0
            P = d.study.floater_origin_m([d.study.operating_gap_m]) + np.array([0.002, 0.0, 0.0])
            wrench_basis(d, P, [0.05, 0.0, 0.0])
            t0 = time.perf_counter()
            wrench_basis(d, P, [0.05, 0.0, 0.0])
            t_pose = time.perf_counter() - t0
            t0 = time.perf_counter()
            wrench_basis(d, P, [0.05, 0.0, 0.0], order="fast", estimate_error=False)
            t_pose_fast = time.perf_counter() - t0
            t_fe, _ = fe_route_seconds(d, [0.005, 0.015], 0.8)
            g = ref["gaps_m"].index(d.study.operating_gap_m)
            I5 = np.array(ref["currents_A"])[:5]
            s_fe = summary(d, I5, np.array(ref["Fz_N"])[g, :5])
            s_c = summary(d, I5, axial_curves(d, gaps_m=[d.study.operating_gap_m], currents_A=I5).Fup_N[0])
            s_u = summary(d, I5, axial_curves(d, gaps_m=[d.study.operating_gap_m], currents_A=I5,
                                              core_model="uniform").Fup_N[0])
            rows = [("FE route (tests/fe_reference, coarse mesh), one gap and current", f"{t_fe:.1f} s"),
                    ("cell model: build and factor both levels (once per design)", f"{t_build:.2f} s"),
                    ("cell solve: 131-gap family, 5 currents, saturable, error bars", f"{t_fam:.2f} s"),
                    ("uniform core: 131-gap family", f"{t_fam_u:.2f} s"),
                    ("cell solve: 8 FE gaps x 5 currents (direct, no interpolation)", f"{t_pts:.2f} s"),
                    ("one general pose (2 mm offset, 0.05 rad tilt), fine + coarse error estimate",
                     f"{t_pose * 1e3:.0f} ms"),
                    ("one general pose, fast rule and coarse cells, no estimate", f"{t_pose_fast * 1e3:.0f} ms")]
            op = (s_fe, s_c, s_u)
            nodes = fam.core_model
    print("## Timings (suspension example, one process, OPENBLAS_NUM_THREADS=1)\n")
    print("| what | time |\n|---|---|")
    for a, b in rows:
        print(f"| {a} | {b} |")
    print(f"\npeak memory (max RSS): {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MB; curve model {nodes}\n")
    print("## Accuracy against the FE reference (every stored gap, currents up to the rated 1.2 A)\n")
    print("| case | cell solve: max error / force scale of the gap | uniform core: same | cell estimate / force scale (max) "
          "| max actual error / (estimate + FE's own) |\n|---|---|---|---|---|")
    for name, r, ru, est, b in acc:
        print(f"| {name} | {r * 100:.2f} % | {ru * 100:.1f} % | {est * 100:.2f} % | {b:.2f} |")
    s_fe, s_c, s_u = op
    print("\n## Operating gap of the suspension example (15 mm), spline in current through 5 currents\n")
    print("| quantity | FE | cell solve | uniform core |\n|---|---|---|---|")
    names = ("hover current (A)", "k_i at hover (N/A)", "F at 0 A (N)", "F at nominal 0.4 A (N)", "F at max 1.2 A (N)")
    for i, n in enumerate(names):
        print(f"| {n} | {s_fe[i]:.5g} | {s_c[i]:.5g} ({(s_c[i] / s_fe[i] - 1) * 100:+.2f} %) | "
              f"{s_u[i]:.5g} ({(s_u[i] / s_fe[i] - 1) * 100:+.1f} %) |")


def steel_ball():
    """The steel-ball rig: the joint cell solve against the FE data, and timings."""
    from fe_reference.cases import sphere_case
    from fe_reference.make import SPEC
    from fe_reference.material import FrohlichKennelly
    from fe_reference.solver import Model
    from test_soft_iron import _ball_z, _rig

    from fields.physics.iron_floater import floater_iron_family, floater_iron_forces

    ref = reference("sphere")
    d = _rig()
    gaps = np.array(ref["gaps_m"])
    cur = np.array(ref["currents_A"])[:, None]
    t0 = time.perf_counter()
    fine = floater_iron_forces(d, _ball_z(gaps), cur, "fine")
    t_fine = time.perf_counter() - t0
    coarse = floater_iron_forces(d, _ball_z(gaps), cur, "coarse")
    F = np.array(ref["Fz_N"])
    err = np.abs(fine.Fz_N - F) / F
    bound = np.abs(fine.Fz_N - F) / (np.abs(fine.Fz_N - coarse.Fz_N) + np.array(ref["Fz_error_N"]))
    g = np.linspace(gaps.min(), gaps.max(), 131)
    t0 = time.perf_counter()
    floater_iron_family(d, _ball_z(g), g, np.array([[0.0], [0.5], [1.0], [2.0], [4.0]]))
    t_fam = time.perf_counter() - t0
    mat = FrohlichKennelly(ref["bh"]["mu_r"], ref["bh"]["Js_T"])
    t0 = time.perf_counter()
    m = Model(sphere_case(0.01, mat, mat), 0, SPEC)
    m.forces_N(m.solve([1.0]).A)
    t_fe = time.perf_counter() - t0
    print("\n## Steel-ball rig (soft-iron floater), against the FE reference\n")
    print("| what | value |\n|---|---|")
    print(f"| joint cell solve, max error / FE force (7 gaps x 5 currents, 0.25-4 A) | {err.max() * 100:.2f} % |")
    print(f"| max actual error / (fine - coarse estimate + FE's own), up to 2 A / at 4 A | "
          f"{bound[:, :4].max():.2f} / {bound[:, 4].max():.2f} |")
    print(f"| joint cell solve, fine level, per height (5 currents, saturable; both cores) | {t_fine / gaps.size:.2f} s |")
    print(f"| 131-gap family, 5 currents, both levels (9 Chebyshev heights in log gap) | {t_fam:.1f} s |")
    print(f"| FE route (tests/fe_reference, coarse mesh), one gap and current | {t_fe:.1f} s |")


if __name__ == "__main__":
    main()
    steel_ball()
