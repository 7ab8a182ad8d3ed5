"""Contact between the floater and the fixed bodies: a cheap lower bound, exact where close.

The distance between world-axis-aligned bounding boxes of the posed floater solids and each
fixed solid never exceeds the true clearance, so it proves a pose clear; the exact clearance of
the solid model (:func:`fields.model.solids.floater_clearance_m`) is computed only where the
boxes come closer than :data:`CLEARANCE_EXACT_WITHIN_M`.
"""

from __future__ import annotations

import numpy as np
from scipy.spatial.transform import Rotation

from fields.model.design import Design
from fields.model.clearance import floater_clearance_m
from fields.model.solids import design_solids

#: poses whose clearance is at or below this are reported as contact (m)
CONTACT_CLEARANCE_M = 0.0
#: the exact clearance is computed where the bounding-box distance is below this (m); beyond it
#: the box distance (a lower bound) already proves the floater is clear
CLEARANCE_EXACT_WITHIN_M = 1e-3


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


def box_clearance_lower_bound_m(design: Design, P: np.ndarray, Rv: np.ndarray) -> np.ndarray:
    """A lower bound (n,) of the floater's clearance: the distance between world-axis-aligned
    bounding boxes of the posed floater solids and of each fixed solid (exact for coaxial flat
    faces seen along the axis; never above the true clearance)."""
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


def clearance_m(design: Design, P: np.ndarray, Rv: np.ndarray) -> np.ndarray:
    """Signed clearance (n,) (m) of the floater at poses P, Rv (n, 3): exact
    (:func:`fields.model.solids.floater_clearance_m`) where the bounding boxes of the floater and
    a fixed body come closer than CLEARANCE_EXACT_WITHIN_M; elsewhere the box distance, a lower
    bound that already proves there is no contact."""
    c = box_clearance_lower_bound_m(design, P, Rv)
    near = c <= CLEARANCE_EXACT_WITHIN_M
    if np.any(near):
        c = c.copy()
        c[near] = np.asarray(floater_clearance_m(design, P[near], Rv[near]), dtype=float).reshape(-1)
    return c
