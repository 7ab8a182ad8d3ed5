"""Force and torque on the floater: surface charges in the fixed sources' field.

The floater's magnets carry surface charges (:mod:`fields.physics.charges`); the force is the sum
of charge times B of the fixed sources (coils, fixed magnets, cores; never the floater's own) at
the charge nodes, and the torque is taken about the floater's centre of mass. Coil parts are kept
per ampere, so the result is a :class:`WrenchBasis` linear in the currents.

Routes, per pose:

- poses in contact are not evaluated;
- on the symmetry axis of a core-free axisymmetric design, when every other pose of the call is
  on it too: the closed-form cap flux (:func:`fields.physics.axial.axial_cap_force`); on the axis
  in a call that also holds off-axis poses, and with cores: the 1-D radial cap rule (it equals the
  general rule there, so that differences across one call stay on one discretisation);
- near a source edge: the graded cap rule (:mod:`fields.physics.nearfield`), one rule per group
  of nearby poses; coil designs send on-axis poses that need grading there too (the closed form
  keeps plain coil layers, which converge slowly for a cap just under a winding's end face);
- elsewhere: the plain rule.

The error estimate is the difference between the requested rule level and the next coarser one
(fewer coil layers and fewer surface nodes); it bounds the error of the coarser result and is
therefore conservative for the returned one.

Soft-iron cores (``core_model="cells"``, the default) are solved for their magnetization by the
ring-cell method (:mod:`fields.physics.iron`) at a cell level tied to the rule level
(:data:`IRON_LEVELS`); the error estimate then compares with the next coarser rule level *and*
the next coarser cell level (:data:`fields.physics.iron.COARSER`), so it holds the cell
discretisation error too. On the axis of an axisymmetric design the axial force comes from
:func:`fields.physics.iron_axis.axial_iron_parts` (closed-form cap flux of the sources and of
the iron's face sheets); elsewhere from the charges in the field of
:func:`fields.physics.iron_basis.iron_field_basis`. :class:`WrenchBasis` holds linear iron
(initial susceptibility); :func:`wrench` at given currents solves the saturable iron (Newton).
``core_model="uniform"`` keeps the uniformly magnetized core of :mod:`fields.physics.cores`
(for comparison only).
"""

from __future__ import annotations

from dataclasses import dataclass
from dataclasses import fields as dataclass_fields

import numpy as np
from scipy.spatial.transform import Rotation

from fields.model.design import Design
from fields.physics.axial import axial_cap_force, on_axis_mask
from fields.physics.charges import floater_surface_rule
from fields.physics.checks import input_error, pose_arrays
from fields.physics.contact import CONTACT_CLEARANCE_M, clearance_m
from fields.physics.cores import clip_polarization, core_models
from fields.physics.field_basis import cell_field_basis, check_core_model, fixed_field_basis
from fields.physics.kernels import CHUNK
from fields.physics.levels import LEVEL_NAMES, RuleLevel, coarser_level, rule_level
from fields.physics.nearfield import graded_floater_rule, near_field_poses, pose_groups


#: cell level of the iron solve per rule level
IRON_LEVELS = {"coarse": "coarse", "fast": "coarse", "standard": "fine", "high": "fine", "reference": "finer"}


def _apply(base: np.ndarray, per_A: np.ndarray, currents_A) -> np.ndarray:
    I = np.asarray(currents_A, dtype=float)
    k = per_A.shape[1]
    if I.shape[-1] != k:
        raise input_error("wrench", "currents_A", f"{k} values per row (one per coil)", I.shape)
    if I.ndim == 1:
        return base + np.einsum("k,nki->ni", I, per_A)
    return base[None] + np.einsum("ck,nki->cni", I, per_A)


