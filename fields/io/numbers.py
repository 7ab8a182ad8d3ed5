"""Numbers as people read them: exact zeros print as ``0`` (never ``1e-17`` or ``-0``).

A computed entry that should vanish (a cross term of a symmetric design, the torque of a
centred floater) comes out as round-off, e.g. ``3e-17``. It is shown as ``0`` when it is no
larger than its own error bar, or than :data:`ZERO_RTOL` of the scale of the numbers it stands
among (the largest entry of its matrix block); the stored value keeps full precision.
"""

from __future__ import annotations

import math

#: entries below this fraction of their matrix's scale are round-off (double precision carries
#: about 16 digits; finite differences lose about half of them, so 1e-12 is well above the noise
#: of an exact zero and well below any physical entry)
ZERO_RTOL = 1e-12


def zero_bound(error: float | None = None, scale: float | None = None, rtol: float = ZERO_RTOL) -> float:
    """The magnitude at or below which a value is shown as 0: the larger of its error bar and
    ``rtol`` times the scale (0 when neither is given).

    >>> zero_bound(1e-9, 10.0), zero_bound(None, 10.0), zero_bound()
    (1e-09, 1e-11, 0.0)
    """
    b = 0.0
    if error is not None and math.isfinite(error):
        b = max(b, abs(float(error)))
    if scale is not None and math.isfinite(scale):
        b = max(b, rtol * abs(float(scale)))
    return b


def is_zero(value: float, error: float | None = None, scale: float | None = None) -> bool:
    """True when ``value`` is 0 within :func:`zero_bound` (an exact 0 always is)."""
    v = float(value)
    return math.isfinite(v) and abs(v) <= zero_bound(error, scale)


def fmt(value: float, digits: int = 4, error: float | None = None, scale: float | None = None) -> str:
    """``value`` with ``digits`` significant digits, or ``"0"`` when it is zero within its error
    bar or the scale (:func:`is_zero`); never ``"-0"``.

    >>> fmt(3e-17, error=2e-9), fmt(-0.0), fmt(-2.5e-13, scale=8.5), fmt(8.5312, 3), fmt(-1e-3, 2)
    ('0', '0', '0', '8.53', '-0.001')
    """
    v = float(value)
    if not math.isfinite(v):
        return "n/a" if math.isnan(v) else ("inf" if v > 0 else "-inf")
    if is_zero(v, error, scale):
        return "0"
    s = f"{v:.{digits}g}"
    return "0" if s.lstrip("-") == "0" else s
