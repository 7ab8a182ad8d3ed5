"""Unit parsing for the geometry file.

Every dimensional value in a geometry file is a string with a unit, e.g. ``"12.7 mm"``,
``"1.32 T"``, ``"25 g"``, ``"0.8 A"``, ``"5 deg"``, ``"0.5 in"``. They are converted to SI once,
here, by pint (a general-purpose units library); everything past the loader works in SI
(m, kg, s, A, T, rad, K, V, W).
"""

from __future__ import annotations

import functools
import math
import re

from fields.errors import HoverfieldError, InputError
from fields.input.tables import G_STANDARD

#: the SI unit each kind of quantity is converted to, with the pint dimensionality it must have
KINDS: dict[str, tuple[str, str]] = {
    "length": ("m", "[length]"),
    "mass": ("kg", "[mass]"),
    "current": ("A", "[current]"),
    "flux_density": ("T", "[mass] / [current] / [time] ** 2"),
    "angle": ("rad", ""),
    "voltage": ("V", "[length] ** 2 * [mass] / [current] / [time] ** 3"),
    "acceleration": ("m/s**2", "[length] / [time] ** 2"),
    "density": ("kg/m**3", "[mass] / [length] ** 3"),
    "heat_transfer": ("W/m**2/K", "[mass] / [temperature] / [time] ** 3"),
    "temperature": ("degC", "[temperature]"),
    "time": ("s", "[time]"),
    "frequency": ("Hz", "1 / [time]"),
    "power": ("W", "[length] ** 2 * [mass] / [time] ** 3"),
    "force": ("N", "[length] * [mass] / [time] ** 2"),
    "resistance": ("ohm", "[length] ** 2 * [mass] / [current] ** 2 / [time] ** 3"),
    "inductance": ("H", "[length] ** 2 * [mass] / [current] ** 2 / [time] ** 2"),
    "volt_per_tesla": ("V/T", "[length] ** 2 / [time]"),
    "field_strength": ("A/m", "[current] / [length]"),
}

#: an example unit for each kind, used in error messages
EXAMPLES = {
    "length": "12.7 mm", "mass": "25 g", "current": "0.8 A", "flux_density": "1.32 T",
    "angle": "5 deg", "voltage": "12 V", "acceleration": f"{G_STANDARD:g} m/s^2",
    "density": "7500 kg/m^3", "heat_transfer": "10 W/m^2/K", "temperature": "40 degC",
    "time": "1 ms", "frequency": "10 kHz", "power": "5 W", "force": "0.3 N",
    "resistance": "10 ohm", "inductance": "20 mH", "volt_per_tesla": "25 mV/mT", "field_strength": "100 A/m",
}


@functools.lru_cache(maxsize=1)
def registry():
    """The shared pint unit registry (created on first use; pint is slow to import)."""
    import pint

    ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    return ureg


class UnitParseError(HoverfieldError, ValueError):
    """Raised by :func:`parse`; the loader turns it into a GeometryError with the key path.

    ``rule`` says what the value must be (e.g. ``a length (e.g. "5 mm")``), ``got`` is the value.
    """

    def __init__(self, rule: str, got: object) -> None:
        self.rule = rule
        self.got = got
        super().__init__(rule)


def parse(value: object, kind: str) -> float:
    """Parse a quantity string such as ``"12.7 mm"`` and return it in SI units (cached).

    See :func:`_parse` for the rules.

    Examples
    --------
    >>> parse("0.5 in", "length")
    0.0127
    """
    if isinstance(value, str):
        return _parse_cached(value, kind)
    return _parse(value, kind)


@functools.lru_cache(maxsize=4096)
def _parse_cached(value: str, kind: str) -> float:
    return _parse(value, kind)


def _parse(value: object, kind: str) -> float:
    """Parse a quantity string such as ``"12.7 mm"`` and return it in SI units.

    Parameters
    ----------
    value : str
        Number followed by a unit.
    kind : str
        One of :data:`KINDS` (``"length"``, ``"mass"``, ...).

    Returns
    -------
    float
        The value in the SI unit of ``kind`` (temperatures in degrees Celsius).

    Examples
    --------
    >>> parse("0.5 in", "length")
    0.0127
    >>> round(parse("5 deg", "angle"), 6)
    0.087266
    """
    if kind not in KINDS:
        raise InputError(f"parse: kind must be one of {', '.join(sorted(KINDS))}; got {kind!r}.")
    si_unit, dim = KINDS[kind]
    if isinstance(value, bool) or not isinstance(value, str):
        if isinstance(value, (int, float)):
            raise UnitParseError(f"a quantity with a unit, e.g. \"{EXAMPLES[kind]}\" (bare numbers have no unit)", value)
        raise UnitParseError(f"a quantity string with a unit, e.g. \"{EXAMPLES[kind]}\"", value)
    text = value.strip().replace("^", "**").replace("°C", "degC").replace("°", "deg").replace("Ω", "ohm")
    # pint files the gauss under the Gaussian system; in SI use it is 1e-4 T (NIST SP 811, Table 10)
    text = re.sub(r"\b(kilogauss|kG)\b", "(0.1 T)", text)
    text = re.sub(r"\b(gauss|Gs)\b", "(1e-4 T)", text)
    ureg = registry()
    try:
        q = ureg.Quantity(text)
    except Exception:  # pint raises many types for unparseable text
        raise UnitParseError(f"a number followed by a unit, e.g. \"{EXAMPLES[kind]}\"", value) from None
    if not isinstance(q, ureg.Quantity) or q.unitless:
        raise UnitParseError(f"a quantity with a unit, e.g. \"{EXAMPLES[kind]}\" (a bare number has no unit)", value)
    expected = ureg.Quantity(1, si_unit).dimensionality
    if q.dimensionality != expected:
        raise UnitParseError(f"a {kind.replace('_', ' ')} (e.g. \"{EXAMPLES[kind]}\")", value)
    out = float(q.to(si_unit).magnitude)
    if not math.isfinite(out):
        raise UnitParseError(f"a finite {kind.replace('_', ' ')}", value)
    return out
