"""Soft-iron floaters on the axis: the floater's iron solved together with the cores.

A floater made of soft iron (a steel ball, a soft-iron disc) has no magnetization of its own:
coils, fixed magnets and cores induce it, and it acts back on the cores. On the common axis the
whole problem is axisymmetric, so the floater's iron is cut into ring cells like the cores
(:mod:`fields.physics.iron_rings`; a ball by :func:`fields.physics.iron_rings.sphere_cells`) and
the cell system of cores and floater is solved as one (:mod:`fields.physics.iron`). Its blocks:

    ``D = [[D_cc, -G_cf], [-G_fc, D_ff]]``

``D_cc`` is the cores' operator (built once per design), ``D_ff`` the floater's (built once: it
only translates), and the coupling ``G_cf = C_c^T L_cf C_f / mu0`` the loop-loop inductances
between the cores' and the floater's faces at the floater's height (the one block that changes
with the gap). Saturation: the same Newton iteration on the joint system, with each body's B-H
curve.

Force along z on the floater's iron: the force on its bound face currents in the field of
everything else (coils, fixed magnets, the cores' solved polarization), never its own:

    ``F_z = sum_e mu0 K_e int_e (-2 pi r B_r) dl / mu0``,

(``-2 pi r B_r = dPhi/dz``, the height derivative of the flux through the face's loops, so this is
``I dPhi/dz`` summed over the floater's loops). The force is not affine in current: without fixed
magnets it is even in the current (an induced body is pulled whatever the current's sign). Flux
linkage of each coil with the cores and the floater follows by reciprocity from the same solve;
``dpsi/dz`` gives the back-EMF of a moving floater.

Error estimate: the ``"fine"`` cell levels (cores and floater) minus the ``"coarse"`` ones.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy import linalg
from scipy.constants import mu_0

from fields.model.design import Design
from fields.physics.checks import array_key, input_error, key_array
from fields.physics.iron import LEVELS, IronModel, _coaxial_sheets, axis_of_cores, curve_of, iron_model
from fields.physics.iron_rings import (
    Edges,
    cross_inductance,
    edge_inductance_matrix,
    graded_nodes,
    rectangle_cells,
    ring_mesh,
    sphere_cells,
)

#: floater cell levels: shells and polar angles of a ball, radial cells of a disc (axial cells
#: follow the core rule's aspect); paired with the cores' level of the same name
FLOATER_LEVELS: dict[str, dict] = {
    "rough": dict(shells=4, angles=8, nr=3),
    "coarse": dict(shells=6, angles=16, nr=6),
    "fine": dict(shells=10, angles=28, nr=12),
    "finer": dict(shells=16, angles=44, nr=24),
}
#: Gauss points per face for the force integral (the field of the other bodies is smooth there)
FORCE_POINTS = 6


@dataclass(frozen=True, eq=False)
class FloaterIron:
    """The floater's soft iron as ring cells in the floater frame (axis = floater z axis).

    Attributes
    ----------
    vertices_m, cells : ndarray
        ``(r, z)`` vertices relative to the floater frame origin and quad cells.
    curve : object
        The B-H curve (:mod:`fields.physics.bh`).
    D : ndarray, shape (2f, 2f)
        The floater cells' own demagnetizing operator.
    incidence : ndarray
        Face sheet map of the floater cells alone.
    """

    vertices_m: np.ndarray
    cells: np.ndarray
    curve: object
    D: np.ndarray
    incidence: np.ndarray
    edges: Edges
    volume_m3: np.ndarray


def _part_cells(part, level: dict) -> tuple[np.ndarray, np.ndarray]:
    z0 = float(part.position_m[2])
    if part.shape == "sphere":
        return sphere_cells(part.dimensions_m[0] / 2, level["shells"], level["angles"], z0)
    d = part.dimensions_m
    ri = 0.0 if part.shape == "cylinder" else d[0] / 2
    ro, h = d[-2] / 2, d[-1]
    nr = int(level["nr"])
    r = graded_nodes(ri, ro, nr, 0.6, "hi" if ri == 0.0 else "both")
    nz = max(1, int(np.ceil(nr * h / (ro - ri) * 0.5)))
    return rectangle_cells(r, graded_nodes(z0 - h / 2, z0 + h / 2, nz, 0.6, "both"))


def floater_iron_curve(design: Design):
    """The B-H curve of the floater's soft iron (:mod:`fields.physics.bh`)."""
    part = design.floater.soft_iron[0]
    return curve_of(part)