@dataclass(frozen=True)
class WrenchBasis:
    """Force and torque on the floater split by linearity in the coil currents.

    ``F(I) = F0_N + sum_k I_k Fk_N_per_A[:, k]`` (exact without cores, and with cores that do not
    saturate; ``core_saturated`` flags poses where the rated current box can saturate a core).

    Attributes
    ----------
    F0_N, T0_Nm : ndarray, shape (n, 3)
        Force (N) and torque about the floater's centre of mass (N m) at zero current.
    Fk_N_per_A, Tk_Nm_per_A : ndarray, shape (n, k, 3)
        Per ampere of each coil.
    error_F_N, error_T_Nm : ndarray, shape (n,)
        Two-level error estimates (at the coils' nominal currents).
    contact : ndarray of bool, shape (n,)
        Floater touches or overlaps a body: no field is evaluated there and the force and torque
        are reported as zero (not a physical value: check this flag).
    clearance_m : ndarray, shape (n,)
        Signed clearance (negative = overlap) (m).
    core_saturated : ndarray of bool, shape (n,)
        The rated current box can saturate a core at this pose (the basis is then not exact for
        every rated current: use :func:`wrench` with the currents).
    """

    F0_N: np.ndarray
    Fk_N_per_A: np.ndarray
    T0_Nm: np.ndarray
    Tk_Nm_per_A: np.ndarray
    error_F_N: np.ndarray
    error_T_Nm: np.ndarray
    contact: np.ndarray
    clearance_m: np.ndarray
    core_saturated: np.ndarray

    def force(self, currents_A) -> np.ndarray:
        """Force (n,3) for currents (k,), or (c,n,3) for currents (c,k) (N)."""
        return _apply(self.F0_N, self.Fk_N_per_A, currents_A)

    def torque(self, currents_A) -> np.ndarray:
        """Torque about the centre of mass, (n,3) or (c,n,3) (N m)."""
        return _apply(self.T0_Nm, self.Tk_Nm_per_A, currents_A)


def concat_bases(parts) -> WrenchBasis:
    """One :class:`WrenchBasis` of the poses of several, in order (e.g. chunks evaluated on
    several processes)."""
    parts = list(parts)
    return WrenchBasis(*(np.concatenate([getattr(p, f.name) for p in parts]) for f in dataclass_fields(WrenchBasis)))


@dataclass(frozen=True)
class Wrench:
    """Force and torque at given currents (nonlinear core clipping included).

    Attributes
    ----------
    force_N, torque_Nm : ndarray, shape (n, 3)
    error_F_N, error_T_Nm : ndarray, shape (n,)
    contact : ndarray of bool, shape (n,)
    clearance_m : ndarray, shape (n,)
    core_saturated : ndarray of bool, shape (n,)
        A core is clipped at saturation at these currents.
    """

    force_N: np.ndarray
    torque_Nm: np.ndarray
    error_F_N: np.ndarray
    error_T_Nm: np.ndarray
    contact: np.ndarray
    clearance_m: np.ndarray
    core_saturated: np.ndarray


# --------------------------------------------------------------------------- evaluation


