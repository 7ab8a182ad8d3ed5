"""The stiffness of a soft-iron floater (a ball) on the axis.

A ball of soft iron turns into itself under any rotation about its centre, so it feels no torque:
its rotational stiffness is zero (neutral) by symmetry. Vertical stiffness: central differences
of the on-axis force of the joint cell solve (:mod:`fields.physics.iron_floater`) with Richardson
extrapolation, error bar = Richardson share + the two cell levels' difference. Sideways: the
frozen-polarization stiffness (:func:`fields.physics.iron_floater.floater_iron_lateral_stiffness`),
for linear iron an upper bound of the true value, with the two cell levels' difference as its
discretisation bar (the bound's own gap is not in it).
"""

from __future__ import annotations

import numpy as np

from fields.analysis.stencil import richardson
from fields.analysis.stiffness import Stiffness
from fields.model.design import Design

#: vertical step of the soft-iron floater's k_z (m): the joint cell solve is smooth in height
IRON_STEP_M = 1e-5


def soft_iron_stiffness(design: Design, position_m, rotvec_rad, currents_A) -> Stiffness:
    """6x6 stiffness of an on-axis soft-iron ball (see the module notes)."""
    from fields.physics.iron_family import CHECK_LEVEL, REPORTED_LEVEL
    from fields.physics.iron_floater import floater_iron_forces, floater_iron_lateral_stiffness

    I = np.asarray(currents_A, dtype=float).reshape(-1)
    p = np.asarray(position_m, dtype=float)
    h = IRON_STEP_M
    z = p[2] + h * np.array([0.0, 1.0, -1.0, 2.0, -2.0])
    kz = {}
    F0 = None
    for lv in (REPORTED_LEVEL, CHECK_LEVEL):
        F = floater_iron_forces(design, z, I[None], lv).Fz_N[:, 0]
        D_h = -(F[1] - F[2]) / (2 * h)
        D_2h = -(F[3] - F[4]) / (4 * h)
        R, bar = richardson(np.array([D_h]), np.array([D_2h]))
        kz[lv] = (float(R[0]), float(bar[0]))
        if lv == REPORTED_LEVEL:
            F0 = F[0]
    kx = floater_iron_lateral_stiffness(design, p[2], I, REPORTED_LEVEL)
    kx_c = floater_iron_lateral_stiffness(design, p[2], I, CHECK_LEVEL)
    K = np.zeros((6, 6))
    K[0, 0] = K[1, 1] = kx
    K[2, 2] = kz[REPORTED_LEVEL][0]
    e_r = np.zeros((6, 6))
    e_q = np.zeros((6, 6))
    e_r[2, 2] = kz[REPORTED_LEVEL][1]
    e_q[2, 2] = abs(kz[REPORTED_LEVEL][0] - kz[CHECK_LEVEL][0])
    e_q[0, 0] = e_q[1, 1] = abs(kx - kx_c)
    return Stiffness(K, e_r + e_q, np.array([0.0, 0.0, F0]), np.zeros(3), p, np.asarray(rotvec_rad, dtype=float), I,
                     h, 0.0, e_r, e_q)
