"""Key paths into a parsed TOML dict, such as ``floater.magnets[0].diameter``.

A key path names one value of a geometry file by its tables, array indices and key; sweep files
use them to say which values vary.
"""

from __future__ import annotations

import re
from typing import Any

_KEY_RE = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*(\[\d+\])*$")


def parse_path(path: str) -> list[str | int] | None:
    """Tokens of a key path such as ``floater.magnets[0].diameter`` (None when malformed).

    Examples
    --------
    >>> parse_path("floater.magnets[0].diameter")
    ['floater', 'magnets', 0, 'diameter']
    """
    out: list[str | int] = []
    for seg in path.split("."):
        if not _KEY_RE.match(seg):
            return None
        out.append(seg.split("[", 1)[0])
        out += [int(i) for i in re.findall(r"\[(\d+)\]", seg)]
    return out


def leaf_paths(node: Any, prefix: str = "") -> list[str]:
    """Every addressable value path of a parsed geometry file (tables and arrays of tables excluded)."""
    out = []
    if isinstance(node, dict):
        for k, v in node.items():
            out += leaf_paths(v, f"{prefix}.{k}" if prefix else k)
    elif isinstance(node, list) and node and all(isinstance(x, dict) for x in node):
        for i, v in enumerate(node):
            out += leaf_paths(v, f"{prefix}[{i}]")
    else:
        out.append(prefix)
        if isinstance(node, list):
            out += [f"{prefix}[{i}]" for i in range(len(node)) if not isinstance(node[i], (list, dict))]
    return out


def get_path(data: dict, tokens: list[str | int]) -> tuple[bool, Any]:
    """(found, value) at the tokens of :func:`parse_path`."""
    node: Any = data
    for t in tokens:
        if isinstance(t, int):
            if not isinstance(node, list) or t >= len(node):
                return False, None
        elif not isinstance(node, dict) or t not in node:
            return False, None
        node = node[t]
    return True, node


def set_path(data: dict, path: str, value: Any) -> None:
    """Set the value at a key path that exists in ``data`` (a parsed TOML dict)."""
    tokens = parse_path(path)
    node: Any = data
    for t in tokens[:-1]:
        node = node[t]
    node[tokens[-1]] = value
