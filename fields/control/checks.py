"""Argument checks shared by the control modules.

Each raises :class:`fields.errors.InputError` (:func:`fields.physics.checks.input_error`) with the project's one message pattern
(``<where>: <what> must be <rule>; got <value>.``).
"""

from __future__ import annotations

import math

from fields.physics.checks import input_error


def check_positive(where: str, what: str, value: float) -> float:
    """``value`` as a float; it must be finite and > 0.

    Examples
    --------
    >>> check_positive("f", "x", 2)
    2.0
    """
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise input_error(where, what, "a positive finite number", value)
    return v


def check_finite(where: str, what: str, value: float) -> float:
    """``value`` as a float; it must be finite."""
    v = float(value)
    if not math.isfinite(v):
        raise input_error(where, what, "finite", value)
    return v


def check_non_negative(where: str, what: str, value: float) -> float:
    """``value`` as a float; it must be finite and >= 0."""
    v = float(value)
    if not (math.isfinite(v) and v >= 0):
        raise input_error(where, what, "non-negative", value)
    return v


def check_choice(where: str, what: str, value: str, choices: tuple[str, ...]) -> str:
    """``value`` unchanged; it must be one of ``choices``."""
    if value not in choices:
        raise input_error(where, what, "one of " + ", ".join(repr(c) for c in choices), value)
    return value
