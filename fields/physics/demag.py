"""Magnetometric demagnetizing factors of cylinders, rings and cuboids.

The magnetometric (volume-averaged) factor ``N`` relates the mean demagnetizing field of a
uniformly magnetized body to its magnetization, ``<H_d> = -N M``. The three factors along a body's
own axes always sum to one. They are used by :mod:`fields.physics.cores` for the uniform-magnetization core
approximation ``M = chi / (1 + N chi) H_mean``.

All functions return factors along the body's own ``(x, y, z)`` axes (z = cylinder axis).
"""

from __future__ import annotations

import numpy as np
from scipy import integrate, special

from fields.physics.checks import input_error


def _positive(where: str, what: str, value: float) -> float:
    v = float(value)
    if not np.isfinite(v) or v <= 0.0:
        raise input_error(where, what, "a positive finite length in metres", value)
    return v


def cylinder_demag_factors(diameter_m: float, height_m: float) -> np.ndarray:
    """Magnetometric demagnetizing factors of a solid circular cylinder.

    Parameters
    ----------
    diameter_m, height_m : float
        Cylinder diameter and height (m).

    Returns
    -------
    ndarray, shape (3,)
        ``(N_x, N_y, N_z)``; z is the cylinder axis, ``N_x = N_y = (1 - N_z) / 2``.

    Notes
    -----
    Closed form with complete elliptic integrals ``K(k)``, ``E(k)`` of modulus
    ``k = 1/sqrt(1 + tau^2)``, ``tau = height/diameter``:
    ``N_z = 1 + 4/(3 pi tau) [1 - ((1 - tau^2) E + tau^2 K)/k]``,
    the circular limit of the elliptic-cylinder result of Beleggia, De Graef, Millev, Goode and
    Rowlands, J. Phys. D 38 (2005) 3333, which reproduces the magnetometric factors tabulated by
    Chen, Brug and Goldfarb, IEEE Trans. Magn. 27(4) (1991) 3601. The transverse factor follows
    from the trace rule ``N_x + N_y + N_z = 1``.

    Examples
    --------
    >>> N = cylinder_demag_factors(0.01, 0.01)
    >>> round(float(N[2]), 5), round(float(N.sum()), 12)
    (0.31158, 1.0)
    """
    d = _positive("cylinder_demag_factors", "diameter_m", diameter_m)
    h = _positive("cylinder_demag_factors", "height_m", height_m)
    tau = h / d
    m = 1.0 / (1.0 + tau * tau)
    k = np.sqrt(m)
    # the bracket cancels for thin discs: relative rounding about 1e-16 / tau, harmless for tau > 1e-8
    nz = 1.0 + 4.0 / (3.0 * np.pi * tau) * (
        1.0 - ((1.0 - tau * tau) * special.ellipe(m) + tau * tau * special.ellipk(m)) / k
    )
    nt = 0.5 * (1.0 - nz)
    return np.array([nt, nt, nz])


def ring_demag_factors(inner_diameter_m: float, outer_diameter_m: float, height_m: float) -> np.ndarray:
    """Magnetometric demagnetizing factors of a ring (hollow cylinder), by a Bessel integral.

    Parameters
    ----------
    inner_diameter_m, outer_diameter_m, height_m : float
        Ring dimensions (m); ``inner < outer``. ``inner = 0`` gives the solid cylinder.

    Returns
    -------
    ndarray, shape (3,)
        ``(N_x, N_y, N_z)``, z the ring axis.

    Notes
    -----
    The magnetostatic energy of the two charged annular end faces (Hankel transform of
    ``1/|x - x'|``) gives, with ``a, b`` the inner and outer radii and ``L`` the height,
    ``N_z = 2 / ((b^2 - a^2) L) * int_0^inf (b J1(kb) - a J1(ka))^2 (1 - exp(-kL)) / k^2 dk``;
    the same route as Joseph, J. Appl. Phys. 37 (1966) 4639 for the solid cylinder. The transverse
    factor follows from the trace rule. Evaluated with ``scipy.integrate.quad`` between the zeros
    of the oscillation scale (relative accuracy about 1e-9).
    """
    a = float(inner_diameter_m) / 2.0
    if not np.isfinite(a) or a < 0.0:
        raise input_error("ring_demag_factors", "inner_diameter_m", "a non-negative length", inner_diameter_m)
    b = _positive("ring_demag_factors", "outer_diameter_m", outer_diameter_m) / 2.0
    L = _positive("ring_demag_factors", "height_m", height_m)
    if a >= b:
        raise input_error("ring_demag_factors", "inner_diameter_m", "smaller than outer_diameter_m", inner_diameter_m)

    def f(k: float) -> float:
        g = b * special.j1(k * b) - a * special.j1(k * a)
        return g * g * (-np.expm1(-k * L)) / (k * k)

    # integrate panel by panel over the oscillation period of J1(k b); the tail decays like k^-3
    step = np.pi / b
    edges = np.arange(0.0, 400.0 * step + step / 2, step)
    total = 0.0
    for lo, hi in zip(edges[:-1], edges[1:]):
        total += integrate.quad(f, lo, hi, epsabs=0.0, epsrel=1e-12, limit=100)[0]
    # tail: <(b J1(kb) - a J1(ka))^2> ~ (b + a)/(pi k) on average and 1 - exp(-kL) ~ 1
    kmax = edges[-1]
    total += (a + b) / (np.pi * 2.0 * kmax * kmax)
    nz = 2.0 * total / ((b * b - a * a) * L)
    nt = 0.5 * (1.0 - nz)
    return np.array([nt, nt, nz])


