"""The design report: one self-contained HTML page (figures embedded) built from the runners'
summaries, plus the stage bookkeeping of a run that may fail part-way.

Every number shown comes from a JSON file the run wrote; each carries ``data-src`` (the file),
``data-path`` (the key path inside it) and ``data-value`` (the full-precision value), so a
reader or a test can trace it. Pure text building: no computation, no file IO.
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import math
import re
from pathlib import Path
from typing import Any

from fields import __version__

CSS = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;margin:0;background:#f6f7f9;color:#1d232b}
main{max-width:1080px;margin:0 auto;padding:18px 28px 60px;background:#fff}
h1{font-size:1.6em;margin:.2em 0} h2{border-bottom:2px solid #d5dbe3;padding-bottom:4px;margin-top:1.8em}
h3{margin-bottom:.3em}
.meta{color:#56606c;font-size:.9em}
.verdict{border-left:6px solid #1f4e9c;background:#eef3fb;padding:10px 16px;margin:14px 0}
.verdict li.unstable{color:#9b1c1c;font-weight:600} .verdict li.stable{color:#1e6b35} .verdict p.unstable{color:#9b1c1c}
.warn{border-left:6px solid #c77700;background:#fff6e6;padding:8px 16px;margin:14px 0}
.fail{border-left:6px solid #b00020;background:#fdecee;padding:8px 16px;margin:14px 0}
.safety{border-left:6px solid #6b6b6b;background:#f1f1f1;padding:8px 16px;margin:14px 0;font-size:.92em}
.scroll{max-width:100%;overflow-x:auto}
table{border-collapse:collapse;margin:8px 0 14px;font-size:.92em}
td,th{border:1px solid #d5dbe3;padding:3px 8px;text-align:right} th{background:#eef1f5}
td.l,th.l{text-align:left}
img{max-width:100%;height:auto;border:1px solid #e3e7ec;margin:6px 0}
pre{background:#f4f6f8;padding:10px;overflow-x:auto;max-width:100%;font-size:.82em}
code{overflow-wrap:anywhere}
nav.toc{background:#f4f6f8;padding:6px 16px;margin:12px 0;font-size:.92em} nav.toc ol{margin:4px 0;padding-left:22px}
ul.files li{margin:2px 0} ul.files small{color:#56606c}
.num{font-variant-numeric:tabular-nums}
"""


def num(value: Any, src: str, path: str, unit: str = "", digits: int = 4, scale: float = 1.0,
        zero_below: float | None = None) -> str:
    """A number as HTML with its provenance; ``scale`` converts SI to the shown unit (e.g. 1e3 for mm).

    ``zero_below`` (SI, see :func:`fields.io.numbers.zero_bound`): a value no larger in magnitude
    is shown as ``0`` and the span carries ``data-zero-below``; an exact zero is ``0``, never ``-0``.
    """
    zattr = ""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        shown = "n/a"
        raw = "null"
    else:
        v = float(value)
        raw = repr(v)
        if v == 0.0 or (zero_below is not None and abs(v) <= zero_below):
            shown = "0"
            zattr = f' data-zero-below="{float(zero_below or 0.0)!r}"'
        else:
            shown = f"{v * scale:.{digits}g}"
    u = f" {html.escape(unit)}" if unit else ""
    return (f'<span class="num" data-src="{html.escape(src)}" data-path="{html.escape(path)}" '
            f'data-value="{raw}" data-scale="{scale!r}" data-digits="{digits}"{zattr}>{shown}</span>{u}')


def img(path: Path, alt: str) -> str:
    """An <img> with the PNG embedded as base64 (the report stays self-contained)."""
    p = Path(path)
    if not p.is_file():
        return f"<p><em>figure {html.escape(p.name)} was not produced</em></p>"
    data = base64.b64encode(p.read_bytes()).decode("ascii")
    return f'<img alt="{html.escape(alt)}" src="data:image/png;base64,{data}">'


def esc(text: Any) -> str:
    return html.escape(str(text))


def table(headers: list[str], rows: list[list[str]], left_cols: int = 1) -> str:
    """An HTML table; cells are already-escaped HTML strings."""
    h = "".join(f'<th class="{"l" if i < left_cols else ""}">{esc(x)}</th>' for i, x in enumerate(headers))
    body = []
    for r in rows:
        body.append("<tr>" + "".join(f'<td class="{"l" if i < left_cols else ""}">{c}</td>' for i, c in enumerate(r)) + "</tr>")
    return f"<div class=\"scroll\"><table><tr>{h}</tr>{''.join(body)}</table></div>"


def shown_path(path: str | Path, cwd: str | Path | None = None) -> str:
    """A file path as the report shows it: a relative path as the user gave it; an absolute one
    relative to the working folder when it lies inside it, else only its file name (the report
    never shows the machine's folders).

    >>> shown_path("geometries/a.toml"), shown_path("/srv/x/geometries/a.toml", "/srv/x"), shown_path("/srv/a.toml", "/home")
    ('geometries/a.toml', 'geometries/a.toml', 'a.toml')
    """
    p = Path(path)
    if not p.is_absolute():
        return str(path)
    base = Path(cwd) if cwd is not None else Path.cwd()
    try:
        return p.relative_to(base).as_posix()
    except ValueError:
        return p.name


def _slug(text: str) -> str:
    s = re.sub(r"<[^>]+>", "", text)
    s = re.sub(r"[^0-9a-zA-Z]+", "-", html.unescape(s).lower()).strip("-")
    return s or "section"


def with_contents(sections: list[str], after: int = 0) -> list[str]:
    """The sections with an ``id`` on every ``<h2>`` and a table of contents (links to them)
    inserted after the first ``after`` sections."""
    entries: list[tuple[str, str]] = []
    used: set[str] = set()

    def tag(m: re.Match) -> str:
        attrs, title = m.group(1), m.group(2)
        if "id=" in attrs:
            sid = re.search(r'id="([^"]*)"', attrs).group(1)
        else:
            sid = base = _slug(title)
            k = 2
            while sid in used:
                sid, k = f"{base}-{k}", k + 1
            attrs = f' id="{sid}"' + attrs
        used.add(sid)
        entries.append((sid, re.sub(r"<[^>]+>", "", title)))
        return f"<h2{attrs}>{title}</h2>"

    out = [re.sub(r"<h2([^>]*)>(.*?)</h2>", tag, sec, flags=re.S) for sec in sections]
    nav = ('<nav class="toc"><b>Contents</b><ol>' + "".join(f'<li><a href="#{i}">{t}</a></li>' for i, t in entries)
           + "</ol></nav>")
    return out[:after] + [nav] + out[after:]


def page(title: str, sections: list[str]) -> str:
    stamp = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    return ("<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<meta name=\"generator\" content=\"hoverfield {__version__}\">"
            f"<title>{esc(title)}</title><style>{CSS}</style></head><body><main>"
            + "".join(sections)
            + f"<p class=\"meta\">hoverfield {__version__}, {stamp}</p></main></body></html>\n")
