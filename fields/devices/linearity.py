"""Linear range of a sensor curve and the inverse table gap(reading).

Linear range: the gaps around the operating gap, walking outwards on the gap grid, where the slope
stays within ``linearity_tolerance`` (default 10 %) of its value at the operating gap.
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


def linear_range(gaps_m, slopes, operating_gap_m: float, slope_at_operating,
                 tolerance: float = LINEARITY_TOLERANCE) -> tuple[float, float]:
    """Gap interval around the operating gap where the slope stays within ``tolerance``.

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

    Returns
    -------
    (lo_m, hi_m) : tuple of float
        Outermost grid gaps reached walking outwards while ``|s - s_op| <= tol |s_op|``;
        NaN when the slope at the operating gap is zero or its neighbours already fail.
    """
    g = np.asarray(gaps_m, dtype=float)
    s = np.asarray(slopes, dtype=float)
    s0 = float(slope_at_operating)
    if s0 == 0 or not np.isfinite(s0):
        return float("nan"), float("nan")
    ok = np.abs(s - s0) <= tolerance * abs(s0)
    below = np.nonzero(g <= operating_gap_m)[0]
    above = np.nonzero(g >= operating_gap_m)[0]
    lo = hi = float(operating_gap_m)
    for i in below[::-1]:
        if not ok[i]:
            break
        lo = float(g[i])
    for i in above:
        if not ok[i]:
            break
        hi = float(g[i])
    if lo == hi:
        return float("nan"), float("nan")
    return lo, hi


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

