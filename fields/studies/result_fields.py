"""How a field of a result dataclass is written by the serialiser (:mod:`fields.io.serialize`).

The stage results declare their fields with these options at class-definition time, so the
options live here, below the writers; the serialiser reads them back from the field metadata:

- :func:`internal`: kept on the object for the caller (solver objects, arrays the CLI prints),
  never written;
- :func:`optional`: left out when ``None`` (a section that does not apply to the design);
- :func:`flattened`: the nested dataclass's fields are written into the parent's level.
"""

from __future__ import annotations

import dataclasses
from typing import Any

#: the key of a field's metadata that holds its option ("internal", "optional" or "flatten")
OPTION_KEY = "hoverfield_serialize"


def internal(default: Any = None, **kwargs) -> Any:
    """A dataclass field that the serialiser never writes (default ``None``)."""
    return dataclasses.field(default=default, repr=False, compare=False, metadata={OPTION_KEY: "internal"}, **kwargs)


def optional(default: Any = None) -> Any:
    """A dataclass field that the serialiser leaves out when its value is ``None``."""
    return dataclasses.field(default=default, metadata={OPTION_KEY: "optional"})


def flattened(**kwargs) -> Any:
    """A dataclass field holding a dataclass whose fields the serialiser writes one level up."""
    return dataclasses.field(metadata={OPTION_KEY: "flatten"}, **kwargs)
