"""Soft-iron cores solved for their magnetization: an axisymmetric ring-cell (moment) method.

The cores are cut into ring cells (:mod:`fields.physics.iron_rings`), each with a uniform
polarization ``J = J_r e_r + J_z e_z`` free in size and direction. Galerkin (cell-mean)
collocation of ``J = J(mu0 H)`` with ``mu0 H = B_applied + B_iron(J) - J`` gives, for linear
iron (``J = chi mu0 H``),

    ``A J = b``,   ``A = diag(V / chi) + diag(V) - G``,   ``b_i = int_{V_i} B_applied . e_i dV``,

``G = C^T L C / mu0`` the symmetric cell interaction matrix (volume integral equation of
magnetostatics, e.g. Chadebec, Coulomb and Janet, IEEE Trans. Magn. 42 (2006) 515; Galerkin
cell means as in Newell, Williams and Dunlop, J. Geophys. Res. 98 (1993) 9551). ``diag(V) - G``
is the cell demagnetizing operator (positive semi-definite), so ``A`` is symmetric positive
definite and is Cholesky-factored once per design and discretisation level. Its right-hand
sides are fixed for the coils (per ampere) and the fixed magnets; only the floater's share
changes with the pose.

Right-hand sides of coaxial sources (coil layers, axially polarized cylinders and rings on the
axis, the floater on the axis) are line integrals of their closed-form disc flux
(:func:`fields.physics.axial.sheet_disc_flux_Wb`) along the cell faces (``int B . phi dV``
equals the flux linked by the test function's bound currents). Other sources are averaged over
the cells by a volume Gauss rule (the azimuthal mean: the ring cells hold the ``m = 0`` part of
the magnetization only, exact for an axisymmetric excitation).

Saturation: per-cell curves (:mod:`fields.physics.bh`); Newton's method on the cell
polarizations, ``F(J) = J - J_curve(h(J))`` with ``h = V^-1 (b - D J)`` the cell-mean
``mu0 H`` and ``D = diag(V) - G``, Jacobian ``I + T V^-1 D`` (``T`` the local differential
susceptibility tensor), started from the linear solution; chord steps with the linear factor
are tried first (one back-substitution each) and Newton takes over when they stall.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass, field, replace

import numpy as np
from scipy import linalg
from scipy.constants import mu_0

from fields.errors import InputError
from fields.model.design import Design, rotation_matrix
from fields.physics.bh import FrohlichKennelly, TableCurve
from fields.physics.checks import input_error
from fields.physics.iron_rings import (
    Edges,
    RingMesh,
    edge_inductance_matrix,
    edge_loop_inductance,
    graded_nodes,
    rectangle_cells,
    ring_mesh,
)
from fields.physics.axial import AxialSheets, axial_sheets, sheet_disc_flux_Wb

#: discretisation levels: radial cells across a core's wall, axial cells per radial cell of
#: height (aspect), grading (end cells are 1 - grade of the mean spacing), Gauss points per face
#: for flux integrals, coil layers for the coils' disc flux
LEVELS: dict[str, dict] = {
    "coarse": dict(nr=6, aspect=0.5, grade=0.6, face_points=4, layers=24),
    "fine": dict(nr=12, aspect=0.5, grade=0.6, face_points=6, layers=32),
    "finer": dict(nr=24, aspect=0.5, grade=0.6, face_points=6, layers=40),
    "rough": dict(nr=3, aspect=0.5, grade=0.6, face_points=4, layers=16),
}
#: the partner of each level in a two-level error estimate (the next coarser one)
COARSER: dict[str, str] = {"finer": "fine", "fine": "coarse", "coarse": "rough"}
#: Newton stops when the largest polarization update is below this (T)
NEWTON_TOL_T = 1e-10
#: observers per vectorised block of the field of the cell sheets
FIELD_CHUNK = 400_000


# --------------------------------------------------------------------------- geometry


def axis_of_cores(design: Design) -> np.ndarray:
    """The common symmetry axis (x, y) of the design's cores (cylinders/rings along world z)."""
    if not design.cores:
        raise input_error("iron_model", "design.cores", "at least one core", 0)
    xy = []
    for c in design.cores:
        R = rotation_matrix(c.rotvec_rad)
        if c.shape not in ("cylinder", "ring") or abs(abs(R[2, 2]) - 1.0) > 1e-12:
            raise input_error(f"core {c.name}", "shape and axis",
                              "a cylinder or ring with its axis along z (ring cells are axisymmetric)",
                              (c.shape, tuple(c.axis)))
        xy.append(np.asarray(c.position_m[:2], dtype=float))
    xy = np.array(xy)
    if np.ptp(xy[:, 0]) > 1e-12 or np.ptp(xy[:, 1]) > 1e-12:
        raise input_error("iron_model", "core positions", "on one common axis parallel to z", xy.tolist())
    return xy[0]


