"""Azimuthal harmonics ``m >= 1`` of the soft-iron cell solve (off-axis and tilted sources).

The ring cells of :mod:`fields.physics.iron` carry the axisymmetric (``m = 0``) polarization. An
excitation that is not axisymmetric about the cores' axis (a floater displaced sideways or
tilted, a coil or magnet off the axis) also drives harmonics ``m = 1, 2, ...`` of the cell
polarization. Per cell and harmonic there are two families of uniform (in ``r, z``) unknowns

    cos family: ``J = a cos(m phi) e_r - b sin(m phi) e_phi + c cos(m phi) e_z``,
    sin family: ``J = a sin(m phi) e_r + b cos(m phi) e_phi + c sin(m phi) e_z``

(the sin family is the cos family turned by ``pi / (2 m)``; for ``m = 1`` and ``a = b`` the cell is
uniformly polarized along x or y). Harmonics and families decouple on a body of revolution, so
each harmonic has one symmetric positive definite matrix, shared by both families, factored
once per design.

Formulation: magnetic charges. The cell's volume charge ``-div J = -(a - m b) cos(m phi) / r`` is
uniform in the meridian area measure ``dr dz``; its face charges ``J . n = (a n_r + c n_z) cos(m
phi)`` (``e_phi`` is tangent to every face) sit on the faces with the measure ``r dl``. The cell
demagnetizing operator in Galerkin form (Newell, Williams and Dunlop, J. Geophys. Res. 98 (1993)
9551, extended to Fourier modes) is

    ``D_ij = -int phi_i . mu0 H(phi_j) dV = (1 / 4 pi) int int q_i q_j / |x - x'| dV dV'
           = (1/4) int int rho_i rho_j g_m dmu dmu'``,

``g_m`` the ``m``-th Fourier coefficient of the Coulomb kernel (:mod:`fields.physics.iron_toroidal`),
``rho`` the meridian charge densities above. The charge form keeps every unknown's field a
scalar kernel (the Amperian form would carry volume currents in r and z for m >= 1), and the
same kernel with its gradient gives the field at observers. ``D`` is a Gram matrix of the
Coulomb energy, so it is symmetric positive semi-definite; with the mass ``int phi_i . phi_i dV
= V_i / 2`` the linear system is ``A = diag(V / (2 chi)) + D``, ``A J = b``,
``b_i = int B_applied . phi_i dV``.

Right-hand sides of a field sampled on a uniform azimuthal rule come from its discrete Fourier
coefficients (spectrally accurate for the smooth field of sources outside the cores; Trefethen
and Weideman, SIAM Rev. 56 (2014) 385). Saturation: harmonics are solved linearized about the
axisymmetric saturated state (the local inverse differential tensor ``dh/dJ`` of
:func:`fields.physics.bh.field_and_inverse_tensor` at the ``m = 0`` polarization): exact for
small harmonics, approximate when the harmonics themselves drive a cell into saturation.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy import linalg

from fields.errors import InputError
from fields.physics.bh import field_and_inverse_tensor
from fields.physics.iron import IronModel
from fields.physics.parallel import map_chunks
from fields.physics.iron_toroidal import (
    fan_rule,
    quad_rule,
    ring_kernel,
    ring_kernel_gradient,
    segment_rule,
    split_segment_rule,
)

#: default highest harmonic
DEFAULT_HARMONICS = 3
#: pairs whose bounding circles are closer than NEAR_RATIO (MID_RATIO) times the larger radius use
#: the singular rule (the mid order); farther pairs the far order
NEAR_RATIO = 1.0
MID_RATIO = 4.0
#: Gauss orders: far and mid tensor rules, outer rule and fan/split rule of near pairs
FAR_ORDER = 3
MID_ORDER = 5
NEAR_OUTER = 7
NEAR_INNER = 7
#: outer rule of near pairs graded toward the element's ends (the inner integral has log kinks there)
NEAR_GRADED = True
#: Gauss order per cell side (and angles per harmonic) of the right-hand-side volume rule
RHS_ORDER = 4
RHS_MIN_ANGLES = 16
#: Gauss order of the source rule for the field at observers (cells: squared)
FIELD_ORDER = 2
#: observers closer to the axis than this fraction of the mesh's largest radius are moved onto
#: it by this much (the field is regular there; the kernel's gradient is not defined on the axis)
AXIS_CLAMP = 1e-9


# --------------------------------------------------------------------------- elements


@dataclass(frozen=True)
class _Elements:
    """Meridian charge elements: the cells (area measure) then the faces (``r dl``)."""

    polys: np.ndarray  # (c, 4, 2)
    s0: np.ndarray  # (e, 2)
    s1: np.ndarray
    centre: np.ndarray  # (E, 2)
    radius: np.ndarray  # (E,)

    @property
    def cells(self) -> int:
        return self.polys.shape[0]

    @property
    def count(self) -> int:
        return self.centre.shape[0]


def _elements(model: IronModel) -> _Elements:
    m = model.mesh
    P = m.vertices_m[m.cells]
    s0, s1 = m.edges.start_m, m.edges.end_m
    cc = P.mean(axis=1)
    rc = np.max(np.linalg.norm(P - cc[:, None, :], axis=-1), axis=1)
    fc = 0.5 * (s0 + s1)
    rf = 0.5 * np.linalg.norm(s1 - s0, axis=1)
    return _Elements(P, s0, s1, np.concatenate((cc, fc)), np.concatenate((rc, rf)))


def _element_rule(el: _Elements, idx: np.ndarray, n: int, graded: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Points (len(idx), g, 2) and weights of elements idx, all of one kind (cells or faces)."""
    c = el.cells
    if np.all(idx < c):
        return quad_rule(el.polys[idx], n, graded)
    return segment_rule(el.s0[idx - c], el.s1[idx - c], n, graded)


