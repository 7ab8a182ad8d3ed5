"""Force and torque on the floater by surface magnetic charges and Gauss quadrature.

For a uniformly magnetized floater magnet in an external field ``B_ext`` with no sources inside
it, ``F = oint sigma B_ext dA`` with ``sigma = M . n = J . n / mu0``, and the torque about a point
``c`` is ``T = oint (x - c) x sigma B_ext dA`` (this already contains ``m x B``). Only faces with
``J . n != 0`` carry charge. Rules (METHODS.md section 2):

- discs and annuli: Gauss-Legendre in r with the ``r dr`` weight, uniform trapezoid in angle;
- cylinder sides (diametral polarization): Gauss-Legendre in z, trapezoid in angle;
- cuboid faces: tensor Gauss-Legendre;
- sphere: the charge route on the sphere surface (Gauss-Legendre in ``cos theta``, trapezoid
  in angle). It is chosen over ``(m . grad) B`` at the centre because it needs no
  finite-difference step, gives the torque by the same formula, and converges spectrally
  like the other rules, so the two-order error estimate works the same way;
- mesh faces: the symmetric 7-point degree-5 triangle rule (Dunavant, Int. J. Numer. Meth.
  Eng. 21 (1985) 1129, table for p = 5), on each face subdivided ``4^s`` times.

On the symmetry axis of a core-free axisymmetric design (untilted floater) the cap integral is
done in closed form: ``F_z = sum over charged cap discs of sigma * Phi``, ``Phi`` the flux of the
sources' solenoid sheets (coil layers, the side currents of axially polarized fixed cylinders and
rings) through the disc, :func:`fields.physics.sources.sheet_disc_flux_Wb`. Only the coil-layer rule is
then left, and the error estimate compares two layer counts.

Near field (issue 3): where a charged cap comes close to a source edge (cylinder, ring and coil
rims, cuboid and mesh edges; :func:`source_edges`) compared with its radial half-span, the plain
tensor rule loses accuracy (3.8e-5 for the ring bearing 2 mm apart, 5e-3 at 0.2 mm). Such poses get
a graded cap rule (:func:`graded_floater_rule`): angular Gauss panels bisected where the edge
distance at the rims, along the rays or to edge end points changes quickly with the angle, and,
along each ray, radial Gauss panels bisected until ``GRADE_RATIO`` times their half-length is
within the edge distance at their centre. The rule is built once per group of poses within
``GROUP_TOL_M``/``GROUP_TOL_RAD`` of each other (a stiffness stencil shares one discretisation);
far poses keep the plain rule. Coil layers are graded per observer near a winding's end face
(:func:`fields.physics.sources._layer_rule`); on-axis poses of coil designs that need grading leave the
closed-form route for the graded one.

Only the fixed sources' field is used (coils, fixed magnets, cores), never the floater's own.
The error estimate is the difference between the requested rule level and the next coarser one
(fewer coil layers and fewer surface nodes); it bounds the error of the coarser result and is
therefore conservative for the returned one.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.spatial.transform import Rotation

from fields.errors import GeometryError
from fields.model.design import Design, Floater, Magnet, rotation_matrix
from fields.physics.sources import (CEL_CHUNK, CHUNK, AxialSheets, _clip, _leggauss, axial_disc_flux_Wb, axial_sheets,
                            core_models, fixed_field_basis, gauss_legendre)

#: rule levels: coil layers, radial nodes, angular nodes, axial/edge nodes, triangle subdivisions,
#: Gauss nodes per panel of the graded (near-field) cap rule
LEVELS: dict[str, dict[str, int]] = {
    "coarse": dict(layers=6, nr=4, na=8, nz=4, sub=0, gm=4),
    "fast": dict(layers=8, nr=4, na=10, nz=5, sub=0, gm=5),
    "standard": dict(layers=10, nr=5, na=12, nz=6, sub=1, gm=6),
    "high": dict(layers=14, nr=8, na=24, nz=10, sub=2, gm=8),
    "reference": dict(layers=24, nr=14, na=48, nz=14, sub=3, gm=12),
}
_ORDER = list(LEVELS)

#: poses whose clearance is at or below this are reported as contact (m)
CONTACT_CLEARANCE_M = 0.0
#: the exact clearance is computed where the bounding-box distance is below this (m); beyond it
#: the box distance (a lower bound) already proves the floater is clear
CLEARANCE_EXACT_WITHIN_M = 1e-3


# --------------------------------------------------------------------------- surface rules


def _dunavant5() -> tuple[np.ndarray, np.ndarray]:
    """Barycentric points (7,3) and weights (7,) (sum 1) of the degree-5 symmetric rule."""
    s15 = np.sqrt(15.0)
    a1, b1 = (6 - s15) / 21, (9 + 2 * s15) / 21
    a2, b2 = (6 + s15) / 21, (9 - 2 * s15) / 21
    w1, w2 = (155 - s15) / 1200, (155 + s15) / 1200
    pts = [(1 / 3, 1 / 3, 1 / 3), (b1, a1, a1), (a1, b1, a1), (a1, a1, b1), (b2, a2, a2), (a2, b2, a2), (a2, a2, b2)]
    return np.array(pts), np.array([9 / 40, w1, w1, w1, w2, w2, w2])


def _subdivide(tri: np.ndarray) -> np.ndarray:
    a, b, c = tri[:, 0], tri[:, 1], tri[:, 2]
    ab, bc, ca = (a + b) / 2, (b + c) / 2, (c + a) / 2
    return np.concatenate([np.stack(t, axis=1) for t in ((a, ab, ca), (ab, b, bc), (ca, bc, c), (ab, bc, ca))])


def _disc_rule(r_in: float, r_out: float, nr: int, na: int):
    r, wr = gauss_legendre(nr, r_in, r_out)
    phi = 2 * np.pi * (np.arange(na) + 0.5) / na
    R, P = np.meshgrid(r, phi, indexing="ij")
    W = (wr * r)[:, None] * np.full(na, 2 * np.pi / na)[None, :]
    return np.stack((R * np.cos(P), R * np.sin(P)), axis=-1).reshape(-1, 2), W.reshape(-1)


def _side_rule(radius: float, h: float, nz: int, na: int):
    z, wz = gauss_legendre(nz, -h / 2, h / 2)
    phi = 2 * np.pi * (np.arange(na) + 0.5) / na
    P, Z = np.meshgrid(phi, z, indexing="ij")
    n = np.stack((np.cos(P), np.sin(P), np.zeros_like(P)), axis=-1).reshape(-1, 3)
    x = n * radius
    x[:, 2] = Z.reshape(-1)
    W = (np.full(na, 2 * np.pi * radius / na)[:, None] * wz[None, :]).reshape(-1)
    return x, n, W


def magnet_surface_rule(magnet: Magnet, level: str = "standard", axisymmetric: bool = False, caps: bool = True):
    """Charge quadrature of one magnet in its own frame.

    Parameters
    ----------
    magnet : Magnet
    level : str
        A key of :data:`LEVELS`.
    axisymmetric : bool
        One angular node (``phi = 0``) carrying the whole ``2 pi`` weight (cylinder/ring caps,
        axial polarization only): the 1-D radial rule for on-axis poses.
    caps : bool
        Include the caps of cylinders and rings (False: the graded near-field rule supplies them).

    Returns
    -------
    points_m : ndarray, shape (q, 3)
        Nodes, own frame (m).
    charges_Am : ndarray, shape (q,)
        ``sigma dA = (J . n / mu0) w`` (A m): the force is ``sum charges * B``.
    """
    from scipy.constants import mu_0

    L = LEVELS[level]
    J = np.asarray(magnet.polarization_T, dtype=float)
    d = magnet.dimensions_m
    xs, qs = [], []

    def add(x, n, w):
        s = (n @ J) * w / mu_0
        keep = s != 0.0
        xs.append(x[keep])
        qs.append(s[keep])

    if magnet.shape in ("cylinder", "ring"):
        ri = 0.0 if magnet.shape == "cylinder" else d[0] / 2
        ro, h = d[-2] / 2, d[-1]
        if axisymmetric:
            r, wr = gauss_legendre(L["nr"], ri, ro)
            xy, w = np.stack((r, np.zeros_like(r)), axis=-1), 2 * np.pi * r * wr
        else:
            xy, w = _disc_rule(ri, ro, L["nr"], L["na"])
        for sgn in (1.0, -1.0) if caps else ():
            if J[2] != 0.0:
                x = np.column_stack((xy, np.full(len(w), sgn * h / 2)))
                add(x, np.tile([0.0, 0.0, sgn], (len(w), 1)), w)
        if (J[0] != 0.0 or J[1] != 0.0) and not axisymmetric:
            x, n, w = _side_rule(ro, h, L["nz"], L["na"])
            add(x, n, w)
            if ri > 0.0:
                x, n, w = _side_rule(ri, h, L["nz"], L["na"])
                add(x, -n, w)
    elif magnet.shape == "cuboid":
        half = np.asarray(d, dtype=float) / 2
        for ax in range(3):
            o1, o2 = [i for i in range(3) if i != ax]
            u, wu = gauss_legendre(L["nz"], -half[o1], half[o1])
            v, wv = gauss_legendre(L["nz"], -half[o2], half[o2])
            U, V = np.meshgrid(u, v, indexing="ij")
            W = (wu[:, None] * wv[None, :]).reshape(-1)
            for sgn in (1.0, -1.0):
                x = np.zeros((W.size, 3))
                x[:, o1], x[:, o2], x[:, ax] = U.reshape(-1), V.reshape(-1), sgn * half[ax]
                n = np.zeros((W.size, 3))
                n[:, ax] = sgn
                add(x, n, W)
    elif magnet.shape == "sphere":
        R = d[0] / 2
        ct, wt = gauss_legendre(L["nr"] + 4, -1.0, 1.0)
        phi = 2 * np.pi * (np.arange(L["na"]) + 0.5) / L["na"]
        CT, P = np.meshgrid(ct, phi, indexing="ij")
        st = np.sqrt(1 - CT**2)
        n = np.stack((st * np.cos(P), st * np.sin(P), CT), axis=-1).reshape(-1, 3)
        W = (wt[:, None] * np.full(L["na"], 2 * np.pi / L["na"])[None, :]).reshape(-1) * R * R
        add(n * R, n, W)
    elif magnet.shape == "mesh":
        tri = np.asarray(magnet.mesh_vertices_m, dtype=float)[np.asarray(magnet.mesh_faces)]
        for _ in range(L["sub"]):
            tri = _subdivide(tri)
        bary, wb = _dunavant5()
        cr = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
        area = 0.5 * np.linalg.norm(cr, axis=1)
        n = cr / (2 * area[:, None])
        x = np.einsum("pj,tjc->tpc", bary, tri).reshape(-1, 3)
        add(x, np.repeat(n, len(wb), axis=0), (area[:, None] * wb[None, :]).reshape(-1))
    else:
        raise GeometryError(f"magnet {magnet.name}", "shape", "one of cylinder, ring, cuboid, sphere, mesh", magnet.shape)
    if not xs:
        return np.zeros((0, 3)), np.zeros(0)
    return np.concatenate(xs), np.concatenate(qs)


def floater_surface_rule(floater: Floater, level: str = "standard", axisymmetric: bool = False):
    """Charge quadrature (points (q,3) in the floater frame, charges (q,) in A m) of all magnets."""
    xs, qs = [], []
    for m in floater.magnets:
        x, s = magnet_surface_rule(m, level, axisymmetric)
        xs.append(x @ rotation_matrix(m.rotvec_rad).T + np.asarray(m.position_m, dtype=float))
        qs.append(s)
    return np.concatenate(xs), np.concatenate(qs)


# --------------------------------------------------------------------------- graded cap rule (near field)

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
#: about 1e-7 relative on the project's cases; measured, see tests/test_forces.py)
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
    a3 = lambda x: np.asarray(x, dtype=float).reshape(-1, 3)  # noqa: E731
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
    x, w = _leggauss(gm)
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


def graded_floater_rule(design: Design, edges: SourceEdges, position_m, rotvec_rad, level: str = "standard"):
    """Charge quadrature of the floater (floater frame) with graded caps built for one pose.

    The caps of axially polarized cylinders and rings get :func:`_graded_cap_rule` (panels graded
    toward the source edges seen from this pose, ``LEVELS[level]["gm"]`` nodes per panel); all
    other faces keep the plain rule of :func:`magnet_surface_rule`.

    Returns
    -------
    points_m : ndarray, shape (q, 3)
    charges_Am : ndarray, shape (q,)
    """
    from scipy.constants import mu_0

    fl = design.floater
    caps = _floater_caps(fl)
    P = np.asarray(position_m, dtype=float).reshape(1, 3)
    Rv = np.asarray(rotvec_rad, dtype=float).reshape(1, 3)
    O, A = _cap_frames(fl, caps, P, Rv)
    gm = LEVELS[level]["gm"]
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


def _graded_poses(design: Design, P, Rv, clearance, level: str) -> tuple[np.ndarray, SourceEdges | None]:
    """(n,) bool: poses where some charged cap is closer to a source edge than GRADE_SWITCH times
    its radial half-span (weighted distances, :func:`edge_distance_m`)."""
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


def _pose_groups(P, Rv, seeds: np.ndarray, pool: np.ndarray) -> list[np.ndarray]:
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


# --------------------------------------------------------------------------- results


def _apply(base: np.ndarray, per_A: np.ndarray, currents_A) -> np.ndarray:
    I = np.asarray(currents_A, dtype=float)
    k = per_A.shape[1]
    if I.shape[-1] != k:
        raise GeometryError("wrench", "currents_A", f"{k} values per row (one per coil)", I.shape)
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
        Signed clearance (negative = overlap); NaN when no clearance model is available.
    core_saturated : ndarray of bool, shape (n,)
    warnings : tuple of str
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
    warnings: tuple[str, ...] = field(default_factory=tuple)

    def force(self, currents_A) -> np.ndarray:
        """Force (n,3) for currents (k,), or (c,n,3) for currents (c,k) (N)."""
        return _apply(self.F0_N, self.Fk_N_per_A, currents_A)

    def torque(self, currents_A) -> np.ndarray:
        """Torque about the centre of mass, (n,3) or (c,n,3) (N m)."""
        return _apply(self.T0_Nm, self.Tk_Nm_per_A, currents_A)


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
    warnings : tuple of str
    """

    force_N: np.ndarray
    torque_Nm: np.ndarray
    error_F_N: np.ndarray
    error_T_Nm: np.ndarray
    contact: np.ndarray
    clearance_m: np.ndarray
    core_saturated: np.ndarray
    warnings: tuple[str, ...] = field(default_factory=tuple)


