"""Small helpers shared by the stage runners."""

from __future__ import annotations

import re
from pathlib import Path


def file_list(out: Path, *names: str) -> tuple[str, ...]:
    """The paths of files written into ``out``, as strings."""
    return tuple(str(Path(out) / n) for n in names)


def close_figure(fig) -> None:
    """Release a matplotlib figure once it is written."""
    from fields.io import plots

    plots.close(fig)


def slug(name: str) -> str:
    """A name as a file-name part: letters and digits, runs of anything else as one ``_``.

    Examples
    --------
    >>> slug("payload +10 % (PD)")
    'payload_10_pd'
    """
    return re.sub(r"_+", "_", "".join(ch if ch.isalnum() else "_" for ch in name)).strip("_").lower()
