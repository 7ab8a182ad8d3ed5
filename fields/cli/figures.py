"""``hoverfield figures``: remake the README's pictures from the example designs."""

from __future__ import annotations

from pathlib import Path

HELP = "remake the README's pictures from the example designs"


def run(args) -> int:
    import tempfile

    from fields.studies.stages.figures import make_figures

    with tempfile.TemporaryDirectory() as tmp:
        files = make_figures(Path(args.out), Path(tmp), progress=not args.quiet)
    print("wrote " + ", ".join(files))
    if not any(f.endswith("report_screenshot.png") for f in files):
        print("note: no report screenshot (Chromium not found; install Debian's 'chromium')")
    return 0


def register(sub) -> None:
    sp = sub.add_parser("figures", help=HELP, description="remake the README's pictures (figures/) from the example designs")
    sp.add_argument("-o", "--out", default="figures", help="folder for the pictures (default: figures)")
    sp.add_argument("-q", "--quiet", action="store_true", help="no progress bar")
    sp.set_defaults(func=run)
