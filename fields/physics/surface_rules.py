"""Quadrature rules on the faces of magnets: discs and annuli, cylinder sides, triangles.

- Discs and annuli: Gauss-Legendre in r with the ``r dr`` weight, uniform midpoint (trapezoid)
  nodes in angle, which is spectrally accurate for periodic integrands (Trefethen and Weideman,
  SIAM Review 56 (2014) 385).
- Cylinder sides: Gauss-Legendre in z, trapezoid in angle.
- Triangles: the symmetric 7-point degree-5 rule of Dunavant, Int. J. Numer. Meth. Eng. 21 (1985)
  1129 (table for p = 5), on triangles subdivided into 4 by their edge midpoints.
"""

from __future__ import annotations

import numpy as np

from fields.physics.quadrature import gauss_legendre


def dunavant5() -> tuple[np.ndarray, np.ndarray]:
    """Barycentric points (7, 3) and weights (7,) (summing to 1) of the degree-5 symmetric rule.

    Examples
    --------
    >>> b, w = dunavant5()
    >>> round(float(w.sum()), 15), round(float(w @ b[:, 0] ** 2), 15)  # mean of x^2 over a triangle: 1/6
    (1.0, 0.166666666666667)
    """
    s15 = np.sqrt(15.0)
    a1, b1 = (6 - s15) / 21, (9 + 2 * s15) / 21
    a2, b2 = (6 + s15) / 21, (9 - 2 * s15) / 21
    w1, w2 = (155 - s15) / 1200, (155 + s15) / 1200
    pts = [(1 / 3, 1 / 3, 1 / 3), (b1, a1, a1), (a1, b1, a1), (a1, a1, b1), (b2, a2, a2), (a2, b2, a2), (a2, a2, b2)]
    return np.array(pts), np.array([9 / 40, w1, w1, w1, w2, w2, w2])


def subdivide_triangles(tri: np.ndarray) -> np.ndarray:
    """Split triangles (t, 3, 3) into 4 each by their edge midpoints: (4 t, 3, 3), orientation kept."""
    a, b, c = tri[:, 0], tri[:, 1], tri[:, 2]
    ab, bc, ca = (a + b) / 2, (b + c) / 2, (c + a) / 2
    return np.concatenate([np.stack(t, axis=1) for t in ((a, ab, ca), (ab, b, bc), (ca, bc, c), (ab, bc, ca))])


def disc_rule(r_in: float, r_out: float, nr: int, na: int) -> tuple[np.ndarray, np.ndarray]:
    """Polar rule on the annulus ``r_in <= r <= r_out`` (a disc for ``r_in = 0``).

    Returns
    -------
    points : ndarray, shape (nr * na, 2)
        (x, y) nodes (unit of the radii).
    weights : ndarray, shape (nr * na,)
        Area weights (``r dr dphi``).
    """
    r, wr = gauss_legendre(nr, r_in, r_out)
    phi = 2 * np.pi * (np.arange(na) + 0.5) / na
    R, P = np.meshgrid(r, phi, indexing="ij")
    W = (wr * r)[:, None] * np.full(na, 2 * np.pi / na)[None, :]
    return np.stack((R * np.cos(P), R * np.sin(P)), axis=-1).reshape(-1, 2), W.reshape(-1)


def side_rule(radius: float, h: float, nz: int, na: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Rule on the side of a cylinder (axis z, centred at the origin, height h).

    Returns
    -------
    points : ndarray, shape (na * nz, 3)
    normals : ndarray, shape (na * nz, 3)
        Outward unit normals.
    weights : ndarray, shape (na * nz,)
        Area weights.
    """
    z, wz = gauss_legendre(nz, -h / 2, h / 2)
    phi = 2 * np.pi * (np.arange(na) + 0.5) / na
    P, Z = np.meshgrid(phi, z, indexing="ij")
    n = np.stack((np.cos(P), np.sin(P), np.zeros_like(P)), axis=-1).reshape(-1, 3)
    x = n * radius
    x[:, 2] = Z.reshape(-1)
    W = (np.full(na, 2 * np.pi * radius / na)[:, None] * wz[None, :]).reshape(-1)
    return x, n, W