def charge_matrix(model: IronModel, m: int) -> np.ndarray:
    """Meridian charge densities (E, 3c) of the cos-family unknowns ``(a, b, c)`` per cell.

    Cells (first c rows): ``-(a - m b)`` per unit ``dr dz``; faces: ``a n_r + c n_z`` per unit
    ``r dl``, summed over the cells on either side (outward normals).
    """
    mesh = model.mesh
    c = model.cells
    C = mesh.incidence  # mu0 K_phi = J_z n_r - J_r n_z:  C[e, 2i] = -n_z, C[e, 2i + 1] = n_r
    e = C.shape[0]
    Q = np.zeros((c + e, 3 * c))
    i = np.arange(c)
    Q[i, 3 * i] = -1.0
    Q[i, 3 * i + 1] = float(m)
    Q[c:, 0::3] = C[:, 1::2]
    Q[c:, 2::3] = -C[:, 0::2]
    return Q


def _pair_classes(el: _Elements):
    E = el.count
    d = np.linalg.norm(el.centre[:, None, :] - el.centre[None, :, :], axis=-1)
    gap = d - el.radius[:, None] - el.radius[None, :]
    big = np.maximum(el.radius[:, None], el.radius[None, :])
    near = gap < NEAR_RATIO * big
    mid = ~near & (gap < MID_RATIO * big)
    iu = np.triu(np.ones((E, E), dtype=bool))
    return near, mid & iu, ~near & ~mid & iu


#: relative size of the last refinement step (largest entry over the solution's largest) and the
#: most refinement steps of :meth:`HarmonicIron.solve_linearized_many`
LINEARIZED_RTOL = 1e-12
LINEARIZED_STEPS = 25

#: element kernel matrices by mesh geometry: they depend on the cells and faces only (not on the
#: B-H curve, the coils or the floater), so designs of a sweep that share their cores share them
_KERNEL_CACHE: dict = {}
_KERNEL_CACHE_SIZE = 4


def element_kernel_matrices(model: IronModel, mmax: int) -> np.ndarray:
    """``K_ab = int_a int_b g_m dmu dmu'`` (mmax+1, E, E) over all element pairs, m = 0..mmax.

    Cached by the mesh's geometry (vertex coordinates of cells and faces, exact bytes) and mmax;
    the returned array is read-only."""
    el = _elements(model)
    key = (int(mmax), el.polys.tobytes(), el.s0.tobytes(), el.s1.tobytes())
    hit = _KERNEL_CACHE.get(key)
    if hit is None:
        hit = _element_kernel_matrices(el, mmax)
        hit.flags.writeable = False
        if len(_KERNEL_CACHE) >= _KERNEL_CACHE_SIZE:
            _KERNEL_CACHE.pop(next(iter(_KERNEL_CACHE)))
        _KERNEL_CACHE[key] = hit
    return hit


