"""The record of a batch: ``batch-summary.csv`` / ``.json``, and what a resumed batch skips.

Both summary files hold one row per photo, in input order, with the columns
of :data:`SUMMARY_COLUMNS`:

==========================  ===============================================
column                      meaning
==========================  ===============================================
``path``                    the photo, as it was given or found
``stem``                    the stem of its output files
``status``                  ``ok``, ``failed`` or ``skipped`` (resumed: done before)
``reason``                  why it failed or was skipped (empty when ok)
``mean_nm`` ... ``max_nm``  mean, standard deviation, minimum, maximum (nm)
``nonuniformity_percent``   (max - min) / (2 mean) x 100
``coverage``                measured fraction of the region of interest, 0-1
``passed``                  the recipe's spec was met (empty without a spec)
``seconds``                 time spent on the photo in this run, s
==========================  ===============================================

Empty CSV cells (JSON ``null``) are values that do not exist (nothing
measured, no spec). Numbers are written in full precision, so the summaries
of two runs compare exactly. The JSON file adds the recipe, its hash, the
counts per status, the wall-clock time and ``complete`` (false while the
batch runs or when it was interrupted; the files are rewritten every few
seconds while it runs).
"""

from __future__ import annotations

import json
import math
import os
import re
import time
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

from .report.outputs import output_paths

__all__ = [
    "SUMMARY_CSV",
    "SUMMARY_JSON",
    "SUMMARY_COLUMNS",
    "BatchSummary",
    "SummaryWriter",
    "summary_row",
    "recorded_stats",
    "remove_stale_partials",
]

#: Names of the summary files in the output folder.
SUMMARY_CSV = "batch-summary.csv"
SUMMARY_JSON = "batch-summary.json"

#: Columns of the summary, in order (thicknesses in nm, coverage 0-1, time in s).
SUMMARY_COLUMNS = (
    "path",
    "stem",
    "status",
    "reason",
    "mean_nm",
    "std_nm",
    "min_nm",
    "max_nm",
    "nonuniformity_percent",
    "coverage",
    "passed",
    "seconds",
)
_NUMBERS = ("mean_nm", "std_nm", "min_nm", "max_nm", "nonuniformity_percent", "coverage")

#: Least time between two rewrites of the summary of a running batch, s.
REWRITE_EVERY_S = 10.0

# ".<name>.<pid>-<8 hex>.partial" (atomic writers), ".fringemap-probe-<pid>-<8 hex>.partial"
_PARTIAL = re.compile(r"^\..*[.-](\d+)-[0-9a-f]{8}\.partial$")