def _core_mesh(design: Design, level: dict) -> tuple[RingMesh, np.ndarray]:
    """Graded rectangle cells of every core; returns the mesh and the core index per cell."""
    verts, cells, body = [], [], []
    off = 0
    for k, c in enumerate(design.cores):
        d = c.dimensions_m
        ri = 0.0 if c.shape == "cylinder" else d[0] / 2
        ro, h = d[-2] / 2, d[-1]
        zc = float(c.position_m[2])
        nr = int(level["nr"])
        r = graded_nodes(ri, ro, nr, level["grade"], "hi" if ri == 0.0 else "both")
        nz = max(1, int(np.ceil(nr * h / (ro - ri) * level["aspect"])))
        z = graded_nodes(zc - h / 2, zc + h / 2, nz, level["grade"], "both")
        V, C = rectangle_cells(r, z, off)
        verts.append(V)
        cells.append(C)
        body.append(np.full(C.shape[0], k))
        off += V.shape[0]
    return ring_mesh(np.concatenate(verts), np.concatenate(cells), np.concatenate(body)), np.concatenate(body)


# --------------------------------------------------------------------------- the model


@dataclass(frozen=True, eq=False)
class IronModel:
    """The factored cell system of a design's cores at one discretisation level.

    Attributes
    ----------
    design : Design or None
        None for a bare mesh model (:func:`cell_model`).
    level : str
    axis_xy_m : ndarray, shape (2,)
        The cores' common axis.
    mesh : RingMesh
        c cells, unknowns ``(J_r, J_z)`` per cell, ordered cell by cell.
    curves : tuple
        The B-H curve of each core.
    cell_curve : ndarray of int, shape (c,)
        Core index of each cell.
    D : ndarray, shape (2c, 2c)
        Cell demagnetizing operator ``diag(V) - G`` (m^3).
    A_factor : tuple
        Cholesky factor of the linear system ``A = diag(V / chi) + D``.
    A_inv : ndarray, shape (2c, 2c)
        ``A^-1`` (its columns serve the low-rank Newton updates).
    b_coils : ndarray, shape (k, 2c)
        Right-hand side per ampere of each coil (T m^3 / A).
    b_magnets : ndarray, shape (2c,)
        Right-hand side of the fixed magnets (T m^3).
    J_coils_T_per_A, J_magnets_T : ndarray
        Linear responses ``A^-1 b`` (T/A per coil, T).
    coil_face_flux : ndarray, shape (k, e)
        ``int_e Phi_coil dl`` per ampere (Wb m / A) on every face: the coil linkage of unit face
        sheets (reciprocity), used for flux linkage.
    """

    design: Design
    level: str
    axis_xy_m: np.ndarray
    mesh: RingMesh
    curves: tuple
    cell_curve: np.ndarray
    D: np.ndarray
    A_factor: tuple
    A_inv: np.ndarray
    b_coils: np.ndarray
    b_magnets: np.ndarray
    J_coils_T_per_A: np.ndarray
    J_magnets_T: np.ndarray
    coil_face_flux: np.ndarray
    settings: dict = field(default_factory=dict)
    _field_cache: dict = field(default_factory=dict, repr=False, compare=False)

    @property
    def cells(self) -> int:
        return int(self.mesh.volume_m3.size)

    @property
    def chi_cells(self) -> np.ndarray:
        """Initial susceptibility of every unknown (2c,)."""
        chi = np.array([float(c.initial_susceptibility) for c in self.curves])[self.cell_curve]
        return np.repeat(chi, 2)

    @property
    def saturation_cells_T(self) -> np.ndarray:
        return np.array([float(c.saturation_T) for c in self.curves])[self.cell_curve]

    # ----------------------------------------------------------------- right-hand sides

    def rhs_sheets(self, sheets: AxialSheets, shift_z_m=None) -> np.ndarray:
        """``b`` (2c,) or (n, 2c) of coaxial solenoid sheets (optionally shifted along z by (n,))."""
        p, w = self.mesh.edges.points(self.settings["face_points"])
        r = p[..., 0][..., None]
        z = p[..., 1][..., None]
        if shift_z_m is None:
            Phi = sheet_disc_flux_Wb(sheets.radius_m, sheets.half_height_m, sheets.J_T, r, z - sheets.centre_z_m)
            face = np.einsum("eqs,eq->e", Phi, w)
            return self.mesh.incidence.T @ face
        dz = np.asarray(shift_z_m, dtype=float).reshape(-1)
        out = np.empty((dz.size, self.mesh.incidence.shape[1]))
        for i, s in enumerate(dz):
            Phi = sheet_disc_flux_Wb(sheets.radius_m, sheets.half_height_m, sheets.J_T, r, z - sheets.centre_z_m - s)
            out[i] = self.mesh.incidence.T @ np.einsum("eqs,eq->e", Phi, w)
        return out

    def rhs_field(self, field_T, order: int = 3, angles: int = 16) -> np.ndarray:
        """``b`` (n, 2c) of an arbitrary applied field by a volume Gauss rule (azimuthal mean).

        ``field_T(points (q, 3)) -> (n, q, 3)`` in the world frame; the field must be free of
        sources inside the cores.
        """
        pts, wr, er = _cell_volume_rule(self.mesh, self.axis_xy_m, order, angles)
        B = np.asarray(field_T(pts.reshape(-1, 3)), dtype=float)
        B = B.reshape((-1,) + pts.shape)  # (n, c, g, 3)
        bz = np.einsum("ncg,cg->nc", B[..., 2], wr)
        br = np.einsum("ncgi,cgi,cg->nc", B, er, wr)
        return np.stack((br, bz), axis=-1).reshape(B.shape[0], -1)

    # ----------------------------------------------------------------- solves

    def solve_linear(self, b) -> np.ndarray:
        """Linear-iron polarizations ``A^-1 b``: (2c,) or (n, 2c) for ``b`` of that shape."""
        b = np.asarray(b, dtype=float)
        return linalg.cho_solve(self.A_factor, b.T).T

    def response(self, currents_A=None, b_floater=None) -> np.ndarray:
        """Linear polarizations (n, c, 2) for coil currents (k,) and floater right-hand sides (n, 2c)."""
        J = self.J_magnets_T.copy()
        if currents_A is not None:
            J = J + np.asarray(currents_A, dtype=float) @ self.J_coils_T_per_A
        if b_floater is not None:
            J = J[None] + self.solve_linear(np.atleast_2d(b_floater))
        return np.atleast_2d(J).reshape(-1, self.cells, 2)

    def solve(self, b, J_start=None, tol_T: float = NEWTON_TOL_T):
        """Saturable polarizations for one right-hand side ``b`` (2c,), by Newton's method
        (:func:`fields.physics.iron_newton.newton_solve`).

        Returns
        -------
        IronSolution
        """
        from fields.physics.iron_newton import newton_solve

        return newton_solve(self, np.asarray(b, dtype=float), J_start, tol_T)

    # ----------------------------------------------------------------- fields of the cells

    def face_currents(self, J_T) -> np.ndarray:
        """Face sheet currents ``mu0 K`` (T) (..., e) of cell polarizations (..., c, 2) or (..., 2c)."""
        J = np.asarray(J_T, dtype=float)
        J = J.reshape(J.shape[:-2] + (-1,)) if J.shape[-1] == 2 and J.ndim >= 2 and J.shape[-2] == self.cells else J
        return J @ self.mesh.incidence.T

    def disc_flux_Wb(self, J_T, radius_m, z_m) -> np.ndarray:
        """Flux of the cells through coaxial discs: J (n, 2c) and discs (d,) -> (n, d) (Wb)."""
        K = self.face_currents(J_T) / mu_0  # (n, e) A/m
        Lq = edge_loop_inductance(self.mesh.edges, radius_m, z_m, self.settings["face_points"])  # (e, d)
        return np.atleast_2d(K) @ Lq

    def field_T(self, J_T, points_m) -> np.ndarray:
        """B (T) of the cells with polarizations J (2c,) at world points (q, 3); points must keep
        clear of the cells' faces (by about a face length).

        The observer x face matrix of the last points is kept (when small), so that further
        polarizations at the same points cost one product.
        """
        p = np.ascontiguousarray(np.asarray(points_m, dtype=float).reshape(-1, 3))
        ne = self.mesh.edges.start_m.shape[0]
        G = None
        if p.shape[0] * ne * 2 <= FIELD_MATRIX_CACHE:
            key = hash(p.tobytes())
            hit = self._field_cache.get("key")
            if hit is not None and hit[0] == key and hit[1].shape == p.shape and np.array_equal(hit[1], p):
                G = hit[2]
            else:
                G = face_field_matrix(self.mesh.edges, p, self.axis_xy_m, self.settings["face_points"])
                self._field_cache["key"] = (key, p.copy(), G)
        return face_sheet_field_T(self.mesh.edges, self.face_currents(J_T), p, self.axis_xy_m,
                                  self.settings["face_points"], G)

    def coil_linkage_Wb(self, J_T) -> np.ndarray:
        """Flux linkage (k,) or (n, k) of each coil with the cells' field (Wb), by reciprocity."""
        return self.face_currents(J_T) @ self.coil_face_flux.T / mu_0