# --------------------------------------------------------------------------- evaluation


def _poses(positions_m, rotvecs_rad):
    P = np.atleast_2d(np.asarray(positions_m, dtype=float))
    Rv = np.atleast_2d(np.asarray(rotvecs_rad, dtype=float))
    if Rv.shape[0] == 1 and P.shape[0] > 1:
        Rv = np.repeat(Rv, P.shape[0], axis=0)
    if P.ndim != 2 or P.shape[1] != 3 or Rv.shape != P.shape:
        raise GeometryError("wrench", "positions_m and rotvecs_rad", "arrays of shape (n, 3)", (P.shape, Rv.shape))
    if not (np.all(np.isfinite(P)) and np.all(np.isfinite(Rv))):
        raise GeometryError("wrench", "positions_m and rotvecs_rad", "finite numbers", "NaN or inf")
    return P, Rv


def _is_axial(axis) -> bool:
    a = np.asarray(axis, dtype=float)
    a = a / np.linalg.norm(a)
    return abs(abs(a[2]) - 1.0) < 1e-12


def _axis_xy(design: Design):
    """Common symmetry axis (x, y) of an axisymmetric design about a z-parallel line, else None."""
    xy = []
    for c in design.coils:
        if not _is_axial(c.axis):
            return None
        xy.append(c.position_m[:2])
    for c in design.cores:
        if c.shape not in ("cylinder", "ring") or not _is_axial(c.axis):
            return None
        xy.append(c.position_m[:2])
    for m in design.magnets:
        R = rotation_matrix(m.rotvec_rad)
        J = R @ np.asarray(m.polarization_T, dtype=float)
        if m.shape not in ("cylinder", "ring") or abs(abs(R[2, 2]) - 1) > 1e-12 or np.hypot(J[0], J[1]) > 1e-12 * abs(J[2]):
            return None
        xy.append(m.position_m[:2])
    fl = design.floater
    for m in fl.magnets:
        R = rotation_matrix(m.rotvec_rad)
        J = R @ np.asarray(m.polarization_T, dtype=float)
        if m.shape not in ("cylinder", "ring") or abs(abs(R[2, 2]) - 1) > 1e-12 or np.hypot(J[0], J[1]) > 1e-12 * abs(J[2]):
            return None
        if np.hypot(*m.position_m[:2]) != 0.0:
            return None
    if np.hypot(*np.asarray(fl.centre_of_mass_m, dtype=float)[:2]) != 0.0:
        return None
    if not xy:
        return None
    xy = np.asarray(xy, dtype=float)
    if np.ptp(xy[:, 0]) > 0.0 or np.ptp(xy[:, 1]) > 0.0:
        return None
    return xy[0]


