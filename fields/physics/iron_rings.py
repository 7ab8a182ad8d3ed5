"""Ring cells: the axisymmetric kernels of the soft-iron cell solve.

A body of revolution is cut into ring cells whose cross-sections are polygons in the ``(r, z)``
half-plane. A cell carries a uniform polarization ``J = J_r e_r + J_z e_z`` (T). Its bound currents
(Amperian equivalence, ``K = M x n``, ``M = J / mu0``) are azimuthal sheets on its faces only: the
volume current ``curl M`` vanishes because ``e_r = grad r`` and ``e_z`` are curl free. On a face
with outward normal ``n`` (in the half-plane) the sheet carries ``K_phi = M_z n_r - M_r n_z``. So
every field of the cells is the field of azimuthal sheets on straight segments of the half-plane
("edges"), and every Galerkin (cell-mean) test is a flux: for a test polarization ``phi`` of a
cell, ``int B . phi dV = int A . curl phi dV = sum over the cell's faces of the sheet-weighted
line integral of 2 pi r A_phi``, and ``2 pi r A_phi(r, z)`` is the flux ``Phi`` through the
coaxial disc of radius ``r`` at height ``z``.

With ``C`` the map from cell polarizations to edge sheet currents (``K = C J / mu0``) and
``L_ef = int_e int_f M(s, t) dl_s dl_t`` the mutual inductance of unit sheets on two edges
(Maxwell's coaxial-loop formula integrated over both segments), the Galerkin interaction matrix
is ``G = C^T L C / mu0``: symmetric, built once per mesh.

Quadrature of ``L``: the loop mutual inductance ``M(a, b, d)`` is smooth except where the two
loops coincide; there ``M = -mu0 (a + b)/2 ln(delta) + R`` with ``delta`` the distance of the
loops in the half-plane and ``R`` continuous (``M ~ mu0 a [ln(8 a / delta) - 2]``, Maxwell,
A Treatise on Electricity and Magnetism, 1873, art. 705). Far pairs use a plain tensor
Gauss-Legendre rule; near and touching pairs integrate the logarithm with the inner segment in
closed form and the outer by Gauss-Legendre after Sidi's sin^2 transformation (Sidi, Int. Ser.
Numer. Math. 112 (1993) 359), and ``R`` by the same transformed tensor rule; a segment with
itself is integrated in the difference variable ``u = s - t`` so that the weak singularity lies
on the rule's end.
"""

from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np
from scipy import special
from scipy.constants import mu_0

from fields.physics.checks import input_error

#: pairs of edges per vectorised block of the inductance quadrature (bounds temporary memory)
PAIR_CHUNK = 40_000
#: pairs closer than this times the longer edge use the singular (log-subtracted) rule
NEAR_RATIO = 1.0
#: pairs closer than this times the longer edge (and not near) use MID_ORDER, farther FAR_ORDER
MID_RATIO = 3.0
#: Gauss orders: near pairs (transformed rule), mid and far pairs (plain tensor rule)
NEAR_ORDER = 16
MID_ORDER = 6
FAR_ORDER = 3
#: near pairs longer than this times their smallest radius are halved (at most MAX_SPLITS times)
SPLIT_RATIO = 1.0
MAX_SPLITS = 8
#: ... but not below this fraction of the mesh's largest radius
SPLIT_FLOOR = 0.02
#: below this parameter m = k^2 Maxwell's formula is summed as its hypergeometric series
SERIES_M = 0.05


# --------------------------------------------------------------------------- loop kernels


@functools.lru_cache(maxsize=1)
def _series_coefficients(n: int = 14) -> np.ndarray:
    """Coefficients c_j of (1 - m/2) K(m) - E(m) = (pi/2) sum_j c_j m^j (hypergeometric series of K, E)."""
    cK = np.empty(n)
    cE = np.empty(n)
    a = b = 1.0
    for j in range(n):
        if j:
            a *= (j - 0.5) / j
            b *= (j - 1.5) / j
        cK[j] = a * a
        cE[j] = a * b
    c = cK - cE
    c[1:] -= 0.5 * cK[:-1]
    return c