def _cell_volume_rule(mesh: RingMesh, axis_xy, order: int, angles: int):
    """World points (c, g, 3), weights (c, g) (m^3) and radial unit vectors (c, g, 3) of a Gauss
    rule on each cell (bilinear map of the quad, r dA weight, trapezoid in angle)."""
    t, w = np.polynomial.legendre.leggauss(order)
    t = 0.5 * (t + 1.0)
    w = 0.5 * w
    P = mesh.vertices_m[mesh.cells]  # (c, 4, 2)
    U, Vv = np.meshgrid(t, t, indexing="ij")
    U, Vv = U.ravel(), Vv.ravel()
    W2 = np.outer(w, w).ravel()
    N = np.stack(((1 - U) * (1 - Vv), U * (1 - Vv), U * Vv, (1 - U) * Vv), axis=1)  # (g2, 4)
    dNu = np.stack((-(1 - Vv), 1 - Vv, Vv, -Vv), axis=1)
    dNv = np.stack((-(1 - U), -U, U, 1 - U), axis=1)
    X = np.einsum("gk,ckj->cgj", N, P)
    Xu = np.einsum("gk,ckj->cgj", dNu, P)
    Xv = np.einsum("gk,ckj->cgj", dNv, P)
    jac = np.abs(Xu[..., 0] * Xv[..., 1] - Xu[..., 1] * Xv[..., 0])
    wa = W2[None] * jac * X[..., 0]  # r dr dz weights (c, g2)
    phi = 2.0 * np.pi * (np.arange(angles) + 0.5) / angles
    cph, sph = np.cos(phi), np.sin(phi)
    r = X[..., 0][..., None]
    pts = np.stack((axis_xy[0] + r * cph, axis_xy[1] + r * sph, np.broadcast_to(X[..., 1][..., None], r.shape[:-1] + (angles,))),
                   axis=-1)
    er = np.broadcast_to(np.stack((cph, sph, np.zeros(angles)), axis=-1), pts.shape)
    c = P.shape[0]
    wt = np.broadcast_to((wa * (2.0 * np.pi / angles))[..., None], r.shape[:-1] + (angles,))
    return pts.reshape(c, -1, 3), wt.reshape(c, -1), er.reshape(c, -1, 3)


