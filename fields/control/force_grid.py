"""A force table on a grid of positions and currents, for floaters whose force is not affine in current.

A soft-iron floater (a steel ball) is pulled by an induced magnetization: ``F(s, I)`` grows about
with ``I^2`` and bends further where the iron saturates. :class:`GridForceTable` holds ``F`` on a
tensor grid and interpolates it by a bicubic spline (``scipy.interpolate.RectBivariateSpline``,
interpolating: smoothing 0). It has the interface of :class:`fields.control.plant.ForceTable`,
with the current as a second argument where the affine table needs none:

- ``force_per_ampere_N_per_A(s, I) = dF/dI``, also the back-EMF coefficient ``d lambda/ds``
  (the co-energy's mixed derivatives agree: ``dF/dI = d^2 W'/ds dI = d lambda/ds``, for any
  lossless magnetically nonlinear system, e.g. Woodson and Melcher, Electromechanical Dynamics,
  Part I, 1968, sec. 3.1);
- ``F0_N``, ``Fk_N_per_A``: the tangent in current at the bias current, ``F(s, I0) - I0 dF/dI`` and
  ``dF/dI(s, I0)`` (what an affine consumer such as the SPICE plant gets; stated there).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import optimize
from scipy.interpolate import RectBivariateSpline

from fields.errors import SolverError
from fields.physics.checks import input_error


@dataclass(frozen=True, eq=False)
class GridForceTable:
    """Magnetic force along ``+s`` on a grid: ``F(s, I)``; gravity is not in it.

    Attributes
    ----------
    positions_m : ndarray, shape (g,)
        Strictly increasing, ``g >= 4``.
    currents_A : ndarray, shape (c,)
        Strictly increasing, ``c >= 4``; the simulations clip the current inside this range.
    F_N : ndarray, shape (g, c)
    bias_current_A : float
        The operating current (for the tangent ``F0_N``/``Fk_N_per_A``).
    """

    positions_m: np.ndarray
    currents_A: np.ndarray
    F_N: np.ndarray
    bias_current_A: float

    def __post_init__(self) -> None:
        w = "GridForceTable"
        s = np.asarray(self.positions_m, dtype=float)
        c = np.asarray(self.currents_A, dtype=float)
        F = np.asarray(self.F_N, dtype=float)
        if s.ndim != 1 or s.size < 4 or c.ndim != 1 or c.size < 4:
            raise input_error(w, "positions_m and currents_A", "1-D arrays of at least 4 values each", (s.shape, c.shape))
        if F.shape != (s.size, c.size):
            raise input_error(w, "F_N", f"shape {(s.size, c.size)}", F.shape)
        if not (np.all(np.isfinite(s)) and np.all(np.isfinite(c)) and np.all(np.isfinite(F))):
            raise input_error(w, "table values", "finite", "non-finite entries")
        if np.any(np.diff(s) <= 0) or np.any(np.diff(c) <= 0):
            raise input_error(w, "positions_m and currents_A", "strictly increasing", (s.tolist()[:4], c.tolist()[:4]))
        object.__setattr__(self, "positions_m", s)
        object.__setattr__(self, "currents_A", c)
        object.__setattr__(self, "F_N", F)
        object.__setattr__(self, "_sp", RectBivariateSpline(s, c, F, kx=3, ky=3, s=0))

    def _ev(self, s_m, current_A, ds: int = 0, di: int = 0) -> np.ndarray:
        s, i = np.broadcast_arrays(np.asarray(s_m, dtype=float), np.asarray(current_A, dtype=float))
        out = self._sp.ev(s.ravel(), i.ravel(), dx=ds, dy=di).reshape(s.shape)
        return out if out.ndim else out[()]

    @property
    def range_m(self) -> tuple[float, float]:
        return float(self.positions_m[0]), float(self.positions_m[-1])

    @property
    def Fk_N_per_A(self) -> np.ndarray:
        """``dF/dI`` at the bias current at each table position (N/A)."""
        return self._ev(self.positions_m, self.bias_current_A, di=1)

    @property
    def F0_N(self) -> np.ndarray:
        """Intercept of the tangent at the bias current, ``F(s, I0) - I0 dF/dI`` (N)."""
        return self._ev(self.positions_m, self.bias_current_A) - self.bias_current_A * self.Fk_N_per_A

    def force_N(self, s_m, current_A) -> np.ndarray:
        """``F(s, I)`` (N)."""
        return self._ev(s_m, current_A)

    def zero_current_force_N(self, s_m) -> np.ndarray:
        return self._ev(s_m, 0.0)

    def force_per_ampere_N_per_A(self, s_m, current_A=None) -> np.ndarray:
        """``dF/dI`` (N/A) at ``(s, I)`` (default the bias current); the back-EMF coefficient (V s/m)."""
        return self._ev(s_m, self.bias_current_A if current_A is None else current_A, di=1)

    def stiffness_N_per_m(self, s_m, current_A) -> np.ndarray:
        return -self._ev(s_m, current_A, ds=1)

    def hover_current_A(self, mass_kg: float, gravity_m_per_s2: float, s_m: float = 0.0) -> float:
        """Current on the bias current's side of zero whose force balances ``m g`` at ``s_m`` (A)."""
        W = mass_kg * gravity_m_per_s2
        side = 1.0 if self.bias_current_A >= 0 else -1.0
        lo, hi = (0.0, float(self.currents_A[-1])) if side > 0 else (float(self.currents_A[0]), 0.0)
        f = lambda i: float(self.force_N(s_m, i)) - W  # noqa: E731
        if f(lo) * f(hi) > 0:
            raise SolverError(f"GridForceTable.hover_current_A: no current in {lo:g}..{hi:g} A balances {W:.4g} N at "
                              f"s = {s_m:g} m.")
        return float(optimize.brentq(f, lo, hi, xtol=1e-14, rtol=1e-12))

    def linearise(self, s_m: float, current_A: float) -> tuple[float, float]:
        """``(k_s N/m, k_i N/A)`` at a position and current."""
        return float(self.stiffness_N_per_m(s_m, current_A)), float(self.force_per_ampere_N_per_A(s_m, current_A))