def _on_axis_mask(design: Design, P: np.ndarray, Rv: np.ndarray) -> np.ndarray:
    xy = _axis_xy(design)
    if xy is None:
        return np.zeros(P.shape[0], dtype=bool)
    return (P[:, 0] == xy[0]) & (P[:, 1] == xy[1]) & np.all(Rv == 0.0, axis=1)


def _own_box_corners(solid) -> np.ndarray:
    """The 8 corners (8, 3) of a solid's own-frame bounding box."""
    s = solid.size_m
    if solid.shape == "mesh":
        lo, hi = solid.vertices_m.min(axis=0), solid.vertices_m.max(axis=0)
    else:
        if solid.shape == "cylinder":
            half = np.array([s[0], s[0], s[1] / 2])
        elif solid.shape == "ring":
            half = np.array([s[1], s[1], s[2] / 2])
        elif solid.shape == "cuboid":
            half = np.asarray(s, float) / 2
        else:
            half = np.array([s[0], s[0], s[0]])
        lo, hi = -half, half
    return np.array([[x, y, z] for x in (lo[0], hi[0]) for y in (lo[1], hi[1]) for z in (lo[2], hi[2])])


def _box_lower_bound(design: Design, P: np.ndarray, Rv: np.ndarray) -> np.ndarray:
    """A lower bound (n,) of the floater's clearance: the distance between world-axis-aligned
    bounding boxes of the posed floater solids and of each fixed solid (exact for coaxial flat
    faces seen along the axis; never above the true clearance)."""
    from fields.model.solids import design_solids

    solids = design_solids(design)
    fl = [s for s in solids if s.on_floater]
    fx = [s for s in solids if not s.on_floater]
    if not fx:
        return np.full(P.shape[0], np.inf)
    fixed_lo = []
    fixed_hi = []
    for s in fx:
        c = _own_box_corners(s) @ s.rotation.T + s.position_m
        fixed_lo.append(c.min(axis=0))
        fixed_hi.append(c.max(axis=0))
    fixed_lo = np.array(fixed_lo)
    fixed_hi = np.array(fixed_hi)
    R = Rotation.from_rotvec(Rv).as_matrix()  # (n,3,3)
    lo = np.full(P.shape, np.inf)
    hi = np.full(P.shape, -np.inf)
    for s in fl:
        c = _own_box_corners(s) @ s.rotation.T + s.position_m  # floater frame (8,3)
        w = np.einsum("nij,cj->nci", R, c) + P[:, None, :]
        lo = np.minimum(lo, w.min(axis=1))
        hi = np.maximum(hi, w.max(axis=1))
    gap = np.maximum(fixed_lo[None] - hi[:, None], lo[:, None] - fixed_hi[None])  # (n, f, 3)
    d = np.sqrt(np.sum(np.maximum(gap, 0.0) ** 2, axis=2))
    return d.min(axis=1)