def _aharoni_nz(a: float, b: float, c: float) -> float:
    """Aharoni (1998) eq. (1): N_z of a prism of half-edges a, b, c (z along c)."""
    abc = np.sqrt(a * a + b * b + c * c)
    ab = np.sqrt(a * a + b * b)
    bc = np.sqrt(b * b + c * c)
    ac = np.sqrt(a * a + c * c)
    s = (
        (b * b - c * c) / (2 * b * c) * np.log((abc - a) / (abc + a))
        + (a * a - c * c) / (2 * a * c) * np.log((abc - b) / (abc + b))
        + b / (2 * c) * np.log((ab + a) / (ab - a))
        + a / (2 * c) * np.log((ab + b) / (ab - b))
        + c / (2 * a) * np.log((bc - b) / (bc + b))
        + c / (2 * b) * np.log((ac - a) / (ac + a))
        + 2 * np.arctan(a * b / (c * abc))
        + (a**3 + b**3 - 2 * c**3) / (3 * a * b * c)
        + (a * a + b * b - 2 * c * c) / (3 * a * b * c) * abc
        + c / (a * b) * (ac + bc)
        - (ab**3 + bc**3 + ac**3) / (3 * a * b * c)
    )
    return float(s / np.pi)


def cuboid_demag_factors(dimensions_m) -> np.ndarray:
    """Magnetometric demagnetizing factors of a rectangular prism.

    Parameters
    ----------
    dimensions_m : sequence of 3 float
        Edge lengths along the prism's own x, y, z (m).

    Returns
    -------
    ndarray, shape (3,)
        ``(N_x, N_y, N_z)``.

    Notes
    -----
    Closed form of Aharoni, "Demagnetizing factors for rectangular ferromagnetic prisms",
    J. Appl. Phys. 83 (1998) 3432, eq. (1), applied with the axes permuted.

    Examples
    --------
    >>> [round(float(v), 12) for v in cuboid_demag_factors((0.01, 0.01, 0.01))]
    [0.333333333333, 0.333333333333, 0.333333333333]
    """
    d = [_positive("cuboid_demag_factors", f"dimensions_m[{i}]", v) / 2.0 for i, v in enumerate(dimensions_m)]
    if len(d) != 3:
        raise input_error("cuboid_demag_factors", "dimensions_m", "three edge lengths", dimensions_m)
    a, b, c = d
    return np.array([_aharoni_nz(b, c, a), _aharoni_nz(c, a, b), _aharoni_nz(a, b, c)])


def core_demag_factors(shape: str, dimensions_m) -> np.ndarray:
    """Demagnetizing factors (3,) of a core or magnet shape along its own axes.

    Parameters
    ----------
    shape : str
        ``"cylinder"`` (diameter, height), ``"ring"`` (inner diameter, outer diameter, height)
        or ``"cuboid"`` (x, y, z).
    dimensions_m : sequence of float
    """
    if shape == "cylinder":
        return cylinder_demag_factors(dimensions_m[0], dimensions_m[1])
    if shape == "ring":
        return ring_demag_factors(*dimensions_m)
    if shape == "cuboid":
        return cuboid_demag_factors(dimensions_m)
    raise input_error("core_demag_factors", "shape", "one of cylinder, ring, cuboid", shape)
