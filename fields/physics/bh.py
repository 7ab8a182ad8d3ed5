"""Magnetization curves of soft iron: polarization as a function of the field, cell by cell.

A curve maps ``h = mu0 |H|`` (T) to ``|J|`` (T) for an isotropic, anhysteretic material whose
polarization is parallel to H. Two kinds:

- :class:`FrohlichKennelly`, the two-parameter curve ``|J| = chi h / (1 + chi h / Js)``
  (Frohlich 1881 and Kennelly, Trans. AIEE 8 (1891) 485; references from memory). It starts with
  slope ``chi = mu_r - 1`` and tends to ``Js``.
- :class:`TableCurve`, measured ``(H, B)`` pairs: the polarization ``J = B - mu0 H`` is
  interpolated monotonically in ``H`` (Fritsch and Carlson, SIAM J. Numer. Anal. 17 (1980) 238,
  ``scipy.interpolate.PchipInterpolator``), so that both ``J`` and ``B`` stay monotone between the
  points (interpolating ``B`` can overshoot ``J`` near saturation), and continued with slope
  ``mu0`` in ``B`` (constant polarization) beyond the last point.

:func:`polarization_and_tensor` turns a curve into the vector law ``J(h)`` and its differential
susceptibility tensor ``dJ/dh = s ĥĥ^T + (|J| / |h|)(I - ĥĥ^T)`` (``s = d|J|/dh``), the local part
of the Newton Jacobian of the cell solve.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.constants import mu_0
from scipy.interpolate import PchipInterpolator

from fields.physics.checks import input_error


@dataclass(frozen=True)
class FrohlichKennelly:
    """``|J| = chi h / (1 + chi h / Js)``, ``h = mu0 |H|`` (T).

    Attributes
    ----------
    chi : float
        Initial susceptibility ``mu_r - 1`` (> 0).
    saturation_T : float
        Saturation polarization ``Js`` (T, > 0).

    Examples
    --------
    >>> c = FrohlichKennelly(999.0, 1.6)
    >>> round(float(c.polarization_T(1.6 / 999.0)), 6)  # chi h = Js: half saturated
    0.8
    """

    chi: float
    saturation_T: float

    def __post_init__(self):
        if not (np.isfinite(self.chi) and self.chi > 0.0):
            raise input_error("FrohlichKennelly", "chi", "a positive number (mu_r > 1)", self.chi)
        if not (np.isfinite(self.saturation_T) and self.saturation_T > 0.0):
            raise input_error("FrohlichKennelly", "saturation_T", "a positive polarization in tesla", self.saturation_T)

    @property
    def initial_susceptibility(self) -> float:
        return float(self.chi)

    def polarization_T(self, h_T) -> np.ndarray:
        """``|J|`` (T) at ``h = mu0 |H|`` (T), h >= 0."""
        h = np.asarray(h_T, dtype=float)
        return self.chi * h / (1.0 + self.chi * h / self.saturation_T)

    def slope(self, h_T) -> np.ndarray:
        """``d|J|/dh`` (dimensionless)."""
        h = np.asarray(h_T, dtype=float)
        return self.chi / (1.0 + self.chi * h / self.saturation_T) ** 2

    def secant(self, h_T) -> np.ndarray:
        """``|J| / h`` (its limit ``chi`` at h = 0)."""
        h = np.asarray(h_T, dtype=float)
        return self.chi / (1.0 + self.chi * h / self.saturation_T)


@dataclass(frozen=True, eq=False)
class TableCurve:
    """A measured B-H curve: ``B - mu0 H`` by monotone cubic interpolation, slope ``mu0`` beyond the table.

    Attributes
    ----------
    H_A_per_m, B_T : ndarray, shape (p,)
        Strictly increasing field (A/m) and flux density (T), starting at ``(0, 0)``.
    saturation_T : float
        ``B - mu0 H`` at the last point: the polarization the curve keeps beyond the table.

    Examples
    --------
    >>> c = TableCurve.from_points([0, 100, 1000, 10000], [0, 0.5, 1.4, 1.8])
    >>> round(float(c.polarization_T(mu_0 * 100.0)), 6)  # B - mu0 H at a table point
    0.499874
    """

    H_A_per_m: np.ndarray
    B_T: np.ndarray
    saturation_T: float
    _interp: PchipInterpolator
    _slope: PchipInterpolator

    @classmethod
    def from_points(cls, H_A_per_m, B_T, where: str = "TableCurve") -> TableCurve:
        """Validate the points and build the interpolant (``where`` names the input in errors)."""
        H = np.asarray(H_A_per_m, dtype=float).reshape(-1)
        B = np.asarray(B_T, dtype=float).reshape(-1)
        if H.size != B.size or H.size < 3:
            raise input_error(where, "(H, B) points", "at least 3 pairs of equal length", (H.size, B.size))
        if H[0] != 0.0 or B[0] != 0.0:
            raise input_error(where, "first (H, B) point", "(0, 0)", (float(H[0]), float(B[0])))
        if np.any(np.diff(H) <= 0.0) or np.any(np.diff(B) <= 0.0):
            raise input_error(where, "H and B", "strictly increasing", "a non-increasing step")
        J = B - mu_0 * H
        if np.any(np.diff(J) < 0.0):
            raise input_error(where, "B - mu0 H", "non-decreasing (slope of B at least mu0)", float(np.diff(J).min()))
        f = PchipInterpolator(H, J, extrapolate=False)
        return cls(H, B, float(J[-1]), f, f.derivative())

    @property
    def initial_susceptibility(self) -> float:
        return float(self._slope(0.0) / mu_0)

    def polarization_T(self, h_T) -> np.ndarray:
        H = np.asarray(h_T, dtype=float) / mu_0
        inside = H <= self.H_A_per_m[-1]
        return np.where(inside, self._interp(np.minimum(H, self.H_A_per_m[-1])), self.saturation_T)

    def slope(self, h_T) -> np.ndarray:
        H = np.asarray(h_T, dtype=float) / mu_0
        inside = H <= self.H_A_per_m[-1]
        return np.where(inside, self._slope(np.minimum(H, self.H_A_per_m[-1])) / mu_0, 0.0)

    def secant(self, h_T) -> np.ndarray:
        h = np.asarray(h_T, dtype=float)
        small = h <= 0.0
        with np.errstate(divide="ignore", invalid="ignore"):
            s = self.polarization_T(h) / np.where(small, 1.0, h)
        return np.where(small, self.initial_susceptibility, s)


def polarization_and_tensor(curve, h_T: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Vector law of an isotropic curve.

    Parameters
    ----------
    curve : FrohlichKennelly or TableCurve
    h_T : ndarray, shape (c, d)
        ``mu0 H`` per cell (T), ``d`` components (2 for ring cells, 3 in space).

    Returns
    -------
    J_T : ndarray, shape (c, d)
        Polarization, parallel to ``h``.
    dJ_dh : ndarray, shape (c, d, d)
        Differential susceptibility tensor ``s ĥĥ^T + (|J|/|h|)(I - ĥĥ^T)``.
    """
    h = np.asarray(h_T, dtype=float)
    mag = np.linalg.norm(h, axis=-1)
    sec = curve.secant(mag)
    slope = curve.slope(mag)
    J = sec[..., None] * h
    with np.errstate(divide="ignore", invalid="ignore"):
        u = np.where(mag[..., None] > 0.0, h / np.where(mag > 0.0, mag, 1.0)[..., None], 0.0)
    uu = u[..., :, None] * u[..., None, :]
    eye = np.eye(h.shape[-1])
    T = slope[..., None, None] * uu + sec[..., None, None] * (eye - uu)
    return J, T