@functools.lru_cache(maxsize=8)
def floater_iron(design: Design, level: str) -> FloaterIron:
    """The floater's iron cells at a level (cached per design)."""
    parts = design.floater.soft_iron
    if len(parts) != 1:
        raise input_error("floater_iron", "floater.soft_iron", "exactly one soft-iron part", len(parts))
    V, C = _part_cells(parts[0], FLOATER_LEVELS[level])
    mesh = ring_mesh(V, C)
    L = edge_inductance_matrix(mesh.edges)
    V2 = np.repeat(mesh.volume_m3, 2)
    D = np.diag(V2) - mesh.incidence.T @ L @ mesh.incidence / mu_0
    return FloaterIron(V, C, floater_iron_curve(design), 0.5 * (D + D.T), mesh.incidence, mesh.edges, mesh.volume_m3)


def _shifted(fi: FloaterIron, z_m: float) -> Edges:
    dz = np.array([0.0, z_m])
    return Edges(fi.edges.start_m + dz, fi.edges.end_m + dz)


@dataclass(frozen=True)
class _Joint:
    """The joint cell system at one height, and (computed when first asked) the force integrals."""

    model: IronModel          # the joint cell system (cores first, then the floater)
    nc: int                   # core unknowns (2 x core cells)
    C_f: np.ndarray           # floater incidence
    design: Design
    level: str
    edges_f: Edges            # the floater's faces at this height

    @functools.cached_property
    def force_integrals(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """``int (-2 pi r B_r) dl`` along every floater face: per ampere of each coil (k, e_f), of
        the fixed magnets (e_f,) and per core polarization (e_f, nc)."""
        from fields.physics.coils import coil_field_per_ampere_T
        from fields.physics.iron import face_field_matrix
        from fields.physics.magnets import magnet_field_T

        d, st = self.design, self.model.settings
        ne_f = self.edges_f.start_m.shape[0]
        pq, wq, pts = _ball_points(self.edges_f, FORCE_POINTS)
        wr = (-2.0 * np.pi * pq[..., 0] * wq).reshape(-1)
        nq = FORCE_POINTS
        Q_coils = np.zeros((len(d.coils), ne_f))
        for i, c in enumerate(d.coils):
            B = coil_field_per_ampere_T(c, pts, st["layers"])
            Q_coils[i] = (B[:, 0] * wr).reshape(ne_f, nq).sum(axis=1)
        Q_mag = np.zeros(ne_f)
        for m in d.magnets:
            B = magnet_field_T(m, pts)
            Q_mag += (B[:, 0] * wr).reshape(ne_f, nq).sum(axis=1)
        T = np.zeros((ne_f, self.nc))
        if self.nc:
            core = iron_model(d, self.level)
            G = face_field_matrix(core.mesh.edges, pts, core.axis_xy_m, st["face_points"])  # (q, 2, e_c)
            T = ((G[:, 0, :] * wr[:, None]).reshape(ne_f, nq, -1).sum(axis=1)) @ core.mesh.incidence
        return Q_coils, Q_mag, T


def _ball_points(edges: Edges, n: int):
    p, w = edges.points(n)
    pts = np.stack((p[..., 0], np.zeros_like(p[..., 0]), p[..., 1]), axis=-1).reshape(-1, 3)
    return p, w, pts


#: joint systems kept (about 40 MB each at the fine level; the reuse is at one height: hover search,
#: sideways stiffness)
@functools.lru_cache(maxsize=4)
def _joint(design: Design, level: str, z_m: float) -> _Joint:
    """The joint cell system of cores and floater iron with the floater frame at height ``z_m``."""
    fi = floater_iron(design, level)
    st = dict(LEVELS[level])
    core = iron_model(design, level) if design.cores else None
    axis = np.zeros(2) if core is None else core.axis_xy_m
    ef = _shifted(fi, z_m)
    Vf = fi.vertices_m + np.array([0.0, z_m])
    if core is not None:
        Vc = core.mesh.vertices_m
        cells = np.concatenate((core.mesh.cells, fi.cells + Vc.shape[0]))
        body = np.concatenate((core.cell_curve, np.full(fi.cells.shape[0], len(core.curves))))
        mesh = ring_mesh(np.concatenate((Vc, Vf)), cells, body)
        nc = 2 * core.cells
        Lcf = cross_inductance(core.mesh.edges, ef)
        Gcf = core.mesh.incidence.T @ Lcf @ fi.incidence / mu_0
        D = np.block([[core.D, -Gcf], [-Gcf.T, fi.D]])
        curves = tuple(core.curves) + (fi.curve,)
    else:
        mesh = ring_mesh(Vf, fi.cells, np.zeros(fi.cells.shape[0], dtype=int))
        nc = 0
        D = fi.D
        curves = (fi.curve,)
    V2 = np.repeat(mesh.volume_m3, 2)
    chi = np.repeat(np.array([float(c.initial_susceptibility) for c in curves])[mesh.body], 2)
    factor = linalg.cho_factor(D + np.diag(V2 / chi), lower=False)
    A_inv = linalg.cho_solve(factor, np.eye(D.shape[0]))
    # right-hand sides: cores' part from the core model, the floater's from the coaxial sheets
    coil_sheets, mag_sheets = _coaxial_sheets(design, axis, st["layers"])
    if any(s is None for s in coil_sheets) or (design.magnets and mag_sheets is None):
        raise input_error("soft-iron floater", "coils and magnets", "coaxial with the floater", None)
    from fields.physics.axial import sheet_disc_flux_Wb

    p, w = ef.points(st["face_points"])
    k = len(design.coils)
    ne_f = ef.start_m.shape[0]
    ff_coils = np.zeros((k, ne_f))
    for i, sh in enumerate(coil_sheets):
        Phi = sheet_disc_flux_Wb(sh.radius_m, sh.half_height_m, sh.J_T, p[..., 0][..., None], p[..., 1][..., None] - sh.centre_z_m)
        ff_coils[i] = np.einsum("eqs,eq->e", Phi, w)
    ff_mag = np.zeros(ne_f)
    if design.magnets:
        Phi = sheet_disc_flux_Wb(mag_sheets.radius_m, mag_sheets.half_height_m, mag_sheets.J_T, p[..., 0][..., None],
                                 p[..., 1][..., None] - mag_sheets.centre_z_m)
        ff_mag = np.einsum("eqs,eq->e", Phi, w)
    b_coils = ff_coils @ fi.incidence
    b_mag = ff_mag @ fi.incidence
    face_flux = ff_coils
    if core is not None:
        b_coils = np.concatenate((core.b_coils, b_coils), axis=1)
        b_mag = np.concatenate((core.b_magnets, b_mag))
        face_flux = np.concatenate((core.coil_face_flux, ff_coils), axis=1)
    model = IronModel(None, level, axis, mesh, curves, mesh.body, D, factor, 0.5 * (A_inv + A_inv.T),
                      b_coils, b_mag, np.zeros_like(b_coils), np.zeros_like(b_mag), face_flux, st)
    return _Joint(model, nc, fi.incidence, design, level, ef)


@dataclass(frozen=True)
class FloaterIronForces:
    """Axial force and coil linkage of an on-axis soft-iron floater at g heights and c current rows.

    Attributes
    ----------
    floater_z_m : ndarray, shape (g,)
    currents_A : ndarray, shape (c, k)
    Fz_N : ndarray, shape (g, c)
        Force along +z with saturable iron (N).
    Fz_linear_N : ndarray, shape (g, c)
        With linear iron (initial susceptibilities).
    linkage_Wb : ndarray, shape (g, c, k)
        Flux linkage of each coil with the cores and the floater (air-core self part excluded).
    saturated_cells : ndarray of int, shape (g, c)
    """

    floater_z_m: np.ndarray
    currents_A: np.ndarray
    Fz_N: np.ndarray
    Fz_linear_N: np.ndarray
    linkage_Wb: np.ndarray
    saturated_cells: np.ndarray


def _force(j: _Joint, J: np.ndarray, I: np.ndarray) -> float:
    Jc, Jf = J[:j.nc], J[j.nc:]
    Q_coils, Q_magnets, T_cores = j.force_integrals
    q = I @ Q_coils + Q_magnets + (T_cores @ Jc if j.nc else 0.0)
    return float((j.C_f @ Jf) @ q / mu_0)


def floater_iron_forces(design: Design, floater_z_m, currents_A, level: str = "fine",
                        saturable: bool = True) -> FloaterIronForces:
    """Axial force on the on-axis soft-iron floater with its frame origin at heights (g,) (m)
    for current rows (c, k). Heights are independent (one joint system each, about a second at
    the fine level): several are split over the cores (:func:`fields.physics.parallel.map_chunks`)."""
    from fields.physics.parallel import map_chunks

    z = np.asarray(floater_z_m, dtype=float).reshape(-1)
    I = np.atleast_2d(np.asarray(currents_A, dtype=float))
    parts = map_chunks(lambda sl: _forces_at(design, z[sl], I, level, saturable), z.size, min_items_per_worker=2)
    if len(parts) == 1:
        return parts[0]
    cat = lambda name: np.concatenate([getattr(p, name) for p in parts])  # noqa: E731
    return FloaterIronForces(z, I, cat("Fz_N"), cat("Fz_linear_N"), cat("linkage_Wb"), cat("saturated_cells"))


def _forces_at(design: Design, z: np.ndarray, I: np.ndarray, level: str, saturable: bool) -> FloaterIronForces:
    """:func:`floater_iron_forces` in this process."""
    from fields.physics.iron_newton import newton_sweep

    g, c = z.size, I.shape[0]
    F = np.zeros((g, c))
    Fl = np.zeros((g, c))
    psi = np.zeros((g, c, I.shape[1]))
    nsat = np.zeros((g, c), dtype=int)
    for a in range(g):
        j = _joint(design, level, float(z[a]))
        m = j.model
        bs = m.b_magnets[None] + I @ m.b_coils
        Jl = m.solve_linear(bs)
        for r in range(c):
            Fl[a, r] = _force(j, Jl[r], I[r])
        if saturable:
            order = np.argsort(np.abs(I).sum(axis=1))
            Js, sat, _ = newton_sweep(m, bs[order])
            Js = Js.reshape(c, -1)
            inv = np.empty_like(order)
            inv[order] = np.arange(c)
            Js, ns = Js[inv], sat.sum(axis=1)[inv]
        else:
            Js, ns = Jl, np.zeros(c, dtype=int)
        for r in range(c):
            F[a, r] = _force(j, Js[r], I[r])
        psi[a] = m.coil_linkage_Wb(Js)
        nsat[a] = ns
    return FloaterIronForces(z, I, F, Fl, psi, nsat)


# --------------------------------------------------------------------------- the axial family

#: Lobatto nodes of the family in log(gap): the force is analytic in s = log(gap) in the strip
#: |Im s| < pi/2 (contact at gap = 0 maps to s = -inf), so over the examples' gap ratios of
#: about 8 nine nodes interpolate to about 1e-7 of the force; the last two coefficients are
#: part of the error estimate
FAMILY_NODES = 9


@functools.lru_cache(maxsize=16)
def _family_forces(design: Design, level: str, z_key: tuple, rows_key: tuple) -> FloaterIronForces:
    """:func:`floater_iron_forces` at a family's nodes, kept per design: the stages of one command
    (curves, control table, exports) ask for the same nodes and current rows."""
    return floater_iron_forces(design, key_array(z_key), key_array(rows_key), level)


def floater_iron_family(design: Design, floater_z_m, gaps_m, currents_A):
    """The axial force family of an on-axis soft-iron floater (saturable), as
    :class:`fields.physics.iron_family.IronAxialFamily`.

    ``Fz_linear_N`` is the force with linear iron (initial susceptibilities), not affine in the
    current; ``F0_N`` is the force at zero current (fixed magnets only) and ``Fk_N_per_A`` the
    force per ampere at zero current (zero without fixed magnets: the induced force is even in
    the current). Error: ``|fine - coarse|`` of the joint cell solve plus the Chebyshev tails.
    """
    from fields.physics.iron_family import (CHECK_LEVEL, REPORTED_LEVEL, ChebyshevInterpolant,
                                            IronAxialFamily, lobatto_points)

    z = np.asarray(floater_z_m, dtype=float).reshape(-1)
    gaps = np.asarray(gaps_m, dtype=float).reshape(-1)
    I = np.atleast_2d(np.asarray(currents_A, dtype=float))
    k = I.shape[1]
    s = np.log(gaps)
    lo, hi = float(s.min()), float(s.max())
    # the force per ampere at zero current by a symmetric difference (exact for a quadratic)
    e = 1e-3 * max(1.0, float(np.max(np.abs(I))) if I.size else 1.0)
    extra = np.concatenate([np.zeros((1, k))] + [np.eye(k)[[i]] * s * e for i in range(k) for s in (1.0, -1.0)])
    rows = np.concatenate((I, extra))
    if hi - lo <= 0.0 or z.size <= FAMILY_NODES:
        zn, n = z, 0
    else:
        n = FAMILY_NODES
        sn = 0.5 * (lo + hi) + 0.5 * (hi - lo) * lobatto_points(n)
        slope = (z[-1] - z[0]) / (gaps[-1] - gaps[0])  # heights are affine in the gap
        zn = z[0] + slope * (np.exp(sn) - gaps[0])
    out = {lv: _family_forces(design, lv, array_key(zn), array_key(rows))
           for lv in (REPORTED_LEVEL, CHECK_LEVEL)}
    if n == 0:
        # direct: derivatives by central differences of extra heights
        h = 1e-6
        rp = floater_iron_forces(design, z + h, rows, REPORTED_LEVEL)
        rm = floater_iron_forces(design, z - h, rows, REPORTED_LEVEL)
        r, rc = out[REPORTED_LEVEL], out[CHECK_LEVEL]
        vals, dvals, cvals = r.Fz_N, (rp.Fz_N - rm.Fz_N) / (2 * h), rc.Fz_N
        lin, clin = r.Fz_linear_N, rc.Fz_linear_N
        tail = np.zeros(rows.shape[0])
        sat = r.saturated_cells > 0
    else:
        f = ChebyshevInterpolant(lo, hi, np.concatenate((out[REPORTED_LEVEL].Fz_N, out[REPORTED_LEVEL].Fz_linear_N), axis=1))
        fc = ChebyshevInterpolant(lo, hi, np.concatenate((out[CHECK_LEVEL].Fz_N, out[CHECK_LEVEL].Fz_linear_N), axis=1))
        m = rows.shape[0]
        P, dP, Pc = f(s), f.derivative(s), fc(s)
        vals, lin = P[:, :m], P[:, m:]
        dvals = dP[:, :m] / (slope * gaps)[:, None]  # dF/dz = dF/ds ds/dg dg/dz
        cvals, clin = Pc[:, :m], Pc[:, m:]
        tail = f.tail[:m] + fc.tail[:m]
        j = np.clip(np.searchsorted(sn, s), 1, sn.size - 1)
        ns = out[REPORTED_LEVEL].saturated_cells
        sat = (ns[j] > 0) | (ns[j - 1] > 0)
    c = I.shape[0]
    F, dF = vals[:, :c], dvals[:, :c]
    err = np.abs(vals - cvals)[:, :c] + tail[None, :c]
    err_lin = np.abs(lin - clin)[:, :c] + tail[None, :c]
    F0, dF0 = vals[:, c], dvals[:, c]
    Fk = np.stack([(vals[:, c + 1 + 2 * i] - vals[:, c + 2 + 2 * i]) / (2 * e) for i in range(k)], axis=1)
    dFk = np.stack([(dvals[:, c + 1 + 2 * i] - dvals[:, c + 2 + 2 * i]) / (2 * e) for i in range(k)], axis=1)
    return IronAxialFamily(z, I, F, dF, lin[:, :c], F0, dF0, Fk, dFk, err, err_lin, sat[:, :c], n)


def floater_hover_points(design: Design, z, pattern, target_N, guess_A, step_m: float = 1e-6):
    """Hover current along ``pattern`` of the soft-iron floater at heights z (n,) (the saturable
    force along +z equals ``target_N``), dF/dI and -dF/dz there; secant in current from
    ``guess_A`` (NaN where it is NaN or fails)."""
    from fields.physics.iron_family import HOVER_MAX_STEPS, HOVER_RTOL, REPORTED_LEVEL

    z = np.asarray(z, dtype=float).reshape(-1)
    d = np.asarray(pattern, dtype=float)
    out = [np.full(z.size, np.nan) for _ in range(3)]

    def force(zz, I):
        return floater_iron_forces(design, [zz], np.asarray(I, dtype=float).reshape(-1, 1) * d[None, :], REPORTED_LEVEL).Fz_N[0]

    for i, (zz, g) in enumerate(zip(z, np.asarray(guess_A, dtype=float))):
        if not np.isfinite(g) or g == 0.0:
            continue
        I0, I1 = g, g * (1 + 1e-3)
        f0, f1 = force(zz, [I0, I1]) - target_N
        for _ in range(HOVER_MAX_STEPS):
            if f1 == f0:
                break
            I0, I1, f0 = I1, I1 - f1 * (I1 - I0) / (f1 - f0), f1
            f1 = float(force(zz, [I1])[0] - target_N)
            if abs(f1) <= HOVER_RTOL * abs(target_N):
                break
        if not np.isfinite(I1) or abs(f1) > 1e-6 * abs(target_N):
            continue
        e = 1e-4 * max(1.0, abs(I1))
        fp, fm = force(zz, [I1 + e, I1 - e])
        kz = -(force(zz + step_m, [I1])[0] - force(zz - step_m, [I1])[0]) / (2 * step_m)
        out[0][i], out[1][i], out[2][i] = I1, (fp - fm) / (2 * e), kz
    return tuple(out)


def on_axis_poses(design: Design, positions_m, rotvecs_rad) -> np.ndarray:
    """Poses (n,) the soft-iron floater model covers: on the cores' and coils' axis, and untilted
    (any orientation for a ball centred on the floater origin, which turns into itself)."""
    P = np.atleast_2d(np.asarray(positions_m, dtype=float))
    Rv = np.array(np.broadcast_to(np.asarray(rotvecs_rad, dtype=float), P.shape))
    axis = np.zeros(2)
    if design.cores:
        axis = axis_of_cores(design)
    elif design.coils:
        axis = np.asarray(design.coils[0].position_m[:2], dtype=float)
    part = design.floater.soft_iron[0]
    ok = np.hypot(P[:, 0] - axis[0], P[:, 1] - axis[1]) <= 1e-12
    ball = part.shape == "sphere" and not np.any(np.abs(part.position_m) > 0.0)
    if not ball:
        ok &= np.linalg.norm(Rv, axis=1) <= 1e-15
    return ok


def floater_iron_wrench(design: Design, positions_m, rotvecs_rad, currents_A, estimate_error: bool = True):
    """Force (n, 3), torque (n, 3) (zero by symmetry), force error (n,) and saturation (n,) of the
    soft-iron floater at poses on the axis (:func:`on_axis_poses`); contact poses give zeros."""
    from fields.errors import SolverError
    from fields.physics.contact import CONTACT_CLEARANCE_M, clearance_m
    from fields.physics.iron_family import CHECK_LEVEL, REPORTED_LEVEL

    P = np.atleast_2d(np.asarray(positions_m, dtype=float))
    Rv = np.array(np.broadcast_to(np.asarray(rotvecs_rad, dtype=float), P.shape))
    n = P.shape[0]
    clear = clearance_m(design, P, Rv)
    contact = clear <= CONTACT_CLEARANCE_M
    ok = on_axis_poses(design, P, Rv)
    if np.any(~ok & ~contact):
        i = int(np.flatnonzero(~ok & ~contact)[0])
        raise SolverError(f"soft-iron floater: only poses on the coil axis are modelled (the floater's iron is "
                          f"solved axisymmetrically); got a pose {1e3 * float(np.hypot(*P[i, :2])):.3g} mm off the "
                          f"axis, tilted {float(np.degrees(np.linalg.norm(Rv[i]))):.3g} deg.")
    I = np.asarray(currents_A, dtype=float).reshape(1, -1)
    F = np.zeros((n, 3))
    err = np.full(n, np.nan)
    sat = np.zeros(n, dtype=bool)
    idx = np.flatnonzero(~contact)
    if idx.size:
        r = floater_iron_forces(design, P[idx, 2], I, REPORTED_LEVEL)
        F[idx, 2] = r.Fz_N[:, 0]
        sat[idx] = r.saturated_cells[:, 0] > 0
        if estimate_error:
            rc = floater_iron_forces(design, P[idx, 2], I, CHECK_LEVEL)
            err[idx] = np.abs(r.Fz_N[:, 0] - rc.Fz_N[:, 0])
    return F, np.zeros((n, 3)), err, contact, clear, sat


#: sideways offset (m) and azimuthal points of the frozen-polarization lateral stiffness
LATERAL_OFFSET_M = 1e-5
LATERAL_ANGLES = 8
LATERAL_POINTS = 3


def floater_iron_lateral_stiffness(design: Design, z_m: float, currents_A, level: str = "fine",
                                   direction: str = "x") -> float:
    """Sideways stiffness (N/m) of the on-axis soft-iron floater with its polarization and the
    cores' frozen at their on-axis solution (saturable solve at ``currents_A``).

    The floater's face loops, offset sideways by :data:`LATERAL_OFFSET_M`, in the field of the coils,
    the fixed magnets and the frozen cores: ``F_x = sum I_loop r dphi cos(phi) B_z``,
    ``k = -F_x / offset`` (the force is odd in the offset).

    For linear iron this is an upper bound of the true sideways stiffness: at fixed currents the
    co-energy is the maximum over polarizations of ``J . b(x) - J^T A(x) J / 2`` (the Galerkin
    system's variational form), so it lies above the frozen-polarization value with equality and
    equal slopes on the axis, and its curvature is larger: letting the polarization follow the
    offset can only lower the centring stiffness.

    ``direction="z"`` gives the frozen stiffness along the axis instead (central difference of
    ``F_z = -sum I_loop r dphi B_rho`` over offsets +-:data:`LATERAL_OFFSET_M` along z): a check,
    since a rigid polarization in a source-free field has a traceless stiffness (Earnshaw), so the
    sideways value must be minus half of it.
    """
    from fields.physics.coils import coil_field_per_ampere_T
    from fields.physics.iron import face_sheet_field_T
    from fields.physics.iron_newton import newton_sweep
    from fields.physics.magnets import magnet_field_T

    I = np.asarray(currents_A, dtype=float).reshape(-1)
    j = _joint(design, level, float(z_m))
    m = j.model
    b = m.b_magnets + I @ m.b_coils
    J, _, _ = newton_sweep(m, b[None])
    J = J.reshape(-1)
    Jc, Jf = J[:j.nc], J[j.nc:]
    fi = floater_iron(design, level)
    ef = _shifted(fi, float(z_m))
    p, w = ef.points(LATERAL_POINTS)  # (e, q, 2)
    K = (fi.incidence @ Jf) / mu_0  # (e,) A/m
    phi = 2 * np.pi * (np.arange(LATERAL_ANGLES) + 0.5) / LATERAL_ANGLES
    axis = m.axis_xy_m
    r = p[..., 0][..., None]
    core = iron_model(design, level) if j.nc else None
    loop_I = K[:, None] * w  # (e, q) A

    def field(dx, dz):
        pts = np.stack((axis[0] + dx + r * np.cos(phi), axis[1] + r * np.sin(phi),
                        np.broadcast_to(p[..., 1][..., None] + dz, r.shape[:-1] + phi.shape)), axis=-1).reshape(-1, 3)
        B = np.zeros((pts.shape[0], 3))
        for i, c in enumerate(design.coils):
            B += I[i] * coil_field_per_ampere_T(c, pts, m.settings["layers"])
        for mg in design.magnets:
            B += magnet_field_T(mg, pts)
        if core is not None:
            B += face_sheet_field_T(core.mesh.edges, core.face_currents(Jc), pts, core.axis_xy_m,
                                    m.settings["face_points"])
        return B.reshape(p.shape[0], p.shape[1], phi.size, 3)

    dphi = 2 * np.pi / phi.size
    if direction == "z":
        Fz = []
        for dz in (LATERAL_OFFSET_M, -LATERAL_OFFSET_M):
            B = field(0.0, dz)
            Brho = B[..., 0] * np.cos(phi) + B[..., 1] * np.sin(phi)
            Fz.append(-np.einsum("eq,eq,eqa->", loop_I, p[..., 0], Brho) * dphi)
        return float(-(Fz[0] - Fz[1]) / (2 * LATERAL_OFFSET_M))
    Bz = field(LATERAL_OFFSET_M, 0.0)[..., 2]
    Fx = np.einsum("eq,eq,eqa,a->", loop_I, p[..., 0], Bz, np.cos(phi)) * dphi
    return float(-Fx / LATERAL_OFFSET_M)
