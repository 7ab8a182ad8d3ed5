"""Benchmark: 6x6 stiffness and gap x offset maps, fields.analysis vs the direct route.

Scenario: the invented suspension example (geometries/suspension.toml) with its iron core removed
(the direct magpylib route cannot model the core), hover current at the operating gap.

Compared in the same run:
- ``analysis.stiffness_matrix`` (25 poses in one batched force call, Richardson error bars) against
  the cost of one single-pose force evaluation (target: no more than about 15 of them), and
  against the direct route a user would write: central differences (12 poses) of
  ``magpylib.getFT`` with the coil as 300 circular loops and meshing (8, 3, 3);
- ``analysis.pose_map`` on a 50 x 41 gap x lateral-offset grid (target: under 2 s on 2 cores)
  against the direct route timed on a subset of the grid and scaled to the full grid;
- errors against a converged reference (the "reference" rule level).

Run: ``python benchmarks/bench_stiffness.py`` (about a minute). Prints a markdown table.
"""

from __future__ import annotations

import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parent))

from bench_force import direct_route

from fields import analysis
from fields.analysis.stencil import central_offsets, pose_steps, stencil_derivatives
from fields.input.geometry import load
from fields.physics.wrench import wrench_basis

ROOT = Path(__file__).resolve().parent.parent


def timed(fn, repeat=5):
    best, out = np.inf, None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main() -> int:
    d = load(ROOT / "geometries" / "suspension.toml")
    d = replace(d, cores=())
    gop = d.study.operating_gap_m
    c = analysis.axial_curves(d, gaps_m=[gop], currents_A=[0.0])
    I = np.array([c.hover_current_A[0]])
    import bench_force

    bench_force.CURRENT_A = float(I[0])  # the direct route drives its loops with this current
    pos, rot = analysis.pose_at_gap(d, [gop])
    # a general pose: the floater offset 1 mm sideways and tilted 2 degrees, so nothing is on axis
    p0, r0 = analysis.displace(d, pos[0], rot[0], np.array([1e-3, 0, 0, 0, np.radians(2.0), 0]))
    p0, r0 = p0[0], r0[0]

    t_one, _ = timed(lambda: wrench_basis(d, p0[None], r0[None]), repeat=20)
    t_K, S = timed(lambda: analysis.stiffness_matrix(d, p0, r0, I), repeat=10)
    Pref, Rref, finish = analysis.stiffness_stencil(d, p0, r0)
    Kref = finish(wrench_basis(d, Pref, Rref, order="reference"), I).K

    # direct route: central differences of getFT, 12 poses (the same stencil, without extrapolation)
    h = pose_steps()
    Pd, Rd = analysis.displace(d, p0, r0, central_offsets(h))

    def direct_K():
        F, T = direct_route(d, Pd, Rd)
        # getFT's torque is about the magnet centre; move it to the centre of mass of each pose
        cm = analysis.com_world(d, Pd, Rd)
        Tc = T + np.cross(Pd - cm, F)
        return -stencil_derivatives(np.concatenate([F, Tc], axis=1), h)[0]

    t_dK, Kd = timed(direct_K, repeat=1)
    scale = np.abs(Kref).max()
    e_ours = float(np.abs(S.K - Kref).max() / scale)
    e_dir = float(np.abs(Kd - Kref).max() / scale)

    # 50 x 41 map
    gaps = np.linspace(d.study.gap_min_m, d.study.gap_max_m, 50)
    offs = np.linspace(-d.study.lateral_span_m, d.study.lateral_span_m, 41)
    t_map, mp = timed(lambda: analysis.pose_map(d, "lateral", gaps_m=gaps, coordinate=offs, currents_A=I), repeat=3)
    sub_g = gaps[::10]
    P = []
    R = []
    for g in sub_g:
        pp, rr = analysis.pose_at_gap(d, [g])
        dq = np.zeros((len(offs), 6))
        dq[:, 0] = offs
        a, b = analysis.displace(d, pp[0], rr[0], dq)
        P.append(a)
        R.append(b)
    P = np.concatenate(P)
    R = np.concatenate(R)
    t_dsub, (Fdm, _) = timed(lambda: direct_route(d, P, R), repeat=1)
    t_dmap = t_dsub * (len(gaps) * len(offs)) / len(P)
    ref_sub = wrench_basis(d, P, R, order="reference").force(I)
    ours_sub = mp.force_N[::10].reshape(-1, 3)
    ok = ~mp.contact[::10].reshape(-1)
    sc = np.max(np.linalg.norm(ref_sub[ok], axis=1))
    e_map = float(np.max(np.linalg.norm(ours_sub[ok] - ref_sub[ok], axis=1)) / sc)
    e_dmap = float(np.max(np.linalg.norm(Fdm[ok] - ref_sub[ok], axis=1)) / sc)

    print("Invented suspension example without its core, hover current at the operating gap; general pose "
          "(1 mm sideways, 2 deg tilt).\n")
    print("| task | direct route | fields | speed-up | direct error | fields error |")
    print("|---|---|---|---|---|---|")
    print(f"| 6x6 stiffness at one pose | {t_dK:.2f} s (12 x getFT) | {t_K * 1e3:.1f} ms "
          f"(= {t_K / t_one:.1f} single-pose force evaluations of {t_one * 1e3:.2f} ms) | {t_dK / t_K:.0f}x | "
          f"{e_dir:.1e} | {e_ours:.1e} |")
    print(f"| 50 x 41 gap x offset map | {t_dmap:.0f} s (timed on {len(P)} poses, scaled) | {t_map:.2f} s | "
          f"{t_dmap / t_map:.0f}x | {e_dmap:.1e} | {e_map:.1e} |")
    print("\nErrors: largest |difference| / largest |reference| against the 'reference' rule level.")
    print("Command: python benchmarks/bench_stiffness.py")
    return 0


if __name__ == "__main__":
    sys.exit(main())
