"""Coil flux linkage and incremental inductance with solved soft-iron cores.

The flux that the iron links with coil ``k`` follows by reciprocity from its face sheets
(:meth:`fields.physics.iron.IronModel.coil_linkage_Wb`): the linkage of the coil with a loop
equals the coil's flux through that loop. With saturable iron at the solution ``J`` of the
operating currents, the incremental (small-signal) inductance added by the iron is

    ``L_iron[k, j] = d psi_k / d I_j = psi_k( (A + U(J))^-1 b_j )``,

the Jacobian of the Galerkin equations (:func:`fields.physics.iron_newton.incremental_response`)
applied to coil ``j``'s right-hand side per ampere. With linear iron it is pose independent
(the floater is a rigid magnet of ``mu_r`` about 1, so it only shifts the iron's operating point
through saturation). The air-core self and mutual inductances are not part of this module
(:mod:`fields.devices.inductance`).
"""

from __future__ import annotations

import functools

from dataclasses import dataclass

import numpy as np

from fields.model.design import Design
from fields.physics.checks import array_key, input_error, key_array
from fields.physics.iron import iron_model


@dataclass(frozen=True)
class IronInductance:
    """Iron's share of the coils' inductance and flux linkage at n floater poses.

    Attributes
    ----------
    inductance_H : ndarray, shape (n, k, k)
        Incremental inductance added by the iron at the poses' currents (saturable iron), H.
    inductance_linear_H : ndarray, shape (k, k)
        The same for linear iron (initial susceptibility; pose independent), H.
    linkage_Wb : ndarray, shape (n, k)
        Flux linkage of each coil from the iron (saturable) and, for poses on the axis, the
        floater's magnets; the coils' own air-core flux is not included (Wb). NaN for the
        floater part of off-axis poses.
    saturated : ndarray of bool, shape (n,)
        Some cell above the saturation fraction at that pose.
    level : str
    """

    inductance_H: np.ndarray
    inductance_linear_H: np.ndarray
    linkage_Wb: np.ndarray
    saturated: np.ndarray
    level: str


def iron_inductance(design: Design, positions_m, rotvecs_rad, currents_A, level: str = "fine") -> IronInductance:
    """Incremental inductance and flux linkage added by the cores at n poses and currents.

    Parameters
    ----------
    design : Design
        With cores (cylinders or rings on one z-parallel axis).
    positions_m, rotvecs_rad : ndarray, shape (n, 3)
        Floater poses.
    currents_A : ndarray, shape (n, k)
        Coil currents at each pose (the operating point: e.g. hover currents).
    level : str
        Cell level (:data:`fields.physics.iron.LEVELS`).

    Returns
    -------
    IronInductance
    """
    from fields.physics.iron_axis import _coaxial_sheets, _floater_linkage
    from fields.physics.iron_basis import floater_rhs
    from fields.physics.iron_newton import incremental_response, newton_sweep

    if not design.cores and not design.floater.soft_iron:
        raise input_error("iron_inductance", "design.cores", "at least one core or a soft-iron floater", 0)
    if design.floater.soft_iron:
        P = np.atleast_2d(np.asarray(positions_m, dtype=float))
        I = np.asarray(currents_A, dtype=float).reshape(P.shape[0], len(design.coils))
        return _soft_iron_inductance(design, array_key(P), array_key(I), level)
    model = iron_model(design, level)
    P = np.atleast_2d(np.asarray(positions_m, dtype=float))
    Rv = np.atleast_2d(np.asarray(rotvecs_rad, dtype=float))
    if Rv.shape[0] == 1 and P.shape[0] > 1:
        Rv = np.repeat(Rv, P.shape[0], axis=0)
    n, k = P.shape[0], len(design.coils)
    I = np.asarray(currents_A, dtype=float).reshape(n, k)
    b_f, axial = floater_rhs(model, P, Rv)
    bs = model.b_magnets[None] + I @ model.b_coils + b_f
    J, sat, _ = newton_sweep(model, bs)
    L = np.empty((n, k, k))
    for i in range(n):
        dJ = incremental_response(model, J[i], model.b_coils.T)  # (2c, k)
        L[i] = model.coil_linkage_Wb(dJ.T)  # rows: driving coil j -> linkage of coil k
    L = 0.5 * (L + L.transpose(0, 2, 1))
    L_lin = model.coil_linkage_Wb(model.J_coils_T_per_A)
    L_lin = 0.5 * (L_lin + L_lin.T)
    link = model.coil_linkage_Wb(J.reshape(n, -1))
    fl = np.full((n, k), np.nan)
    if np.any(axial):
        coil_sheets, _ = _coaxial_sheets(design, model.axis_xy_m, model.settings["layers"])
        if all(s is not None for s in coil_sheets):
            fl[axial] = _floater_linkage(model, coil_sheets, P[axial, 2])
    return IronInductance(L, L_lin, link + fl, np.any(sat, axis=1), level)


@functools.lru_cache(maxsize=8)
def _soft_iron_inductance(design: Design, P_key: tuple, I_key: tuple, level: str) -> IronInductance:
    """:func:`iron_inductance` of a soft-iron floater on the axis: the joint cell system of cores
    and floater at each height (:mod:`fields.physics.iron_floater`); kept per design and poses
    (the design summary and the coil stage ask for the same gaps)."""
    from fields.physics.iron_floater import _joint
    from fields.physics.iron_newton import incremental_response, newton_sweep

    P = key_array(P_key)
    I = key_array(I_key)
    n, k = I.shape
    L = np.empty((n, k, k))
    L_lin = np.empty((n, k, k))
    link = np.empty((n, k))
    sat = np.zeros(n, dtype=bool)
    for i in range(n):
        m = _joint(design, level, float(P[i, 2])).model
        J, s, _ = newton_sweep(m, (m.b_magnets + I[i] @ m.b_coils)[None])
        dJ = incremental_response(m, J[0], m.b_coils.T)
        L[i] = m.coil_linkage_Wb(dJ.T)
        L_lin[i] = m.coil_linkage_Wb(m.solve_linear(m.b_coils))
        link[i] = m.coil_linkage_Wb(J.reshape(1, -1))[0]
        sat[i] = bool(np.any(s))
    L = 0.5 * (L + L.transpose(0, 2, 1))
    # the linear part is pose dependent here (the floater is iron): the operating pose's value
    return IronInductance(L, 0.5 * (L_lin[0] + L_lin[0].T), link, sat, level)
