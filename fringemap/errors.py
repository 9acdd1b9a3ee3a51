"""Errors and warnings of fringemap, with the exit codes the command line uses.

Every error names what was wrong (an option, a file, a recipe key), what was
expected and what was received, so the command line can print it on one line.

Exit codes (also in ``docs/errors.md``):

====  ===================================================================
code  meaning
====  ===================================================================
0     success
1     unexpected internal error (a bug: please report it with ``--debug``)
2     bad option, recipe, material, light or other configuration value
3     an input file is missing, unreadable, corrupt or unsupported
4     an output cannot be written (folder unwritable, name clash)
5     the photo was read but cannot be measured (all black, all saturated)
6     a batch finished but some inputs failed
130   interrupted (Ctrl-C)
====  ===================================================================
"""

from __future__ import annotations

__all__ = [
    "FringemapError",
    "OptionError",
    "InputFileError",
    "OutputError",
    "MeasurementError",
    "BatchFailures",
    "FringemapWarning",
    "EXIT_OK",
    "EXIT_INTERNAL",
    "EXIT_INTERRUPTED",
]

EXIT_OK = 0
EXIT_INTERNAL = 1
EXIT_INTERRUPTED = 130


class FringemapError(Exception):
    """Base class of every error fringemap reports to its user.

    Parameters
    ----------
    message : str
        One line saying what is wrong and, where possible, what to do.
    where : str, optional
        The option (``--film``), recipe key (``stack.film``) or file path
        the problem is in; printed before the message.
    """

    exit_code = EXIT_INTERNAL

    def __init__(self, message: str, *, where: str | None = None):
        super().__init__(message)
        self.message = message
        self.where = where

    def __str__(self) -> str:
        if self.where:
            return f"{self.where}: {self.message}"
        return self.message


class OptionError(FringemapError, ValueError):
    """A bad option, recipe entry, material, light or other setting (exit 2)."""

    exit_code = 2


class InputFileError(FringemapError):
    """An input file that is missing, unreadable, corrupt or unsupported (exit 3)."""

    exit_code = 3


class OutputError(FringemapError):
    """An output that cannot be written (exit 4)."""

    exit_code = 4


class MeasurementError(FringemapError):
    """A photo that was read but cannot be measured at all (exit 5)."""

    exit_code = 5


class BatchFailures(FringemapError):
    """A batch that finished with some failed inputs (exit 6)."""

    exit_code = 6


class FringemapWarning(UserWarning):
    """A soft problem the user should know about (saturated pixels, light mismatch...)."""
