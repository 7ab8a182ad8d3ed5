"""Soft-iron constitutive law for the finite-element reference: the Frohlich-Kennelly curve.

The polarization ``J = B - mu0 H`` is parallel to ``H`` with magnitude

    |J| = chi mu0 |H| / (1 + chi mu0 |H| / Js),      chi = mu_r - 1,

(O. Frohlich, Elektrotechnische Zeitschrift 2 (1881) 134; A. E. Kennelly, "Magnetic reluctance",
Trans. AIEE 8 (1891) 485; citations from memory). It starts with slope ``chi`` and tends to ``Js``. With ``h = mu0 |H|`` (T)
and ``b = |B|`` it gives ``b = h + chi h / (1 + chi h / Js)``, a quadratic in ``h``:

    (chi / Js) h^2 + (1 + chi - b chi / Js) h - b = 0,

whose positive root is taken in the cancellation-free form. ``Js = inf`` is the linear law
``h = b / mu_r``. The vector-potential formulation needs ``H(B)`` and its Jacobian
``dH/dB = nu I + (nu_d - nu) e e^T`` (``e = B / |B|``, ``nu = h / (mu0 b)``, ``nu_d = h'(b) / mu0``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.constants import mu_0


@dataclass(frozen=True)
class FrohlichKennelly:
    """Frohlich-Kennelly soft iron: relative permeability ``mu_r`` at low field, saturation ``Js_T``.

    ``Js_T = inf`` gives linear iron.
    """

    mu_r: float
    Js_T: float = float("inf")

    @property
    def linear(self) -> bool:
        return not np.isfinite(self.Js_T)

    def h_of_b(self, b_T) -> tuple[np.ndarray, np.ndarray]:
        """``mu0 |H|`` (T) and its derivative ``d(mu0 |H|)/d|B|`` for ``|B|`` (T), any shape."""
        b = np.asarray(b_T, dtype=float)
        chi = self.mu_r - 1.0
        if self.linear:
            return b / self.mu_r, np.full_like(b, 1.0 / self.mu_r)
        k = chi / self.Js_T
        beta = 1.0 + chi - b * k
        disc = np.sqrt(beta * beta + 4.0 * k * b)
        with np.errstate(divide="ignore", invalid="ignore"):
            h = np.where(beta >= 0.0, 2.0 * b / (beta + disc), (disc - beta) / (2.0 * k))
        dh = (1.0 + k * h) / disc
        return h, dh

    def polarization_T(self, h_T) -> np.ndarray:
        """``|J|`` (T) for ``mu0 |H|`` (T): the curve itself."""
        h = np.asarray(h_T, dtype=float)
        chi = self.mu_r - 1.0
        if self.linear:
            return chi * h
        return chi * h / (1.0 + chi * h / self.Js_T)

    def field_and_tangent(self, Br, Bz):
        """``H`` (A/m) and ``dH/dB`` (A/(m T)) for ``B = (Br, Bz)`` (T) arrays of one shape.

        Returns ``Hr, Hz, n_rr, n_rz, n_zz``.
        """
        b = np.hypot(Br, Bz)
        h, dh = self.h_of_b(b)
        with np.errstate(divide="ignore", invalid="ignore"):
            nu = np.where(b > 0.0, h / np.where(b > 0.0, b, 1.0), 1.0 / self.mu_r) / mu_0
            er = np.where(b > 0.0, Br / np.where(b > 0.0, b, 1.0), 0.0)
            ez = np.where(b > 0.0, Bz / np.where(b > 0.0, b, 1.0), 0.0)
        nud = dh / mu_0
        d = nud - nu
        return nu * Br, nu * Bz, nu + d * er * er, d * er * ez, nu + d * ez * ez
