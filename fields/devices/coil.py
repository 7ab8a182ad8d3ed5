"""Coil electrical and thermal model: winding, resistance, inductance, heat and drive headroom.

Conventions
-----------
- A coil is a thick winding of rectangular cross-section (radii ``a..b``, height ``h``, ``N``
  turns) treated as a *uniform current density* ``j = N I / ((b - a) h)`` (see
  :class:`fields.model.Coil`).
- ``wire_diameter_m`` is the **bare copper** diameter. The fill factor is the *copper-area* fill
  factor ``N pi d^2 / 4 = fill (b - a) h``; enamel and voids are inside ``1 - fill``.
- Index letters: ``k`` coils, ``g`` gaps, ``q`` quadrature points.

Inductance
----------
The air-core self-inductance is the flux linkage of the coil's own field, written as the
fourfold integral of Maxwell's mutual inductance of two coaxial circular filaments over the
cross-section twice (Maxwell, *A Treatise on Electricity and Magnetism*, 1873, art. 701)::

    L = (N / S)^2  int_S int_S  M(r1, r2, z1 - z2) dS1 dS2,     S = (b - a) h.

The integrand has a logarithmic singularity where the two filaments coincide (the self term that
Lyle's method and Rosa's geometric-mean-distance correction approximate). Here it is integrated
exactly instead: the ``z`` integrals are reduced to one over ``u = |z1 - z2|`` with weight
``2 (h - u)``, the radii to ``r`` and ``s = r2 - r1 >= 0``; the only singular point is the corner
``(s, u) = (0, 0)`` of the ``(s, u)`` rectangle, which is covered by two Duffy triangles
(Duffy 1982, SIAM J. Numer. Anal. 19(6)) with a squared radial map, and the rest by
Gauss-Legendre panels that grow geometrically away from the corner. Two rule orders give the error
estimate. The round-wire correction of Rosa (Bull. Bureau of Standards 2, 1906) for discrete
turns is **not** applied: it is small for many-turn coils (of order ``1/N`` relative).

Mutual inductances between coils use the closed-form vector potential of a circular filament
(Smythe, *Static and Dynamic Electricity*, 1950, sec. 7.10) integrated along the other filament
(``M = oint A . dl``, trapezoid rule in angle, spectrally accurate for a periodic integrand) and
Gauss-Legendre over both cross-sections: any relative placement, windings must not overlap.

A soft-iron core (iron-free approximation of :mod:`fields.physics.sources`, uniform polarization
``J = X <B_applied>``) adds, by reciprocity (the flux a magnetic dipole ``m`` links with coil
``i`` is ``m . b_i``, ``b_i`` the coil's field per ampere)::

    L_core[i, k] = V / mu0 * <b_i>_core . J_k,      J_k = X <b_k>_core per ampere,

which is symmetric because ``X`` is.

Heat
----
Lumped steady state ``P = h_conv A (T - T_amb)`` with ``P = I^2 R(T)``, ``R(T) = R20 (1 + alpha
(T - 20 C))`` (IEC 60028). Because ``R`` is linear in ``T`` the fixed point is explicit:
``T - T_amb = P(T_amb) / (G - I^2 R20 alpha)``, ``G = h_conv A``; the iteration
``T <- T_amb + P(T) / G`` converges to it when the loop gain ``I^2 R20 alpha / G < 1`` and runs
away otherwise (reported, temperature ``inf``).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np
from scipy import special
from scipy.constants import mu_0

from fields.input import tables
from fields.errors import GeometryError
from fields.model.design import Coil, Design

#: copper-area fill factor assumed when a coil gives turns but no wire: random-wound enamelled
#: round wire reaches about 0.5-0.6 (common practice, no source)
DEFAULT_FILL_FACTOR = 0.6
#: densest packing of equal round wires (hexagonal): pi / (2 sqrt 3)
HEXAGONAL_FILL = np.pi / (2.0 * np.sqrt(3.0))
#: copper fill above which a random winding is hard to achieve (common practice, no source)
HIGH_FILL_WARNING = 0.75
#: continuous-duty current density for natural-convection coils, upper end of the usual
#: 3-4 A/mm^2 band (common practice, no source)
CONTINUOUS_CURRENT_DENSITY_A_PER_MM2 = 3.5
CURRENT_DENSITY_SOURCE = "3-4 A/mm^2 continuous duty in natural convection (common practice, no source)"
#: insulation thermal class used when the coil gives none (IEC 60085 class 130, "B")
DEFAULT_INSULATION_CLASS_C = 130.0
#: hot-spot allowance between the average (by-resistance) winding temperature and the thermal
#: class: the 10 K margin IEC 60034-1 leaves between its by-resistance rise limits and the class
#: (from memory)
HOT_SPOT_ALLOWANCE_K = 10.0
CONVECTION_SOURCE = "10 W/m^2K natural convection default (common practice, no source)"
#: displacement the drive must correct at the unstable pole's rate (headroom rule, m)
DEFAULT_CORRECTION_DISPLACEMENT_M = 1e-3


# ------------------------------------------------------------------------------------ filaments


def coaxial_loop_mutual_H(a_m, b_m, d_m) -> np.ndarray:
    """Mutual inductance of two coaxial circular filaments (Maxwell's formula).

    Parameters
    ----------
    a_m, b_m : array_like
        Loop radii (m), broadcastable.
    d_m : array_like
        Axial separation (m).

    Returns
    -------
    ndarray
        ``M = mu0 sqrt(a b) [(2/k - k) K(k) - 2 E(k) / k]`` (H), with
        ``k^2 = 4 a b / ((a + b)^2 + d^2)``.

    Notes
    -----
    Maxwell, *A Treatise on Electricity and Magnetism* (1873), art. 701; ``K`` is evaluated from the
    complementary parameter (``scipy.special.ellipkm1``) so that nearly touching filaments keep
    their digits.

    Examples
    --------
    >>> round(float(coaxial_loop_mutual_H(0.1, 0.1, 0.1)) * 1e9, 3)  # nH
    49.408
    """
    a = np.asarray(a_m, dtype=float)
    b = np.asarray(b_m, dtype=float)
    d = np.asarray(d_m, dtype=float)
    den = (a + b) ** 2 + d * d
    m1 = ((a - b) ** 2 + d * d) / den
    m = 1.0 - m1  # = 4 a b / den, kept <= 1 under rounding
    k = np.sqrt(m)
    with np.errstate(divide="ignore", invalid="ignore"):
        M = mu_0 * np.sqrt(a * b) * ((2.0 / k - k) * special.ellipkm1(m1) - 2.0 / k * special.ellipe(m))
    return np.where(m > 0, M, 0.0)


def _loop_vector_potential_per_A(radius_m, rho_m, z_m) -> np.ndarray:
    """Azimuthal vector potential A_phi (T m per A) of a circular filament at (rho, z).

    ``A_phi = mu0 / (pi k) sqrt(a / rho) [(1 - k^2 / 2) K(k) - E(k)]`` (Smythe 1950, sec. 7.10).
    """
    a = np.asarray(radius_m, dtype=float)
    rho = np.asarray(rho_m, dtype=float)
    z = np.asarray(z_m, dtype=float)
    den = (a + rho) ** 2 + z * z
    m1 = ((a - rho) ** 2 + z * z) / den
    m = 1.0 - m1  # = 4 a rho / den
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.sqrt(m)
        A = mu_0 / (np.pi * k) * np.sqrt(a / rho) * ((1.0 - 0.5 * m) * special.ellipkm1(m1) - special.ellipe(m))
    return np.where(rho > 0, A, 0.0)


def _frame(axis) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    n = np.asarray(axis, dtype=float)
    n = n / np.linalg.norm(n)
    t = np.array([1.0, 0.0, 0.0]) if abs(n[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    u = np.cross(n, t)
    u /= np.linalg.norm(u)
    return n, u, np.cross(n, u)


def filament_mutual_H(c1_m, n1, a1_m, c2_m, n2, a2_m, angles: int = 64) -> np.ndarray:
    """Mutual inductance of circular filaments in arbitrary relative placement.

    Parameters
    ----------
    c1_m, c2_m : ndarray, shape (p, 3)
        Loop centres (m).
    n1, n2 : array_like, shape (3,)
        Unit normals (axes) of all loops of set 1 and of set 2.
    a1_m, a2_m : ndarray, shape (p,)
        Radii (m).
    angles : int
        Trapezoid nodes along loop 2.

    Returns
    -------
    ndarray, shape (p,)
        ``M = oint_2 A_1 . dl_2`` (H) with the closed-form filament potential (Smythe 1950).
    """
    c1 = np.asarray(c1_m, dtype=float).reshape(-1, 3)
    c2 = np.asarray(c2_m, dtype=float).reshape(-1, 3)
    a1 = np.asarray(a1_m, dtype=float).reshape(-1)
    a2 = np.asarray(a2_m, dtype=float).reshape(-1)
    e1, _, _ = _frame(n1)
    e2, u2, v2 = _frame(n2)
    phi = 2.0 * np.pi * np.arange(angles) / angles
    cp, sp = np.cos(phi), np.sin(phi)
    radial = cp[:, None] * u2[None, :] + sp[:, None] * v2[None, :]  # (m, 3)
    tang = -sp[:, None] * u2[None, :] + cp[:, None] * v2[None, :]
    out = np.empty(c1.shape[0])
    step = max(1, 200_000 // angles)
    for s in range(0, c1.shape[0], step):
        sl = slice(s, s + step)
        pts = c2[sl, None, :] + a2[sl, None, None] * radial[None]  # (p, m, 3)
        rel = pts - c1[sl, None, :]
        z = rel @ e1
        rvec = rel - z[..., None] * e1
        rho = np.linalg.norm(rvec, axis=-1)
        with np.errstate(invalid="ignore", divide="ignore"):
            phihat = np.cross(e1[None, None, :], rvec) / rho[..., None]
        phihat = np.where(rho[..., None] > 0, phihat, 0.0)
        A = _loop_vector_potential_per_A(a1[sl, None], rho, z)
        out[sl] = (A * np.einsum("pmi,mi->pm", phihat, tang)).sum(axis=1) * a2[sl] * 2.0 * np.pi / angles
    return out


# ---------------------------------------------------------------------------- self-inductance


def _gl(n: int, lo, hi):
    x, w = np.polynomial.legendre.leggauss(int(n))
    lo = np.asarray(lo, dtype=float)
    hi = np.asarray(hi, dtype=float)
    half = 0.5 * (hi - lo)
    return lo[..., None] + half[..., None] * (x + 1.0), half[..., None] * w


def _geometric_panels(start: float, end: float) -> list[tuple[float, float]]:
    out, lo = [], start
    while lo < end * (1 - 1e-12):
        hi = min(2.0 * lo, end)
        if end - hi < 0.25 * (hi - lo):
            hi = end
        out.append((lo, hi))
        lo = hi
    return out


def _self_inductance_per_turn2(a: float, b: float, h: float, n: int) -> float:
    """L / N^2 (H) of a uniform-current-density winding, Duffy-corner rule of order n."""
    W = b - a
    xr, wr = np.polynomial.legendre.leggauss(n)

    def G(s, u):
        # 4 (h - u) int_a^{b-s} M(r, r + s, u) dr, for arrays s, u of one shape
        hi = b - s
        r = a + 0.5 * (hi - a)[..., None] * (xr + 1.0)
        M = coaxial_loop_mutual_H(r, r + s[..., None], u[..., None])
        F = 0.5 * (hi - a) * (M * wr).sum(axis=-1)
        return 4.0 * (h - u) * F

    c = min(W, h)
    total = 0.0
    # corner square [0, c]^2: two Duffy triangles, x = t^2 radially
    t, wt = _gl(n, 0.0, 1.0)
    y, wy = _gl(n, 0.0, 1.0)
    T, Y = np.meshgrid(t, y, indexing="ij")
    Wt = np.outer(wt, wy)
    X = T * T
    jac = c * c * X * 2.0 * T  # ds du = c^2 x dx dy, dx = 2 t dt
    total += np.sum(Wt * jac * G(c * X, c * X * Y))  # u <= s
    total += np.sum(Wt * jac * G(c * X * Y, c * X))  # s <= u
    # strips, geometric panels away from the corner
    if W > c * (1 + 1e-12):
        uu, wu = _gl(n, 0.0, h)
        for lo, hi in _geometric_panels(c, W):
            ss, ws = _gl(n, lo, hi)
            S_, U_ = np.meshgrid(ss, uu, indexing="ij")
            total += np.sum(np.outer(ws, wu) * G(S_, U_))
    elif h > c * (1 + 1e-12):
        ss, ws = _gl(n, 0.0, W)
        for lo, hi in _geometric_panels(c, h):
            uu, wu = _gl(n, lo, hi)
            S_, U_ = np.meshgrid(ss, uu, indexing="ij")
            total += np.sum(np.outer(ws, wu) * G(S_, U_))
    return total / (W * h) ** 2


def _check_coil(coil: Coil) -> tuple[float, float, float, float]:
    a, b, h, N = float(coil.inner_radius_m), float(coil.outer_radius_m), float(coil.height_m), float(coil.turns)
    if not (np.isfinite(a) and np.isfinite(b) and 0.0 <= a < b):
        raise GeometryError(f"coil {coil.name}", "inner and outer radius", "0 <= inner < outer (m)", (a, b))
    if not (np.isfinite(h) and h > 0):
        raise GeometryError(f"coil {coil.name}", "height_m", "positive", h)
    if not (np.isfinite(N) and N > 0):
        raise GeometryError(f"coil {coil.name}", "turns", "positive", N)
    return a, b, h, N


def air_self_inductance_H(coil: Coil, order: int = 20) -> tuple[float, float]:
    """Air-core self-inductance of a thick coil with uniform current density.

    Parameters
    ----------
    coil : Coil
    order : int
        Gauss order of each panel; the estimate compares ``order`` with ``order + 8``.

    Returns
    -------
    L_H : float
        Self-inductance (H), from the higher order.
    error_H : float
        Difference between the two orders (H), an error estimate.

    Notes
    -----
    Flux linkage of the coil's own field as Maxwell's filament mutual inductance integrated over the
    cross-section twice, the logarithmic self term integrated exactly (module docstring).

    Examples
    --------
    >>> from fields.model.design import Coil
    >>> c = Coil("c", 0.01, 0.02, 0.01, 100, (0, 0, 0), (0, 0, 1), 1.0, 1.0)
    >>> L, err = air_self_inductance_H(c)
    >>> round(float(L) * 1e6, 2), bool(err < 1e-6 * L)
    (254.91, True)
    """
    a, b, h, N = _check_coil(coil)
    lo = _self_inductance_per_turn2(a, b, h, order)
    hi = _self_inductance_per_turn2(a, b, h, order + 8)
    return N * N * hi, N * N * abs(hi - lo)


def _filaments(coil: Coil, n: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Gauss filaments of a coil: centres (f,3), radii (f,), turns weight (f,) summing to N."""
    a, b, h, N = _check_coil(coil)
    r, wr = _gl(n, a, b)
    z, wz = _gl(n, -h / 2, h / 2)
    e, _, _ = _frame(coil.axis)
    R, Z = np.meshgrid(r, z, indexing="ij")
    w = np.outer(wr, wz).reshape(-1) * N / ((b - a) * h)
    centres = np.asarray(coil.position_m, dtype=float)[None, :] + Z.reshape(-1)[:, None] * e[None, :]
    return centres, R.reshape(-1), w


def _windings_overlap(c1: Coil, c2: Coil) -> bool:
    """Conservative test: bounding spheres of the two windings intersect and they are coaxial-overlapping."""
    e1, _, _ = _frame(c1.axis)
    e2, _, _ = _frame(c2.axis)
    d = np.asarray(c2.position_m, float) - np.asarray(c1.position_m, float)
    if abs(abs(e1 @ e2) - 1.0) < 1e-12 and np.linalg.norm(d - (d @ e1) * e1) < 1e-12:
        rad = max(c1.inner_radius_m, c2.inner_radius_m) < min(c1.outer_radius_m, c2.outer_radius_m)
        ax = abs(d @ e1) < 0.5 * (c1.height_m + c2.height_m)
        return bool(rad and ax)
    return False


def air_mutual_inductance_H(coil1: Coil, coil2: Coil, order: int = 8, angles: int = 64) -> tuple[float, float]:
    """Air-core mutual inductance between two coils in any placement.

    Parameters
    ----------
    coil1, coil2 : Coil
    order : int
        Gauss order per cross-section direction; the estimate compares ``order`` with ``order + 4``.
    angles : int
        Trapezoid nodes along each filament of ``coil2``.

    Returns
    -------
    M_H, error_H : float
        Mutual inductance (H) for positive currents in both coils, and the two-order difference (H).
    """
    if _windings_overlap(coil1, coil2):
        raise GeometryError(f"coils {coil1.name} and {coil2.name}", "windings", "disjoint", "overlapping windings")
    vals = []
    for n in (order, order + 4):
        c1, r1, w1 = _filaments(coil1, n)
        c2, r2, w2 = _filaments(coil2, n)
        i, j = np.meshgrid(np.arange(r1.size), np.arange(r2.size), indexing="ij")
        i, j = i.reshape(-1), j.reshape(-1)
        M = filament_mutual_H(c1[i], coil1.axis, r1[i], c2[j], coil2.axis, r2[j], angles)
        vals.append(float(np.sum(w1[i] * w2[j] * M)))
    return vals[1], abs(vals[1] - vals[0])


# --------------------------------------------------------------------------------- core terms


def _core_inductance_terms(design: Design, gaps_m, hover_currents_A, layers: int = 8):
    """Core contribution to the inductance matrix per gap (incremental, clip model).

    Returns
    -------
    Lc_H : ndarray, shape (g, k, k)
        Incremental core inductance matrix at each gap and hover-current set.
    saturated : ndarray of bool, shape (g,)
    """
    from fields.physics import field_basis as sources

    k = len(design.coils)
    gaps = np.atleast_1d(np.asarray(gaps_m, dtype=float))
    ng = gaps.size
    Lc = np.zeros((ng, k, k))
    sat = np.zeros(ng, dtype=bool)
    if not design.cores:
        return Lc, sat
    st = design.study
    P = st.floater_origin_m(gaps)
    Rv = np.repeat(np.asarray(st.floater_rotvec_rad, dtype=float)[None], ng, axis=0)
    far = np.full((ng, 1, 3), 1.0e3)  # a dummy observer far from every body
    fb = sources.fixed_field_basis(design, far, P, Rv, layers=layers)
    cms = sources.core_models(design)
    I = np.zeros((ng, k)) if hover_currents_A is None else np.asarray(hover_currents_A, dtype=float).reshape(ng, k)
    for j, cm in enumerate(cms):
        V = float(cm.core.volume_m3)
        bmean = np.stack([cm.mean_w @ sources.coil_field_per_ampere_T(c, cm.mean_pts_m, layers) for c in design.coils])
        Jk = fb.core_Jk_T_per_A[:, :, j, :]  # (g, k, 3)
        J = fb.core_J0_T[:, j, :] + np.einsum("gk,gki->gi", I, Jk)
        Js = float(cm.core.saturation_polarization_T)
        mag = np.linalg.norm(J, axis=-1)
        over = mag > Js
        sat |= over
        dJ = Jk.copy()
        for gi in np.nonzero(over)[0]:
            jh = J[gi] / mag[gi]
            dJ[gi] = (Js / mag[gi]) * (Jk[gi] - np.outer(Jk[gi] @ jh, jh))
        Lc += V / mu_0 * np.einsum("ai,gbi->gab", bmean, dJ)
    return 0.5 * (Lc + Lc.transpose(0, 2, 1)), sat


def mutual_inductance_matrix(design: Design, order: int = 8) -> np.ndarray:
    """Inductance matrix of all coils (H), shape (k, k), at zero current.

    Diagonal: self-inductances; off-diagonal: mutual inductances (positive currents as defined
    by each coil's axis). Cores add their unsaturated contribution (iron-free approximation,
    module docstring) evaluated at the study's operating gap with zero current; a core saturated
    there contributes its incremental (clip-model) part.

    Parameters
    ----------
    design : Design
    order : int
        Gauss order of the mutual terms.

    Returns
    -------
    ndarray, shape (k, k)
    """
    k = len(design.coils)
    L = np.zeros((k, k))
    for i, c in enumerate(design.coils):
        L[i, i] = air_self_inductance_H(c)[0]
        for j in range(i + 1, k):
            L[i, j] = L[j, i] = air_mutual_inductance_H(c, design.coils[j], order)[0]
    if design.cores:
        Lc, _ = _core_inductance_terms(design, [design.study.operating_gap_m], None)
        L = L + Lc[0]
    return L


# ---------------------------------------------------------------------------------- datasheet


@dataclass(frozen=True)
class CoilData:
    """Electrical and thermal data sheet of one coil (SI; arrays over gaps ``g``).

    Attributes
    ----------
    name : str
    turns : float
    wire_diameter_m : float
        Bare copper diameter (m).
    wire_origin : str
        ``"given"``, ``"AWG n (ASTM B258)"`` or ``"inferred from turns and default fill"``.
    copper_fill_factor : float
        ``N pi d^2 / 4 / ((b - a) h)``.
    mean_turn_length_m, wire_length_m, copper_mass_kg : float
    copper_area_m2 : float
        Cross-section of one bare wire (m^2).
    resistance_20C_ohm : float
    operating_temperature_C, resistance_operating_ohm : float
        Temperature used for the hot resistance (the self-consistent steady temperature at the
        hover current of the operating gap, else at the nominal current) and the resistance there.
    inductance_air_H, inductance_error_H : float
        Air-core self-inductance and its quadrature error estimate.
    inductance_core_H : float
        Core contribution at the operating gap (0 without cores).
    inductance_H : float
        Total at the operating gap.
    time_constant_20C_s, time_constant_operating_s : float
        L / R.
    gaps_m, inductance_vs_gap_H, dL_dgap_H_per_m : ndarray, shape (g,)
    dL_dgap_note : str
        Why dL/dgap is what it is.
    hover_currents_A : ndarray, shape (g,)
        The hover current of this coil at each gap (input; NaN when not given).
    power_W, temperature_C, temperature_rise_K, resistance_hot_ohm : ndarray, shape (g,)
        Steady, self-consistent values at the hover current (``inf`` where it runs away).
    runaway : ndarray of bool, shape (g,)
    current_density_A_per_mm2 : ndarray, shape (g,)
        At the hover current.
    current_density_nominal_A_per_mm2, current_density_max_A_per_mm2 : float
    nominal_current_A, max_current_A : float
    voltage_drive_cold_V : ndarray, shape (g,)
        Voltage that drives the hover current through the coil at 20 C.
    current_hot_same_voltage_A : ndarray, shape (g,)
        Current that voltage gives once the coil is at its steady temperature.
    surface_area_m2 : float
    surface_note : str
    convection_W_per_m2K, ambient_temperature_C, insulation_class_C : float
    sources : dict
        Where each constant comes from.
    warnings : tuple of str
    """

    name: str
    turns: float
    wire_diameter_m: float
    wire_origin: str
    copper_fill_factor: float
    mean_turn_length_m: float
    wire_length_m: float
    copper_area_m2: float
    copper_mass_kg: float
    resistance_20C_ohm: float
    operating_temperature_C: float
    resistance_operating_ohm: float
    inductance_air_H: float
    inductance_error_H: float
    inductance_core_H: float
    inductance_H: float
    time_constant_20C_s: float
    time_constant_operating_s: float
    gaps_m: np.ndarray
    inductance_vs_gap_H: np.ndarray
    dL_dgap_H_per_m: np.ndarray
    dL_dgap_note: str
    hover_currents_A: np.ndarray
    power_W: np.ndarray
    temperature_C: np.ndarray
    temperature_rise_K: np.ndarray
    resistance_hot_ohm: np.ndarray
    runaway: np.ndarray
    current_density_A_per_mm2: np.ndarray
    current_density_nominal_A_per_mm2: float
    current_density_max_A_per_mm2: float
    nominal_current_A: float
    max_current_A: float
    voltage_drive_cold_V: np.ndarray
    current_hot_same_voltage_A: np.ndarray
    surface_area_m2: float
    surface_note: str
    convection_W_per_m2K: float
    ambient_temperature_C: float
    insulation_class_C: float
    sources: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()

    def resistance_ohm(self, temperature_C) -> np.ndarray:
        """Resistance (ohm) at temperatures (C): ``R20 (1 + alpha (T - 20))`` (IEC 60028)."""
        T = np.asarray(temperature_C, dtype=float)
        return self.resistance_20C_ohm * (1.0 + tables.COPPER_ALPHA_20C_PER_K * (T - 20.0))

    def to_dict(self) -> dict:
        """JSON-ready dict (arrays as lists, non-finite numbers as None)."""

        def clean(v):
            if isinstance(v, np.ndarray):
                return [clean(x) for x in v.tolist()]
            if isinstance(v, (list, tuple)):
                return [clean(x) for x in v]
            if isinstance(v, dict):
                return {kk: clean(x) for kk, x in v.items()}
            if isinstance(v, (float, np.floating)):
                return float(v) if np.isfinite(v) else None
            if isinstance(v, np.bool_):
                return bool(v)
            return v

        return {kk: clean(v) for kk, v in asdict(self).items()}


def steady_temperature_C(current_A, resistance_20C_ohm: float, conductance_W_per_K: float,
                         ambient_C: float) -> tuple[np.ndarray, np.ndarray]:
    """Self-consistent steady coil temperature of the lumped model.

    Parameters
    ----------
    current_A : array_like, shape (g,)
    resistance_20C_ohm : float
    conductance_W_per_K : float
        ``h_conv A_surface`` (W/K).
    ambient_C : float

    Returns
    -------
    temperature_C : ndarray, shape (g,)
        ``inf`` where there is no fixed point (thermal runaway).
    runaway : ndarray of bool, shape (g,)

    Notes
    -----
    Fixed point of ``T = T_amb + I^2 R20 (1 + alpha (T - 20)) / G`` (alpha from IEC 60028):
    ``T - T_amb = I^2 R(T_amb) / (G - I^2 R20 alpha)``; none when ``I^2 R20 alpha >= G``.

    Examples
    --------
    >>> T, run = steady_temperature_C([1.0], 10.0, 1.0, 20.0)
    >>> round(float(T[0]), 3), bool(run[0])
    (30.409, False)
    """
    I2 = np.asarray(current_A, dtype=float) ** 2
    alpha = tables.COPPER_ALPHA_20C_PER_K
    G = float(conductance_W_per_K)
    P_amb = I2 * resistance_20C_ohm * (1.0 + alpha * (ambient_C - 20.0))
    denom = G - I2 * resistance_20C_ohm * alpha
    runaway = denom <= 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        dT = np.where(runaway, np.inf, P_amb / np.where(runaway, 1.0, denom))
    return ambient_C + dT, runaway


def _wire(coil: Coil, a: float, b: float, h: float, N: float, warnings: list) -> tuple[float, str, float]:
    area = (b - a) * h
    if coil.wire_diameter_m is not None:
        d = float(coil.wire_diameter_m)
        origin = f"{coil.wire_gauge} (ASTM B258 formula)" if coil.wire_gauge else "given bare diameter"
    elif coil.wire_gauge is not None:
        d = tables.awg_diameter_m(tables.parse_gauge(coil.wire_gauge))
        origin = f"{coil.wire_gauge} (ASTM B258 formula)"
    else:
        fill = float(coil.fill_factor) if coil.fill_factor else DEFAULT_FILL_FACTOR
        d = float(np.sqrt(4.0 * fill * area / (np.pi * N)))
        origin = f"inferred from turns and copper fill {fill:g}"
        warnings.append(f"coil {coil.name}: no wire given; bare diameter {d * 1e3:.3g} mm inferred from "
                        f"{N:g} turns at copper fill {fill:g} (common practice, no source)")
    if not (np.isfinite(d) and d > 0):
        raise GeometryError(f"coil {coil.name}", "wire diameter", "positive", d)
    fill = N * np.pi * d * d / 4.0 / area
    if fill > HEXAGONAL_FILL:
        raise GeometryError(f"coil {coil.name}", "copper fill factor N pi d^2 / (4 (b - a) h)",
                            f"at most {HEXAGONAL_FILL:.4f} (hexagonal packing of round wire)", round(fill, 4))
    if fill > HIGH_FILL_WARNING:
        warnings.append(f"coil {coil.name}: copper fill factor {fill:.2f} is above {HIGH_FILL_WARNING} "
                        "and hard to wind with enamelled round wire (common practice, no source)")
    if coil.fill_factor is not None and abs(fill - float(coil.fill_factor)) > 0.02:
        warnings.append(f"coil {coil.name}: given fill factor {coil.fill_factor:g} differs from the "
                        f"{fill:.3f} implied by the turns and wire; the implied value is used")
    return d, origin, fill


def coil_datasheet(design: Design, coil_index: int, hover_currents_A=None, gaps_m=None,
                   operating_temperature_C: float | None = None) -> CoilData:
    """Electrical and thermal data sheet of one coil.

    Parameters
    ----------
    design : Design
    coil_index : int
        Which coil (index into ``design.coils``).
    hover_currents_A : array_like, shape (g,) or (g, k), optional
        Hover current of this coil (or of all coils, one column per coil) at each gap, from the
        equilibrium analysis. Without it the thermal arrays use the nominal current.
    gaps_m : array_like, shape (g,), optional
        Gaps of ``hover_currents_A``; default the study's gap grid.
    operating_temperature_C : float, optional
        Temperature of the hot resistance; default the steady temperature at the hover current at
        the operating gap (interpolated), or at the nominal current without hover currents.

    Returns
    -------
    CoilData
    """
    k = len(design.coils)
    if not (isinstance(coil_index, (int, np.integer)) and 0 <= coil_index < k):
        raise GeometryError("coil_datasheet", "coil_index", f"an integer in 0..{k - 1}", coil_index)
    coil = design.coils[coil_index]
    st = design.study
    warnings: list[str] = []
    a, b, h, N = _check_coil(coil)
    d, origin, fill = _wire(coil, a, b, h, N, warnings)
    gaps = st.gaps() if gaps_m is None else np.atleast_1d(np.asarray(gaps_m, dtype=float))
    ng = gaps.size
    if hover_currents_A is None:
        I_all = None
        I = np.full(ng, float(coil.nominal_current_A))
        cur_note = "nominal current (no hover currents given)"
    else:
        H = np.asarray(hover_currents_A, dtype=float)
        if H.ndim == 1:
            if H.size != ng:
                raise GeometryError("coil_datasheet", "hover_currents_A", f"{ng} values (one per gap)", H.size)
            I = H.copy()
            I_all = np.zeros((ng, k))
            I_all[:, coil_index] = H
        else:
            if H.shape != (ng, k):
                raise GeometryError("coil_datasheet", "hover_currents_A", f"shape ({ng}, {k})", H.shape)
            I = H[:, coil_index].copy()
            I_all = H
        cur_note = "hover current from the equilibrium analysis"
    # winding
    mtl = np.pi * (a + b)
    length = N * mtl
    Acu = np.pi * d * d / 4.0
    mass = tables.COPPER_DENSITY_KG_PER_M3 * length * Acu
    R20 = tables.COPPER_RESISTIVITY_20C_OHM_M * length / Acu
    # heat
    S_out = 2.0 * np.pi * b * h
    S_ends = 2.0 * np.pi * (b * b - a * a)
    S_bore = 2.0 * np.pi * a * h
    bore_blocked = any(_core_in_bore(coil, c) for c in design.cores)
    if bore_blocked:
        S = S_out + S_ends
        s_note = "outer cylinder + both end annuli (bore filled by a core, not counted)"
    else:
        S = S_out + S_ends + S_bore
        s_note = "outer cylinder + both end annuli + open bore"
    hconv = float(st.convection_W_per_m2K)
    Tamb = float(st.ambient_temperature_C)
    G = hconv * S
    T, run = steady_temperature_C(I, R20, G, Tamb)
    alpha = tables.COPPER_ALPHA_20C_PER_K
    R_hot = R20 * (1.0 + alpha * (T - 20.0))
    P = I * I * R_hot
    if np.any(run):
        warnings.append(f"coil {coil.name}: thermal runaway (no steady temperature: I^2 R20 alpha >= h A) at "
                        f"{int(run.sum())} of {ng} gaps, e.g. gap {gaps[run][0] * 1e3:.3g} mm")
    if operating_temperature_C is None:
        I_op = float(np.interp(st.operating_gap_m, gaps, I)) if hover_currents_A is not None else float(coil.nominal_current_A)
        T_op_arr, run_op = steady_temperature_C([I_op], R20, G, Tamb)
        T_op = float(T_op_arr[0])
        if run_op[0]:
            T_op = float(tables.THERMAL_CLASSES_C[-1])
            warnings.append(f"coil {coil.name}: runaway at the operating current; the hot resistance is "
                            f"quoted at {T_op:g} C")
    else:
        T_op = float(operating_temperature_C)
    R_op = R20 * (1.0 + alpha * (T_op - 20.0))
    # insulation
    ins = coil.insulation_class_C
    if ins is None:
        ins = DEFAULT_INSULATION_CLASS_C
        warnings.append(f"coil {coil.name}: no insulation class given; class {ins:g} C (IEC 60085) assumed")
    fin = np.isfinite(T)
    if np.any(fin):
        Tmax = float(np.max(T[fin]))
        over = fin & (T > ins)
        if Tmax > ins:
            go = gaps[over] * 1e3
            where = (f"at {int(over.sum())} of {ng} gaps ({go.min():.3g}-{go.max():.3g} mm)" if ng > 1
                     else "at this current")
            warnings.append(f"coil {coil.name}: the winding would run above its insulation thermal class {ins:g} C "
                            f"{where} if held there continuously (IEC 60085 / IEC 60317)")
        elif Tmax + HOT_SPOT_ALLOWANCE_K > ins:
            warnings.append(f"coil {coil.name}: average winding temperature {Tmax:.0f} C is within the "
                            f"{HOT_SPOT_ALLOWANCE_K:g} K hot-spot allowance of the thermal class {ins:g} C "
                            "(IEC 60085; allowance as in IEC 60034-1, from memory): the hot spot may exceed it")
    # current density
    Jd = np.abs(I) / Acu * 1e-6
    Jnom = abs(float(coil.nominal_current_A)) / Acu * 1e-6
    Jmax = abs(float(coil.max_current_A)) / Acu * 1e-6
    if np.max(Jd) > CONTINUOUS_CURRENT_DENSITY_A_PER_MM2:
        warnings.append(f"coil {coil.name}: current density up to {np.max(Jd):.2f} A/mm^2 at the {cur_note} "
                        f"exceeds {CONTINUOUS_CURRENT_DENSITY_A_PER_MM2} A/mm^2 ({CURRENT_DENSITY_SOURCE})")
    if Jmax > CONTINUOUS_CURRENT_DENSITY_A_PER_MM2:
        warnings.append(f"coil {coil.name}: max current gives {Jmax:.2f} A/mm^2, above the continuous-duty "
                        f"band; short duty only ({CURRENT_DENSITY_SOURCE})")
    # voltage drive drift
    V_cold = I * R20
    with np.errstate(invalid="ignore", divide="ignore"):
        I_hot = np.where(np.isfinite(R_hot), V_cold / R_hot, 0.0)
    # inductance
    L_air, L_err = air_self_inductance_H(coil)
    all_gaps = np.concatenate([gaps, [st.operating_gap_m]])
    if design.cores:
        I_ops = None
        if I_all is not None:
            I_ops = np.vstack([I_all, [np.array([np.interp(st.operating_gap_m, gaps, I_all[:, j]) for j in range(k)])]])
        Lc, sat = _core_inductance_terms(design, all_gaps, I_ops)
        Lcore = Lc[:, coil_index, coil_index]
        # dL/dgap by central differences inside each regime
        dg = 1e-6
        Ip = Im = None
        if I_all is not None:
            Ip = np.stack([np.interp(gaps + dg, gaps, I_all[:, j]) for j in range(k)], axis=1)
            Im = np.stack([np.interp(gaps - dg, gaps, I_all[:, j]) for j in range(k)], axis=1)
        Lp, sp = _core_inductance_terms(design, gaps + dg, Ip)
        Lm, sm = _core_inductance_terms(design, gaps - dg, Im)
        dL = (Lp[:, coil_index, coil_index] - Lm[:, coil_index, coil_index]) / (2 * dg)
        step = sp != sm
        dL = np.where(step, np.nan, dL)
        if np.any(sat[:-1]):
            note = ("core saturated (clip model) at some gaps: there the incremental core inductance depends on the "
                    "bias and dL/dgap is its central difference; NaN marks the saturation onset (a step in L)")
            warnings.append(f"coil {coil.name}: a core saturates at {int(sat[:-1].sum())} of {ng} gaps; the core's "
                            "incremental inductance drops there (iron-free clip model, approximate)")
        else:
            note = ("linear (unsaturated) core and a rigid permanent-magnet floater of mu_r about 1: in this linear "
                    "model L does not depend on the gap, dL/dgap = 0")
        L_gap = L_air + Lcore[:-1]
        L_core_op = float(Lcore[-1])
    else:
        L_gap = np.full(ng, L_air)
        dL = np.zeros(ng)
        L_core_op = 0.0
        note = ("air coil and a rigid permanent-magnet floater of mu_r about 1: the floater does not change L in a "
                "linear model, dL/dgap = 0 (a real magnet's mu_r of about 1.05 gives a small, unmodelled change)")
    L_tot = L_air + L_core_op
    src = {
        "wire": tables.AWG_SOURCE if coil.wire_gauge else origin,
        "copper": tables.COPPER_SOURCE + ": resistivity 1/58 ohm mm^2/m, alpha 0.00393 /K, density 8890 kg/m^3",
        "convection": CONVECTION_SOURCE if abs(hconv - 10.0) < 1e-12 else "study.convection_W_per_m2K",
        "current_density_band": CURRENT_DENSITY_SOURCE,
        "insulation": tables.THERMAL_CLASS_SOURCE,
        "inductance": "Maxwell filament mutual inductance integrated over the cross-section, exact self term",
        "currents": cur_note,
    }
    return CoilData(
        name=coil.name, turns=N, wire_diameter_m=d, wire_origin=origin, copper_fill_factor=float(fill),
        mean_turn_length_m=float(mtl), wire_length_m=float(length), copper_area_m2=float(Acu),
        copper_mass_kg=float(mass), resistance_20C_ohm=float(R20), operating_temperature_C=T_op,
        resistance_operating_ohm=float(R_op), inductance_air_H=float(L_air), inductance_error_H=float(L_err),
        inductance_core_H=L_core_op, inductance_H=float(L_tot), time_constant_20C_s=float(L_tot / R20),
        time_constant_operating_s=float(L_tot / R_op), gaps_m=gaps, inductance_vs_gap_H=L_gap,
        dL_dgap_H_per_m=dL, dL_dgap_note=note,
        hover_currents_A=I if hover_currents_A is not None else np.full(ng, np.nan),
        power_W=P, temperature_C=T, temperature_rise_K=T - Tamb, resistance_hot_ohm=R_hot, runaway=run,
        current_density_A_per_mm2=Jd, current_density_nominal_A_per_mm2=float(Jnom),
        current_density_max_A_per_mm2=float(Jmax), nominal_current_A=float(coil.nominal_current_A),
        max_current_A=float(coil.max_current_A), voltage_drive_cold_V=V_cold, current_hot_same_voltage_A=I_hot,
        surface_area_m2=float(S), surface_note=s_note, convection_W_per_m2K=hconv, ambient_temperature_C=Tamb,
        insulation_class_C=float(ins), sources=src, warnings=tuple(warnings),
    )


def _core_in_bore(coil: Coil, core) -> bool:
    """True when a core's centre lies inside the coil's bore (on its axis, within its height)."""
    e, _, _ = _frame(coil.axis)
    d = np.asarray(core.position_m, float) - np.asarray(coil.position_m, float)
    z = d @ e
    rho = np.linalg.norm(d - z * e)
    return bool(rho < coil.inner_radius_m and abs(z) < 0.5 * coil.height_m)


# ------------------------------------------------------------------------------ drive headroom


@dataclass(frozen=True)
class DriveHeadroom:
    """Supply-voltage headroom of one coil's driver at an operating point.

    Attributes
    ----------
    hover_current_A : float
    correction_current_A : float
        Extra current that produces the restoring force ``|k| x0`` (A).
    peak_current_A : float
        ``|I_hover| + correction_current_A``.
    rate_per_s : float
        ``p = sqrt(|k| / m)``: the unstable pole when ``k < 0`` (see ``rate_note``).
    current_slew_A_per_s : float
        ``dI/dt = |k| x0 p / k_i``.
    voltage_resistive_V, voltage_inductive_V, voltage_required_V : float
        ``R I_peak``, ``L dI/dt`` and their sum (hot resistance).
    supply_voltage_V, headroom_V : float
        Supply and ``supply - required``.
    max_slew_A_per_s : float
        ``(V_supply - R |I_hover|) / L``: the fastest current change the supply allows at hover.
    linear_driver_dissipation_W : float
        ``(V_supply - R I) I`` in a linear (transistor) stage at the hover point, for heat sinking.
    coil_power_W : float
        ``R I^2`` at hover.
    correction_displacement_m : float
    rate_note : str
    warnings : tuple of str
    """

    hover_current_A: float
    correction_current_A: float
    peak_current_A: float
    rate_per_s: float
    current_slew_A_per_s: float
    voltage_resistive_V: float
    voltage_inductive_V: float
    voltage_required_V: float
    supply_voltage_V: float
    headroom_V: float
    max_slew_A_per_s: float
    linear_driver_dissipation_W: float
    coil_power_W: float
    resistance_ohm: float
    inductance_H: float
    correction_displacement_m: float
    rate_note: str
    warnings: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return {kk: (list(v) if isinstance(v, tuple) else v) for kk, v in asdict(self).items()}


def drive_headroom(coil_data: CoilData, hover_current_A: float, force_per_ampere_N_per_A: float,
                   stiffness_N_per_m: float, mass_kg: float, supply_voltage_V: float,
                   correction_displacement_m: float = DEFAULT_CORRECTION_DISPLACEMENT_M,
                   hot: bool = True) -> DriveHeadroom:
    """Voltage headroom of a coil driver: ``V = R I + L dI/dt`` against the supply.

    Parameters
    ----------
    coil_data : CoilData
    hover_current_A : float
    force_per_ampere_N_per_A : float
        ``k_i = dF/dI`` at the operating point (N/A), nonzero.
    stiffness_N_per_m : float
        Restoring stiffness ``k = -dF/dx`` along the controlled axis (N/m); ``k < 0`` is unstable
        with the pole ``p = sqrt(-k / m)``. ``|k|`` is used either way.
    mass_kg : float
    supply_voltage_V : float
    correction_displacement_m : float
        ``x0``: the displacement the drive must correct at the pole's rate (default 1 mm).
    hot : bool
        Use the resistance at the operating temperature (default) instead of 20 C.

    Returns
    -------
    DriveHeadroom

    Notes
    -----
    Rule (a sizing estimate, not a control design): to correct a displacement ``x0`` at the rate
    of the unstable pole ``p = sqrt(|k| / m)`` the force must slew at ``dF/dt ~ |k| x0 p``, so
    ``dI/dt ~ |k| x0 p / |k_i|``; the peak current adds ``|k| x0 / |k_i|`` to the hover current.
    The required voltage is ``R I_peak + L dI/dt`` (both terms taken with the same sign, the worst
    case).
    """
    ki = float(force_per_ampere_N_per_A)
    if not (np.isfinite(ki) and ki != 0.0):
        raise GeometryError("drive_headroom", "force_per_ampere_N_per_A", "finite and nonzero", ki)
    m = float(mass_kg)
    if not (np.isfinite(m) and m > 0):
        raise GeometryError("drive_headroom", "mass_kg", "positive", m)
    x0 = float(correction_displacement_m)
    if not (np.isfinite(x0) and x0 > 0):
        raise GeometryError("drive_headroom", "correction_displacement_m", "positive", x0)
    k = float(stiffness_N_per_m)
    if not np.isfinite(k):
        raise GeometryError("drive_headroom", "stiffness_N_per_m", "finite", k)
    Vs = float(supply_voltage_V)
    if not (np.isfinite(Vs) and Vs > 0):
        raise GeometryError("drive_headroom", "supply_voltage_V", "positive", Vs)
    warnings: list[str] = []
    p = float(np.sqrt(abs(k) / m))
    note = (f"p = sqrt(-k/m) = {p:.4g} 1/s: the unstable pole (restoring stiffness k = -dF/dx < 0)" if k < 0 else
            f"p = sqrt(k/m) = {p:.4g} 1/s: the natural frequency (k = -dF/dx >= 0, a stable axis)")
    R = coil_data.resistance_operating_ohm if hot else coil_data.resistance_20C_ohm
    L = coil_data.inductance_H
    I = float(hover_current_A)
    dI_corr = abs(k) * x0 / abs(ki)
    Ipk = abs(I) + dI_corr
    slew = abs(k) * x0 * p / abs(ki)
    VR = R * Ipk
    VL = L * slew
    Vreq = VR + VL
    head = Vs - Vreq
    with np.errstate(divide="ignore"):
        max_slew = (Vs - R * abs(I)) / L if L > 0 else np.inf
    diss = max(0.0, (Vs - R * abs(I)) * abs(I))
    if head < 0:
        warnings.append(f"coil {coil_data.name}: the supply {Vs:g} V is short of the {Vreq:.3g} V needed "
                        f"(R I_peak {VR:.3g} V + L dI/dt {VL:.3g} V) to correct {x0 * 1e3:g} mm at {p:.3g} 1/s")
    elif head < 0.2 * Vs:
        warnings.append(f"coil {coil_data.name}: headroom {head:.3g} V is under 20 % of the supply")
    if Vs - R * abs(I) <= 0:
        warnings.append(f"coil {coil_data.name}: the supply cannot even hold the hover current "
                        f"({R * abs(I):.3g} V needed)")
    if Ipk > abs(coil_data.max_current_A):
        warnings.append(f"coil {coil_data.name}: the peak current {Ipk:.3g} A exceeds the coil's max current")
    return DriveHeadroom(
        hover_current_A=I, correction_current_A=dI_corr, peak_current_A=Ipk, rate_per_s=p,
        current_slew_A_per_s=slew, voltage_resistive_V=VR, voltage_inductive_V=VL, voltage_required_V=Vreq,
        supply_voltage_V=Vs, headroom_V=head, max_slew_A_per_s=float(max_slew),
        linear_driver_dissipation_W=float(diss), coil_power_W=R * I * I, resistance_ohm=R, inductance_H=L,
        correction_displacement_m=x0, rate_note=note, warnings=tuple(warnings),
    )


def resistance_and_cooling(design: Design, coil_index: int) -> tuple[float, float]:
    """Resistance at 20 C (ohm) and convective conductance h A (W/K) of one coil.

    The same lumped model as :func:`coil_datasheet`, without its inductance work
    (which costs most of its time and a sweep does not need): ``R20 = rho20 N pi (a + b) /
    (pi d^2 / 4)`` with copper's resistivity from IEC 60028 (:mod:`fields.input.tables`), the bare wire
    diameter ``d`` given or inferred from the turns at the copper fill; cooling over the outer
    cylinder, both end annuli and the bore unless a core fills it.

    Returns
    -------
    resistance_20C_ohm, conductance_W_per_K : float
    """
    c = design.coils[coil_index]
    a, b, h, N = float(c.inner_radius_m), float(c.outer_radius_m), float(c.height_m), float(c.turns)
    if c.wire_diameter_m is not None:
        d = float(c.wire_diameter_m)
    else:
        fill = float(c.fill_factor) if c.fill_factor else DEFAULT_FILL_FACTOR
        d = math.sqrt(4.0 * fill * (b - a) * h / (math.pi * N))
    length = N * math.pi * (a + b)
    R20 = tables.COPPER_RESISTIVITY_20C_OHM_M * length / (math.pi * d * d / 4.0)
    S = 2.0 * math.pi * b * h + 2.0 * math.pi * (b * b - a * a)
    if not any(_core_in_bore(c, core) for core in design.cores):
        S += 2.0 * math.pi * a * h
    return R20, float(design.study.convection_W_per_m2K) * S
