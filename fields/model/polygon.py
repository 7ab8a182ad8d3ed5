"""Plane polygons: area, orientation, point inclusion, convex clipping, convex hull, disc areas.

A polygon is an array of shape (p, 2) of vertices in order, not repeating the first one.
Counter-clockwise polygons have a positive signed area. Pure numpy, any consistent length unit.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "signed_area",
    "polygon_area",
    "point_in_polygon",
    "orient_loops",
    "convex_clip",
    "clip_to_rectangle",
    "convex_hull",
    "circle_rectangle_area",
]


def signed_area(poly) -> float:
    """Signed (shoelace) area of a polygon (p, 2): positive when counter-clockwise.

    Notes
    -----
    The shoelace (Gauss area) formula ``A = 1/2 sum(x_i y_{i+1} - x_{i+1} y_i)``, e.g. Zwillinger,
    *CRC Standard Mathematical Tables and Formulae*, 31st ed., 2003, sec. 4.5.

    Examples
    --------
    >>> signed_area([[0, 0], [2, 0], [2, 1], [0, 1]])
    2.0
    """
    p = np.asarray(poly, dtype=float).reshape(-1, 2)
    if p.shape[0] < 3:
        return 0.0
    x, y = p[:, 0], p[:, 1]
    return 0.5 * float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y))


def polygon_area(poly) -> float:
    """Absolute area of a polygon (p, 2); 0 for fewer than three vertices."""
    return abs(signed_area(poly))


def point_in_polygon(point, poly) -> bool:
    """True when a point (2,) lies inside a polygon (p, 2), by the even-odd crossing rule.

    Notes
    -----
    Crossing-number test (Shimrat, "Algorithm 112: Position of point relative to polygon",
    Comm. ACM 5(8), 1962): a ray to +x crosses the boundary an odd number of times from inside.
    Points exactly on an edge may go either way.
    """
    pt = np.asarray(point, dtype=float)
    p = np.asarray(poly, dtype=float).reshape(-1, 2)
    x, y = p[:, 0], p[:, 1]
    x2, y2 = np.roll(x, -1), np.roll(y, -1)
    cross = (y > pt[1]) != (y2 > pt[1])
    with np.errstate(divide="ignore", invalid="ignore"):
        xi = x + (pt[1] - y) * (x2 - x) / (y2 - y)
    return bool(np.count_nonzero(cross & (pt[0] < xi)) % 2)


def orient_loops(loops: list[np.ndarray]) -> list[np.ndarray]:
    """Orient closed loops: outer boundaries counter-clockwise, holes (odd nesting depth) clockwise.

    Parameters
    ----------
    loops : list of ndarray, shape (p, 2)
        Disjoint, non-crossing loops (e.g. the section of one solid).

    Returns
    -------
    list of ndarray
        The same loops, reversed where needed, so that a nonzero-winding fill draws the holes.
    """
    out = []
    for i, lp in enumerate(loops):
        depth = sum(point_in_polygon(lp[0], other) for j, other in enumerate(loops) if j != i)
        ccw = signed_area(lp) > 0
        out.append(lp if ccw == (depth % 2 == 0) else lp[::-1])
    return out


def convex_clip(subject, clip) -> np.ndarray:
    """Part of a polygon inside a convex counter-clockwise polygon.

    Parameters
    ----------
    subject : array_like, shape (p, 2)
        Any simple polygon (the result is exact when it is convex).
    clip : array_like, shape (c, 2)
        Convex polygon, counter-clockwise.

    Returns
    -------
    ndarray, shape (r, 2)
        The clipped polygon (``r = 0`` when nothing is left). Points on a clip edge are kept.

    Notes
    -----
    Sutherland and Hodgman, "Reentrant polygon clipping", Comm. ACM 17(1), 1974: the subject is
    cut by the half-plane of each clip edge in turn.

    Examples
    --------
    >>> sq = [[0, 0], [2, 0], [2, 2], [0, 2]]
    >>> polygon_area(convex_clip(sq, [[1, 1], [3, 1], [3, 3], [1, 3]]))
    1.0
    """
    out = np.asarray(subject, dtype=float).reshape(-1, 2)
    c = np.asarray(clip, dtype=float).reshape(-1, 2)
    for i in range(c.shape[0]):
        if out.shape[0] == 0:
            break
        a, b = c[i], c[(i + 1) % c.shape[0]]
        e = b - a
        side = e[0] * (out[:, 1] - a[1]) - e[1] * (out[:, 0] - a[0])
        res = []
        for k in range(out.shape[0]):
            k1 = (k + 1) % out.shape[0]
            p, q, sp, sq = out[k], out[k1], side[k], side[k1]
            if sp >= 0:
                res.append(p)
            if (sp >= 0) != (sq >= 0):
                res.append(p + (q - p) * (sp / (sp - sq)))
        out = np.array(res).reshape(-1, 2)
    return out


def clip_to_rectangle(poly, x0: float, x1: float, y0: float, y1: float) -> np.ndarray:
    """Part of a polygon (p, 2) inside the rectangle ``[x0, x1] x [y0, y1]`` (:func:`convex_clip`)."""
    rect = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]], dtype=float)
    return convex_clip(poly, rect)


def convex_hull(points) -> np.ndarray:
    """Counter-clockwise convex hull of plane points (v, 2), collinear points dropped.

    Returns
    -------
    ndarray, shape (h, 2)
        Hull vertices, counter-clockwise, starting at the lowest-x (then lowest-y) point; fewer
        than three rows when the points are all collinear or coincide.

    Notes
    -----
    Monotone chain (Andrew, "Another efficient algorithm for convex hulls in two dimensions",
    Inf. Process. Lett. 9(5), 1979). Points are rounded to 15 decimals first so that duplicates
    from rounding merge.

    Examples
    --------
    >>> convex_hull([[0, 0], [1, 0], [1, 1], [0, 1], [0.5, 0.5]]).tolist()
    [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]]
    """
    P = np.unique(np.round(np.asarray(points, dtype=float).reshape(-1, 2), 15), axis=0)
    if P.shape[0] < 3:
        return P
    P = P[np.lexsort((P[:, 1], P[:, 0]))]

    def cross(o, a, b):
        return (a[0] - o[0]) * (b[1] - o[1]) - (a[1] - o[1]) * (b[0] - o[0])

    def half(pts):
        h: list[np.ndarray] = []
        for p in pts:
            while len(h) >= 2 and cross(h[-2], h[-1], p) <= 0:
                h.pop()
            h.append(p)
        return h

    lower, upper = half(P), half(P[::-1])
    return np.array(lower[:-1] + upper[:-1])


def circle_rectangle_area(cx: float, cy: float, radius: float, x0: float, x1: float, y0: float,
                          y1: float) -> float:
    """Exact area of a disc intersected with an axis-aligned rectangle.

    Parameters
    ----------
    cx, cy, radius : float
        Disc centre and radius.
    x0, x1, y0, y1 : float
        Rectangle ``[x0, x1] x [y0, y1]``.

    Returns
    -------
    float
        Area, by integrating the chord length ``min(x1, cx + c) - max(x0, cx - c)``,
        ``c(t) = sqrt(R^2 - t^2)``, piecewise exactly with the antiderivative
        ``(t c + R^2 asin(t / R)) / 2`` between the heights where the chord meets a side.

    Examples
    --------
    >>> round(circle_rectangle_area(0, 0, 1, -2, 2, -2, 2), 12) == round(np.pi, 12)
    True
    """
    R = float(radius)
    if R <= 0:
        return 0.0
    X0, X1 = float(x0) - cx, float(x1) - cx
    lo, hi = max(float(y0) - cy, -R), min(float(y1) - cy, R)
    if hi <= lo or X1 <= X0:
        return 0.0
    brk = {lo, hi}
    for X in (X0, X1):
        if abs(X) < R:
            t = np.sqrt(R * R - X * X)
            brk.update((t, -t))
    ts = sorted(t for t in brk if lo <= t <= hi)

    def prim(t):  # int c(t) dt
        t = min(max(t, -R), R)
        return 0.5 * (t * np.sqrt(max(R * R - t * t, 0.0)) + R * R * np.arcsin(t / R))

    area = 0.0
    for ta, tb in zip(ts[:-1], ts[1:]):
        if tb <= ta:
            continue
        tm = 0.5 * (ta + tb)
        cm = np.sqrt(R * R - tm * tm)
        # which ends bind on this piece: right end min(X1, c), left end max(X0, -c)
        right_c = cm < X1
        left_c = -cm > X0
        if (X1 if not right_c else cm) <= (X0 if not left_c else -cm):
            continue
        ncirc = int(right_c) + int(left_c)
        const = (0.0 if right_c else X1) - (0.0 if left_c else X0)
        area += ncirc * (prim(tb) - prim(ta)) + const * (tb - ta)
    return float(area)
