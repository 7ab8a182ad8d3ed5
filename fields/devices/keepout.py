"""Where a sensor cannot go: inside a body, or inside the space the floater sweeps as it moves.

Signed distances come from the model layer (:mod:`fields.model.solids`, :mod:`fields.model.sdf`):
negative inside, exact for the primitives. The floater's travel is the union of its magnets over the
poses ``study.floater_origin_m(g) + u x + v y`` (study orientation) with ``gap_min <= g <= gap_max``
and ``|u|, |v| <= lateral_span`` (world x and y: a square of offsets, which contains every
sideways offset the study's maps use). Its signed distance at a point is the least of the magnets'
signed distances over those poses, found by sampling the poses and polishing the least sample with a
bounded Powell search (the signed distance is 1-Lipschitz in the pose, so a sample grid with
half-diagonal ``rho`` can miss at most ``rho``; every point whose sampled distance is under ``rho``
is polished).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.model.design import Design, rotation_matrix
from fields.model.solids import design_solids

#: pose samples of the travel search: gaps and sideways offsets per axis
TRAVEL_GAP_SAMPLES = 53
TRAVEL_LATERAL_SAMPLES = 7


@dataclass(frozen=True)
class Keepout:
    """Which points lie inside a body or the floater's travel.

    Attributes
    ----------
    body_distance_m : ndarray, shape (p,)
        Least signed distance to the fixed bodies (magnets, coil windings, cores); +inf without any.
    nearest_body : tuple of str
        The body of that least distance ("" without fixed bodies).
    travel_distance_m : ndarray, shape (p,)
        Signed distance to the floater's travel (negative: the floater passes through the point).
    reason : tuple of str
        ``""`` (kept), ``"inside_body"`` or ``"floater_travel"`` (a body comes first).
    lateral_span_m : float
        The sideways half-span of the travel used.
    """

    body_distance_m: np.ndarray
    nearest_body: tuple[str, ...]
    travel_distance_m: np.ndarray
    reason: tuple[str, ...]
    lateral_span_m: float

    @property
    def excluded(self) -> np.ndarray:
        """True where a point is excluded, shape (p,)."""
        return np.array([r != "" for r in self.reason], dtype=bool)


def _travel_sdf(floater_solids, R: np.ndarray, points: np.ndarray, poses: np.ndarray) -> np.ndarray:
    """Least floater signed distance at points (p, 3) for floater origins (n, 3): shape (n, p)."""
    own = (points[None, :, :] - poses[:, None, :]) @ R  # floater frame (rows: R^T (x - P))
    return np.min(np.stack([s.sdf_parent(own) for s in floater_solids]), axis=0)


def keepout(design: Design, points_m, lateral_span_m: float | None = None, clearance_m: float = 0.0) -> Keepout:
    """Signed distances of points to the bodies and to the floater's travel, and the exclusions.

    Parameters
    ----------
    design : Design
    points_m : array_like, shape (p, 3)
        World points (m).
    lateral_span_m : float, optional
        Sideways half-span of the travel; default ``study.lateral_span_m`` (0: vertical travel only).
    clearance_m : float
        A point closer than this to a body or the travel is excluded too (default 0: inside only).

    Returns
    -------
    Keepout
    """
    from scipy.optimize import minimize

    pts = np.asarray(points_m, dtype=float).reshape(-1, 3)
    st = design.study
    span = float(st.lateral_span_m if lateral_span_m is None else lateral_span_m)
    solids = design_solids(design)
    fixed = [s for s in solids if not s.on_floater]
    floater = [s for s in solids if s.on_floater]
    if fixed:
        d = np.stack([s.sdf_parent(pts) for s in fixed])
        body_d = d.min(axis=0)
        nearest = tuple(fixed[i].name for i in d.argmin(axis=0))
    else:
        body_d = np.full(pts.shape[0], np.inf)
        nearest = ("",) * pts.shape[0]
    R = rotation_matrix(st.floater_rotvec_rad)
    gs = np.linspace(st.gap_min_m, st.gap_max_m, TRAVEL_GAP_SAMPLES)
    us = np.linspace(-span, span, TRAVEL_LATERAL_SAMPLES) if span > 0 else np.zeros(1)
    G, U, V = (a.reshape(-1) for a in np.meshgrid(gs, us, us, indexing="ij"))
    ex, ey = np.eye(3)[0], np.eye(3)[1]

    def origin(q):
        q = np.atleast_2d(q)
        return st.floater_origin_m(q[:, 0]) + q[:, 1:2] * ex + q[:, 2:3] * ey

    Q = np.stack([G, U, V], axis=1)
    travel = _travel_sdf(floater, R, pts, origin(Q))  # (n, p)
    trav_d = travel.min(axis=0)
    steps = [gs[1] - gs[0] if gs.size > 1 else 0.0] + [us[1] - us[0] if us.size > 1 else 0.0] * 2
    rho = 0.5 * float(np.linalg.norm(steps))
    bounds = [(st.gap_min_m, st.gap_max_m), (-span, span), (-span, span)]
    for i in np.nonzero(trav_d < rho + clearance_m)[0]:
        q0 = Q[int(travel[:, i].argmin())]
        r = minimize(lambda q, i=i: float(_travel_sdf(floater, R, pts[i:i + 1], origin(q))[0, 0]), q0,
                     method="Powell", bounds=bounds, options={"xtol": 1e-9, "ftol": 1e-12})
        trav_d[i] = min(trav_d[i], float(r.fun))
    reason = tuple("inside_body" if b < clearance_m else "floater_travel" if t < clearance_m else ""
                   for b, t in zip(body_d, trav_d))
    return Keepout(body_d, nearest, trav_d, reason, span)
