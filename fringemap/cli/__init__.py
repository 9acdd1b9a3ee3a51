"""The command line: parses options, calls the Python API, prints. Nothing else.

Each command lives in its own module here with a ``register(subparsers,
common)`` function; :data:`COMMAND_MODULES` lists them in the order ``--help``
shows. Exit codes are listed in :mod:`fringemap.errors` and ``docs/errors.md``.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from .. import __version__
from ..errors import EXIT_INTERNAL, EXIT_INTERRUPTED, FringemapError

__all__ = ["main", "build_parser", "COMMAND_MODULES"]

#: command modules, in help order; each has register(subparsers, common)
COMMAND_MODULES = [
    "fringemap.cli.map",
    "fringemap.cli.batch",
    "fringemap.cli.series",
    "fringemap.cli.chart",
    "fringemap.cli.calibrate",
    "fringemap.cli.fringes",
    "fringemap.cli.simulate",
]


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (also used to generate the option reference)."""
    parser = argparse.ArgumentParser(
        prog="fringemap",
        description="Film-thickness maps from photographs of thin-film interference colours. "
        "Thickness and wavelength in nm, angles in degrees.",
    )
    parser.add_argument("--version", action="version", version=f"fringemap {__version__}")
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--debug", action="store_true", help="show full tracebacks on errors")
    common.add_argument("--quiet", "-q", action="store_true", help="print only errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMAND_MODULES:
        importlib.import_module(name).register(sub, common)
    return parser


def _one_line_warnings() -> None:
    """Show each fringemap warning once, on one line, without file and line numbers.

    Warnings a command also reports in its results (per photo) are printed there
    with the photo's name; the same text is not repeated here.
    """
    import warnings

    from ..errors import FringemapWarning

    def show(message, category, filename, lineno, file=None, line=None):
        text = str(message)
        if issubclass(category, FringemapWarning):
            if text not in SHOWN_WARNINGS:
                SHOWN_WARNINGS.add(text)
                print(f"fringemap: warning: {text}", file=sys.stderr)
        else:  # a library's warning: one line too
            print(f"fringemap: warning ({category.__name__}): {text}", file=sys.stderr)

    warnings.showwarning = show


#: texts of warnings already shown (commands skip these when listing per-photo warnings)
SHOWN_WARNINGS: set[str] = set()


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``fringemap`` command; returns the exit code."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return 2
    debug = getattr(args, "debug", False)
    if not debug:
        _one_line_warnings()
    try:
        return int(args.func(args) or 0)
    except FringemapError as exc:
        if debug:
            raise
        print(f"fringemap: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except BrokenPipeError:  # output piped into head, less...: not an error
        sys.stderr.close()
        return 0
    except KeyboardInterrupt:
        print("fringemap: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # a bug: say so on one line
        if debug:
            raise
        print(
            f"fringemap: internal error: {exc.__class__.__name__}: {exc} "
            "(run again with --debug for details)",
            file=sys.stderr,
        )
        return EXIT_INTERNAL
