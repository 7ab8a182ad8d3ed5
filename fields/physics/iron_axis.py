"""Axial force and flux linkage of an on-axis floater under solved soft-iron cores.

For a floater on the cores' axis, untilted, with axially polarized cylinder or ring magnets, the
whole problem is axisymmetric. The axial force on the floater is the sum over its charged cap
discs of ``sigma Phi`` (surface-charge force, ``F = oint sigma B dA`` with ``sigma = J . n / mu0``,
integrated over a disc: the flux ``Phi`` of everything else through the disc). ``Phi`` is the
closed-form disc flux of the coil layers and fixed magnets
(:func:`fields.physics.axial.axial_disc_flux_Wb`) plus the flux of the iron's face sheets
(Maxwell's loop-loop mutual inductance along each face). The floater's own field enters the
iron solve through its solenoid sheets (closed-form right-hand side per gap); the iron's field
at the floater, not the floater's own, enters the force.

Flux linkage of coil ``k``: its air-core self-linkage is not included here; the iron's share is
``sum_e K_e int_e Phi_k dl`` and the floater's ``K_f int Phi_k dz`` over its sheets (reciprocity:
the linkage of the coil with a loop equals the coil's flux through that loop).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy.constants import mu_0

from fields.model.design import rotation_matrix
from fields.physics.axial import axial_disc_flux_Wb, axial_sheets, sheet_disc_flux_Wb
from fields.physics.checks import input_error
from fields.physics.iron import IronModel, _coaxial_sheets
from fields.physics.iron_rings import edge_loop_inductance
from fields.physics.quadrature import gauss_legendre


@dataclass(frozen=True)
class AxialIronForces:
    """Axial force on an on-axis floater at g gaps and c coil-current sets.

    Attributes
    ----------
    gaps_m : ndarray, shape (g,)
    currents_A : ndarray, shape (c, k)
    Fz_N : ndarray, shape (g, c)
        Force along +z on the floater with saturable iron (N).
    Fz_linear_N : ndarray, shape (g, c)
        The same with linear iron (initial susceptibility): ``F0 + sum_k I_k Fk``.
    F0_N : ndarray, shape (g,)
    Fk_N_per_A : ndarray, shape (g, k)
    linkage_Wb : ndarray, shape (g, c, k)
        Flux linkage of each coil from the iron and the floater (air-core self part excluded).
    linkage_linear_Wb : ndarray, shape (g, c, k)
    saturated_cells : ndarray of int, shape (g, c)
        Cells above the saturation fraction in the saturable solve.
    newton_steps : ndarray of int, shape (g, c)
    """

    gaps_m: np.ndarray
    currents_A: np.ndarray
    Fz_N: np.ndarray
    Fz_linear_N: np.ndarray
    F0_N: np.ndarray
    Fk_N_per_A: np.ndarray
    linkage_Wb: np.ndarray
    linkage_linear_Wb: np.ndarray
    saturated_cells: np.ndarray
    newton_steps: np.ndarray


def _floater_sheets(model: IronModel):
    """Solenoid sheets of the floater's magnets in the floater frame (centre_z relative to its origin)."""
    d = model.design
    fl = d.floater
    for m in fl.magnets:
        R = rotation_matrix(m.rotvec_rad)
        if np.hypot(*m.position_m[:2]) > 0.0 or abs(abs(R[2, 2]) - 1.0) > 1e-12:
            raise input_error(f"floater magnet {m.name}", "position and axis", "on the floater's z axis, along z",
                              (tuple(m.position_m), tuple(m.rotvec_rad)))
    return axial_sheets(replace(d, cores=(), coils=(), magnets=fl.magnets), coils=False)


def floater_rhs_axis(model: IronModel, floater_z_m) -> np.ndarray:
    """Right-hand sides (n, 2c) of the on-axis floater with its frame origin at heights (n,) (m)."""
    sh = _floater_sheets(model)
    z = np.asarray(floater_z_m, dtype=float).reshape(-1)
    p, w = model.mesh.edges.points(model.settings["face_points"])
    Phi = sheet_disc_flux_Wb(sh.radius_m, sh.half_height_m, sh.J_T, p[None, ..., 0, None],
                             p[None, ..., 1, None] - sh.centre_z_m - z[:, None, None, None])  # (n, e, q, s)
    face = np.einsum("neqs,eq->ne", Phi, w)
    return face @ model.mesh.incidence


