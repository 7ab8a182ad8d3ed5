"""Benchmark: force on a levitated disc, fields.physics.wrench vs. the direct magpylib route.

Invented scenario (not a real product): a suspension levitator with one coil (inner radius
7 mm, outer 22 mm, height 30 mm, 2100 turns, centred at z = 25 mm, axis +z, 0.5 A) and a disc
floater (12.7 mm x 6.35 mm, polarization 1.30 T along +z, "N42-like") hanging 3..25 mm below
the coil's bottom face (z = 10 mm), 200 gaps.

Compared in the same run:

- ``fields.physics.wrench.wrench_basis`` at the "standard" level, timed with its two-level error estimate
  (default) and without it (``estimate_error=False``); the minimum of several repeats is shown
  (the machine is shared; single timings are noisy). On the axis it uses the closed-form cap
  flux of the coil layers (``fields.physics.axial.sheet_disc_flux_Wb``); off the axis, Gauss layers
  and surface charges at 3-D cap nodes;
- the direct route a user would write: the coil as a magpylib Collection of 300 circular loops
  and ``magpylib.getFT`` with meshing (8, 3, 3) (chunked over poses to stay below 1 GB);
- the reference: ``wrench_basis`` at the "reference" level (24 layers), whose convergence is
  shown by its difference to the "high" level. On the axis it is also compared with an
  independent evaluation of the same 24-layer model by magpylib's field at 14 radial cap nodes
  (the 1-D radial rule: one angular node carrying the whole turn, symmetry not used), which
  shares no code with the closed-form flux.

Run: ``python benchmarks/bench_force.py`` (about a minute on 2 cores). Prints a markdown table.
"""

from __future__ import annotations

import sys
import time
from dataclasses import replace

import numpy as np

from fields.model.design import Coil, Design, Floater, Magnet, Study
from fields.input.tables import G_STANDARD
from fields.physics.levels import LEVELS
from fields.physics.wrench import wrench_basis

CURRENT_A = 0.5
N_POSES = 200
DIRECT_CHUNK = 40  # poses per getFT call: keeps the direct route's arrays below ~0.3 GB


def build_design() -> Design:
    """The invented benchmark design (SI)."""
    coil = Coil("coil", 0.007, 0.022, 0.030, 2100, (0.0, 0.0, 0.025), (0.0, 0.0, 1.0), CURRENT_A, 1.0)
    disc = Magnet("disc", "cylinder", (0.0127, 0.00635), (0.0, 0.0, 1.30))
    floater = Floater("disc floater", (disc,), 0.0, (0.0, 0.0, 0.0), disc.mass_kg, (0.0, 0.0, 0.0),
                      ((1.0, 0.0, 0.0), (0.0, 1.0, 0.0), (0.0, 0.0, 1.0)))
    study = Study(0.003, 0.025, N_POSES, "coil", (0.0, 0.0, 0.010), (0.0, 0.0, -1.0), 0.010, (CURRENT_A,),
                  0.0, 1, 0.0, 1, (0.0, 0.0, -G_STANDARD), 12.0)
    return Design("bench (invented)", "invented suspension levitator", "benchmarks/bench_force.py",
                  (coil,), (), (), floater, (), study)


def poses(design: Design, general: bool) -> tuple[np.ndarray, np.ndarray]:
    gaps = np.linspace(0.003, 0.025, N_POSES)
    h = design.floater.magnets[0].dimensions_m[1]
    P = np.zeros((N_POSES, 3))
    P[:, 2] = 0.010 - gaps - h / 2
    R = np.zeros((N_POSES, 3))
    if general:
        # lateral offset 3 mm along x and 1 mm along y, tilt 5 deg about y; the tilted disc's
        # upper rim rises by 0.55 mm, so the smallest gaps shrink to about 2.4 mm
        P[:, 0], P[:, 1] = 0.003, 0.001
        R[:, 1] = np.deg2rad(5.0)
    return P, R


