"""Copy benchmark result files into the README between marker comments.

For every file ``benchmarks/results/<name>.md`` the README's block
``<!-- bench:<name> -->`` ... ``<!-- /bench:<name> -->`` is replaced by the file's text; the prose
around the markers is kept. A result file without markers in the README is reported, not added.

Run: ``python benchmarks/readme_tables.py`` (after the benchmark scripts that write the results).
"""

from __future__ import annotations

import re
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from fields.io.export import write_atomic  # noqa: E402


def rewrite(readme: str, name: str, body: str) -> str | None:
    """The README text with the ``name`` block replaced by ``body``; None without its markers."""
    pat = re.compile(rf"(<!-- bench:{re.escape(name)} -->\n).*?(<!-- /bench:{re.escape(name)} -->)", re.S)
    if not pat.search(readme):
        return None
    return pat.sub(lambda m: m.group(1) + body.rstrip("\n") + "\n" + m.group(2), readme, count=1)


def main() -> int:
    readme_path = ROOT / "README.md"
    text = readme_path.read_text(encoding="utf-8")
    for res in sorted((ROOT / "benchmarks" / "results").glob("*.md")):
        new = rewrite(text, res.stem, res.read_text(encoding="utf-8"))
        if new is None:
            print(f"README.md: no <!-- bench:{res.stem} --> markers; {res.name} not copied")
            continue
        text = new
        print(f"README.md: {res.stem} table from {res.relative_to(ROOT)}")
    write_atomic(readme_path, text)
    return 0


if __name__ == "__main__":
    sys.exit(main())
