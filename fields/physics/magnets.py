"""B of permanent magnets placed in the world frame, fixed or on the moving floater."""

from __future__ import annotations

import numpy as np
from scipy.spatial.transform import Rotation

from fields.model.design import Design, Magnet, rotation_matrix
from fields.physics.kernels import mesh_triangles, shape_field_own_T


def _magnet_field_frames(magnet: Magnet, points_m: np.ndarray, Rw: np.ndarray, tw: np.ndarray) -> np.ndarray:
    """B of a magnet at many frames: Rw (n,3,3), tw (n,3) of its own frame; points (n,q,3)."""
    own = np.einsum("nqi,nij->nqj", points_m - tw[:, None, :], Rw)
    n, q = own.shape[:2]
    Bown = shape_field_own_T(magnet.shape, magnet.dimensions_m, np.asarray(magnet.polarization_T, dtype=float),
                             own.reshape(-1, 3), mesh_triangles(magnet)).reshape(n, q, 3)
    return np.einsum("nij,nqj->nqi", Rw, Bown)


def _floater_frames(magnet: Magnet, positions_m, rotvecs_rad) -> tuple[np.ndarray, np.ndarray]:
    """World rotation (n,3,3) and origin (n,3) of a floater magnet's own frame at n poses."""
    P = np.asarray(positions_m, dtype=float).reshape(-1, 3)
    Rp = Rotation.from_rotvec(np.asarray(rotvecs_rad, dtype=float).reshape(-1, 3)).as_matrix()
    Rm = rotation_matrix(magnet.rotvec_rad)
    return Rp @ Rm, P + Rp @ np.asarray(magnet.position_m, dtype=float)


def magnet_field_T(magnet: Magnet, points_m, position_m=None, rotvec_rad=None) -> np.ndarray:
    """B of one magnet in the world frame.

    Parameters
    ----------
    magnet : Magnet
        Placed by its own ``position_m``/``rotvec_rad`` in its parent frame.
    points_m : ndarray, shape (q, 3)
        Observers, world frame (m).
    position_m, rotvec_rad : array_like, shape (3,), optional
        Pose of the parent (floater) frame in the world; omit for fixed magnets.

    Returns
    -------
    ndarray, shape (q, 3)
        B (T).
    """
    p = np.asarray(points_m, dtype=float).reshape(1, -1, 3)
    pos = np.zeros(3) if position_m is None else position_m
    rv = np.zeros(3) if rotvec_rad is None else rotvec_rad
    Rw, tw = _floater_frames(magnet, pos, rv)
    return _magnet_field_frames(magnet, p, Rw, tw)[0]


def floater_field_T(design: Design, points_m, positions_m, rotvecs_rad) -> np.ndarray:
    """B (n, q, 3) of all floater magnets at n poses, at observers (n, q, 3) or (q, 3)."""
    P = np.asarray(positions_m, dtype=float).reshape(-1, 3)
    pts = np.asarray(points_m, dtype=float)
    if pts.ndim == 2:
        pts = np.broadcast_to(pts, (P.shape[0],) + pts.shape)
    B = np.zeros(pts.shape)
    for m in design.floater.magnets:
        Rw, tw = _floater_frames(m, P, rotvecs_rad)
        B += _magnet_field_frames(m, pts, Rw, tw)
    return B