@dataclass(frozen=True)
class AxialIronParts:
    """Linear-iron pieces of the axial force at n on-axis floater heights (shared by every current).

    Attributes
    ----------
    floater_z_m : ndarray, shape (n,)
        Height of the floater frame origin (m).
    F0_N : ndarray, shape (n,)
        Force at zero current with linear iron (N).
    Fk_N_per_A : ndarray, shape (n, k)
        Force per ampere of each coil with linear iron (N/A).
    source_F0_N, source_Fk_N_per_A : ndarray, shape (n,), (n, k)
        The iron-free parts (fixed magnets, coils per ampere).
    force_per_J : ndarray, shape (n, 2c)
        Force on the floater per unit cell polarization (N/T): ``F_iron = force_per_J . J``.
    b_floater : ndarray, shape (n, 2c)
        The floater's right-hand sides (T m^3).
    J_floater_T : ndarray, shape (n, 2c)
        Linear response of the iron to the floater (T).
    """

    floater_z_m: np.ndarray
    F0_N: np.ndarray
    Fk_N_per_A: np.ndarray
    source_F0_N: np.ndarray
    source_Fk_N_per_A: np.ndarray
    force_per_J: np.ndarray
    b_floater: np.ndarray
    J_floater_T: np.ndarray

    def rhs(self, currents_A, model: IronModel) -> np.ndarray:
        """Right-hand sides (n, 2c) at coil currents (k,)."""
        return model.b_magnets[None] + (np.asarray(currents_A, dtype=float) @ model.b_coils)[None] + self.b_floater

    def force_N(self, J_T, currents_A) -> np.ndarray:
        """Force (n,) of cell polarizations J (n, 2c) or (n, c, 2) at currents (k,)."""
        J = np.asarray(J_T, dtype=float).reshape(self.force_per_J.shape)
        I = np.asarray(currents_A, dtype=float).reshape(-1)
        return self.source_F0_N + self.source_Fk_N_per_A @ I + np.einsum("nx,nx->n", self.force_per_J, J)


def _coaxial_or_fail(model: IronModel):
    coil_sheets, mag_sheets = _coaxial_sheets(model.design, model.axis_xy_m, model.settings["layers"])
    if any(s is None for s in coil_sheets) or (model.design.magnets and mag_sheets is None):
        raise input_error("axial_iron_forces", "coils and magnets", "coaxial with the cores", None)
    return coil_sheets, mag_sheets


def axial_iron_parts(model: IronModel, floater_z_m) -> AxialIronParts:
    """Linear-iron axial force pieces of the on-axis, untilted floater at heights (n,) (m).

    The axial force is the floater's cap charges times the flux through its cap discs of the
    coils' and magnets' sheets (closed form) and of the iron's face sheets (loop-loop mutual
    inductance along each face); the iron's response to the floater is one back-substitution
    per height.
    """
    from fields.physics.axial import floater_cap_discs

    d = model.design
    z = np.asarray(floater_z_m, dtype=float).reshape(-1)
    k = len(d.coils)
    coil_sheets, mag_sheets = _coaxial_or_fail(model)
    rad, zf, q = floater_cap_discs(d.floater)
    zd = z[:, None] + zf[None, :]  # (g, d)
    g, nd = zd.shape
    Phi_c = np.zeros((g, k, nd))
    for i, sh in enumerate(coil_sheets):
        Phi_c[:, i] = axial_disc_flux_Wb(sh, rad, zd).sum(axis=-1)
    Phi_m = axial_disc_flux_Wb(mag_sheets, rad, zd).sum(axis=-1) if mag_sheets is not None else np.zeros((g, nd))
    Lq = edge_loop_inductance(model.mesh.edges, np.tile(rad, g), zd.reshape(-1),
                              model.settings["face_points"]).reshape(-1, g, nd)  # (e, g, d)
    Cq = (model.mesh.incidence.T @ (Lq @ q)).T / mu_0  # (g, 2c) N/T
    b_f = floater_rhs_axis(model, z)
    J_f = model.solve_linear(b_f)
    S0 = Phi_m @ q
    Sk = np.einsum("gkd,d->gk", Phi_c, q)
    F0 = S0 + np.einsum("gc,gc->g", Cq, J_f + model.J_magnets_T[None])
    Fk = Sk + Cq @ model.J_coils_T_per_A.T
    return AxialIronParts(z, F0, Fk, S0, Sk, Cq, b_f, J_f)