#: loop (Gauss) points per horizontal face by the ratio face length / distance to the nearest
#: observer: Gauss-Legendre with n points on a segment of length L seen from distance d errs by
#: about (L / 2d)^(2n) (Davis and Rabinowitz, Methods of Numerical Integration, 1984, sec. 4.6)
ADAPTIVE_ORDERS = ((0.1, 2), (0.25, 3), (0.5, 4))
#: largest observer x face matrix kept for reuse (entries)
FIELD_MATRIX_CACHE = 4_000_000


def face_field_matrix(edges: Edges, points_m, axis_xy, order: int = 6) -> np.ndarray:
    """``(B_rho, B_z)`` (q, 2, e) at world points (q, 3) per unit face sheet ``mu0 K = 1 T``.

    Faces along z are solenoid sheets, evaluated in closed form as axially polarized cylinders
    (Derby and Olbert, Am. J. Phys. 78 (2010) 229, magpylib ``magnet_cylinder_axial_Bfield``); other
    faces are Gauss-Legendre sums of circular loops (Ortner et al., Magnetism 3 (2023) 11,
    magpylib ``current_circle_Hfield``), with fewer points on faces far from every observer
    (:data:`ADAPTIVE_ORDERS`; at most ``order``).
    """
    import magpylib as magpy

    p = np.asarray(points_m, dtype=float).reshape(-1, 3)
    x, y = p[:, 0] - axis_xy[0], p[:, 1] - axis_xy[1]
    rho = np.hypot(x, y)
    z = p[:, 2]
    q = p.shape[0]
    s, e = edges.start_m, edges.end_m
    ne = s.shape[0]
    G = np.zeros((q, 2, ne))
    vert = (np.abs(s[:, 0] - e[:, 0]) <= 1e-15 * np.maximum(s[:, 0], 1e-300)) & (s[:, 0] > 0.0)
    iv = np.nonzero(vert)[0]
    a = s[iv, 0]
    hz = np.abs(e[iv, 1] - s[iv, 1])
    zc = 0.5 * (e[iv, 1] + s[iv, 1])
    per = max(1, FIELD_CHUNK // max(1, iv.size))
    for i in range(0, q, per):
        sl = slice(i, i + per)
        m = rho[sl].size
        B = magpy.core.magnet_cylinder_axial_Bfield(np.repeat((0.5 * hz / a)[None], m, 0).ravel(),
                                                    (rho[sl][:, None] / a).ravel(),
                                                    ((z[sl][:, None] - zc) / a).ravel()).reshape(3, m, iv.size)
        G[sl, 0, iv] = B[0]
        G[sl, 1, iv] = B[2]
    io = np.nonzero(~vert)[0]
    if io.size:
        mid = 0.5 * (s[io] + e[io])
        L = np.linalg.norm(e[io] - s[io], axis=1)
        dmin = np.full(io.size, np.inf)
        for i in range(0, q, 4096):
            d2 = (rho[i:i + 4096, None] - mid[None, :, 0]) ** 2 + (z[i:i + 4096, None] - mid[None, :, 1]) ** 2
            dmin = np.minimum(dmin, np.sqrt(d2.min(axis=0)))
        ratio = L / np.maximum(dmin, 1e-300)
        orders = np.full(io.size, order)
        for lim, n in reversed(ADAPTIVE_ORDERS):
            orders[ratio < lim] = min(n, order)
        for n in np.unique(orders):
            sel = io[orders == n]
            pe, we = Edges(s[sel], e[sel]).points(int(n))
            r0 = pe[..., 0].ravel()  # Gauss points are interior: r0 > 0 on every face
            z0 = pe[..., 1].ravel()
            cur = we.ravel()
            per = max(1, FIELD_CHUNK // max(1, r0.size))
            for i in range(0, q, per):
                sl = slice(i, i + per)
                m = rho[sl].size
                H = magpy.core.current_circle_Hfield(np.repeat(r0[None], m, 0).ravel(),
                                                     np.repeat(rho[sl][:, None], r0.size, 1).ravel(),
                                                     (z[sl][:, None] - z0[None]).ravel(),
                                                     np.repeat(cur[None], m, 0).ravel()).reshape(3, m, sel.size, int(n))
                G[sl, 0, sel] += H[0].sum(axis=-1)
                G[sl, 1, sel] += H[2].sum(axis=-1)
    return G


def face_sheet_field_T(edges: Edges, muK_T, points_m, axis_xy, order: int = 6, matrix=None) -> np.ndarray:
    """B (T) at world points (q, 3) of azimuthal sheets ``mu0 K`` (e,) or (s, e) on faces about
    the axis; returns (q, 3) or (s, q, 3). ``matrix`` is :func:`face_field_matrix` at these points."""
    p = np.asarray(points_m, dtype=float).reshape(-1, 3)
    muK = np.asarray(muK_T, dtype=float)
    G = face_field_matrix(edges, p, axis_xy, order) if matrix is None else matrix
    B = np.einsum("qce,se->sqc", G, np.atleast_2d(muK))
    x, y = p[:, 0] - axis_xy[0], p[:, 1] - axis_xy[1]
    rho = np.hypot(x, y)
    with np.errstate(invalid="ignore", divide="ignore"):
        c = np.where(rho > 0, x / np.where(rho > 0, rho, 1.0), 0.0)
        sn = np.where(rho > 0, y / np.where(rho > 0, rho, 1.0), 0.0)
    out = np.stack((B[..., 0] * c, B[..., 0] * sn, B[..., 1]), axis=-1)
    return out if muK.ndim > 1 else out[0]


def curve_of(part):
    """The B-H curve of one soft-iron part (a core or a floater's iron): its ``bh_curve`` table,
    else the two-parameter curve of ``relative_permeability`` and ``saturation_polarization``."""
    if getattr(part, "bh_curve", None):
        return TableCurve.from_points([h for h, _ in part.bh_curve], [b for _, b in part.bh_curve],
                                      f"core {part.name}.bh_curve")
    mu_r = float(part.relative_permeability)
    if not np.isfinite(mu_r) or mu_r <= 1.0:
        raise input_error(f"core {part.name}", "relative_permeability", "> 1", mu_r)
    return FrohlichKennelly(mu_r - 1.0, float(part.saturation_polarization_T))


def _curves(design: Design, curves) -> tuple:
    if curves is None:
        return tuple(curve_of(c) for c in design.cores)
    curves = tuple(curves)
    if len(curves) != len(design.cores):
        raise input_error("iron_model", "curves", f"one per core ({len(design.cores)})", len(curves))
    return curves


def _coaxial_sheets(design: Design, axis_xy, layers: int):
    """Sheets of the coils (per coil) and of the fixed magnets when they are coaxial with the cores,
    else None for that group (their right-hand side then comes from the volume rule)."""
    base = replace(design, cores=())
    coils = []
    for k, c in enumerate(design.coils):
        try:
            if np.hypot(*(np.asarray(c.position_m[:2]) - axis_xy)) > 1e-12:
                raise input_error("coil", "axis", "coaxial", None)
            sh = axial_sheets(replace(base, coils=(c,), magnets=()), layers, magnets=False)
        except InputError:
            sh = None
        coils.append(sh)
    mags = None
    if design.magnets:
        try:
            if any(np.hypot(*(np.asarray(m.position_m[:2]) - axis_xy)) > 1e-12 for m in design.magnets):
                raise input_error("magnet", "axis", "coaxial", None)
            mags = axial_sheets(base, coils=False)
        except InputError:
            mags = None
    return coils, mags


def cell_model(mesh: RingMesh, curves, cell_curve=None, axis_xy_m=(0.0, 0.0), settings=None,
               design: Design | None = None, level: str = "custom") -> IronModel:
    """Build and factor the cell system of a ring mesh (no sources attached).

    Parameters
    ----------
    mesh : RingMesh
        c cells (:func:`fields.physics.iron_rings.ring_mesh`).
    curves : sequence
        B-H curves (:mod:`fields.physics.bh`), indexed by ``cell_curve``.
    cell_curve : array_like of int, shape (c,), optional
        Curve of each cell (default: ``mesh.body``).
    axis_xy_m : array_like, shape (2,)
        World position of the symmetry axis (parallel to z).
    settings : dict, optional
        ``face_points`` (Gauss points per face for flux integrals) and ``layers`` (coil layers);
        default: the ``"fine"`` level's.

    Returns
    -------
    IronModel
        With zero coil and magnet right-hand sides; use :meth:`IronModel.rhs_field` or
        :meth:`IronModel.rhs_sheets` for sources.
    """
    st = dict(LEVELS["fine"]) if settings is None else dict(settings)
    curves = tuple(curves)
    body = np.asarray(mesh.body if cell_curve is None else cell_curve, dtype=int)
    L = edge_inductance_matrix(mesh.edges)
    C = mesh.incidence
    V2 = np.repeat(mesh.volume_m3, 2)
    D = np.diag(V2) - C.T @ L @ C / mu_0
    D = 0.5 * (D + D.T)
    chi = np.repeat(np.array([float(c.initial_susceptibility) for c in curves])[body], 2)
    factor = linalg.cho_factor(D + np.diag(V2 / chi), lower=False)
    n = 2 * body.size
    A_inv = linalg.cho_solve(factor, np.eye(n))
    return IronModel(design, level, np.asarray(axis_xy_m, dtype=float), mesh, curves, body, D, factor, 0.5 * (A_inv + A_inv.T),
                     np.zeros((0, n)), np.zeros(n), np.zeros((0, n)), np.zeros(n),
                     np.zeros((0, mesh.edges.start_m.shape[0])), st)


def build_iron_model(design: Design, level="coarse", curves=None) -> IronModel:
    """Build and factor the cell system of a design's cores (use :func:`iron_model` for the cache).

    Parameters
    ----------
    design : Design
        Its cores must be cylinders or rings on one axis parallel to z.
    level : str or dict
        Key of :data:`LEVELS`, or a dict with the same keys.
    curves : sequence, optional
        One B-H curve per core (:mod:`fields.physics.bh`); default: the Frohlich-Kennelly curve
        of each core's ``relative_permeability`` and ``saturation_polarization_T``.
    """
    from fields.physics.coils import coil_field_per_ampere_T
    from fields.physics.magnets import magnet_field_T

    if isinstance(level, dict):
        st, name = dict(level), "custom"
        missing = {"nr", "aspect", "grade", "face_points", "layers"} - set(st)
        if missing:
            raise input_error("iron_model", "level", "a dict with nr, aspect, grade, face_points, layers",
                              sorted(missing))
    elif level in LEVELS:
        st, name = dict(LEVELS[level]), level
    else:
        raise input_error("iron_model", "level", f"one of {', '.join(LEVELS)}", level)
    axis_xy = axis_of_cores(design)
    curves = _curves(design, curves)
    mesh, body = _core_mesh(design, st)
    model = cell_model(mesh, curves, body, axis_xy, st, design, name)
    C = mesh.incidence
    coil_sheets, mag_sheets = _coaxial_sheets(design, axis_xy, st["layers"])
    k = len(design.coils)
    b_coils = np.zeros((k, 2 * body.size))
    face_flux = np.zeros((k, mesh.edges.start_m.shape[0]))
    p, w = mesh.edges.points(st["face_points"])
    for i, (c, sh) in enumerate(zip(design.coils, coil_sheets)):
        if sh is not None:
            Phi = sheet_disc_flux_Wb(sh.radius_m, sh.half_height_m, sh.J_T, p[..., 0][..., None],
                                     p[..., 1][..., None] - sh.centre_z_m)
            face_flux[i] = np.einsum("eqs,eq->e", Phi, w)
            b_coils[i] = C.T @ face_flux[i]
        else:
            b_coils[i] = model.rhs_field(lambda q, c=c: coil_field_per_ampere_T(c, q, st["layers"])[None])[0]
    b_mag = np.zeros(2 * body.size)
    if design.magnets:
        if mag_sheets is not None:
            b_mag = model.rhs_sheets(mag_sheets)
        else:
            b_mag = model.rhs_field(lambda q: sum(magnet_field_T(m, q) for m in design.magnets)[None])[0]
    Jc = model.solve_linear(b_coils) if k else np.zeros((0, 2 * body.size))
    Jm = model.solve_linear(b_mag)
    return replace(model, b_coils=b_coils, b_magnets=b_mag, J_coils_T_per_A=Jc, J_magnets_T=Jm,
                   coil_face_flux=face_flux)


@functools.lru_cache(maxsize=8)
def _cached(design: Design, level: str) -> IronModel:
    return build_iron_model(design, level)


def iron_model(design: Design, level: str = "coarse", curves=None) -> IronModel:
    """The cell model of a design's cores, built once per design and level (cached).

    Designs given with explicit ``curves`` are not cached.
    """
    if curves is not None:
        return build_iron_model(design, level, curves)
    try:
        return _cached(design, level)
    except TypeError:  # an unhashable design
        return build_iron_model(design, level)
