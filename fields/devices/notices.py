"""Structured notices: conditions a device computation found, for the report and CLI to word.

A result keeps what it found as data (a code, the body it concerns, the numbers); the wording
is made where results are shown, so that results stay plain data.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

__all__ = ["Notice"]


@dataclass(frozen=True)
class Notice:
    """One condition found while computing a device result.

    Attributes
    ----------
    code : str
        What was found, e.g. ``"thermal_runaway"`` (each result type lists its codes).
    subject : str
        Name of the coil or sensor concerned.
    values : dict
        The numbers behind the notice, SI with units in the keys (e.g. ``{"gap_m": 0.004}``).
    """

    code: str
    subject: str
    values: dict[str, Any] = field(default_factory=dict)
