"""The command line: parses options, calls the Python API, prints. Nothing else.

Each command lives in its own module here with a ``register(subparsers,
common)`` function; :data:`COMMAND_MODULES` lists them in the order ``--help``
shows. Exit codes are listed in :mod:`fringemap.errors` and ``docs/errors.md``.
"""

from __future__ import annotations

import argparse
import importlib
import sys
import traceback

from .. import __version__
from ..errors import EXIT_INTERNAL, EXIT_INTERRUPTED, FringemapError, OptionError

__all__ = ["main", "build_parser", "COMMAND_MODULES"]


class _Parser(argparse.ArgumentParser):
    """An argument parser whose mistakes are one-line :class:`OptionError` s (exit 2).

    argparse would print the whole usage and exit the process; the command
    line prints one line instead, like every other error, and ``main`` returns
    the exit code (so it can be called in-process). Subcommand parsers are of
    this class too (``add_subparsers`` uses the parent's class).
    """

    def error(self, message: str):
        command = self.prog.split(maxsplit=1)[1] if " " in self.prog else ""
        hint = f"fringemap {command} --help" if command else "fringemap --help"
        raise OptionError(f"{' '.join(message.split())} (see {hint})")


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
    parser = _Parser(
        prog="fringemap",
        description="Film-thickness maps from photographs of thin-film interference colours. "
        "Thickness and wavelength in nm, angles in degrees.",
    )
    parser.add_argument("--version", action="version", version=f"fringemap {__version__}")
    common = _Parser(add_help=False)
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
    """Entry point of the ``fringemap`` command; returns the exit code.

    Every error is one line on stderr, ``fringemap: error: WHERE: WHAT``, and
    the exit code of :mod:`fringemap.errors`; with ``--debug`` the traceback is
    printed above that line (the exit code stays the same).
    """
    parser = build_parser()
    try:
        args, extra = parser.parse_known_args(argv)
        if extra:
            command = getattr(args, "command", None)
            hint = f"fringemap {command} --help" if command else "fringemap --help"
            raise OptionError(f"unrecognized arguments: {' '.join(extra)} (see {hint})")
    except OptionError as exc:  # a malformed command line (argparse's own checks)
        print(f"fringemap: error: {exc}", file=sys.stderr)
        return exc.exit_code
    if not getattr(args, "command", None):
        parser.print_help()
        return 2
    debug = getattr(args, "debug", False)
    if not debug:
        _one_line_warnings()
    from .._memory import keep_freed_memory

    keep_freed_memory()  # photo after photo reuses the same memory (see fringemap._memory)
    try:
        return int(args.func(args) or 0)
    except FringemapError as exc:
        if debug:
            traceback.print_exc()
        print(f"fringemap: error: {_one_line(exc)}", file=sys.stderr)
        return exc.exit_code
    except BrokenPipeError:  # output piped into head, less...: not an error
        sys.stderr.close()
        return 0
    except KeyboardInterrupt:
        print("fringemap: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # a bug: say so on one line
        if debug:
            traceback.print_exc()
        print(
            f"fringemap: internal error: {exc.__class__.__name__}: {_one_line(exc)} "
            "(run again with --debug for details)",
            file=sys.stderr,
        )
        return EXIT_INTERNAL


def _one_line(exc: BaseException) -> str:
    """An error's text on one line (a stray newline in a library's message is folded)."""
    return " ".join(str(exc).split())
