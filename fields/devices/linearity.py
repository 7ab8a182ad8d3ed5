"""Linear range of a sensor curve and the inverse table gap(reading).

Linear range: the gaps around the operating gap where the slope stays within ``linearity_tolerance``
(default 10 %) of its value at the operating gap. The edges are found between grid points (the
grid only brackets them), so the range never snaps to the grid.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fields.errors import InputError, SolverError

#: default linearity tolerance: slope within 10 % of its operating-gap value (a design choice)
LINEARITY_TOLERANCE = 0.1
#: central-difference step for slopes (m)
SLOPE_STEP_M = 1e-6


def sensor_gaps(design, gaps_m=None, operating_gap_m: float | None = None) -> tuple[np.ndarray, float]:
    """The sorted gap grid (default the study's) and the operating gap (default the study's).

    Parameters
    ----------
    design : Design
    gaps_m : array_like, shape (g,), optional
    operating_gap_m : float, optional

    Returns
    -------
    (gaps_m, operating_gap_m) : tuple of ndarray, shape (g,), and float
    """
    st = design.study
    gaps = st.gaps() if gaps_m is None else np.sort(np.atleast_1d(np.asarray(gaps_m, dtype=float)))
    return gaps, float(st.operating_gap_m if operating_gap_m is None else operating_gap_m)


def _first_failure(g, ok, start: int, step: int) -> int | None:
    """Index of the first grid point failing the band, walking from ``start`` by ``step`` (None: none fails)."""
    i = start
    while 0 <= i < g.size:
        if not ok[i]:
            return i
        i += step
    return None


def _refine_edges(brackets, measure_fn, samples: int, rounds: int) -> list[float]:
    """Edges where the measure first turns positive walking from each bracket's inner end.

    Each bracket is ``(inner, outer, m_inner, m_outer)`` with ``m_inner <= 0 < m_outer``. Every
    round samples all brackets at ``samples`` interior points in one call of ``measure_fn`` and
    keeps the sub-interval before the first failing sample (so a narrow excursion inside the
    bracket is found too, at the sampling's resolution); the edge is the linear zero of the
    measure in the final sub-interval. Each round shrinks a bracket by ``samples + 1``.
    """
    br = [list(b) for b in brackets]
    t = np.arange(1, samples + 1) / (samples + 1)
    for _ in range(rounds):
        if not br:
            break
        pts = np.concatenate([b[0] + t * (b[1] - b[0]) for b in br])
        m = np.asarray(measure_fn(pts), dtype=float).reshape(len(br), samples)
        for b, mb in zip(br, m):
            bad = np.nonzero(~(mb <= 0))[0]  # NaN counts as failing
            xs = b[0] + t * (b[1] - b[0])
            if bad.size:
                j = int(bad[0])
                if j > 0:
                    b[0], b[2] = xs[j - 1], mb[j - 1]
                b[1], b[3] = xs[j], mb[j]
            else:
                b[0], b[2] = xs[-1], mb[-1]
    out = []
    for inner, outer, mi, mo in br:
        f = mi / (mi - mo) if np.isfinite(mo) and mo > mi else 0.0  # not finite outside: the inner end
        out.append(float(inner + f * (outer - inner)))
    return out


#: linear-range edge search: interior samples per bracket and round, and rounds (shrink 17^4)
EDGE_SAMPLES = 16
EDGE_ROUNDS = 4


def linear_range(gaps_m, slopes, operating_gap_m: float, slope_at_operating,
                 tolerance: float = LINEARITY_TOLERANCE, slope_fn=None,
                 samples: int = EDGE_SAMPLES, rounds: int = EDGE_ROUNDS) -> tuple[float, float]:
    """Gap interval around the operating gap where the slope stays within ``tolerance``.

    The nonlinearity measure is ``m(g) = |s(g) - s_op| - tolerance |s_op|`` (negative inside the
    band). Walking outwards from the operating gap on the grid brackets each edge between the last
    point inside the band (or the operating gap itself, where ``m = -tolerance |s_op| < 0``) and the
    first point outside it; the edge is then located between grid points by repeated sampling of
    the bracket (:data:`EDGE_SAMPLES` points, :data:`EDGE_ROUNDS` rounds) and a final linear zero.
    So a range exists, and is returned, whenever the slope at the operating gap is finite and
    nonzero, however narrow it is compared with the grid spacing.

    Parameters
    ----------
    gaps_m : ndarray, shape (g,)
        Increasing gap grid.
    slopes : ndarray, shape (g,)
        Slope of the reading at each gap.
    operating_gap_m : float
    slope_at_operating : float
    tolerance : float
        Relative band, default 0.1.
    slope_fn : callable, optional
        ``slope_fn(gaps (n,)) -> slopes (n,)``: the slope evaluated anywhere (the sensor's own
        model). Without it the slope is interpolated between grid points by a monotone cubic
        (PCHIP) through the grid slopes and the operating point.
    samples, rounds : int
        The edge search's resolution (see above).

    Returns
    -------
    (lo_m, hi_m) : tuple of float
        ``lo < operating gap < hi``; an edge that is never left within the grid is the grid's end.
        ``(nan, nan)`` only when there is no range: the slope at the operating gap is zero or
        not finite (no sensitivity), or the operating gap lies outside the grid.

    Examples
    --------
    Slope ``s(g) = g`` around ``g = 1`` with a 10 % band: edges at 0.9 and 1.1, although the grid
    has no point between 0 and 2.

    >>> lo, hi = linear_range([0.0, 1.0, 2.0], [0.0, 1.0, 2.0], 1.0, 1.0, slope_fn=lambda g: g)
    >>> round(lo, 12), round(hi, 12)
    (0.9, 1.1)
    """
    g = np.asarray(gaps_m, dtype=float).reshape(-1)
    s = np.asarray(slopes, dtype=float).reshape(-1)
    s0 = float(slope_at_operating)
    g0 = float(operating_gap_m)
    if s0 == 0 or not np.isfinite(s0) or g.size == 0 or not (g[0] <= g0 <= g[-1]):
        return float("nan"), float("nan")
    band = tolerance * abs(s0)
    if slope_fn is None:
        from scipy.interpolate import PchipInterpolator

        gg = np.concatenate([g, [g0]])
        ss = np.concatenate([s, [s0]])
        o = np.argsort(gg, kind="stable")
        gg, ss = gg[o], ss[o]
        keep = np.concatenate([[True], np.diff(gg) > 0]) & np.isfinite(ss)
        if keep.sum() >= 2:
            interp = PchipInterpolator(gg[keep], ss[keep])
        else:
            def interp(x):
                return np.full(np.shape(x), s0)
        slope_fn = interp

    def measure(x):
        return np.abs(np.asarray(slope_fn(np.asarray(x, dtype=float)), dtype=float) - s0) - band

    m = np.abs(s - s0) - band
    ok = m <= 0
    brackets, ends = [], []
    for step in (-1, 1):
        # nearest grid point strictly beyond the operating gap on this side
        start = int(np.searchsorted(g, g0, side="left")) - 1 if step < 0 else int(np.searchsorted(g, g0, side="right"))
        j = _first_failure(g, ok, start, step)
        if j is None:
            ends.append(float(g[0] if step < 0 else g[-1]))
            continue
        k = j - step  # the last passing grid point on this side, if any
        if j != start:
            inner, mi = float(g[k]), float(m[k])
        else:
            inner, mi = g0, -band
        mo = float(m[j]) if np.isfinite(m[j]) else np.inf
        brackets.append((inner, float(g[j]), mi, mo))
        ends.append(None)
    edges = iter(_refine_edges(brackets, measure, samples, rounds))
    lo, hi = (e if e is not None else next(edges) for e in ends)
    return float(lo), float(hi)


@dataclass(frozen=True)
class InverseTable:
    """Gap as a function of a sensor reading (monotone cubic interpolation).

    Attributes
    ----------
    reading : ndarray, shape (g,)
        Readings in increasing order (T for Hall sensors, fraction for beam gates).
    gap_m : ndarray, shape (g,)
        The gaps at those readings.
    """

    reading: np.ndarray
    gap_m: np.ndarray

    def __call__(self, readings) -> np.ndarray:
        """Gap (m) at readings; outside the tabulated range is an error."""
        from scipy.interpolate import PchipInterpolator

        r = np.asarray(readings, dtype=float)
        if np.any(r < self.reading[0]) or np.any(r > self.reading[-1]):
            bad = r[(r < self.reading[0]) | (r > self.reading[-1])].reshape(-1)[0]
            raise InputError(f"InverseTable: reading must be within [{self.reading[0]:.6g}, "
                             f"{self.reading[-1]:.6g}]; got {float(bad)!r}.")
        return PchipInterpolator(self.reading, self.gap_m)(r)


def inverse_table(gaps_m, readings) -> InverseTable:
    """Build gap(reading) from a reading vs gap curve; the reading must be strictly monotone.

    Parameters
    ----------
    gaps_m : array_like, shape (g,)
    readings : array_like, shape (g,)

    Returns
    -------
    InverseTable
        Monotone piecewise-cubic (PCHIP, Fritsch and Carlson 1980, SIAM J. Numer. Anal. 17(2))
        interpolation of the gap in the reading, which preserves the monotonicity.

    Raises
    ------
    SolverError
        When the reading is not strictly monotone over the range.

    Examples
    --------
    >>> t = inverse_table([1e-3, 2e-3, 3e-3], [0.3, 0.2, 0.1])
    >>> round(float(t(0.2)) * 1e3, 9)
    2.0
    """
    g = np.asarray(gaps_m, dtype=float).reshape(-1)
    r = np.asarray(readings, dtype=float).reshape(-1)
    if g.size != r.size or g.size < 2:
        raise InputError(f"inverse_table: gaps_m and readings must have the same length, at least 2; "
                         f"got {(g.size, r.size)}.")
    o = np.argsort(g)
    g, r = g[o], r[o]
    dr = np.diff(r)
    if not (np.all(dr > 0) or np.all(dr < 0)):
        i = int(np.nonzero(np.sign(dr[1:]) != np.sign(dr[0]))[0][0] + 1) if np.any(dr != 0) else 0
        raise SolverError(f"inverse_table: the reading must be strictly monotone in the gap over "
                          f"[{g[0] * 1e3:.4g}, {g[-1] * 1e3:.4g}] mm; got a turning or flat point near gap "
                          f"{g[i + 1] * 1e3:.4g} mm.")
    if dr[0] < 0:
        g, r = g[::-1], r[::-1]
    return InverseTable(r, g)

