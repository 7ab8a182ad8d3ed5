"""The graded near-field cap rule: where a charged cap comes close to a source edge.

Where a charged cap of the floater comes close to a source edge (cylinder, ring and coil rims,
cuboid and mesh edges; :func:`source_edges`) compared with its radial half-span, the plain tensor
rule loses accuracy (3.8e-5 for a ring bearing 2 mm apart, 5e-3 at 0.2 mm). Such poses get a
graded cap rule (:func:`graded_floater_rule`): angular Gauss panels bisected where the edge
distance at the rims, along the rays or to edge end points changes quickly with the angle, and,
along each ray, radial Gauss panels bisected until ``GRADE_RATIO`` times their half-length is
within the edge distance at their centre. The rule is built once per group of poses within
``GROUP_TOL_M``/``GROUP_TOL_RAD`` of each other (:func:`pose_groups`: a stiffness stencil shares
one discretisation); far poses keep the plain rule.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.constants import mu_0
from scipy.spatial.transform import Rotation

from fields.model.design import Design, Floater, rotation_matrix
from fields.physics.charges import magnet_surface_rule
from fields.physics.levels import RuleLevel, rule_level
from fields.physics.quadrature import gauss_legendre

#: graded rule: a radial panel is bisected until GRADE_RATIO * half-length <= the (weighted) distance
#: from its centre to the nearest source edge; with ``gm`` Gauss nodes per panel the nearest complex
#: singularity of the integrand then lies outside the panel's Bernstein ellipse of parameter
#: rho >= GRADE_RATIO + sqrt(GRADE_RATIO^2 + 1) (about 4.2), so each panel's relative error is below
#: about rho^(-2 gm) (Trefethen, Approximation Theory and Approximation Practice, 2013, thm 19.3)
GRADE_RATIO = 2.0
#: most bisections of one radial or angular panel (2^-14 of the cap's span)
GRADE_DEPTH = 14
#: a pose uses the graded cap rule where some charged cap comes closer to a source edge than
#: GRADE_SWITCH times the half-width of the cap's radial span (the plain rule's error then exceeds
#: about 1e-7 relative on the project's cases; measured, see ``tests/test_forces.py``)
GRADE_SWITCH = 2.0
#: for the choice of the graded rule, distances to coil winding edges count this many times: B of
#: a thick winding is continuous at its corners (only its gradient is log-singular), unlike B at a
#: magnet's rim, so the plain rule stays accurate closer to them (the grading itself uses true distances)
COIL_EDGE_FACTOR = 3.0
#: poses closer than these to a pose already holding a graded rule share that rule (keeps
#: finite-difference stencils on one discretisation)
GROUP_TOL_M = 2e-5
GROUP_TOL_RAD = 2e-3
#: initial angular panels of the graded rule (each with ``gm`` Gauss nodes)
GRADE_PHI_PANELS = 16


@dataclass(frozen=True)
class SourceEdges:
    """Edges of the fixed sources, where their field is (nearly) singular, world frame.

    Attributes
    ----------
    centre_m, normal, radius_m : ndarray, shapes (c, 3), (c, 3), (c,)
        Circular rims (cylinder and ring rims, coil winding corners).
    circle_factor : ndarray, shape (c,)
        Distance weight (``COIL_EDGE_FACTOR`` for coil corners, else 1).
    start_m, end_m : ndarray, shape (s, 3)
        Straight edges (cuboids, mesh edges).
    """

    centre_m: np.ndarray
    normal: np.ndarray
    radius_m: np.ndarray
    circle_factor: np.ndarray
    start_m: np.ndarray
    end_m: np.ndarray


def source_edges(design: Design) -> SourceEdges:
    """The rims and straight edges of every fixed solid (magnets, coil windings, cores)."""
    from fields.model.solids import design_solids

    cc, cn, cr, cf, sa, sb = [], [], [], [], [], []
    for s in design_solids(design):
        if s.on_floater:
            continue
        R, t, z = s.rotation, s.position_m, s.rotation[:, 2]
        fac = COIL_EDGE_FACTOR if s.kind == "coil" else 1.0
        if s.shape in ("cylinder", "ring"):
            radii = (s.size_m[0],) if s.shape == "cylinder" else (s.size_m[0], s.size_m[1])
            for r in radii:
                for sg in (-1.0, 1.0):
                    if r > 0.0:
                        cc.append(t + sg * 0.5 * s.size_m[-1] * z)
                        cn.append(z)
                        cr.append(r)
                        cf.append(fac)
        elif s.shape == "cuboid":
            h = np.asarray(s.size_m, dtype=float) / 2
            for ax in range(3):
                o = [i for i in range(3) if i != ax]
                for s1 in (-1.0, 1.0):
                    for s2 in (-1.0, 1.0):
                        p = np.zeros(3)
                        p[o[0]], p[o[1]] = s1 * h[o[0]], s2 * h[o[1]]
                        a, b = p.copy(), p.copy()
                        a[ax], b[ax] = -h[ax], h[ax]
                        sa.append(R @ a + t)
                        sb.append(R @ b + t)
        elif s.shape == "mesh":
            f = np.asarray(s.faces)
            e = np.sort(np.concatenate([f[:, [0, 1]], f[:, [1, 2]], f[:, [2, 0]]]), axis=1)
            e = np.unique(e, axis=0)
            v = np.asarray(s.vertices_m, dtype=float) @ R.T + t
            sa.extend(v[e[:, 0]])
            sb.extend(v[e[:, 1]])
    a3 = lambda x: np.asarray(x, dtype=float).reshape(-1, 3)
    return SourceEdges(a3(cc), a3(cn), np.asarray(cr, dtype=float), np.asarray(cf, dtype=float), a3(sa), a3(sb))


def edge_distance_m(edges: SourceEdges, points_m, weighted: bool = False) -> np.ndarray:
    """Distance (...,) from points (..., 3) to the nearest source edge (inf without edges);
    ``weighted``: distances to circles are multiplied by their ``circle_factor``."""
    X = np.asarray(points_m, dtype=float)
    D = np.full(X.shape[:-1], np.inf)
    for c, nrm, r, f in zip(edges.centre_m, edges.normal, edges.radius_m, edges.circle_factor):
        v = X - c
        h = v @ nrm
        rho = np.linalg.norm(v - h[..., None] * nrm, axis=-1)
        np.minimum(D, (f if weighted else 1.0) * np.hypot(rho - r, h), out=D)
    for a, b in zip(edges.start_m, edges.end_m):
        ab = b - a
        s = np.clip(((X - a) @ ab) / (ab @ ab), 0.0, 1.0)
        np.minimum(D, np.linalg.norm(X - a - s[..., None] * ab, axis=-1), out=D)
    return D


def _floater_caps(floater: Floater):
    """Charged caps (axially polarized cylinders and rings) of the floater: list of
    (magnet index, inner radius, outer radius, cap z in the magnet frame)."""
    caps = []
    for i, m in enumerate(floater.magnets):
        if m.shape not in ("cylinder", "ring") or float(np.asarray(m.polarization_T, dtype=float)[2]) == 0.0:
            continue
        d = m.dimensions_m
        ri = 0.0 if m.shape == "cylinder" else d[0] / 2
        for sg in (1.0, -1.0):
            caps.append((i, ri, d[-2] / 2, sg * d[-1] / 2))
    return caps


def _cap_frames(floater: Floater, caps, P, Rv):
    """World origin (n, c, 3) and axes (n, c, 3, 3) (columns e1, e2, normal) of each cap at n poses."""
    R = Rotation.from_rotvec(Rv).as_matrix()
    O = np.empty((P.shape[0], len(caps), 3))
    A = np.empty((P.shape[0], len(caps), 3, 3))
    for j, (i, _, _, zc) in enumerate(caps):
        m = floater.magnets[i]
        Rm = rotation_matrix(m.rotvec_rad)
        o = Rm @ np.array([0.0, 0.0, zc]) + np.asarray(m.position_m, dtype=float)
        O[:, j] = np.einsum("nij,j->ni", R, o) + P
        A[:, j] = R @ Rm
    return O, A


def _cap_edge_distance(edges: SourceEdges, floater: Floater, caps, P, Rv, nr: int = 9, na: int = 48) -> np.ndarray:
    """Least weighted edge distance over each cap (n, c), sampled on an (nr x na) polar grid; the
    sampling covering radius is subtracted (distance is 1-Lipschitz), so it is a lower bound."""
    O, A = _cap_frames(floater, caps, P, Rv)
    out = np.empty((P.shape[0], len(caps)))
    phi = 2 * np.pi * np.arange(na) / na
    for j, (_, ri, ro, _) in enumerate(caps):
        r = np.linspace(ri, ro, nr)
        loc = np.stack(np.broadcast_arrays(r[:, None] * np.cos(phi), r[:, None] * np.sin(phi), 0.0), axis=-1).reshape(-1, 3)
        X = np.einsum("nij,qj->nqi", A[:, j], loc) + O[:, j, None, :]
        cover = 0.5 * np.hypot((ro - ri) / (nr - 1), 2 * np.pi * ro / na)
        out[:, j] = np.maximum(edge_distance_m(edges, X, weighted=True).min(axis=1) - cover, 0.0)
    return out


def _graded_cap_rule(edges: SourceEdges, origin, axes, ri: float, ro: float, gm: int):
    """Graded polar rule of one cap at one pose: local (q, 2) points and (q,) area weights.

    Angular panels (``GRADE_PHI_PANELS`` to start, ``gm`` Gauss nodes each) are bisected where the
    distance of an edge (or of an edge's end point) to the cap's rims or to the nearest ray point
    changes quickly with the angle (sampled at 17 angles per panel);
    along each ray, radial panels (``gm`` Gauss nodes) are bisected until ``GRADE_RATIO`` times
    their half-length is at most the edge distance at their centre.
    """
    def dist(r, phi):
        loc = np.stack(np.broadcast_arrays(r * np.cos(phi), r * np.sin(phi), 0.0 * r), axis=-1)
        return edge_distance_m(edges, loc @ axes.T + origin)

    vert = np.unique(np.concatenate((edges.start_m, edges.end_m)), axis=0)

    def vdist(r, phi):
        loc = np.stack(np.broadcast_arrays(r * np.cos(phi), r * np.sin(phi), 0.0 * r), axis=-1) @ axes.T + origin
        D = np.full(loc.shape[:-1], np.inf)
        for v in vert:
            np.minimum(D, np.linalg.norm(loc - v, axis=-1), out=D)
        return D

    rgrid = np.linspace(ri, ro, 65)
    # angular panels
    lo = 2 * np.pi * np.arange(GRADE_PHI_PANELS) / GRADE_PHI_PANELS
    hi = lo + 2 * np.pi / GRADE_PHI_PANELS
    done_lo, done_hi = [], []
    for depth in range(GRADE_DEPTH + 1):
        if lo.size == 0:
            break
        t = np.linspace(0.0, 1.0, 17)
        ph = lo[:, None] + (hi - lo)[:, None] * t[None, :]  # (p, 5)
        fs = [dist(np.full(ph.shape, ro), ph)]
        if ri > 0.0:
            fs.append(dist(np.full(ph.shape, ri), ph))
        fs.append(dist(rgrid[None, None, :], ph[..., None]).min(axis=-1))
        if vert.shape[0]:  # corners: where a crossing curve kinks (e.g. a cuboid's corner over the cap)
            fs.append(vdist(rgrid[None, None, :], ph[..., None]).min(axis=-1))
        half = 0.5 * (hi - lo)
        refine = np.zeros(lo.size, dtype=bool)
        for f in fs:
            slope = np.abs(np.diff(f, axis=1)).max(axis=1) / (2 * half / (f.shape[1] - 1))
            refine |= GRADE_RATIO * half * slope > f.min(axis=1)
        if depth == GRADE_DEPTH:
            refine[:] = False
        done_lo.append(lo[~refine])
        done_hi.append(hi[~refine])
        mid = 0.5 * (lo + hi)
        lo, hi = np.concatenate([lo[refine], mid[refine]]), np.concatenate([mid[refine], hi[refine]])
    alo, ahi = np.concatenate(done_lo), np.concatenate(done_hi)
    x, w = gauss_legendre(gm)
    phi = (0.5 * (alo + ahi))[:, None] + (0.5 * (ahi - alo))[:, None] * x[None, :]
    wphi = (0.5 * (ahi - alo))[:, None] * w[None, :]
    phi, wphi = phi.reshape(-1), wphi.reshape(-1)
    # radial panels per ray
    ray = np.arange(phi.size)
    lo = np.full(phi.size, ri)
    hi = np.full(phi.size, ro)
    out_ray, out_lo, out_hi = [], [], []
    for depth in range(GRADE_DEPTH + 1):
        if lo.size == 0:
            break
        half = 0.5 * (hi - lo)
        D = dist(lo + half, phi[ray])
        refine = (GRADE_RATIO * half > D) & (depth < GRADE_DEPTH)
        out_ray.append(ray[~refine])
        out_lo.append(lo[~refine])
        out_hi.append(hi[~refine])
        mid = lo + half
        ray = np.concatenate([ray[refine], ray[refine]])
        lo, hi = np.concatenate([lo[refine], mid[refine]]), np.concatenate([mid[refine], hi[refine]])
    ray, rlo, rhi = (np.concatenate(v) for v in (out_ray, out_lo, out_hi))
    r = (0.5 * (rlo + rhi))[:, None] + (0.5 * (rhi - rlo))[:, None] * x[None, :]
    wr = (0.5 * (rhi - rlo))[:, None] * w[None, :] * r
    P = phi[ray][:, None]
    pts = np.stack((r * np.cos(P), r * np.sin(P)), axis=-1).reshape(-1, 2)
    return pts, (wr * wphi[ray][:, None]).reshape(-1)


def graded_floater_rule(design: Design, edges: SourceEdges, position_m, rotvec_rad,
                        level: str | RuleLevel = "standard") -> tuple[np.ndarray, np.ndarray]:
    """Charge quadrature of the floater (floater frame) with graded caps built for one pose.

    The caps of axially polarized cylinders and rings get :func:`_graded_cap_rule` (panels graded
    toward the source edges seen from this pose, ``level.gm`` nodes per panel); all
    other faces keep the plain rule of :func:`magnet_surface_rule`.

    Returns
    -------
    points_m : ndarray, shape (q, 3)
    charges_Am : ndarray, shape (q,)
    """
    fl = design.floater
    caps = _floater_caps(fl)
    P = np.asarray(position_m, dtype=float).reshape(1, 3)
    Rv = np.asarray(rotvec_rad, dtype=float).reshape(1, 3)
    O, A = _cap_frames(fl, caps, P, Rv)
    gm = rule_level(level, "graded_floater_rule").gm
    xs, qs = [], []
    for m in fl.magnets:
        x, s = magnet_surface_rule(m, level, False, caps=False)
        xs.append(x @ rotation_matrix(m.rotvec_rad).T + np.asarray(m.position_m, dtype=float))
        qs.append(s)
    for j, (i, ri, ro, zc) in enumerate(caps):
        m = fl.magnets[i]
        xy, w = _graded_cap_rule(edges, O[0, j], A[0, j], ri, ro, gm)
        loc = np.column_stack((xy, np.full(w.size, zc)))
        xs.append(loc @ rotation_matrix(m.rotvec_rad).T + np.asarray(m.position_m, dtype=float))
        qs.append(np.sign(zc) * float(np.asarray(m.polarization_T, dtype=float)[2]) / mu_0 * w)
    return np.concatenate(xs), np.concatenate(qs)


def near_field_poses(design: Design, P, Rv, clearance) -> tuple[np.ndarray, SourceEdges | None]:
    """(n,) bool: poses where some charged cap is closer to a source edge than GRADE_SWITCH times
    its radial half-span (weighted distances, :func:`edge_distance_m`), and the source edges
    (None when the floater has no charged caps).

    ``clearance`` (n,) (m) is a lower bound of every edge distance; poses with ``inf`` are skipped.
    """
    n = P.shape[0]
    caps = _floater_caps(design.floater)
    if not caps or n == 0:
        return np.zeros(n, dtype=bool), None
    edges = source_edges(design)
    if edges.radius_m.size == 0 and edges.start_m.shape[0] == 0:
        return np.zeros(n, dtype=bool), edges
    half = np.array([0.5 * (ro - ri) for _, ri, ro, _ in caps])
    # the clearance is a lower bound of every edge distance (weights >= 1): far poses need no more
    wmin = min([1.0] * int(edges.start_m.shape[0] > 0) + list(edges.circle_factor))
    cand = ~(wmin * np.asarray(clearance) >= GRADE_SWITCH * half.max())
    out = np.zeros(n, dtype=bool)
    idx = np.nonzero(cand)[0]
    for a in range(0, idx.size, 2000):
        sl = idx[a:a + 2000]
        D = _cap_edge_distance(edges, design.floater, caps, P[sl], Rv[sl])
        out[sl] = np.any(D < GRADE_SWITCH * half[None, :], axis=1)
    return out, edges


def pose_groups(P, Rv, seeds: np.ndarray, pool: np.ndarray) -> list[np.ndarray]:
    """Greedy groups: each unassigned seed pose takes every unassigned pose of ``pool`` (bool (n,))
    within GROUP_TOL_M and GROUP_TOL_RAD of it; returns index arrays, seed first."""
    free = pool.copy()
    groups = []
    for i in np.nonzero(seeds)[0]:
        if not free[i]:
            continue
        near = free & (np.abs(P - P[i]).max(axis=1) <= GROUP_TOL_M) & (np.abs(Rv - Rv[i]).max(axis=1) <= GROUP_TOL_RAD)
        near[i] = True
        idx = np.nonzero(near)[0]
        idx = np.concatenate(([i], idx[idx != i]))
        free[idx] = False
        groups.append(idx)
    return groups
