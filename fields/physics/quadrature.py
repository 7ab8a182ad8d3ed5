"""Gauss-Legendre quadrature on an interval, with the reference nodes cached per order.

The ``n``-point rule integrates polynomials of degree ``2n - 1`` exactly (Abramowitz & Stegun,
Handbook of Mathematical Functions, 1964, eq. 25.4.29); nodes and weights on ``[-1, 1]`` come from
:func:`numpy.polynomial.legendre.leggauss` and are mapped affinely to ``[a, b]``.
"""

from __future__ import annotations

import functools

import numpy as np

from fields.errors import InputError

__all__ = ["gauss_legendre"]


@functools.lru_cache(maxsize=128)
def _reference_rule(n: int) -> tuple[np.ndarray, np.ndarray]:
    x, w = np.polynomial.legendre.leggauss(n)
    x.setflags(write=False)
    w.setflags(write=False)
    return x, w


def gauss_legendre(n: int, a: float = -1.0, b: float = 1.0) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights of the ``n``-point Gauss-Legendre rule on ``[a, b]``.

    Parameters
    ----------
    n : int
        Number of nodes (>= 1).
    a, b : float
        Interval ends (any unit; the weights carry the unit of ``b - a``).

    Returns
    -------
    nodes, weights : ndarray, shape (n,)
        New (writable) arrays; ``sum(weights * f(nodes))`` approximates the integral of ``f``.

    Notes
    -----
    Abramowitz & Stegun (1964), eq. 25.4.29, with the change of variable
    ``x = a + (b - a) (t + 1) / 2``.

    Examples
    --------
    >>> x, w = gauss_legendre(3, 0.0, 2.0)
    >>> round(float(w @ x**5), 12)   # integral of x^5 on [0, 2] is 64/6
    10.666666666667
    """
    n = int(n)
    if n < 1:
        raise InputError(f"gauss_legendre: n must be a positive integer; got {n}.")
    x, w = _reference_rule(n)
    if a == -1.0 and b == 1.0:
        return x.copy(), w.copy()
    half = 0.5 * (b - a)
    return a + half * (x + 1.0), half * w
