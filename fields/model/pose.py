"""The one check for floater poses entering the model, physics and analysis functions.

A pose is a floater frame origin ``position_m`` (3,) in the world (m) and an orientation
``rotvec_rad`` (3,), a rotation vector (axis times angle, rad). ``n`` poses are two arrays of
shape (n, 3).
"""

from __future__ import annotations

import numpy as np

from fields.errors import InputError

__all__ = ["check_poses"]


def check_poses(positions_m, rotvecs_rad, where: str = "poses") -> tuple[np.ndarray, np.ndarray]:
    """Validate floater poses and return them as float arrays of shape (n, 3).

    Parameters
    ----------
    positions_m : array_like, shape (n, 3) or (3,)
        Floater frame origins (m).
    rotvecs_rad : array_like, shape (n, 3) or (3,)
        Floater orientations as rotation vectors (rad). A single one applies to every position
        (and a single position to every orientation).
    where : str
        Name of the calling function, for the message.

    Returns
    -------
    positions_m, rotvecs_rad : ndarray, shape (n, 3)
        New float arrays.

    Raises
    ------
    InputError
        When a shape is not (n, 3) or (3,), the counts differ (and neither is 1), or a value is
        NaN or infinite.

    Examples
    --------
    >>> P, R = check_poses([[0, 0, 0.01], [0, 0, 0.02]], [0, 0, 0])
    >>> P.shape, R.shape
    ((2, 3), (2, 3))
    """
    P = np.array(positions_m, dtype=float, ndmin=2)
    Rv = np.array(rotvecs_rad, dtype=float, ndmin=2)
    for name, a in (("positions_m", P), ("rotvecs_rad", Rv)):
        if a.ndim != 2 or a.shape[1] != 3:
            raise InputError(f"{where}: {name} must be an array of shape (n, 3) or (3,); got shape {a.shape}.")
    if Rv.shape[0] == 1 and P.shape[0] > 1:
        Rv = np.repeat(Rv, P.shape[0], axis=0)
    elif P.shape[0] == 1 and Rv.shape[0] > 1:
        P = np.repeat(P, Rv.shape[0], axis=0)
    if Rv.shape != P.shape:
        raise InputError(f"{where}: positions_m and rotvecs_rad must have the same number of rows; "
                         f"got {P.shape[0]} and {Rv.shape[0]}.")
    if not (np.isfinite(P).all() and np.isfinite(Rv).all()):
        raise InputError(f"{where}: positions_m and rotvecs_rad must be finite; got NaN or inf.")
    return P, Rv