def _clean(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def summary_row(
    path: str, stem: str, status: str, reason: str, numbers: dict, seconds: float
) -> dict:
    """One summary row; ``numbers`` holds the statistics by column name (others ignored)."""
    row = {"path": path, "stem": stem, "status": status, "reason": reason}
    for key in _NUMBERS:
        value = numbers.get(key)
        ok = isinstance(value, int | float) and not isinstance(value, bool)
        row[key] = _clean(float(value)) if ok else None
    passed = numbers.get("passed")
    analysis = numbers.get("analysis")
    if isinstance(analysis, dict):  # a stats.json read back: the verdict against the spec
        passed = {"pass": True, "fail": False}.get(analysis.get("verdict"))
    row["passed"] = passed if isinstance(passed, bool) else None
    row["seconds"] = round(float(seconds), 3)
    return row


def _csv_cell(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    text = str(value)
    if any(c in text for c in ',"\n\r'):
        text = '"' + text.replace('"', '""') + '"'
    return text


@dataclass(frozen=True)
class BatchSummary:
    """The outcome of a batch.

    Attributes
    ----------
    rows : tuple of dict
        One per photo, in input order, keyed by :data:`SUMMARY_COLUMNS`
        (numbers in nm, ``coverage`` 0-1, ``seconds`` s; None where unknown).
    seconds : float
        Wall-clock time of the run, s.
    workers : int
        Local worker processes (0 on a cluster).
    scheduler : str or None
        The Dask scheduler's address, on a cluster.
    csv_path, json_path : pathlib.Path
        The summary files written.
    """

    rows: tuple[dict, ...]
    seconds: float
    workers: int
    scheduler: str | None
    csv_path: Path
    json_path: Path

    def count(self, status: str) -> int:
        """Rows with ``status`` (``"ok"``, ``"failed"`` or ``"skipped"``)."""
        return sum(1 for r in self.rows if r["status"] == status)

    @property
    def failures(self) -> tuple[dict, ...]:
        """The rows of the photos that failed."""
        return tuple(r for r in self.rows if r["status"] == "failed")

    @property
    def photos_per_minute(self) -> float:
        """Photos measured in this run (ok or failed) per minute of wall-clock time."""
        n = self.count("ok") + self.count("failed")
        return 60.0 * n / self.seconds if self.seconds > 0 else math.nan


class SummaryWriter:
    """The rows of a running batch, written now and then and at the end.

    Parameters
    ----------
    out_dir : Path
        The output folder.
    n : int
        Number of photos (rows) in the batch.
    meta : dict
        JSON-ready facts about the run, written at the top of the JSON file.
    """

    def __init__(self, out_dir: Path, n: int, meta: dict):
        self.rows: list[dict | None] = [None] * n
        self.meta = meta
        self.csv_path = Path(out_dir) / SUMMARY_CSV
        self.json_path = Path(out_dir) / SUMMARY_JSON
        self._last = time.monotonic()

    def set(self, index: int, row: dict) -> None:
        """Record row ``index``; rewrite the files when the last write is old enough."""
        self.rows[index] = row
        if time.monotonic() - self._last >= REWRITE_EVERY_S:
            self.write(complete=False)

    def write(self, *, complete: bool, seconds: float | None = None) -> None:
        """Write both files atomically (rows recorded so far, in input order)."""
        from .io.write import write_json, write_text

        rows = [r for r in self.rows if r is not None]
        counts = Counter(r["status"] for r in rows)
        lines = [",".join(SUMMARY_COLUMNS)]
        lines += [",".join(_csv_cell(r[c]) for c in SUMMARY_COLUMNS) for r in rows]
        write_text(self.csv_path, "\n".join(lines) + "\n")
        doc = {
            **self.meta,
            "complete": complete,
            "photos": len(self.rows),
            "counts": {s: counts.get(s, 0) for s in ("ok", "failed", "skipped")},
            "wall_seconds": None if seconds is None else round(seconds, 3),
            "columns": list(SUMMARY_COLUMNS),
            "rows": rows,
        }
        write_json(self.json_path, doc)
        self._last = time.monotonic()


def _real(path: str | os.PathLike[str]) -> str:
    return os.path.normcase(os.path.realpath(path))


def recorded_stats(
    path: str, stem: str, out_dir: Path, recipe_hash: str, *, also: tuple[Path, ...] = ()
) -> dict | None:
    """The ``<stem>.stats.json`` of ``path`` measured before with this recipe, or None.

    None unless every standard output of the stem and every file of ``also``
    (optional outputs the recipe asks for) exists, the stats file can be read,
    its ``recipe_hash`` is ``recipe_hash`` and its ``source`` is ``path``.
    """
    paths = output_paths(out_dir, stem)
    if not all(p.is_file() for p in (*paths.values(), *also)):
        return None
    try:
        doc = json.loads(paths["stats"].read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(doc, dict) or doc.get("recipe_hash") != recipe_hash:
        return None
    source = doc.get("source")
    if source and _real(source) != _real(path):
        return None
    return doc


def _pid_alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # e.g. another user's process
        return True
    return True


def remove_stale_partials(out_dir: Path) -> int:
    """Remove temporary files left in ``out_dir`` by writers killed on this machine.

    Only ``.*.partial`` files whose writer process (named in the file name)
    no longer runs here are removed; returns how many.
    """
    removed = 0
    try:
        entries = list(os.scandir(out_dir))
    except OSError:
        return 0
    for entry in entries:
        m = _PARTIAL.match(entry.name)
        if m and entry.is_file() and not _pid_alive(int(m.group(1))):
            try:
                os.unlink(entry.path)
                removed += 1
            except OSError:
                pass  # gone already, or not ours to remove
    return removed