def saturable_axial_forces(model: IronModel, parts: AxialIronParts, currents_A):
    """Axial force with saturable iron at every height of ``parts`` and every row of currents.

    One :func:`fields.physics.iron_newton.newton_sweep` runs through all (height, current)
    pairs in a serpentine order (neighbours close), so that each solve starts near its answer.

    Parameters
    ----------
    model : IronModel
    parts : AxialIronParts
    currents_A : ndarray, shape (c, k)

    Returns
    -------
    Fz_N : ndarray, shape (n, c)
    J_T : ndarray, shape (n, c, cells, 2)
    saturated_cells : ndarray of int, shape (n, c)
    steps : ndarray of int, shape (n, c)
    """
    from fields.physics.iron_newton import newton_sweep

    I = np.atleast_2d(np.asarray(currents_A, dtype=float))
    n, nc = parts.floater_z_m.size, I.shape[0]
    order = []
    for ci in np.argsort(I[:, 0] if I.shape[1] else np.zeros(nc), kind="stable"):
        rows = range(n) if len(order) // max(n, 1) % 2 == 0 else range(n - 1, -1, -1)
        order += [(a, int(ci)) for a in rows]
    bs = np.array([model.b_magnets + I[ci] @ model.b_coils + parts.b_floater[a] for a, ci in order])
    J, sat, steps = newton_sweep(model, bs)
    Fz = np.empty((n, nc))
    Jo = np.empty((n, nc) + J.shape[1:])
    nsat = np.empty((n, nc), dtype=int)
    st = np.empty((n, nc), dtype=int)
    for j, (a, ci) in enumerate(order):
        Jo[a, ci] = J[j]
        Fz[a, ci] = (parts.source_F0_N[a] + parts.source_Fk_N_per_A[a] @ I[ci]
                     + parts.force_per_J[a] @ J[j].reshape(-1))
        nsat[a, ci] = int(sat[j].sum())
        st[a, ci] = steps[j]
    return Fz, Jo, nsat, st


def axial_iron_forces(model: IronModel, gaps_m, currents_A, saturable: bool = True) -> AxialIronForces:
    """Axial force and coil flux linkage of the on-axis floater at gaps and currents.

    Parameters
    ----------
    model : IronModel
    gaps_m : array_like, shape (g,)
        Gaps as defined by the design's study (floater origin ``study.floater_origin_m(gap)``).
    currents_A : array_like, shape (c, k) or (c,) for one coil
    saturable : bool
        Also solve the saturable iron (Newton per gap and current); False returns the linear
        force in ``Fz_N`` too.

    Returns
    -------
    AxialIronForces
    """
    d = model.design
    gaps = np.asarray(gaps_m, dtype=float).reshape(-1)
    k = len(d.coils)
    I = np.asarray(currents_A, dtype=float)
    I = I.reshape(-1, 1) if (I.ndim == 1 and k == 1) else np.atleast_2d(I)
    if I.shape[1] != k:
        raise input_error("axial_iron_forces", "currents_A", f"rows of {k} currents (one per coil)", I.shape)
    P = d.study.floater_origin_m(gaps)
    if (np.any(np.abs(P[:, :2] - model.axis_xy_m) > 1e-12) or np.any(np.asarray(d.study.floater_rotvec_rad) != 0.0)):
        raise input_error("axial_iron_forces", "floater poses", "on the cores' axis and untilted", P[0].tolist())
    parts = axial_iron_parts(model, P[:, 2])
    coil_sheets, _ = _coaxial_or_fail(model)
    g = gaps.size
    Flin = parts.F0_N[:, None] + parts.Fk_N_per_A @ I.T
    fl_link = _floater_linkage(model, coil_sheets, P[:, 2])  # (g, k)
    Jlin = (parts.J_floater_T[:, None, :] + model.J_magnets_T[None, None]
            + np.einsum("ck,kx->cx", I, model.J_coils_T_per_A)[None])
    link_lin = model.coil_linkage_Wb(Jlin) + fl_link[:, None, :]
    Fz = Flin.copy()
    link = link_lin.copy()
    nsat = np.zeros((g, I.shape[0]), dtype=int)
    steps = np.zeros((g, I.shape[0]), dtype=int)
    if saturable:
        Fz, J, nsat, steps = saturable_axial_forces(model, parts, I)
        link = model.coil_linkage_Wb(J.reshape(g, I.shape[0], -1)) + fl_link[:, None, :]
    return AxialIronForces(gaps, I, Fz, Flin, parts.F0_N, parts.Fk_N_per_A, link, link_lin, nsat, steps)


def _floater_linkage(model: IronModel, coil_sheets, floater_z_m) -> np.ndarray:
    """Flux linkage (n, k) of each coil with the on-axis floater: ``K_f int Phi_coil dz`` per sheet."""
    sh = _floater_sheets(model)
    z = np.asarray(floater_z_m, dtype=float).reshape(-1)
    t, w = gauss_legendre(24, -1.0, 1.0)
    out = np.zeros((z.size, len(coil_sheets)))
    for j in range(sh.radius_m.size):
        zz = z[:, None] + sh.centre_z_m[j] + sh.half_height_m[j] * t[None, :]  # (n, t)
        for i, cs in enumerate(coil_sheets):
            Phi = sheet_disc_flux_Wb(cs.radius_m, cs.half_height_m, cs.J_T, sh.radius_m[j],
                                     zz[..., None] - cs.centre_z_m).sum(axis=-1)
            out[:, i] += sh.J_T[j] / mu_0 * (Phi @ w) * sh.half_height_m[j]
    return out