def direct_route(design: Design, P: np.ndarray, R: np.ndarray, loops=(10, 30)):
    """Coil as nr x nz circular loops (magpylib Collection) and magpylib.getFT with meshing (8,3,3)."""
    import magpylib as magpy
    from scipy.spatial.transform import Rotation

    c = design.coils[0]
    nr, nz = loops
    # midpoint grid of filaments over the winding cross-section
    r = c.inner_radius_m + (np.arange(nr) + 0.5) * (c.outer_radius_m - c.inner_radius_m) / nr
    z = c.position_m[2] - c.height_m / 2 + (np.arange(nz) + 0.5) * c.height_m / nz
    I_loop = CURRENT_A * c.turns / (nr * nz)
    coil = magpy.Collection(*[magpy.current.Circle(current=I_loop, diameter=2 * ri, position=(0, 0, zi))
                              for ri in r for zi in z])
    m = design.floater.magnets[0]
    F = np.empty((P.shape[0], 3))
    T = np.empty((P.shape[0], 3))
    for a in range(0, P.shape[0], DIRECT_CHUNK):
        sl = slice(a, a + DIRECT_CHUNK)
        disc = magpy.magnet.Cylinder(dimension=m.dimensions_m, polarization=m.polarization_T,
                                     position=P[sl], orientation=Rotation.from_rotvec(R[sl]))
        f, t = magpy.getFT(coil, disc, meshing=(8, 3, 3))
        F[sl], T[sl] = np.reshape(f, (-1, 3)), np.reshape(t, (-1, 3))
    return F, T


def timed(fn, repeat: int = 3):
    best = np.inf
    out = None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def rel_err(F: np.ndarray, Fref: np.ndarray) -> float:
    """Max over poses of |F - Fref| / max |Fref| (relative to the curve's scale)."""
    return float(np.max(np.linalg.norm(F - Fref, axis=1)) / np.max(np.linalg.norm(Fref, axis=1)))


def main() -> int:
    d = build_design()
    I = np.array([CURRENT_A])
    rows = []
    for label, general in (("on axis", False), ("offset + tilt", True)):
        P, R = poses(d, general)
        ref = wrench_basis(d, P, R, order="reference")
        high = wrench_basis(d, P, R, order="high")
        Fref, Tref = ref.force(I), ref.torque(I)
        conv = rel_err(high.force(I), Fref)
        if general:
            indep = float("nan")
        else:  # same 24-layer model through magpylib's field at 14 radial cap nodes
            radial = replace(LEVELS["reference"], na=1)  # one node per radius: compare F_z only
            alt = wrench_basis(d, P, R, order=radial, estimate_error=False, near_field=False, axis_symmetry=False)
            Falt = alt.force(I) * np.array([0.0, 0.0, 1.0])
            indep = rel_err(Falt, Fref)
        rep = 3 if general else 15
        t_ours, ours = timed(lambda: wrench_basis(d, P, R, order="standard"), repeat=rep)
        t_quick, quick = timed(lambda: wrench_basis(d, P, R, order="standard", estimate_error=False), repeat=rep)
        t_direct, (Fd, Td) = timed(lambda: direct_route(d, P, R), repeat=1)
        e_ours = rel_err(ours.force(I), Fref)
        # same numbers (up to rounding: the blocks of the elliptic loop differ)
        assert np.allclose(quick.force(I), ours.force(I), rtol=1e-13, atol=0.0)
        e_direct = rel_err(Fd, Fref)
        est = float(np.max(ours.error_F_N) / np.max(np.linalg.norm(Fref, axis=1)))
        if general:
            eT_ours, eT_direct = rel_err(ours.torque(I), Tref), rel_err(Td, Tref)
        else:
            eT_ours = eT_direct = float("nan")
        rows.append((label, t_direct, e_direct, eT_direct, t_ours, t_quick, e_ours, eT_ours, est, conv, indep))
    print("Invented suspension levitator, 200 gaps 3..25 mm, 0.5 A, no core.\n")
    print("| poses | direct time (s) | direct F err | direct T err | fields time with / without estimate (ms) | "
          "fields F err | fields T err | fields error estimate | speed-up with / without estimate | "
          "reference convergence | reference vs independent route |")
    print("|---|---|---|---|---|---|---|---|---|---|---|")
    for label, td, ed, etd, to, tq, eo, eto, est, conv, indep in rows:
        print(f"| {label} | {td:.2f} | {ed:.1e} | {etd:.1e} | {to * 1e3:.2f} / {tq * 1e3:.2f} | {eo:.1e} | "
              f"{eto:.1e} | {est:.1e} | {td / to:.0f}x / {td / tq:.0f}x | {conv:.1e} | {indep:.1e} |")
    print("\nErrors: max over poses of |F - F_ref| / max |F_ref| (torque likewise); reference = 'reference'"
          " level, its convergence = difference to the 'high' level. Error estimate = fields' own"
          " two-level estimate (conservative). fields times: minimum of repeated runs; direct: one run.")
    return 0


if __name__ == "__main__":
    sys.exit(main())