def loop_mutual_H(a_m, b_m, d_m, delta_m=None) -> np.ndarray:
    """Mutual inductance (H) of coaxial circular loops of radii ``a``, ``b`` at axial distance ``d``.

    Notes
    -----
    ``M = mu0 sqrt(a b) (2 / k) [(1 - k^2 / 2) K(k) - E(k)]``, ``k^2 = 4 a b / ((a + b)^2 + d^2)``
    (Maxwell, A Treatise on Electricity and Magnetism, 1873, art. 701). ``K`` comes from the
    complementary parameter (``scipy.special.ellipkm1``) so close loops keep their digits; for
    ``k^2 < SERIES_M`` the bracket is the hypergeometric series of ``K`` and ``E`` (it cancels to
    ``pi k^4 / 32`` otherwise). Zero when a radius is zero.

    ``delta_m`` (optional) is ``hypot(a - b, d)`` when the caller knows it more accurately than
    the difference of the radii.

    Examples
    --------
    >>> round(float(loop_mutual_H(0.1, 0.1, 0.1)) * 1e9, 3)  # nH
    49.408
    """
    a, b, d = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (a_m, b_m, d_m)))
    den = (a + b) ** 2 + d * d
    with np.errstate(divide="ignore", invalid="ignore"):
        m1 = (np.hypot(a - b, d) if delta_m is None else np.asarray(delta_m, dtype=float)) ** 2 / den
        m = np.minimum(4.0 * a * b / den, 1.0)
    out = np.zeros(a.shape)
    big = m >= SERIES_M
    if np.any(big):
        mb, k = m[big], np.sqrt(m[big])
        out[big] = (2.0 / k) * ((1.0 - 0.5 * mb) * special.ellipkm1(m1[big]) - special.ellipe(mb))
    small = (m > 0.0) & ~big
    if np.any(small):
        ms = m[small]
        out[small] = (2.0 / np.sqrt(ms)) * 0.5 * np.pi * np.polynomial.polynomial.polyval(ms, _series_coefficients())
    return mu_0 * np.sqrt(a * b) * out


def _loop_mutual_regular_H(a, b, d, delta=None) -> np.ndarray:
    """``M + mu0 (a + b)/2 ln(delta)``, ``delta = hypot(a - b, d)``: continuous where the loops meet."""
    delta = np.hypot(a - b, d) if delta is None else delta
    pos = delta > 0.0
    out = np.empty(np.shape(delta))
    with np.errstate(divide="ignore"):
        out[pos] = (loop_mutual_H(a[pos], b[pos], d[pos], delta[pos])
                    + mu_0 * 0.5 * (a[pos] + b[pos]) * np.log(delta[pos]))
    ap = a[~pos]
    with np.errstate(divide="ignore", invalid="ignore"):
        out[~pos] = np.where(ap > 0.0, mu_0 * ap * (np.log(8.0 * ap) - 2.0), 0.0)
    return out


# --------------------------------------------------------------------------- quadrature rules


@functools.lru_cache(maxsize=16)
def _gauss01(n: int) -> tuple[np.ndarray, np.ndarray]:
    x, w = np.polynomial.legendre.leggauss(int(n))
    return 0.5 * (x + 1.0), 0.5 * w


