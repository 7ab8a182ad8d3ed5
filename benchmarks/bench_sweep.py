"""Benchmark: design sweeps of the invented suspension example.

The large runs use the example without its iron core (tests/data/air_suspension.toml): the
iron-free engine; a small run on geometries/suspension.toml itself measures the cost per design
with the ring-cell iron solve (every design has its own floater, so its own iron response).

Measured in the same run:

- ``fields.studies.sweep.run_sweep`` on the local process pool with 1 and 2 workers (scaling), a
  Sobol sample of floater magnet diameter (8..20 mm) x height (3..10 mm); wall time of the whole
  call (pool start, every design loaded by the normal loader, operating point, 6x6 stiffness,
  verdict, coil heat, payload envelope, chunk files, merge, plots, best design);
- the same at the target size: 1000 designs (grid 40 x 25) with full stability data on 2 workers;
- the naive per-design route a user would write with magpylib alone: the coil as a
  ``magpylib.Collection`` of 300 ``magpylib.current.Circle`` loops (10 radii x 30 heights, the
  winding's ampere-turns shared equally) and ``magpylib.getFT`` with meshing (8, 3, 3) on the
  floater disc, k_z by central differences (3 poses per design), timed on a few designs and
  extrapolated per design; and extrapolated again to the 25 poses the full 6x6 stiffness needs.
  It leaves out the iron core (magpylib has no soft iron), so it is optimistic for that route.

Run: ``python benchmarks/bench_sweep.py`` (about 2 minutes on 2 cores; add
``--quick`` to skip the 1000-design run). Prints a markdown table.
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
BASE = ROOT / "tests" / "data" / "air_suspension.toml"
IRON = ROOT / "geometries" / "suspension.toml"

SAMPLE = """
name = "bench"
invented = true
mode = "sample"
[sample]
count = {n}
method = "sobol"
seed = 3
[[parameters]]
key = "floater.magnets[0].diameter"
start = "8 mm"
stop = "20 mm"
[[parameters]]
key = "floater.magnets[0].height"
start = "3 mm"
stop = "10 mm"
[[objectives]]
column = "coil_power_W"
sense = "min"
[[objectives]]
column = "k_lateral_N_per_m"
sense = "max"
"""

GRID = """
name = "bench-grid"
invented = true
mode = "grid"
[[parameters]]
key = "floater.magnets[0].diameter"
start = "8 mm"
stop = "20 mm"
count = 40
[[parameters]]
key = "floater.magnets[0].height"
start = "3 mm"
stop = "10 mm"
count = 25
[[objectives]]
column = "coil_power_W"
sense = "min"
[[objectives]]
column = "k_lateral_N_per_m"
sense = "max"
"""


def run(text: str, workers: int, tmp: Path, tag: str, base: Path = BASE):
    from fields.studies.sweep import run_sweep

    sp = tmp / f"{tag}.toml"
    sp.write_text(text, encoding="utf-8")
    t0 = time.perf_counter()
    r = run_sweep(base, sp, tmp / tag, workers=workers, progress=False)
    dt = time.perf_counter() - t0
    assert r.evaluated == len(r.table)
    return len(r.table), dt, sum(1 for row in r.table if row["failure"])


def naive_seconds_per_design(n_designs: int = 3) -> tuple[float, float]:
    """Seconds per design of the magpylib-only route: (k_z with 3 poses, extrapolated to 25 poses)."""
    import magpylib as magpy
    from scipy.spatial.transform import Rotation

    from fields.input import geometry
    from fields.analysis.poses import pose_at_gap
    from fields.input.tables import G_STANDARD

    d = geometry.load(BASE)
    c = d.coils[0]
    h = 1e-6
    times = []
    for dia in np.linspace(0.010, 0.018, n_designs):
        t0 = time.perf_counter()
        nr, nz = 10, 30
        r = c.inner_radius_m + (np.arange(nr) + 0.5) * (c.outer_radius_m - c.inner_radius_m) / nr
        z = c.position_m[2] - c.height_m / 2 + (np.arange(nz) + 0.5) * c.height_m / nz
        coil = magpy.Collection(*[magpy.current.Circle(current=c.turns / (nr * nz), diameter=2 * ri, position=(0, 0, zi))
                                  for ri in r for zi in z])
        m = d.floater.magnets[0]
        p, rv = pose_at_gap(d, [d.study.operating_gap_m])
        P = np.repeat(p, 3, axis=0)
        P[:, 2] += [0.0, h, -h]
        disc = magpy.magnet.Cylinder(dimension=(dia, m.dimensions_m[1]), polarization=m.polarization_T,
                                     position=P, orientation=Rotation.from_rotvec(np.repeat(rv, 3, axis=0)))
        F, _ = magpy.getFT(coil, disc, meshing=(8, 3, 3))
        F = np.reshape(F, (-1, 3))
        ki = F[0, 2]  # N per ampere (no core, no fixed magnet: the force is I times this)
        ih = G_STANDARD * d.floater.mass_kg / ki
        kz = -(F[1, 2] - F[2, 2]) * ih / (2 * h)
        assert np.isfinite(kz)
        times.append(time.perf_counter() - t0)
    t = float(np.median(times))
    return t, t * 25 / 3


def main(argv: list[str]) -> int:
    quick = "--quick" in argv
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        run(SAMPLE.format(n=4), 1, tmp, "warmup")  # imports, unit registry, file caches
        n = 96
        for w in (1, 2):
            rows.append((f"fields.studies.sweep, {n} designs (Sobol)", w, *run(SAMPLE.format(n=n), w, tmp, f"s{w}")))
        if not quick:
            rows.append(("fields.studies.sweep, 1000 designs (grid 40 x 25)", 2, *run(GRID, 2, tmp, "g1000")))
        rows.append(("fields.studies.sweep with the iron core (geometries/suspension.toml), 4 designs (Sobol)", 2,
                     *run(SAMPLE.format(n=4), 2, tmp, "iron", base=IRON)))
    t_kz, t_full = naive_seconds_per_design()
    print("Invented suspension example without its core (tests/data/air_suspension.toml) unless the row says "
          "otherwise; designs with full stability data (hover current, k_i, 6x6 stiffness, verdict, coil heat, "
          "payload envelope).\n")
    print("| route | workers | designs | wall time (s) | designs/s | failed |")
    print("|---|---|---|---|---|---|")
    for label, w, nd, dt, nf in rows:
        print(f"| {label} | {w} | {nd} | {dt:.1f} | {nd / dt:.1f} | {nf} |")
    print(f"| naive magpylib route, k_z only (3 poses), measured on 3 designs | 1 | 1000 (extrapolated) | "
          f"{1000 * t_kz:.0f} | {1 / t_kz:.2f} | - |")
    print(f"| naive magpylib route, full 6x6 (25 poses), extrapolated | 1 | 1000 (extrapolated) | "
          f"{1000 * t_full:.0f} | {1 / t_full:.2f} | - |")
    print("\nReproduce: python benchmarks/bench_sweep.py" + (" --quick" if quick else ""))
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