def _surface_wrench(design: Design, P, Rv, level: RuleLevel, axisym: bool, currents_A=None, rule=None,
                    core_model: str = "cells", iron_level: str = "fine"):
    """F0, Fk, T0, Tk, clipped F and T at currents, clipped and box-saturated flags for the poses
    P (n,3) at one rule level; ``rule`` (points (q,3), charges (q,)) replaces the floater's plain
    surface rule."""
    xf, s = floater_surface_rule(design.floater, level, axisym) if rule is None else rule
    q = xf.shape[0]
    k = len(design.coils)
    c_f = np.asarray(design.floater.centre_of_mass_m, dtype=float)
    n = P.shape[0]
    F0 = np.zeros((n, 3))
    T0 = np.zeros((n, 3))
    Fk = np.zeros((n, k, 3))
    Tk = np.zeros((n, k, 3))
    Fc = np.zeros((n, 3))
    Tc = np.zeros((n, 3))
    sat = np.zeros(n, dtype=bool)
    sat_box = np.zeros(n, dtype=bool)
    layers = level.layers
    per = max(1, CHUNK // max(1, q * max(layers, 1)))
    cells = bool(design.cores) and core_model == "cells"
    cores = core_models(design) if design.cores and not cells else ()
    if cells:
        return _cell_surface_wrench(design, P, Rv, xf, s, c_f, currents_A, iron_level)
    for a in range(0, n, per):
        sl = slice(a, a + per)
        R = Rotation.from_rotvec(Rv[sl]).as_matrix()
        X = np.einsum("nij,qj->nqi", R, xf) + P[sl, None, :]
        arm = X - (np.einsum("nij,j->ni", R, c_f) + P[sl])[:, None, :]
        fb = fixed_field_basis(design, X, P[sl], Rv[sl], layers=layers, grade_within=level.layer_grade_within,
                               core_model="uniform")
        F0[sl] = np.einsum("q,nqi->ni", s, fb.B0_T)
        Fk[sl] = np.einsum("q,nkqi->nki", s, fb.Bk_T_per_A)
        T0[sl] = np.einsum("q,nqi->ni", s, np.cross(arm, fb.B0_T))
        Tk[sl] = np.einsum("q,nkqi->nki", s, np.cross(arm[:, None], fb.Bk_T_per_A))
        sat_box[sl] = fb.core_saturated
        if currents_A is not None:
            I = np.asarray(currents_A, dtype=float)
            B = fb.field_T(I)
            if cores:
                J = fb.core_J0_T + np.einsum("k,nkci->nci", I, fb.core_Jk_T_per_A)
                Jc, over = clip_polarization(J, fb.core_saturation_T[None, :])
                sat[sl] = np.any(over, axis=1)
                for j, cm in enumerate(cores):
                    idx = np.nonzero(over[:, j])[0]
                    if idx.size:
                        G = cm.field_matrix(X[idx]).reshape(idx.size, q, 3, 3)
                        B[idx] += np.einsum("nqij,nj->nqi", G, Jc[idx, j] - J[idx, j])
            Fc[sl] = np.einsum("q,nqi->ni", s, B)
            Tc[sl] = np.einsum("q,nqi->ni", s, np.cross(arm, B))
    return F0, Fk, T0, Tk, Fc, Tc, sat, sat_box


def _cell_surface_wrench(design: Design, P, Rv, xf, s, c_f, currents_A, iron_level: str):
    """:func:`_surface_wrench` with the cell solve of the cores (general poses)."""
    from fields.physics.iron import iron_model
    from fields.physics.iron_basis import iron_field_at_currents

    model = iron_model(design, iron_level)
    n = P.shape[0]
    R = Rotation.from_rotvec(Rv).as_matrix()
    X = np.einsum("nij,qj->nqi", R, xf) + P[:, None, :]
    arm = X - (np.einsum("nij,j->ni", R, c_f) + P)[:, None, :]
    fb = cell_field_basis(design, X, P, Rv, iron_level)
    F0 = np.einsum("q,nqi->ni", s, fb.B0_T)
    Fk = np.einsum("q,nkqi->nki", s, fb.Bk_T_per_A)
    T0 = np.einsum("q,nqi->ni", s, np.cross(arm, fb.B0_T))
    Tk = np.einsum("q,nkqi->nki", s, np.cross(arm[:, None], fb.Bk_T_per_A))
    Fc = np.zeros((n, 3))
    Tc = np.zeros((n, 3))
    sat = np.zeros(n, dtype=bool)
    if currents_A is not None:
        res = iron_field_at_currents(model, X, P, Rv, np.asarray(currents_A, dtype=float))
        Fc = np.einsum("q,nqi->ni", s, res.B_T)
        Tc = np.einsum("q,nqi->ni", s, np.cross(arm, res.B_T))
        sat = np.array([len(c) > 0 for c in res.saturated_cells], dtype=bool)
    return F0, Fk, T0, Tk, Fc, Tc, sat, np.asarray(fb.core_saturated)


def _iron_axis_wrench(design: Design, P, currents_A, iron_level: str):
    """The result tuple of :func:`_surface_wrench` on the axis with the cell solve (axial force
    from the closed-form cap flux; transverse force and torque zero by symmetry)."""
    from fields.physics.iron import iron_model
    from fields.physics.iron_axis import axial_iron_parts, saturable_axial_forces
    from fields.physics.iron_newton import SATURATION_FRACTION

    model = iron_model(design, iron_level)
    parts = axial_iron_parts(model, P[:, 2])
    res = list(_axis_wrench(parts.F0_N, parts.Fk_N_per_A, None))
    n = P.shape[0]
    k = len(design.coils)
    thr = SATURATION_FRACTION * model.saturation_cells_T
    box = np.zeros(n, dtype=bool)
    from fields.physics.cores import rated_current_box

    J0 = (parts.J_floater_T + model.J_magnets_T[None]).reshape(n, -1, 2)
    for I in rated_current_box(design):
        J = J0 + (I @ model.J_coils_T_per_A).reshape(1, -1, 2) if k else J0
        box |= np.any(np.linalg.norm(J, axis=-1) > thr[None], axis=1)
    res[7] = box
    if currents_A is not None:
        Fz, _, nsat, _ = saturable_axial_forces(model, parts, np.asarray(currents_A, dtype=float)[None])
        res[4] = np.zeros((n, 3))
        res[4][:, 2] = Fz[:, 0]
        res[6] = nsat[:, 0] > 0
    return tuple(res)


def _axis_wrench(F0z, Fkz, currents_A):
    """The result tuple of :func:`_surface_wrench` for the closed-form axial route (transverse
    force and torque zero by symmetry, no cores)."""
    n, k = Fkz.shape
    F0 = np.zeros((n, 3))
    Fk = np.zeros((n, k, 3))
    F0[:, 2] = F0z
    Fk[:, :, 2] = Fkz
    Fc = np.zeros((n, 3))
    if currents_A is not None:
        Fc = F0 + np.einsum("k,nki->ni", np.asarray(currents_A, dtype=float), Fk)
    z3 = np.zeros((n, 3))
    return F0, Fk, z3, np.zeros((n, k, 3)), Fc, z3.copy(), np.zeros(n, dtype=bool), np.zeros(n, dtype=bool)


def _levels(order: str | RuleLevel, estimate_error: bool) -> tuple[RuleLevel, RuleLevel]:
    """The rule level and its partner for the error estimate (the level itself without one)."""
    if isinstance(order, RuleLevel):
        if estimate_error:
            raise input_error("wrench", "estimate_error", "False when order is a RuleLevel (it has no coarser level)",
                              estimate_error)
        return order, order
    if order not in LEVEL_NAMES[1:]:
        raise input_error("wrench", "order", f"one of {', '.join(LEVEL_NAMES[1:])} or a RuleLevel", order)
    return rule_level(order), coarser_level(order)


def _iron_levels(order, estimate_error: bool) -> tuple[str, str]:
    from fields.physics.iron import COARSER

    name = IRON_LEVELS.get(order, "fine") if isinstance(order, str) else "fine"
    return name, (COARSER[name] if estimate_error else name)


def _evaluate(design: Design, positions_m, rotvecs_rad, order: str | RuleLevel, currents_A=None,
              estimate_error: bool = True, near_field: bool = True, axis_symmetry: bool = True,
              core_model: str = "cells"):
    check_core_model(core_model, "wrench")
    level, lower = _levels(order, estimate_error)
    cells = bool(design.cores) and core_model == "cells"
    iron_hi, iron_lo = _iron_levels(order, estimate_error)
    P, Rv = pose_arrays(positions_m, rotvecs_rad, "wrench")
    n = P.shape[0]
    k = len(design.coils)
    if currents_A is not None:
        currents_A = np.asarray(currents_A, dtype=float).reshape(-1)
        if currents_A.size != k:
            raise input_error("wrench", "currents_A", f"{k} values (one per coil)", currents_A.size)
    clearance = clearance_m(design, P, Rv)
    contact = clearance <= CONTACT_CLEARANCE_M
    out = [np.zeros((n, 3)), np.zeros((n, k, 3)), np.zeros((n, 3)), np.zeros((n, k, 3)),
           np.zeros((n, 3)), np.zeros((n, 3)), np.zeros(n, dtype=bool), np.zeros(n, dtype=bool)]
    low = [np.zeros((n, 3)), np.zeros((n, k, 3)), np.zeros((n, 3)), np.zeros((n, k, 3)),
           np.zeros((n, 3)), np.zeros((n, 3))]
    axial = (on_axis_mask(design, P, Rv) if axis_symmetry else np.zeros(n, dtype=bool)) & ~contact
    general = ~axial & ~contact
    closed_form = not design.cores and not np.any(general)
    # near-field poses (a charged cap close to a source edge) get the graded cap rule, built per
    # group of nearby poses so that a stiffness stencil shares one discretisation; the closed-form
    # on-axis route needs no cap rule (but keeps plain coil layers, which converge slowly for a
    # cap just under a winding's end face: coil designs send such poses to the graded route)
    pool = general | (axial & (bool(design.coils) or not closed_form) & (not cells))
    if near_field:
        graded, edges = near_field_poses(design, P, Rv, np.where(pool, clearance, np.inf))
        graded &= pool
    else:
        graded, edges = np.zeros(n, dtype=bool), None
    groups = pose_groups(P, Rv, graded, pool) if np.any(graded) else []
    for g in groups:
        graded[g] = True
    tasks = [(axial & ~graded, True, None), (general & ~graded, False, None)]
    tasks += [(np.isin(np.arange(n), g), bool(np.all(axial[g])), g[0]) for g in groups]
    for mask, axisym, seed in tasks:
        if not np.any(mask):
            continue
        # closed-form cap flux (exact cap integral) unless the batch also holds off-axis poses: a
        # batch is then evaluated with one cap rule (the 1-D radial rule equals the general rule on
        # the axis), so that differences across it (stiffness stencils) stay consistent
        if seed is not None:
            rule = graded_floater_rule(design, edges, P[seed], Rv[seed], level)
            res = _surface_wrench(design, P[mask], Rv[mask], level, False, currents_A, rule, core_model, iron_hi)
            if estimate_error:
                rule_lo = graded_floater_rule(design, edges, P[seed], Rv[seed], lower)
                res_lo = _surface_wrench(design, P[mask], Rv[mask], lower, False, currents_A, rule_lo, core_model,
                                         iron_lo)
            else:
                res_lo = res
        elif axisym and cells:
            res = _iron_axis_wrench(design, P[mask], currents_A, iron_hi)
            res_lo = _iron_axis_wrench(design, P[mask], currents_A, iron_lo) if estimate_error else res
        elif axisym and closed_form:
            counts = (level.layers, lower.layers) if estimate_error else (level.layers,)
            F0z, Fkz = axial_cap_force(design, P[mask], counts)
            res, res_lo = _axis_wrench(F0z, Fkz[0], currents_A), _axis_wrench(F0z, Fkz[-1], currents_A)
        else:
            res = _surface_wrench(design, P[mask], Rv[mask], level, axisym, currents_A, None, core_model, iron_hi)
            res_lo = (_surface_wrench(design, P[mask], Rv[mask], lower, axisym, currents_A, None, core_model, iron_lo)
                      if estimate_error else res)
        if axisym:  # exact symmetry: transverse force and all torque vanish
            for r in (res, res_lo):
                r[0][:, :2] = 0.0
                r[1][:, :, :2] = 0.0
                r[2][:] = 0.0
                r[3][:] = 0.0
                r[4][:, :2] = 0.0
                r[5][:] = 0.0
        for dst, src in zip(out, res):
            dst[mask] = src
        for dst, src in zip(low, res_lo):
            dst[mask] = src
    if not estimate_error:
        dF = dT = np.full((n, 3), np.nan)
    elif currents_A is not None:
        dF, dT = out[4] - low[4], out[5] - low[5]
    else:
        Inom = np.array([float(c.nominal_current_A) for c in design.coils])
        dF = (out[0] - low[0]) + np.einsum("k,nki->ni", Inom, out[1] - low[1])
        dT = (out[2] - low[2]) + np.einsum("k,nki->ni", Inom, out[3] - low[3])
    return out, np.linalg.norm(dF, axis=1), np.linalg.norm(dT, axis=1), contact, clearance


def wrench_basis(design: Design, positions_m, rotvecs_rad, order: str | RuleLevel = "standard",
                 estimate_error: bool = True, near_field: bool = True, axis_symmetry: bool = True,
                 core_model: str = "cells") -> WrenchBasis:
    """Force and torque bases of the floater at n poses.

    Parameters
    ----------
    design : Design
    positions_m : ndarray, shape (n, 3)
        Floater frame origins, world frame (m).
    rotvecs_rad : ndarray, shape (n, 3) or (3,)
        Floater orientations (rotation vectors, rad).
    order : str or RuleLevel
        Rule level: ``"fast"``, ``"standard"``, ``"high"`` or ``"reference"``
        (:data:`fields.physics.levels.LEVELS`), or a :class:`~fields.physics.levels.RuleLevel`
        (then ``estimate_error`` must be False).
    estimate_error : bool
        Evaluate the next coarser level too and report the difference as the error estimate
        (default). False halves the cost and reports NaN estimates (for inner loops whose
        accuracy was established once, e.g. finite-difference stencils).
    near_field : bool
        Use the graded cap rule where a charged cap comes close to a source edge (default).
    axis_symmetry : bool
        Use the symmetry of on-axis poses (closed-form cap flux or 1-D radial cap rule, exact
        zeros off the axis direction) (default). False evaluates them like any other pose.
    core_model : str
        ``"cells"`` (default: the ring-cell solve of the cores, linear iron at the initial
        susceptibility in this basis) or ``"uniform"`` (uniformly magnetized cores, comparison).

    Returns
    -------
    WrenchBasis
        Linear in the currents; exact without cores and for linear iron. Torque is about the
        floater's centre of mass.

    Notes
    -----
    Poses on the symmetry axis of an axisymmetric design (all sources coaxial along a line
    parallel to z, axial polarizations, floater untilted) have zero transverse force and torque
    by symmetry. Without cores, their axial force is the closed-form flux of the sources' sheets
    through the floater's charged cap discs (exact in the caps; the "standard" level's 10 coil
    layers then leave about 3e-9 relative at a 3 mm gap on the benchmark design), when every
    non-contact pose of the call is on the axis; a call that mixes on- and off-axis poses (e.g. a
    stiffness stencil) uses the 1-D radial cap rule on the axis, which equals the general rule
    there, so that differences across the call stay consistent. Designs with cores use the 1-D
    radial cap rule on the axis.
    """
    if design.floater.soft_iron:
        raise input_error("wrench_basis", "design.floater", "a floater of magnets (the force on a soft-iron floater "
                          "is not affine in the currents: use wrench with the currents)", "soft iron")
    out, eF, eT, contact, clearance = _evaluate(design, positions_m, rotvecs_rad, order, None, estimate_error,
                                                near_field, axis_symmetry, core_model)
    return WrenchBasis(out[0], out[1], out[2], out[3], eF, eT, contact, clearance, out[7])


def wrench(design: Design, positions_m, rotvecs_rad, currents_A, order: str | RuleLevel = "standard",
           estimate_error: bool = True, near_field: bool = True, axis_symmetry: bool = True,
           core_model: str = "cells") -> Wrench:
    """Force and torque on the floater at n poses and one set of currents.

    Parameters
    ----------
    design : Design
    positions_m : ndarray, shape (n, 3)
    rotvecs_rad : ndarray, shape (n, 3) or (3,)
    currents_A : array_like, shape (k,)
    order, estimate_error, near_field, axis_symmetry, core_model
        As in :func:`wrench_basis`.

    Returns
    -------
    Wrench
        With cells the saturable iron is solved by Newton's method at these currents (``"uniform"``
        clips the core polarization at saturation); nonlinear in the currents.
    """
    if design.floater.soft_iron:
        from fields.physics.iron_floater import floater_iron_wrench

        F, T, eF, contact, clearance, sat = floater_iron_wrench(design, positions_m, rotvecs_rad, currents_A,
                                                                estimate_error)
        return Wrench(F, T, eF, np.where(np.isnan(eF), np.nan, 0.0), contact, clearance, sat)
    out, eF, eT, contact, clearance = _evaluate(design, positions_m, rotvecs_rad, order, currents_A, estimate_error,
                                                near_field, axis_symmetry, core_model)
    return Wrench(out[4], out[5], eF, eT, contact, clearance, out[6])