def _clearance(design: Design, P: np.ndarray, Rv: np.ndarray):
    """Signed clearance (n,): exact (bodies.floater_clearance_m) where the bounding boxes of the
    floater and a fixed body come closer than CLEARANCE_EXACT_WITHIN_M; elsewhere the box
    distance, a lower bound that already proves there is no contact."""
    try:
        from fields.model.clearance import floater_clearance_m
    except ImportError:
        return np.full(P.shape[0], np.nan), ("contact not checked: fields.model.solids is not available",)
    c = _box_lower_bound(design, P, Rv)
    near = c <= CLEARANCE_EXACT_WITHIN_M
    if np.any(near):
        c = c.copy()
        c[near] = np.asarray(floater_clearance_m(design, P[near], Rv[near]), dtype=float).reshape(-1)
    return c, ()


def _raw(design: Design, P, Rv, level: str, axisym: bool, currents_A=None, rule=None):
    """F0, Fk, T0, Tk (and clipped F, T at currents) for the poses P (n,3) at one rule level;
    ``rule`` (points (q,3), charges (q,)) replaces the floater's plain surface rule."""
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
    layers = LEVELS[level]["layers"]
    per = max(1, CHUNK // max(1, q * max(layers, 1)))
    cores = core_models(design) if design.cores else ()
    for a in range(0, n, per):
        sl = slice(a, a + per)
        R = Rotation.from_rotvec(Rv[sl]).as_matrix()
        X = np.einsum("nij,qj->nqi", R, xf) + P[sl, None, :]
        arm = X - (np.einsum("nij,j->ni", R, c_f) + P[sl])[:, None, :]
        fb = fixed_field_basis(design, X, P[sl], Rv[sl], layers=layers)
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
                Jc, over = _clip(J, fb.core_saturation_T[None, :])
                sat[sl] = np.any(over, axis=1)
                for j, cm in enumerate(cores):
                    idx = np.nonzero(over[:, j])[0]
                    if idx.size:
                        G = cm.field_matrix(X[idx]).reshape(idx.size, q, 3, 3)
                        B[idx] += np.einsum("nqij,nj->nqi", G, Jc[idx, j] - J[idx, j])
            Fc[sl] = np.einsum("q,nqi->ni", s, B)
            Tc[sl] = np.einsum("q,nqi->ni", s, np.cross(arm, B))
    return F0, Fk, T0, Tk, Fc, Tc, sat, sat_box


def floater_cap_discs(floater: Floater) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Charged cap discs of an axisymmetric floater (axially polarized cylinders and rings on its z axis).

    Returns
    -------
    radius_m : ndarray, shape (d,)
        Disc radii (a ring's annulus is its outer disc minus its inner disc).
    z_m : ndarray, shape (d,)
        Disc planes, floater frame z (m).
    charge_A_per_m : ndarray, shape (d,)
        ``sigma = J . n / mu0`` (A/m) times the disc's sign (+1 outer, -1 inner), so that the
        axial force is ``sum charge * Phi`` with ``Phi`` the fixed sources' flux through the disc
        (normal +z).
    """
    from scipy.constants import mu_0

    rad, zs, q = [], [], []
    for m in floater.magnets:
        R = rotation_matrix(m.rotvec_rad)
        Jz = float((R @ np.asarray(m.polarization_T, dtype=float))[2])
        d = m.dimensions_m
        if m.shape not in ("cylinder", "ring") or abs(abs(R[2, 2]) - 1.0) > 1e-12:
            raise GeometryError(f"floater magnet {m.name}", "shape", "a cylinder or ring with its axis along z", m.shape)
        discs = ((d[0] / 2, 1.0),) if m.shape == "cylinder" else ((d[1] / 2, 1.0), (d[0] / 2, -1.0))
        for sgn_n in (1.0, -1.0):  # top cap: normal +z; bottom cap: normal -z
            for r, sgn_d in discs:
                if r > 0.0 and Jz != 0.0:
                    rad.append(r)
                    zs.append(float(m.position_m[2]) + sgn_n * d[-1] / 2)
                    q.append(sgn_n * sgn_d * Jz / mu_0)
    return np.array(rad, dtype=float), np.array(zs, dtype=float), np.array(q, dtype=float)


def _raw_axis(design: Design, P, levels: tuple[str, ...], currents_A=None):
    """:func:`_raw` for on-axis, untilted poses of a core-free axisymmetric design, per level.

    ``F_z = sum over charged cap discs of sigma * Phi`` with ``Phi`` the closed-form flux of the
    sources' solenoid sheets through the disc (:func:`fields.physics.sources.sheet_disc_flux_Wb`). The
    cap integral is exact; only the coil layers depend on the level. One kernel call serves
    all levels (the magnets' sheets are shared). Transverse force and torque are zero.
    """
    n = P.shape[0]
    k = len(design.coils)
    rad, zf, q = floater_cap_discs(design.floater)
    parts = [axial_sheets(design, LEVELS[lv]["layers"], magnets=False) for lv in levels]
    mags = axial_sheets(design, coils=False)
    allsheets = parts + [mags]
    cat = [np.concatenate([getattr(sh, f) for sh in allsheets]) for f in
           ("radius_m", "half_height_m", "centre_z_m", "J_T", "coil_index")]
    sheets = AxialSheets(*cat)
    bounds = np.cumsum([0] + [sh.radius_m.size for sh in allsheets])
    Fs = np.zeros((n, bounds[-1]))
    per = max(1, CEL_CHUNK // max(1, 2 * rad.size * bounds[-1]))  # cache-sized blocks of poses
    for a in range(0, n, per):
        sl = slice(a, a + per)
        Phi = axial_disc_flux_Wb(sheets, rad, P[sl, 2:3] + zf[None, :])  # (n, d, s)
        Fs[sl] = np.einsum("d,nds->ns", q, Phi)
    F0m = Fs[:, bounds[-2]:].sum(axis=1)
    out = []
    for i in range(len(levels)):
        F0 = np.zeros((n, 3))
        Fk = np.zeros((n, k, 3))
        F0[:, 2] = F0m
        idx = sheets.coil_index[bounds[i]:bounds[i + 1]]
        Fl = Fs[:, bounds[i]:bounds[i + 1]]
        for j in range(k):
            Fk[:, j, 2] = Fl[:, idx == j].sum(axis=1)
        Fc = np.zeros((n, 3))
        if currents_A is not None:
            Fc = F0 + np.einsum("k,nki->ni", np.asarray(currents_A, dtype=float), Fk)
        z3 = np.zeros((n, 3))
        out.append((F0, Fk, z3, np.zeros((n, k, 3)), Fc, z3.copy(), np.zeros(n, dtype=bool), np.zeros(n, dtype=bool)))
    return out


def _evaluate(design: Design, positions_m, rotvecs_rad, order: str, currents_A=None, estimate_error: bool = True,
              near_field: bool = True):
    if order not in LEVELS or order == "coarse":
        raise GeometryError("wrench", "order", f"one of {', '.join(_ORDER[1:])}", order)
    P, Rv = _poses(positions_m, rotvecs_rad)
    n = P.shape[0]
    k = len(design.coils)
    if currents_A is not None:
        currents_A = np.asarray(currents_A, dtype=float).reshape(-1)
        if currents_A.size != k:
            raise GeometryError("wrench", "currents_A", f"{k} values (one per coil)", currents_A.size)
    clearance, warns = _clearance(design, P, Rv)
    contact = clearance <= CONTACT_CLEARANCE_M  # NaN compares False
    lower = _ORDER[_ORDER.index(order) - 1]
    out = [np.zeros((n, 3)), np.zeros((n, k, 3)), np.zeros((n, 3)), np.zeros((n, k, 3)),
           np.zeros((n, 3)), np.zeros((n, 3)), np.zeros(n, dtype=bool), np.zeros(n, dtype=bool)]
    low = [np.zeros((n, 3)), np.zeros((n, k, 3)), np.zeros((n, 3)), np.zeros((n, k, 3)),
           np.zeros((n, 3)), np.zeros((n, 3))]
    axial = _on_axis_mask(design, P, Rv) & ~contact
    general = ~axial & ~contact
    closed_form = not design.cores and not np.any(general)
    # near-field poses (a charged cap close to a source edge) get the graded cap rule, built per
    # group of nearby poses so that a stiffness stencil shares one discretisation; the closed-form
    # on-axis route needs no cap rule
    # (the closed form is exact in the caps but keeps plain coil layers, which converge slowly for
    # a cap just under a winding's end face: coil designs send such poses to the graded route)
    pool = general | (axial & (bool(design.coils) or not closed_form))
    if near_field:
        graded, edges = _graded_poses(design, P, Rv, np.where(pool, clearance, np.inf), order)
        graded &= pool
    else:
        graded, edges = np.zeros(n, dtype=bool), None
    groups = _pose_groups(P, Rv, graded, pool) if np.any(graded) else []
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
            rule = graded_floater_rule(design, edges, P[seed], Rv[seed], order)
            res = _raw(design, P[mask], Rv[mask], order, False, currents_A, rule)
            if estimate_error:
                rule_lo = graded_floater_rule(design, edges, P[seed], Rv[seed], lower)
                res_lo = _raw(design, P[mask], Rv[mask], lower, False, currents_A, rule_lo)
            else:
                res_lo = res
        elif axisym and closed_form:
            both = _raw_axis(design, P[mask], (order, lower) if estimate_error else (order,), currents_A)
            res, res_lo = both[0], both[-1]
        else:
            res = _raw(design, P[mask], Rv[mask], order, axisym, currents_A)
            res_lo = _raw(design, P[mask], Rv[mask], lower, axisym, currents_A) if estimate_error else res
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
    if currents_A is not None:
        dF, dT = out[4] - low[4], out[5] - low[5]
    else:
        Inom = np.array([float(c.nominal_current_A) for c in design.coils])
        dF = (out[0] - low[0]) + np.einsum("k,nki->ni", Inom, out[1] - low[1])
        dT = (out[2] - low[2]) + np.einsum("k,nki->ni", Inom, out[3] - low[3])
    warns = list(warns)
    if not estimate_error:
        dF = dT = np.full((n, 3), np.nan)
    if np.any(contact):
        warns.append(f"{int(contact.sum())} of {n} poses are in contact: force and torque not evaluated there")
    return P, out, np.linalg.norm(dF, axis=1), np.linalg.norm(dT, axis=1), contact, clearance, warns


def wrench_basis(design: Design, positions_m, rotvecs_rad, order: str = "standard",
                 estimate_error: bool = True, near_field: bool = True) -> WrenchBasis:
    """Force and torque bases of the floater at n poses.

    Parameters
    ----------
    design : Design
    positions_m : ndarray, shape (n, 3)
        Floater frame origins, world frame (m).
    rotvecs_rad : ndarray, shape (n, 3) or (3,)
        Floater orientations (rotation vectors, rad).
    order : str
        Rule level: ``"fast"``, ``"standard"``, ``"high"`` or ``"reference"`` (:data:`LEVELS`).
    estimate_error : bool
        Evaluate the next coarser level too and report the difference as the error estimate
        (default). False halves the cost and reports NaN estimates (for inner loops whose
        accuracy was established once, e.g. finite-difference stencils).

    Returns
    -------
    WrenchBasis
        Linear in the currents; exact without cores and for unclipped cores. Torque is about the
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
    P, out, eF, eT, contact, clearance, warns = _evaluate(design, positions_m, rotvecs_rad, order,
                                                          estimate_error=estimate_error, near_field=near_field)
    sat = out[7]
    if np.any(sat):
        warns.append(f"{int(sat.sum())} poses can saturate a core within the rated currents: "
                     "the linear basis is not exact there (use wrench() with the currents)")
    return WrenchBasis(out[0], out[1], out[2], out[3], eF, eT, contact, clearance, sat, tuple(warns))


def wrench(design: Design, positions_m, rotvecs_rad, currents_A, order: str = "standard") -> Wrench:
    """Force and torque on the floater at n poses and one set of currents.

    Parameters
    ----------
    design : Design
    positions_m : ndarray, shape (n, 3)
    rotvecs_rad : ndarray, shape (n, 3) or (3,)
    currents_A : array_like, shape (k,)
    order : str
        Rule level (see :func:`wrench_basis`).

    Returns
    -------
    Wrench
        Core polarizations are clipped at saturation (nonlinear in the currents).
    """
    P, out, eF, eT, contact, clearance, warns = _evaluate(design, positions_m, rotvecs_rad, order, currents_A)
    sat = out[6]
    if np.any(sat):
        warns.append(f"{int(sat.sum())} poses saturate a core: polarization clipped at saturation")
    return Wrench(out[4], out[5], eF, eT, contact, clearance, sat, tuple(warns))