def _element_kernel_matrices(el: _Elements, mmax: int) -> np.ndarray:
    E, c = el.count, el.cells
    K = np.zeros((mmax + 1, E, E))
    near, mid, far = _pair_classes(el)
    kinds = (np.arange(c), np.arange(c, E))
    # tensor rules for mid and far pairs, block by element kind; the pairs are independent, so
    # each block's pair list is split over the cores (fields.physics.parallel)
    for mask, order in ((far, FAR_ORDER), (mid, MID_ORDER)):
        rules = [_element_rule(el, k, order) for k in kinds]
        for ia, ka in enumerate(kinds):
            pa, wa = rules[ia]
            for ib, kb in enumerate(kinds):
                pb, wb = rules[ib]
                I, J = np.nonzero(mask[np.ix_(ka, kb)])

                def pairs(sl, I=I, J=J, pa=pa, wa=wa, pb=pb, wb=wb):
                    out = np.empty((mmax + 1, sl.stop - sl.start))
                    for s in range(sl.start, sl.stop, 4000):
                        i, j = I[s:min(s + 4000, sl.stop)], J[s:min(s + 4000, sl.stop)]
                        g = ring_kernel(pa[i][:, :, None, 0], pa[i][:, :, None, 1], pb[j][:, None, :, 0],
                                        pb[j][:, None, :, 1], mmax)
                        out[:, s - sl.start:s - sl.start + i.size] = np.einsum("mpab,pa,pb->mp", g, wa[i], wb[j])
                    return out

                if I.size:
                    K[:, ka[I], kb[J]] = np.concatenate(map_chunks(pairs, I.size, min_items_per_worker=4000), axis=1)
    # near pairs (both orders): outer Gauss rule, inner rule around each outer point; split by
    # column over the cores
    outer = [_element_rule(el, k, NEAR_OUTER, NEAR_GRADED) for k in kinds]

    order = np.random.default_rng(0).permutation(E)  # cells cost far more than faces: mix them

    def columns(sl):
        out = []
        for b in order[sl]:
            A = np.nonzero(near[:, b])[0]
            for ka_i, ka in enumerate(kinds):
                a = A[np.isin(A, ka)]
                if a.size == 0:
                    continue
                pa, wa = outer[ka_i]
                loc = a - (0 if ka_i == 0 else c)
                X = pa[loc].reshape(-1, 2)
                W = wa[loc].reshape(-1)
                if b < c:
                    Y, Wy = fan_rule(X, el.polys[b], NEAR_INNER)
                else:
                    Y, Wy = split_segment_rule(X, el.s0[b - c], el.s1[b - c], NEAR_INNER)
                g = ring_kernel(X[:, None, 0], X[:, None, 1], Y[..., 0], Y[..., 1], mmax)
                inner = np.einsum("mpy,py->mp", g, Wy) * W[None]
                out.append((a, b, inner.reshape(mmax + 1, a.size, -1).sum(axis=-1)))
        return out

    for part in map_chunks(columns, E, min_items_per_worker=64):
        for a, b, v in part:
            K[:, a, b] = v
    # mirror the tensor-rule triangle; near pairs were done in both orders: average them
    upper = mid | far
    T = np.where(upper[None], K, 0.0)
    T = T + np.swapaxes(np.where((upper & ~np.eye(E, dtype=bool))[None], K, 0.0), 1, 2)
    N = np.where(near[None], K, 0.0)
    return T + 0.5 * (N + np.swapaxes(N, 1, 2))


# --------------------------------------------------------------------------- the harmonic model