@functools.lru_cache(maxsize=16)
def _sidi01(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre on [0, 1] after Sidi's sin^2 map t -> t - sin(2 pi t)/(2 pi) (weights include the
    map's derivative 1 - cos(2 pi t), which vanishes to second order at both ends)."""
    t, w = _gauss01(n)
    return t - np.sin(2.0 * np.pi * t) / (2.0 * np.pi), w * (1.0 - np.cos(2.0 * np.pi * t))


# --------------------------------------------------------------------------- segments


@dataclass(frozen=True)
class Edges:
    """Straight segments of the ``(r, z)`` half-plane carrying azimuthal sheets.

    Attributes
    ----------
    start_m, end_m : ndarray, shape (e, 2)
        End points ``(r, z)`` (m), ``r >= 0``.
    """

    start_m: np.ndarray
    end_m: np.ndarray

    @property
    def length_m(self) -> np.ndarray:
        return np.linalg.norm(self.end_m - self.start_m, axis=1)

    @property
    def tangent(self) -> np.ndarray:
        return (self.end_m - self.start_m) / self.length_m[:, None]

    def points(self, n: int) -> tuple[np.ndarray, np.ndarray]:
        """Gauss-Legendre points (e, n, 2) and line weights (e, n) (m) on every edge."""
        t, w = _gauss01(n)
        p = self.start_m[:, None, :] + t[None, :, None] * (self.end_m - self.start_m)[:, None, :]
        return p, w[None, :] * self.length_m[:, None]


def _point_segment_distance(p, a, b):
    ab = b - a
    t = np.clip(np.einsum("...i,...i->...", p - a, ab) / np.einsum("...i,...i->...", ab, ab), 0.0, 1.0)
    return np.linalg.norm(p - (a + t[..., None] * ab), axis=-1)


def _pair_distance(s0, s1, t0, t1) -> np.ndarray:
    """Distance (p,) between segments s0-s1 and t0-t1 (p, 2) that do not cross."""
    return np.minimum(np.minimum(_point_segment_distance(s0, t0, t1), _point_segment_distance(s1, t0, t1)),
                      np.minimum(_point_segment_distance(t0, s0, s1), _point_segment_distance(t1, s0, s1)))


def _log_moment(x, q0, tau, ell) -> np.ndarray:
    """``int_0^ell (r_x + r_t)/2 ln|x - t| dl_t`` along the segment q0 + t tau (closed form).

    x (..., 2); q0, tau (..., 2); ell (...). With ``s`` along the segment from the foot of ``x``
    and ``v`` its distance to the line: ``int ln hypot(s, v) ds = s ln rho - s + v atan(s/v)`` and
    ``int s ln hypot(s, v) ds = rho^2 ln(rho)/2 - s^2/4``.
    """
    dx = x - q0
    u = np.einsum("...i,...i->...", dx, tau)
    v = np.abs(dx[..., 0] * tau[..., 1] - dx[..., 1] * tau[..., 0])
    c0 = 0.5 * (x[..., 0] + q0[..., 0] + u * tau[..., 0])
    c1 = 0.5 * tau[..., 0]

    def F(s):
        rho2 = s * s + v * v
        with np.errstate(divide="ignore", invalid="ignore"):
            lr = np.where(rho2 > 0.0, 0.5 * np.log(np.where(rho2 > 0.0, rho2, 1.0)), 0.0)
        f0 = s * lr - s + v * np.arctan2(s, v)
        f1 = 0.5 * rho2 * lr - 0.25 * s * s
        return c0 * f0 + c1 * f1

    return F(ell - u) - F(-u)


def _along(p0, p1, t):
    """Points (p, n, 2) at fractions t (n,) of segments p0-p1 (p, 2)."""
    return p0[:, None, :] + t[None, :, None] * (p1 - p0)[:, None, :]


def _tensor_pairs(s0, s1, t0, t1, ts, ws, regular: bool) -> np.ndarray:
    """Tensor rule ``sum_ab w_a w_b K(s_a, t_b) ell_s ell_t``, K = M or its regular part."""
    ps, pt = _along(s0, s1, ts), _along(t0, t1, ts)
    shape = (s0.shape[0], ts.size, ts.size)
    a = np.broadcast_to(ps[:, :, None, 0], shape).ravel()
    b = np.broadcast_to(pt[:, None, :, 0], shape).ravel()
    d = (ps[:, :, None, 1] - pt[:, None, :, 1]).ravel()
    K = (_loop_mutual_regular_H(a, b, d) if regular else loop_mutual_H(a, b, d)).reshape(shape)
    ls, lt = np.linalg.norm(s1 - s0, axis=1), np.linalg.norm(t1 - t0, axis=1)
    return np.einsum("pab,a,b->p", K, ws, ws) * ls * lt


def _near_pairs(s0, s1, t0, t1) -> np.ndarray:
    """L of near, distinct segments: the log part with the inner integral in closed form and the
    outer by the transformed rule, the regular part by the transformed tensor rule."""
    ts, ws = _sidi01(NEAR_ORDER)
    reg = _tensor_pairs(s0, s1, t0, t1, ts, ws, regular=True)
    lt = np.linalg.norm(t1 - t0, axis=1)
    ls = np.linalg.norm(s1 - s0, axis=1)
    g = _log_moment(_along(s0, s1, ts), t0[:, None, :], ((t1 - t0) / lt[:, None])[:, None, :], lt[:, None])
    return reg - mu_0 * (g @ ws) * ls


def _self_pairs(q0, q1) -> np.ndarray:
    """L of a segment with itself: regular part in u = s - t (the singular line on the rule's end),
    log part with the inner integral in closed form."""
    ell = np.linalg.norm(q1 - q0, axis=1)
    tau = (q1 - q0) / ell[:, None]
    tu, wu = _sidi01(NEAR_ORDER)
    tv, wv = _gauss01(NEAR_ORDER)
    # s = u + t, t in [0, ell - u]: both orderings give the same value (symmetric kernel), factor 2
    U = tu[None, :, None] * ell[:, None, None]  # (p, a, 1)
    T = tv[None, None, :] * (ell[:, None, None] - U)  # (p, a, b)
    S = T + U
    pS = q0[:, None, None, :] + S[..., None] * tau[:, None, None, :]
    pT = q0[:, None, None, :] + T[..., None] * tau[:, None, None, :]
    dU = np.broadcast_to(U, S.shape).ravel()  # exact loop distance (the radii's difference loses digits)
    K = _loop_mutual_regular_H(pS[..., 0].ravel(), pT[..., 0].ravel(), (pS[..., 1] - pT[..., 1]).ravel(),
                               dU).reshape(S.shape)
    reg = 2.0 * np.einsum("pab,a,b,pa->p", K, wu, wv, ell[:, None] - U[:, :, 0]) * ell
    g = _log_moment(_along(q0, q1, tu), q0[:, None, :], tau[:, None, :], ell[:, None])
    return reg - mu_0 * (g @ wu) * ell


def _pair_values(s0, s1, t0, t1, same, r_floor: float, allow_split: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Values (p,) of the pairs that need no split, and a mask (p,) of those that do.

    A near or identical pair is split when a segment is longer than ``SPLIT_RATIO`` times the
    smallest radius on the pair (or than their distance, or ``r_floor``): the logarithm describes
    ``M`` only on scales below the loops' radius, so near the axis the pair is cut down to that
    scale; below ``r_floor`` (a small fraction of the largest radius) ``M ~ r^4`` is negligible.
    """
    ls, lt = np.linalg.norm(s1 - s0, axis=1), np.linalg.norm(t1 - t0, axis=1)
    lmax = np.maximum(ls, lt)
    dist = np.where(same, 0.0, _pair_distance(s0, s1, t0, t1))
    rmin = np.minimum(np.minimum(s0[:, 0], s1[:, 0]), np.minimum(t0[:, 0], t1[:, 0]))
    close = same | (dist < NEAR_RATIO * lmax)
    split = close & (lmax > SPLIT_RATIO * np.maximum(np.maximum(rmin, dist), r_floor)) & allow_split
    out = np.zeros(s0.shape[0])
    m = ~split & same
    if np.any(m):
        out[m] = _self_pairs(s0[m], s1[m])
    m = ~split & close & ~same
    if np.any(m):
        out[m] = _near_pairs(s0[m], s1[m], t0[m], t1[m])
    mid = ~close & (dist < MID_RATIO * lmax)
    for mask, order in ((mid, MID_ORDER), (~close & ~mid, FAR_ORDER)):
        if np.any(mask):
            t, w = _gauss01(order)
            out[mask] = _tensor_pairs(s0[mask], s1[mask], t0[mask], t1[mask], t, w, regular=False)
    return out, split


def _split_pairs(s0, s1, t0, t1, same, idx, wt):
    """Children of split pairs: halves of both segments (a self pair gives two self pairs and its
    cross pair twice)."""
    sm, tm = 0.5 * (s0 + s1), 0.5 * (t0 + t1)
    S0, S1, T0, T1, SAME, IDX, WT = [], [], [], [], [], [], []
    for a0, a1 in ((s0, sm), (sm, s1)):
        for b0, b1 in ((t0, tm), (tm, t1)):
            S0.append(a0)
            S1.append(a1)
            T0.append(b0)
            T1.append(b1)
            IDX.append(idx)
            WT.append(wt)
            SAME.append(np.zeros(idx.size, dtype=bool))
    # for identical segments the two diagonal children are self pairs
    SAME[0] = same.copy()
    SAME[3] = same.copy()
    cat = [np.concatenate(x) for x in (S0, S1, T0, T1, SAME, IDX, WT)]
    return cat


def _pairs_L(s0, s1, t0, t1, same, r_floor: float) -> np.ndarray:
    """``int_S int_T M dl dl`` (p,) for segment pairs, splitting near pairs adaptively."""
    total = np.zeros(s0.shape[0])
    idx = np.arange(s0.shape[0])
    wt = np.ones(s0.shape[0])
    for depth in range(MAX_SPLITS + 1):
        val, split = _pair_values(s0, s1, t0, t1, same, r_floor, allow_split=depth < MAX_SPLITS)
        np.add.at(total, idx[~split], (wt * val)[~split])
        if not np.any(split):
            break
        s0, s1, t0, t1, same, idx, wt = _split_pairs(s0[split], s1[split], t0[split], t1[split], same[split],
                                                     idx[split], wt[split])
    return total


def cross_inductance(a: Edges, b: Edges) -> np.ndarray:
    """``L_ef = int_e int_f M dl dl`` (a, b) between two disjoint edge sets (Wb m^2 per A/m)."""
    na, nb = a.start_m.shape[0], b.start_m.shape[0]
    i, j = np.meshgrid(np.arange(na), np.arange(nb), indexing="ij")
    i, j = i.ravel(), j.ravel()
    rmax = float(max(a.start_m[:, 0].max(), a.end_m[:, 0].max(), b.start_m[:, 0].max(), b.end_m[:, 0].max()))
    out = np.empty(i.size)
    step = 40_000
    for s in range(0, i.size, step):
        ii, jj = i[s:s + step], j[s:s + step]
        out[s:s + step] = _pairs_L(a.start_m[ii], a.end_m[ii], b.start_m[jj], b.end_m[jj],
                                   np.zeros(ii.size, dtype=bool), SPLIT_FLOOR * rmax)
    return out.reshape(na, nb)


def edge_inductance_matrix(edges: Edges) -> np.ndarray:
    """``L_ef = int_e int_f M dl dl`` for all pairs of edges: symmetric (e, e).

    Notes
    -----
    ``L_ef`` (Wb m^2 per A/m) is the flux of a unit azimuthal sheet (1 A/m) on ``f`` through the
    loops of ``e``, integrated along ``e`` (symmetric by reciprocity). See the module notes for
    the quadrature.
    """
    n = edges.start_m.shape[0]
    if np.any(edges.length_m <= 0.0):
        raise input_error("edge_inductance_matrix", "edge lengths", "positive", float(edges.length_m.min()))
    iu, ju = np.triu_indices(n)
    L = np.empty(iu.size)
    r_floor = SPLIT_FLOOR * float(max(edges.start_m[:, 0].max(), edges.end_m[:, 0].max()))
    for s in range(0, iu.size, PAIR_CHUNK):
        i, j = iu[s:s + PAIR_CHUNK], ju[s:s + PAIR_CHUNK]
        L[s:s + PAIR_CHUNK] = _pairs_L(edges.start_m[i], edges.end_m[i], edges.start_m[j], edges.end_m[j], i == j,
                                       r_floor)
    M = np.empty((n, n))
    M[iu, ju] = L
    M[ju, iu] = L
    return M


def edge_loop_inductance(edges: Edges, radius_m, z_m, order: int = 6) -> np.ndarray:
    """``int_e M(s; loop) dl_s`` (H m) for every edge and coaxial loop: shape (e, l).

    radius_m, z_m : ndarray, shape (l,). The loops must keep away from the edges (no singular
    treatment): this is the flux through a disc of a loop, integrated along the edge.
    """
    p, w = edges.points(order)
    rad = np.asarray(radius_m, dtype=float).reshape(-1)
    z = np.asarray(z_m, dtype=float).reshape(-1)
    a = np.broadcast_to(p[:, :, None, 0], p.shape[:2] + rad.shape)
    Mv = loop_mutual_H(a, np.broadcast_to(rad, a.shape), p[:, :, None, 1] - z)
    return np.einsum("eql,eq->el", Mv, w)


# --------------------------------------------------------------------------- ring meshes


@dataclass(frozen=True)
class RingMesh:
    """Ring cells of one or more bodies of revolution about a common axis.

    Attributes
    ----------
    vertices_m : ndarray, shape (v, 2)
        ``(r, z)`` vertices in the axis frame (m).
    cells : ndarray of int, shape (c, 4)
        Vertex indices of each cell, counter-clockwise in the ``(r, z)`` plane (a triangle repeats
        its last vertex).
    body : ndarray of int, shape (c,)
        Body index of each cell.
    edges : Edges
        Unique cell faces, except those on the axis (they carry no current).
    incidence : ndarray, shape (e, 2 c)
        ``C``: edge sheet current ``mu0 K = C J`` for cell polarizations ``J = (J_r0, J_z0, J_r1, ...)``.
    volume_m3 : ndarray, shape (c,)
    centroid_m : ndarray, shape (c, 2)
    """

    vertices_m: np.ndarray
    cells: np.ndarray
    body: np.ndarray
    edges: Edges
    incidence: np.ndarray
    volume_m3: np.ndarray
    centroid_m: np.ndarray


def _cell_area_centroid(P: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Area (c,) and centroid (c, 2) of polygons P (c, k, 2) (shoelace; repeated vertices allowed)."""
    x, y = P[..., 0], P[..., 1]
    xn, yn = np.roll(x, -1, axis=1), np.roll(y, -1, axis=1)
    cr = x * yn - xn * y
    A = 0.5 * cr.sum(axis=1)
    cx = ((x + xn) * cr).sum(axis=1) / (6.0 * A)
    cy = ((y + yn) * cr).sum(axis=1) / (6.0 * A)
    return A, np.stack((cx, cy), axis=1)


def ring_mesh(vertices_m, cells, body=None) -> RingMesh:
    """Assemble a :class:`RingMesh` from polygon cells (counter-clockwise, 3 or 4 vertices)."""
    V = np.asarray(vertices_m, dtype=float)
    Cl = np.asarray(cells, dtype=int)
    if Cl.shape[1] == 3:
        Cl = np.concatenate((Cl, Cl[:, 2:3]), axis=1)
    nc = Cl.shape[0]
    body = np.zeros(nc, dtype=int) if body is None else np.asarray(body, dtype=int)
    if np.any(V[:, 0] < 0.0):
        raise input_error("ring_mesh", "vertex radii", ">= 0", float(V[:, 0].min()))
    area, cen = _cell_area_centroid(V[Cl])
    if np.any(area <= 0.0):
        raise input_error("ring_mesh", "cells", "counter-clockwise polygons of positive area", float(area.min()))
    keys: dict[tuple[int, int], int] = {}
    rows, cols, vals = [], [], []
    starts, ends = [], []
    for c in range(nc):
        vs = Cl[c]
        for k in range(4):
            a, b = int(vs[k]), int(vs[(k + 1) % 4])
            if a == b:
                continue
            pa, pb = V[a], V[b]
            if pa[0] == 0.0 and pb[0] == 0.0:
                continue  # on the axis: no current, no flux
            key = (min(a, b), max(a, b))
            if key not in keys:
                keys[key] = len(starts)
                starts.append(V[key[0]])
                ends.append(V[key[1]])
            e = keys[key]
            t = (pb - pa) / np.linalg.norm(pb - pa)
            n_r, n_z = t[1], -t[0]  # outward normal of a counter-clockwise polygon
            # mu0 K_phi = J_z n_r - J_r n_z with this cell's outward normal (K_phi needs no edge direction)
            rows += [e, e]
            cols += [2 * c, 2 * c + 1]
            vals += [-n_z, n_r]
    C = np.zeros((len(starts), 2 * nc))
    np.add.at(C, (np.array(rows), np.array(cols)), np.array(vals))
    edges = Edges(np.array(starts), np.array(ends))
    return RingMesh(V, Cl, body, edges, C, 2.0 * np.pi * area * cen[:, 0], cen)


def graded_nodes(lo: float, hi: float, n: int, grade: float, ends: str) -> np.ndarray:
    """``n + 1`` nodes on ``[lo, hi]`` graded toward ``ends`` ("both", "hi" or "lo").

    ``x = t -+ grade sin(...)/pi`` keeps the spacing smooth; the end cells are ``(1 - grade)`` times
    the mean spacing (``0 <= grade < 1``).
    """
    t = np.linspace(0.0, 1.0, int(n) + 1)
    if ends == "both":
        x = t - grade * np.sin(2.0 * np.pi * t) / (2.0 * np.pi)
    elif ends == "hi":
        x = t + grade * np.sin(np.pi * t) / np.pi
        x = x / x[-1]
    elif ends == "lo":
        x = t - grade * np.sin(np.pi * t) / np.pi
        x = x / x[-1]
    else:
        raise input_error("graded_nodes", "ends", "one of both, hi, lo", ends)
    x[0], x[-1] = 0.0, 1.0
    return lo + (hi - lo) * x


def rectangle_cells(r_nodes, z_nodes, vertex_offset: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Vertices (v, 2) and counter-clockwise quad cells (c, 4) of a tensor grid in (r, z)."""
    r = np.asarray(r_nodes, dtype=float)
    z = np.asarray(z_nodes, dtype=float)
    R, Z = np.meshgrid(r, z, indexing="ij")
    V = np.stack((R.ravel(), Z.ravel()), axis=1)
    nz1 = z.size
    i, j = np.meshgrid(np.arange(r.size - 1), np.arange(z.size - 1), indexing="ij")
    v00 = (i * nz1 + j).ravel()
    cells = np.stack((v00, v00 + nz1, v00 + nz1 + 1, v00 + 1), axis=1) + vertex_offset
    return V, cells


def sphere_cells(radius_m: float, radial: int, polar: int, centre_z_m: float = 0.0,
                 volume_matched: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """Vertices (v, 2) and counter-clockwise cells (c, 4) of a ball's half-disc cross-section.

    Cells lie between ``radial`` uniform shells and ``polar`` uniform polar angles; the innermost
    are triangles. The boundary is the polygon through the nodes on the sphere; with
    ``volume_matched`` all radii are scaled so that the polygon's body of revolution has the
    ball's volume (Pappus's centroid theorem).
    """
    rho = radius_m * np.arange(1, radial + 1) / radial
    th = np.pi * np.arange(polar + 1) / polar
    R, T = np.meshgrid(rho, th, indexing="ij")
    V = np.concatenate(([[0.0, 0.0]], np.stack((R.ravel() * np.sin(T.ravel()), R.ravel() * np.cos(T.ravel())), axis=1)))
    V[:, 0] = np.abs(V[:, 0])
    V[np.abs(V[:, 0]) < 1e-15 * radius_m, 0] = 0.0

    def vid(i, j):  # shell i >= 1, angle j
        return 1 + (i - 1) * (polar + 1) + j

    cells = []
    for j in range(polar):
        cells.append([0, vid(1, j + 1), vid(1, j), vid(1, j)])
        for i in range(1, radial):
            cells.append([vid(i, j + 1), vid(i + 1, j + 1), vid(i + 1, j), vid(i, j)])
    cells = np.array(cells)
    area, cen = _cell_area_centroid(V[cells])
    flip = area < 0.0
    cells[flip] = cells[flip][:, ::-1]
    if volume_matched:
        area, cen = _cell_area_centroid(V[cells])
        vol = 2.0 * np.pi * np.sum(area * cen[:, 0])
        V = V * (4.0 / 3.0 * np.pi * radius_m ** 3 / vol) ** (1.0 / 3.0)
    V[:, 1] += centre_z_m
    return V, cells