def field_of_polarization_T(curve, J_mag_T) -> np.ndarray:
    """The inverse curve: ``h = mu0 |H|`` (T) at which the curve reaches ``|J|`` (T).

    ``|J|`` must lie below the curve's saturation (the inverse tends to infinity there). The
    Frohlich-Kennelly inverse is ``h = |J| / (chi (1 - |J|/Js))``; a table is inverted by bisection
    on its monotone interpolant (60 halvings: to rounding).
    """
    J = np.asarray(J_mag_T, dtype=float)
    if isinstance(curve, FrohlichKennelly):
        return J / (curve.chi * (1.0 - J / curve.saturation_T))
    lo = np.zeros(J.shape)
    hi = np.full(J.shape, mu_0 * float(curve.H_A_per_m[-1]))
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        below = curve.polarization_T(mid) < J
        lo = np.where(below, mid, lo)
        hi = np.where(below, hi, mid)
    return 0.5 * (lo + hi)


def field_and_inverse_tensor(curve, J_T: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Inverse vector law: ``h`` (c, d) parallel to ``J`` (c, d) and ``dh/dJ`` (c, d, d).

    ``dh/dJ = (1/s) ĵĵ^T + (|h|/|J|)(I - ĵĵ^T)``, the inverse of the differential susceptibility
    tensor of :func:`polarization_and_tensor`; ``|J|`` below saturation.
    """
    J = np.asarray(J_T, dtype=float)
    mag = np.linalg.norm(J, axis=-1)
    h = field_of_polarization_T(curve, mag)
    s = curve.slope(h)
    sec = curve.secant(h)
    with np.errstate(divide="ignore", invalid="ignore"):
        u = np.where(mag[..., None] > 0.0, J / np.where(mag > 0.0, mag, 1.0)[..., None], 0.0)
    uu = u[..., :, None] * u[..., None, :]
    eye = np.eye(J.shape[-1])
    Tinv = (1.0 / s)[..., None, None] * uu + (1.0 / sec)[..., None, None] * (eye - uu)
    return h[..., None] * u, Tinv


def saturation_of(curve) -> float:
    """The largest polarization the curve reaches (T): ``Js`` or the table's last ``B - mu0 H``."""
    return float(curve.saturation_T)