@dataclass(frozen=True, eq=False)
class HarmonicIron:
    """Factored harmonic systems ``m = 1..M`` of an :class:`fields.physics.iron.IronModel`.

    Unknowns per harmonic and family: ``(a, b, c)`` per cell, ordered cell by cell (3c); the
    families are ``0`` (cos) and ``1`` (sin), see the module notes.

    Attributes
    ----------
    model : IronModel
    harmonics : int
        M, the highest harmonic.
    D : ndarray, shape (M, 3c, 3c)
        Cell demagnetizing operator of each harmonic (m^3).
    factors : tuple
        Cholesky factor of ``A_m = diag(V / (2 chi)) + D_m`` per harmonic.
    mass_m3 : ndarray, shape (3c,)
        ``int phi_i . phi_i dV = V / 2``.
    source_matrix : ndarray, shape (M, S, 3c)
        Charge (T m^2, divided by 4 pi) at each of S source points per unit unknown: the field rule.
    source_rz_m : ndarray, shape (S, 2)
    b_coils, J_coils_T_per_A : ndarray, shape (k, M, 2, 3c)
        Harmonic right-hand sides per ampere of the coils that are not coaxial with the cores (zero
        for coaxial coils) and their linear responses.
    b_magnets, J_magnets_T : ndarray, shape (M, 2, 3c)
        The same for the fixed magnets.
    """

    model: IronModel
    harmonics: int
    D: np.ndarray
    factors: tuple
    mass_m3: np.ndarray
    source_matrix: np.ndarray
    source_rz_m: np.ndarray
    b_coils: np.ndarray
    J_coils_T_per_A: np.ndarray
    b_magnets: np.ndarray
    J_magnets_T: np.ndarray

    @property
    def cells(self) -> int:
        return self.model.cells

    # ----------------------------------------------------------------- right-hand sides

    def angles(self) -> int:
        """Azimuthal nodes of the right-hand-side rule (uniform, spectrally accurate)."""
        return max(RHS_MIN_ANGLES, 4 * self.harmonics + 4)

    def sample_points(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """World points (c, g, a, 3), weights ``r dr dz dphi`` (c, g) (m^3) and angles (a,) of the rule."""
        m = self.model
        X, w = quad_rule(m.mesh.vertices_m[m.mesh.cells], RHS_ORDER)
        na = self.angles()
        phi = 2.0 * np.pi * (np.arange(na) + 0.5) / na
        r = X[..., 0][..., None]
        ax = m.axis_xy_m
        pts = np.stack((ax[0] + r * np.cos(phi), ax[1] + r * np.sin(phi),
                        np.broadcast_to(X[..., 1][..., None], r.shape[:-1] + (na,))), axis=-1)
        return pts, w * X[..., 0] * (2.0 * np.pi / na), phi

    def rhs_of_samples(self, B_T: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Right-hand sides of a field sampled on :meth:`sample_points`: B (n, c, g, a, 3) ->
        ``m = 0`` (n, 2c) (ordered as :meth:`IronModel.rhs_field`) and harmonics (n, M, 2, 3c)."""
        _, w, phi = self.sample_points()
        cph, sph = np.cos(phi), np.sin(phi)
        Br = B_T[..., 0] * cph + B_T[..., 1] * sph
        Bp = -B_T[..., 0] * sph + B_T[..., 1] * cph
        Bz = B_T[..., 2]
        n = B_T.shape[0]
        c = self.cells
        b0 = np.stack((np.einsum("ncga,cg->nc", Br, w), np.einsum("ncga,cg->nc", Bz, w)), axis=-1).reshape(n, -1)
        M = self.harmonics
        mm = np.arange(1, M + 1)
        cm = np.cos(mm[:, None] * phi[None])  # (M, a)
        sm = np.sin(mm[:, None] * phi[None])
        bh = np.empty((n, M, 2, c, 3))
        for F, fam in ((Br, 0), (Bz, 2)):
            Fw = np.einsum("ncga,cg->nca", F, w)
            bh[:, :, 0, :, fam] = np.einsum("nca,ma->nmc", Fw, cm)
            bh[:, :, 1, :, fam] = np.einsum("nca,ma->nmc", Fw, sm)
        Pw = np.einsum("ncga,cg->nca", Bp, w)
        bh[:, :, 0, :, 1] = -np.einsum("nca,ma->nmc", Pw, sm)
        bh[:, :, 1, :, 1] = np.einsum("nca,ma->nmc", Pw, cm)
        return b0, bh.reshape(n, M, 2, 3 * c)

    def rhs_field(self, field_T) -> tuple[np.ndarray, np.ndarray]:
        """Right-hand sides of ``field_T(points (p, 3)) -> (n, p, 3)`` (sources outside the cores)."""
        pts, _, _ = self.sample_points()
        B = np.asarray(field_T(pts.reshape(-1, 3)), dtype=float)
        return self.rhs_of_samples(B.reshape((-1,) + pts.shape))

    # ----------------------------------------------------------------- solves

    def solve_linear(self, bh) -> np.ndarray:
        """Linear-iron harmonics ``A_m^-1 b_m``: bh (..., M, 2, 3c) -> same shape."""
        bh = np.asarray(bh, dtype=float)
        out = np.empty_like(bh)
        for m in range(self.harmonics):
            x = bh[..., m, :, :]
            out[..., m, :, :] = linalg.cho_solve(self.factors[m], x.reshape(-1, x.shape[-1]).T).T.reshape(x.shape)
        return out

    def solve_linearized_many(self, bh, J0s_T) -> np.ndarray:
        """Harmonics linearized about n saturated axisymmetric states: ``(mass dh/dJ + D_m) J = b``
        for bh (n, M, 2, 3c) and J0s (n, c, 2).

        ``dh/dJ`` is the inverse differential tensor of each cell's curve at ``J0`` (3 x 3 in
        ``(e_r, e_phi, e_z)``); approximate where the harmonics are not small against ``J0``.

        The poses of a stencil or a short family differ little, so one Cholesky factor per
        harmonic (at the first state) preconditions all of them: each solve is iterative
        refinement with that factor (x += A0^-1 (b - A_i x), a stationary iteration that
        converges when A0^-1 A_i is near the identity; Golub and Van Loan, Matrix Computations,
        4th ed., 2013, sec. 3.5.3 and 11.2) until a step is below LINEARIZED_RTOL of the
        solution; a state for which it contracts slowly (a step over half the last) gets its own
        factor. The answers equal per-pose factorisations to
        that tolerance.
        """
        m0 = self.model
        c = self.cells
        bh = np.asarray(bh, dtype=float)
        n = bh.shape[0]
        out = np.zeros_like(bh)
        if n == 0:
            return out
        J0s = np.asarray(J0s_T, dtype=float).reshape(n, c, 2)
        blks = np.empty((n, c, 3, 3))
        for i in range(n):
            J3 = np.zeros((c, 3))
            J3[:, 0], J3[:, 2] = J0s[i, :, 0], J0s[i, :, 1]
            Ti = np.empty((c, 3, 3))
            for k, cv in enumerate(m0.curves):
                idx = np.nonzero(m0.cell_curve == k)[0]
                _, Ti[idx] = field_and_inverse_tensor(cv, J3[idx])
            blks[i] = 0.5 * m0.mesh.volume_m3[:, None, None] * Ti
        idx = np.arange(c)

        def matrix(m, blk):
            A = self.D[m].copy().reshape(c, 3, c, 3)
            A[idx, :, idx, :] += blk
            return A.reshape(3 * c, 3 * c)

        for m in range(self.harmonics):
            f0 = linalg.cho_factor(matrix(m, blks[0]), check_finite=False)
            for i in range(n):
                b = bh[i, m].reshape(-1, 3 * c).T  # (3c, 2)
                if not np.any(b):
                    continue
                x = linalg.cho_solve(f0, b, check_finite=False)
                if i and not np.array_equal(blks[i], blks[0]):
                    Dm = self.D[m]
                    last, done = np.inf, False
                    for _ in range(LINEARIZED_STEPS):
                        Ax = Dm @ x + np.einsum("cab,cbf->caf", blks[i], x.reshape(c, 3, -1)).reshape(3 * c, -1)
                        dx = linalg.cho_solve(f0, b - Ax, check_finite=False)
                        x = x + dx
                        size = float(np.max(np.abs(dx)))
                        if size <= LINEARIZED_RTOL * float(np.max(np.abs(x))):
                            done = True
                            break
                        if size > 0.5 * last:  # contracting too slowly: this state needs its own factor
                            break
                        last = size
                    if not done:
                        x = linalg.cho_solve(linalg.cho_factor(matrix(m, blks[i]), check_finite=False), b,
                                             check_finite=False)
                out[i, m] = x.T.reshape(bh.shape[2:])
        return out

    # ----------------------------------------------------------------- fields

    def field_T(self, Jh, points_m) -> np.ndarray:
        """B (T) of harmonic polarizations Jh (s, M, 2, 3c) at world points (q, 3), per harmonic:
        shape (s, M, q, 3). Points must keep clear of the cores by about a cell size."""
        Jh = np.asarray(Jh, dtype=float)
        Jh = Jh.reshape((-1,) + Jh.shape[-3:])
        p = np.asarray(points_m, dtype=float).reshape(-1, 3)
        ax = self.model.axis_xy_m
        x, y, z = p[:, 0] - ax[0], p[:, 1] - ax[1], p[:, 2]
        rho = np.hypot(x, y)
        phi = np.arctan2(y, x)
        rho = np.maximum(rho, AXIS_CLAMP * float(self.source_rz_m[:, 0].max()))
        M = self.harmonics
        ns, nq = Jh.shape[0], p.shape[0]
        out = np.zeros((ns, M, nq, 3))
        if nq == 0:
            return out
        W = np.einsum("msx,nmfx->nmfs", self.source_matrix, Jh)  # (s, M, 2, S) charges at source points
        src = self.source_rz_m
        per = max(1, 300_000 // src.shape[0])
        for i0 in range(0, nq, per):
            sl = slice(i0, i0 + per)
            g, gr, gz = ring_kernel_gradient(rho[sl][:, None], z[sl][:, None], src[None, :, 0], src[None, :, 1], M)
            U = np.einsum("mqs,nmfs->nmfq", g[1:], W)
            Ur = np.einsum("mqs,nmfs->nmfq", gr[1:], W)
            Uz = np.einsum("mqs,nmfs->nmfq", gz[1:], W)
            mm = np.arange(1, M + 1)[:, None]
            ph = phi[sl][None]
            cm, sm = np.cos(mm * ph), np.sin(mm * ph)  # (M, q)
            Brho = -(cm * Ur[:, :, 0] + sm * Ur[:, :, 1])
            Bphi = (mm / rho[sl][None]) * (sm * U[:, :, 0] - cm * U[:, :, 1])
            Bz = -(cm * Uz[:, :, 0] + sm * Uz[:, :, 1])
            co, so = np.cos(phi[sl]), np.sin(phi[sl])
            out[:, :, sl, 0] = Brho * co - Bphi * so
            out[:, :, sl, 1] = Brho * so + Bphi * co
            out[:, :, sl, 2] = Bz
        return out

    def cell_polarization_T(self, J0_T, Jh, angles: int | None = None) -> np.ndarray:
        """Cell polarizations ``(J_r, J_phi, J_z)`` (..., c, a, 3) at ``a`` uniform angles from the
        ``m = 0`` part J0 (..., c, 2) and the harmonics Jh (..., M, 2, 3c)."""
        a = self.angles() if angles is None else int(angles)
        phi = 2.0 * np.pi * np.arange(a) / a
        c = self.cells
        J0 = np.asarray(J0_T, dtype=float)
        H = np.asarray(Jh, dtype=float)
        H = H.reshape(H.shape[:-1] + (c, 3))  # (..., M, 2, c, 3)
        mm = np.arange(1, self.harmonics + 1)[:, None]
        cm, sm = np.cos(mm * phi[None]), np.sin(mm * phi[None])  # (M, a)
        Jr = J0[..., 0][..., None] + np.einsum("...mc,ma->...ca", H[..., 0, :, 0], cm) + np.einsum(
            "...mc,ma->...ca", H[..., 1, :, 0], sm)
        Jp = -np.einsum("...mc,ma->...ca", H[..., 0, :, 1], sm) + np.einsum("...mc,ma->...ca", H[..., 1, :, 1], cm)
        Jz = J0[..., 1][..., None] + np.einsum("...mc,ma->...ca", H[..., 0, :, 2], cm) + np.einsum(
            "...mc,ma->...ca", H[..., 1, :, 2], sm)
        return np.stack((Jr, Jp, Jz), axis=-1)


def _build(model: IronModel, harmonics: int) -> HarmonicIron:
    from dataclasses import replace as _replace

    from fields.physics.coils import coil_field_per_ampere_T
    from fields.physics.iron import _coaxial_sheets
    from fields.physics.magnets import magnet_field_T

    M = int(harmonics)
    if M < 1:
        raise InputError(f"harmonic_iron: harmonics must be an integer >= 1; got {harmonics!r}.")
    c = model.cells
    K = element_kernel_matrices(model, M)
    mass = np.repeat(0.5 * model.mesh.volume_m3, 3)
    chi = np.repeat(np.array([float(cv.initial_susceptibility) for cv in model.curves])[model.cell_curve], 3)
    el = _elements(model)
    kinds = (np.arange(el.cells), np.arange(el.cells, el.count))
    pts, wts, owner = [], [], []
    for k in kinds:
        p, w = _element_rule(el, k, FIELD_ORDER)
        pts.append(p.reshape(-1, 2))
        wts.append(w.reshape(-1))
        owner.append(np.repeat(k, p.shape[1]))
    src, sw, own = np.concatenate(pts), np.concatenate(wts), np.concatenate(owner)
    keep = src[:, 0] > 0.0
    src, sw, own = src[keep], sw[keep], own[keep]
    Ds, facs, S = [], [], []
    for m in range(1, M + 1):
        Q = charge_matrix(model, m)
        D = 0.25 * Q.T @ K[m] @ Q
        D = 0.5 * (D + D.T)
        Ds.append(D)
        facs.append(linalg.cho_factor(D + np.diag(mass / chi)))
        S.append(Q[own] * (sw / (4.0 * np.pi))[:, None])
    proto = HarmonicIron(model, M, np.array(Ds), tuple(facs), mass, np.array(S), src,
                         np.zeros((0, M, 2, 3 * c)), np.zeros((0, M, 2, 3 * c)), np.zeros((M, 2, 3 * c)),
                         np.zeros((M, 2, 3 * c)))
    d = model.design
    if d is None:
        return proto
    coil_sheets, mag_sheets = _coaxial_sheets(d, model.axis_xy_m, model.settings["layers"])
    k = len(d.coils)
    bc = np.zeros((k, M, 2, 3 * c))
    for i, (coil, sh) in enumerate(zip(d.coils, coil_sheets)):
        if sh is None:  # off the axis or tilted: it drives harmonics
            bc[i] = proto.rhs_field(lambda q, coil=coil: coil_field_per_ampere_T(coil, q, model.settings["layers"])[None])[1][0]
    bm = np.zeros((M, 2, 3 * c))
    if d.magnets and mag_sheets is None:
        bm = proto.rhs_field(lambda q: sum(magnet_field_T(mg, q) for mg in d.magnets)[None])[1][0]
    return _replace(proto, b_coils=bc, J_coils_T_per_A=proto.solve_linear(bc) if k else bc, b_magnets=bm,
                    J_magnets_T=proto.solve_linear(bm))


@functools.lru_cache(maxsize=8)
def _cached(model: IronModel, harmonics: int) -> HarmonicIron:
    return _build(model, harmonics)


def harmonic_iron(model: IronModel, harmonics: int = DEFAULT_HARMONICS) -> HarmonicIron:
    """The factored harmonic systems ``m = 1..harmonics`` of a cell model (cached per model).

    Parameters
    ----------
    model : IronModel
        From :func:`fields.physics.iron.iron_model` or :func:`fields.physics.iron.cell_model`.
    harmonics : int
        Highest harmonic M (>= 1). The size of the last harmonic's field is the truncation
        estimate reported by :func:`fields.physics.iron_basis.iron_field_basis`.

    Returns
    -------
    HarmonicIron
    """
    if not isinstance(harmonics, (int, np.integer)) or harmonics < 1:
        raise InputError(f"harmonic_iron: harmonics must be an integer >= 1; got {harmonics!r}.")
    return _cached(model, int(harmonics))
