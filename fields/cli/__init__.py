"""The ``hoverfield`` command: a thin shell over the package.

Every subcommand (one module each in this package) reads a geometry file, calls the stage
runners and prints a summary; outputs go to the output folder (default ``out/<design-name>/``).
Errors the user can fix print one line and exit with status 2; nothing is written into the input
file. This package is the only one that prints. Importing it stays light: the subcommand modules
import the numerical stack only when they run.
"""

from __future__ import annotations

import argparse
import os
import sys

# The solver's linear algebra is many small and medium factorisations; a multithreaded BLAS pool
# on top of the sweep's worker processes oversubscribes the cores and runs many times slower
# (measured on a 2-core machine). One BLAS thread per process unless the user chose otherwise;
# this must happen before numpy is first imported (the subcommand modules import it lazily).
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

from fields import __version__
from fields.cli import check, coil, compare, control, curves, figures, report, sensors, size, stability, sweep, tolerance
from fields.errors import HoverfieldError

#: the subcommands, in the order ``--help`` lists them
COMMANDS = (report, check, curves, stability, coil, sweep, size, tolerance, compare, figures, control, sensors)


def build_parser() -> argparse.ArgumentParser:
    from fields.io.wording import safety_text

    p = argparse.ArgumentParser(
        prog="hoverfield",
        description="Design calculations for magnetic levitation devices from a geometry file (TOML).",
        epilog=safety_text(),
    )
    p.add_argument("--version", action="version", version=f"hoverfield {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    for module in COMMANDS:
        module.register(sub)
    return p


def _terminate(signum, frame):  # pragma: no cover - exercised through a subprocess test
    raise KeyboardInterrupt


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the exit status (0 done, 1 a stage failed, 2 input error,
    130 interrupted)."""
    import signal

    if argv is None:  # a real process: SIGTERM ends it like Ctrl-C, so atomic writes clean up
        signal.signal(signal.SIGTERM, _terminate)
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return 1
    try:
        rc = args.func(args)
        sys.stdout.flush()  # a closed pipe shows here, inside the handler, not at interpreter exit
    except BrokenPipeError:
        return _reader_gone()
    except HoverfieldError as e:
        print(f"hoverfield: error: {e}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("hoverfield: interrupted; files already written are complete", file=sys.stderr)
        return 130
    return rc


#: exit status when the reader of our output went away (128 + SIGPIPE, as a shell reports a
#: process that the signal ended; POSIX signal number 13)
EXIT_BROKEN_PIPE = 141


def _reader_gone() -> int:
    """The reader of stdout closed it early (``hoverfield check FILE | head``): stop quietly.

    Further writes, including the interpreter's final flush, go to the null device, as the
    Python documentation advises for SIGPIPE (library reference, ``signal``, "Note on SIGPIPE").
    """
    import os

    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):  # stdout without a file descriptor (captured in tests)
        pass
    return EXIT_BROKEN_PIPE


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
