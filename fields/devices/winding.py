"""Coil winding: wire, copper fill, resistance, cooling surface and steady temperature.

Conventions
-----------
- A coil is a thick winding of rectangular cross-section (radii ``a..b``, height ``h``, ``N``
  turns); see :class:`fields.model.design.Coil`.
- ``wire_diameter_m`` is the **bare copper** diameter. The fill factor is the *copper-area* fill
  factor ``N pi d^2 / 4 = fill (b - a) h``; enamel and voids are inside ``1 - fill``.

Heat
----
Lumped steady state ``P = h_conv A (T - T_amb)`` with ``P = I^2 R(T)``, ``R(T) = R20 (1 + alpha
(T - 20 C))`` (IEC 60028). Because ``R`` is linear in ``T`` the fixed point is explicit:
``T - T_amb = P(T_amb) / (G - I^2 R20 alpha)``, ``G = h_conv A``; the iteration
``T <- T_amb + P(T) / G`` converges to it when the loop gain ``I^2 R20 alpha / G < 1`` and runs
away otherwise (temperature ``inf``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fields.devices.notices import Notice
from fields.errors import InputError
from fields.input import tables
from fields.model.design import Coil, Design

#: copper-area fill factor assumed when a coil gives turns but no wire: random-wound enamelled
#: round wire reaches about 0.5-0.6 (common practice, no source)
DEFAULT_FILL_FACTOR = 0.6
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
#: natural-convection coefficient the study defaults to (W/m^2K)
DEFAULT_CONVECTION_W_PER_M2K = 10.0
CONVECTION_SOURCE = "10 W/m^2K natural convection default (common practice, no source)"

WIRE_SOURCES = ("given", "gauge", "inferred")
"""How the bare wire diameter was found: given in the file, from the AWG gauge (ASTM B258), or
inferred from the turns at the copper fill."""


def winding_dimensions(coil: Coil) -> tuple[float, float, float, float]:
    """``(a, b, h, N)``: inner and outer radius (m), height (m) and turns, checked.

    Raises
    ------
    InputError
        If ``0 <= a < b``, ``h > 0`` or ``N > 0`` fails.
    """
    a, b, h, N = float(coil.inner_radius_m), float(coil.outer_radius_m), float(coil.height_m), float(coil.turns)
    if not (np.isfinite(a) and np.isfinite(b) and 0.0 <= a < b):
        raise InputError(f"coil {coil.name}: inner and outer radius must be 0 <= inner < outer (m); got {(a, b)}.")
    if not (np.isfinite(h) and h > 0):
        raise InputError(f"coil {coil.name}: height_m must be positive; got {h!r}.")
    if not (np.isfinite(N) and N > 0):
        raise InputError(f"coil {coil.name}: turns must be positive; got {N!r}.")
    return a, b, h, N


@dataclass(frozen=True)
class Wire:
    """The bare copper wire of a coil.

    Attributes
    ----------
    diameter_m : float
        Bare diameter (m).
    source : str
        One of :data:`WIRE_SOURCES`.
    gauge : str or None
        The AWG size when one was given.
    assumed_fill : float or None
        The copper fill the diameter was inferred at (``source == "inferred"`` only).
    copper_fill_factor : float
        ``N pi d^2 / 4 / ((b - a) h)``.
    """

    diameter_m: float
    source: str
    gauge: str | None
    assumed_fill: float | None
    copper_fill_factor: float

    @property
    def area_m2(self) -> float:
        """Bare cross-section ``pi d^2 / 4`` (m^2)."""
        return math.pi * self.diameter_m * self.diameter_m / 4.0


def coil_wire(coil: Coil) -> tuple[Wire, tuple[Notice, ...]]:
    """The coil's bare wire, its copper fill and notices about the fill.

    Returns
    -------
    wire : Wire
    notices : tuple of Notice
        ``"wire_inferred"`` (values ``diameter_m``, ``turns``, ``fill``), ``"high_fill"``
        (``fill``, ``limit``), ``"fill_mismatch"`` (``given_fill``, ``implied_fill``).

    Raises
    ------
    InputError
        If the fill exceeds hexagonal packing of round wire.
    """
    a, b, h, N = winding_dimensions(coil)
    area = (b - a) * h
    notices: list[Notice] = []
    assumed = None
    if coil.wire_diameter_m is not None:
        d = float(coil.wire_diameter_m)
        source = "gauge" if coil.wire_gauge else "given"
    elif coil.wire_gauge is not None:
        d = tables.awg_diameter_m(tables.parse_gauge(coil.wire_gauge))
        source = "gauge"
    else:
        assumed = float(coil.fill_factor) if coil.fill_factor else DEFAULT_FILL_FACTOR
        d = float(np.sqrt(4.0 * assumed * area / (np.pi * N)))
        source = "inferred"
        notices.append(Notice("wire_inferred", coil.name, {"diameter_m": d, "turns": N, "fill": assumed,
                                                           "fill_given": coil.fill_factor is not None}))
    if not (np.isfinite(d) and d > 0):
        raise InputError(f"coil {coil.name}: the wire diameter must be positive; got {d!r}.")
    fill = N * np.pi * d * d / 4.0 / area
    if fill > tables.HEXAGONAL_FILL:
        raise InputError(f"coil {coil.name}: the copper fill factor N pi d^2 / (4 (b - a) h) must be at most "
                         f"{tables.HEXAGONAL_FILL:.4f} (hexagonal packing of round wire); got {round(fill, 4)}.")
    if fill > HIGH_FILL_WARNING:
        notices.append(Notice("high_fill", coil.name, {"fill": float(fill), "limit": HIGH_FILL_WARNING}))
    if coil.fill_factor is not None and abs(fill - float(coil.fill_factor)) > 0.02:
        notices.append(Notice("fill_mismatch", coil.name,
                              {"given_fill": float(coil.fill_factor), "implied_fill": float(fill)}))
    return Wire(d, source, coil.wire_gauge, assumed, float(fill)), tuple(notices)


def mean_turn_length_m(coil: Coil) -> float:
    """Mean length of one turn ``pi (a + b)`` (m)."""
    a, b, _, _ = winding_dimensions(coil)
    return float(np.pi * (a + b))


def resistance_20C_ohm(coil: Coil, wire: Wire) -> float:
    """DC resistance at 20 C: ``rho20 N pi (a + b) / (pi d^2 / 4)`` (ohm), rho20 from IEC 60028."""
    length = float(coil.turns) * mean_turn_length_m(coil)
    return tables.COPPER_RESISTIVITY_20C_OHM_M * length / wire.area_m2


def core_in_bore(coil: Coil, core) -> bool:
    """True when a core's centre lies inside the coil's bore (on its axis, within its height)."""
    e = np.asarray(coil.axis, dtype=float)
    e = e / np.linalg.norm(e)
    d = np.asarray(core.position_m, float) - np.asarray(coil.position_m, float)
    z = d @ e
    rho = np.linalg.norm(d - z * e)
    return bool(rho < coil.inner_radius_m and abs(z) < 0.5 * coil.height_m)


def cooling_surface_m2(design: Design, coil_index: int) -> tuple[float, bool]:
    """Convective surface of a coil (m^2) and whether its bore is counted.

    The outer cylinder ``2 pi b h`` and both end annuli ``2 pi (b^2 - a^2)``, plus the bore
    ``2 pi a h`` unless a core fills it (:func:`core_in_bore`).
    """
    c = design.coils[coil_index]
    a, b, h, _ = winding_dimensions(c)
    S = 2.0 * np.pi * b * h + 2.0 * np.pi * (b * b - a * a)
    bore_cooled = not any(core_in_bore(c, core) for core in design.cores)
    if bore_cooled:
        S += 2.0 * np.pi * a * h
    return float(S), bore_cooled


def resistance_and_cooling(design: Design, coil_index: int) -> tuple[float, float]:
    """Resistance at 20 C (ohm) and convective conductance h A (W/K) of one coil.

    The same lumped model as :func:`fields.devices.coil.coil_datasheet`, without its inductance
    work (which costs most of its time and a sweep does not need).

    Returns
    -------
    resistance_20C_ohm, conductance_W_per_K : float
    """
    c = design.coils[coil_index]
    wire, _ = coil_wire(c)
    S, _ = cooling_surface_m2(design, coil_index)
    return resistance_20C_ohm(c, wire), float(design.study.convection_W_per_m2K) * S


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


def hot_resistance_ohm(resistance_20C_ohm: float, temperature_C) -> np.ndarray:
    """Resistance (ohm) at temperatures (C): ``R20 (1 + alpha (T - 20))`` (IEC 60028)."""
    T = np.asarray(temperature_C, dtype=float)
    return resistance_20C_ohm * (1.0 + tables.COPPER_ALPHA_20C_PER_K * (T - 20.0))
