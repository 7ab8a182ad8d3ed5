"""The current-and-position force table of induced floaters (fields.control.force_grid).

Checked against a closed form: the pull of a coil on a small soft-iron ball far away scales as
``F = a I^2 / (s0 - s)^n`` (an induced dipole in the field of a current loop, whose field falls
as a power of the distance; e.g. Jackson, Classical Electrodynamics, 3rd ed., sec. 5.6 and the
force on an induced moment F = grad(m . B) / 2). The table interpolates it; its derivatives, the
back-EMF coefficient dF/dI, the hover current and the affine tangent at the bias follow from the
same closed form. Tolerances: a bicubic spline on a 41 x 13 grid of this smooth function.
"""

from __future__ import annotations

import numpy as np
import pytest

from fields.control.force_grid import GridForceTable
from fields.errors import InputError, SolverError

A, S0, N = 2e-6, 0.02, 3.0


def _F(s, i):
    return A * np.asarray(i) ** 2 / (S0 - np.asarray(s)) ** N


def _table(bias=0.8):
    s = np.linspace(-0.01, 0.01, 41)
    cur = np.linspace(-1.5, 1.5, 13)
    return GridForceTable(s, cur, _F(s[:, None], cur[None, :]), bias)


def test_force_and_derivatives_match_the_closed_form():
    t = _table()
    s, i = np.array([-0.0073, 0.0011, 0.0064]), np.array([0.33, 0.8, 1.27])
    assert np.allclose(t.force_N(s, i), _F(s, i), rtol=2e-4)
    dFdI = 2 * A * i / (S0 - s) ** N
    assert np.allclose(t.force_per_ampere_N_per_A(s, i), dFdI, rtol=2e-3)
    dFds = N * A * i ** 2 / (S0 - s) ** (N + 1)
    assert np.allclose(t.stiffness_N_per_m(s, i), -dFds, rtol=2e-3)


def test_hover_current_and_tangent_at_the_bias():
    t = _table(bias=0.8)
    m, g = 0.05, 9.80665
    I = t.hover_current_A(m, g, 0.002)
    assert I == pytest.approx(np.sqrt(m * g * (S0 - 0.002) ** N / A), rel=1e-4)
    # the tangent in current at the bias: F0 + I0 Fk = F(s, I0)
    s = t.positions_m
    assert np.allclose(t.F0_N + 0.8 * t.Fk_N_per_A, _F(s, 0.8), rtol=1e-4)
    ks, ki = t.linearise(0.0, 0.8)
    assert ki == pytest.approx(2 * A * 0.8 / S0 ** N, rel=2e-3)


def test_no_balance_and_bad_grids_are_refused():
    t = _table()
    with pytest.raises(SolverError, match="no current"):
        t.hover_current_A(100.0, 9.80665, 0.0)
    with pytest.raises(InputError, match="strictly increasing"):
        GridForceTable(np.array([0.0, 1, 1, 2]), np.arange(4.0), np.zeros((4, 4)), 0.0)
