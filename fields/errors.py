"""Exception types of hoverfield.

One pattern for every message: ``<where>: <what> must be <rule>; got <value>.``
For input files ``<where>`` is the file and the key path, e.g.
``demo.toml: coils[0].outer_radius``.
"""

from __future__ import annotations


class HoverfieldError(Exception):
    """Base class of every error the tool raises on purpose."""


class GeometryError(HoverfieldError, ValueError):
    """A geometry file (or a model built in Python) is invalid."""

    def __init__(self, where: str, what: str, rule: str, got: object = None) -> None:
        self.where = where
        self.what = what
        self.rule = rule
        self.got = got
        msg = f"{where}: {what} must be {rule}"
        if got is not None:
            msg += f"; got {got!r}" if not isinstance(got, str) else f"; got {got}"
        super().__init__(msg + ".")


class InputError(HoverfieldError, ValueError):
    """An argument passed through the Python API is invalid (misuse, not an input-file problem).

    Messages follow the same pattern: ``<function>: <what> must be <rule>; got <value>.``
    """


class SolverError(HoverfieldError, RuntimeError):
    """A numerical search (equilibrium, root) failed; the message names what was tried."""


class ContactError(HoverfieldError, ValueError):
    """A pose puts the floater into contact with (or inside) another body."""
