"""The one message pattern for arguments passed wrongly through the Python API.

``<where>: <what> must be <rule>; got <value>.`` -- the same wording as
:class:`fields.errors.GeometryError` uses for input files, raised as
:class:`fields.errors.InputError` (a misuse of the API, not a problem of an input file).
"""

from __future__ import annotations

import numpy as np

from fields.errors import InputError


def input_error(where: str, what: str, rule: str, got: object = None) -> InputError:
    """An :class:`~fields.errors.InputError` whose message follows the project's pattern.

    Examples
    --------
    >>> str(input_error("wrench", "order", "one of fast, standard", "slow"))
    'wrench: order must be one of fast, standard; got slow.'
    """
    msg = f"{where}: {what} must be {rule}"
    if got is not None:
        msg += f"; got {got}" if isinstance(got, str) else f"; got {got!r}"
    return InputError(msg + ".")


def pose_arrays(positions_m, rotvecs_rad, where: str = "poses") -> tuple[np.ndarray, np.ndarray]:
    """Validated floater poses: positions (n, 3) (m) and rotation vectors (n, 3) (rad).

    A single rotation vector (3,) is repeated for every position. Raises
    :class:`~fields.errors.InputError` for other shapes and for non-finite values.
    """
    P = np.atleast_2d(np.asarray(positions_m, dtype=float))
    Rv = np.atleast_2d(np.asarray(rotvecs_rad, dtype=float))
    if Rv.shape[0] == 1 and P.shape[0] > 1:
        Rv = np.repeat(Rv, P.shape[0], axis=0)
    if P.ndim != 2 or P.shape[1] != 3 or Rv.shape != P.shape:
        raise input_error(where, "positions_m and rotvecs_rad", "arrays of shape (n, 3)", (P.shape, Rv.shape))
    if not (np.all(np.isfinite(P)) and np.all(np.isfinite(Rv))):
        raise input_error(where, "positions_m and rotvecs_rad", "finite numbers", "NaN or inf")
    return P, Rv


def array_key(a) -> tuple:
    """A float array as a hashable cache key (its shape and exact bytes): for ``functools.lru_cache``
    on functions of arrays; :func:`key_array` gives the array back.

    Examples
    --------
    >>> k = array_key(np.array([[1.0, 2.0]]))
    >>> key_array(k).tolist(), hash(k) == hash(array_key(np.array([[1.0, 2.0]])))
    ([[1.0, 2.0]], True)
    """
    a = np.ascontiguousarray(np.asarray(a, dtype=float))
    return a.shape, a.tobytes()


def key_array(key: tuple) -> np.ndarray:
    """The read-only array of an :func:`array_key`."""
    shape, data = key
    return np.frombuffer(data, dtype=float).reshape(shape)
