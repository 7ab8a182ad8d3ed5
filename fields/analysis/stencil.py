"""Central finite differences on generalized coordinates, with a Richardson error bar.

Derivatives of the force with respect to the pose (stiffness, ``k_z``, ``dk_i/dh``) are taken by
central differences ``D_h = (f(q + h) - f(q - h)) / (2 h)``, whose truncation error is
``O(h^2)``. With the steps ``h`` and ``2 h``, Richardson extrapolation ``R = (4 D_h - D_2h) / 3``
removes the ``h^2`` term, and ``|R - D_h|`` estimates the error of ``D_h`` (Richardson, Phil.
Trans. R. Soc. A 210 (1911) 307; Press et al., Numerical Recipes, 3rd ed. 2007, sec. 5.7).

Steps: 1e-6 m and 1e-4 rad balance truncation (``h^2``) against rounding (``eps |F| / h``) for
forces of order 0.1-10 N on bodies of about 10 mm.

The stencil layout used throughout: for each multiple ``s`` of the steps (in order), for each
axis ``j`` (in order), the pose displaced by ``+s h_j e_j`` then by ``-s h_j e_j``; optionally the
undisplaced pose last.
"""

from __future__ import annotations

import numpy as np

#: central-difference step for translations (m)
STEP_LENGTH_M = 1e-6
#: central-difference step for rotations (rad)
STEP_ANGLE_RAD = 1e-4
#: the 25-pose stiffness stencil: steps h and 2h on each of the six axes, then the pose itself
RICHARDSON_MULTIPLES = (1.0, 2.0)


def pose_steps(step_length_m: float = STEP_LENGTH_M, step_angle_rad: float = STEP_ANGLE_RAD) -> np.ndarray:
    """Steps (6,) of the generalized coordinates (x, y, z in m; rx, ry, rz in rad)."""
    return np.array([step_length_m] * 3 + [step_angle_rad] * 3)


def central_offsets(steps, axes=None, multiples=(1.0,), centre: bool = False) -> np.ndarray:
    """Displacements (m, d) of a central-difference stencil in d coordinates.

    Parameters
    ----------
    steps : array_like, shape (d,)
        Step of each coordinate.
    axes : sequence of int, optional
        The coordinates to differentiate along (default: all).
    multiples : sequence of float
        Step multiples (``(1, 2)`` for a Richardson pair).
    centre : bool
        Append the undisplaced point (all zeros) last.

    Returns
    -------
    ndarray, shape (2 * len(multiples) * len(axes) + centre, d)
        Rows in the layout of the module docstring.

    Examples
    --------
    >>> central_offsets([0.1, 0.2], multiples=(1.0, 2.0), centre=True).tolist()
    [[0.1, 0.0], [-0.1, -0.0], [0.0, 0.2], [-0.0, -0.2], [0.2, 0.0], [-0.2, -0.0], [0.0, 0.4], [-0.0, -0.4], [0.0, 0.0]]
    """
    h = np.asarray(steps, dtype=float)
    idx = range(h.size) if axes is None else axes
    rows = []
    for s in multiples:
        for j in idx:
            e = np.zeros(h.size)
            e[j] = s * h[j]
            rows.append(e)
            rows.append(-e)
    if centre:
        rows.append(np.zeros(h.size))
    return np.array(rows)


def central_difference(f_plus, f_minus, step):
    """``(f_plus - f_minus) / (2 step)``: the central difference, broadcast elementwise."""
    return (np.asarray(f_plus) - np.asarray(f_minus)) / (2 * step)


def stencil_derivatives(values, steps, axes=None, multiples=(1.0,)) -> np.ndarray:
    """Central differences of values evaluated on :func:`central_offsets` (same arguments).

    Parameters
    ----------
    values : ndarray, shape (m, ...)
        Function values at the stencil rows (a trailing centre row is ignored).

    Returns
    -------
    ndarray, shape (len(multiples), ..., len(axes))
        ``D[s, ..., a]``: the derivative along axis ``axes[a]`` with step ``multiples[s] h``.
    """
    W = np.asarray(values)
    h = np.asarray(steps, dtype=float)
    idx = list(range(h.size) if axes is None else axes)
    D = np.zeros((len(multiples),) + W.shape[1:] + (len(idx),))
    for si, s in enumerate(multiples):
        for a, j in enumerate(idx):
            row = 2 * (si * len(idx) + a)
            D[si, ..., a] = central_difference(W[row], W[row + 1], s * h[j])
    return D


def richardson(D_h, D_2h) -> tuple[np.ndarray, np.ndarray]:
    """Richardson extrapolation of central differences with steps h and 2h.

    Returns
    -------
    R : ndarray
        ``(4 D_h - D_2h) / 3`` (truncation error ``O(h^4)``).
    error : ndarray
        ``|R - D_h|``, the error bar of ``D_h`` (and a conservative one of ``R``).

    Examples
    --------
    >>> h = 0.1
    >>> D = [(np.exp(s * h) - np.exp(-s * h)) / (2 * s * h) for s in (1, 2)]  # d/dx e^x at 0
    >>> R, err = richardson(*D)
    >>> bool(abs(R - 1) < 1e-5 < abs(D[0] - 1)), bool(err >= abs(D[0] - 1) * 0.99)
    (True, True)
    """
    D_h = np.asarray(D_h)
    D_2h = np.asarray(D_2h)
    R = (4 * D_h - D_2h) / 3
    return R, np.abs(R - D_h)
