"""Every example design loads and solves; its key numbers hold (examples are tests).

The numbers asserted are physical identities and the design intent, not stored outputs:
the hover current balances the weight (Newton), the suspension floater is vertically unstable
and sideways stable, the repulsive floater vertically stable and sideways unstable (Earnshaw's
theorem allows no other combination for rigid magnets without feedback), and the floater mass
equals volume x density + payload.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from fields import analysis
from fields.analysis.operating import operating_point
from fields.input.geometry import load

from helpers import EXAMPLES, REPULSIVE, SUSPENSION


#: examples that take more than a few seconds to solve
SLOW_EXAMPLES = {REPULSIVE.name, "ring_steering.toml", "steel_ball.toml"}


@pytest.mark.parametrize("path", [pytest.param(p, marks=pytest.mark.slow) if p.name in SLOW_EXAMPLES else p
                                  for p in EXAMPLES], ids=lambda p: p.name)
@pytest.mark.slow
def test_example_solves(path):
    d = load(path)
    c = analysis.axial_curves(d)
    assert not np.any(np.isnan(c.Fup_N[~c.contact]))
    op = operating_point(d, c)
    eq = op.equilibrium
    # force balance at the six-axis equilibrium: residual below 1e-6 of the weight
    assert np.linalg.norm(eq.residual_force_N) < 1e-6 * d.weight_N
    # the floater mass is the magnets' volume x density (a ball: pi d^3 / 6) plus the payload
    mags = sum(m.volume_m3 * m.density_kg_per_m3 for m in d.floater.magnets)
    mags += sum(p.density_kg_m3 * math.pi * p.dimensions_m[0] ** 3 / 6 for p in d.floater.soft_iron)
    assert d.floater.mass_kg == pytest.approx(mags + d.floater.payload_mass_kg, rel=1e-12)


def test_suspension_hover_current_balances_weight():
    d = load(SUSPENSION)
    c = analysis.axial_curves(d, gaps_m=[d.study.operating_gap_m], currents_A=[0.0])
    I = c.hover_current_A[0]
    assert 0 < I < d.coils[0].max_current_A
    pos, rot = analysis.pose_at_gap(d, [d.study.operating_gap_m])
    from fields.physics.wrench import wrench

    w = wrench(d, pos, rot, [I])
    assert w.force_N[0] @ d.up == pytest.approx(d.weight_N, rel=1e-9)


@pytest.mark.slow
def test_repulsive_passive_height_is_stable_vertically():
    d = load(REPULSIVE)
    c = analysis.axial_curves(d)
    stable = [e for e in analysis.axial_equilibria(d, 0.0, c) if e.stable]
    assert len(stable) == 1
    assert d.study.gap_min_m < stable[0].gap_m < d.study.gap_max_m
    assert math.isfinite(stable[0].kz_N_per_m) and stable[0].kz_N_per_m > 0
