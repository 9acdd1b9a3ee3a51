"""Reading the small numeric CSV files users give (spectra, sensitivities, indices)."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

from .errors import OptionError

__all__ = ["read_numeric_csv"]


def read_numeric_csv(
    path: Path, *, columns: tuple[int, ...], what: str, where: str, min_rows: int
) -> list[list[float]]:
    """Rows of numbers from a CSV file: one optional header line, ``#`` comments skipped.

    Parameters
    ----------
    path : Path
        The file.
    columns : tuple of int
        Accepted numbers of columns per row.
    what : str
        What the file holds ("light", "index"), for messages.
    where : str
        The option the file was given to.
    min_rows : int
        Fewest data rows accepted.

    Raises
    ------
    OptionError
        Unreadable file, a non-numeric cell after the header, a row of another
        width, too few rows, or NaN/inf values; the message names the file and line.
    """
    # the file is named once: as the place, or in the message after the option
    name = "" if where == str(path) else f"{path}: "
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise OptionError(
            f"{name}cannot read {what} CSV ({exc.__class__.__name__})", where=where
        ) from None
    rows: list[list[float]] = []
    for lineno, row in enumerate(csv.reader(text.splitlines()), start=1):
        cells = [c.strip() for c in row if c.strip()]
        if not cells or cells[0].startswith("#"):
            continue
        try:
            values = [float(c) for c in cells]
        except ValueError:
            if not rows:  # a header line
                continue
            raise OptionError(f"{name}line {lineno}: not a number", where=where) from None
        if len(values) not in columns:
            expected = " or ".join(str(c) for c in columns)
            raise OptionError(
                f"{name}line {lineno}: expected {expected} columns, got {len(values)}",
                where=where,
            )
        rows.append(values)
    if len(rows) < min_rows:
        raise OptionError(f"{name}{what} CSV needs at least {min_rows} rows", where=where)
    if not np.all(np.isfinite(np.array([v for r in rows for v in r]))):
        raise OptionError(f"{name}{what} CSV contains NaN or inf", where=where)
    return rows
