"""Frame times of a time series, and the rate of a thickness that changes with time.

Times of photos come from EXIF DateTimeOriginal (:func:`exif_time`) or from
the file name (:func:`time_from_name`, forms in :data:`NAME_PATTERNS`):

* a date and clock time: ``YYYYMMDD-HHMMSS`` (``_`` or ``T`` also between the
  date and the time), optionally with a fraction of a second ``.fff``; or
  ``YYYY-MM-DD_HH-MM-SS`` (a space or ``T`` also before the time, ``.`` or
  ``:`` also between its fields);
* an elapsed time: ``t`` and a number with the unit ``s``, ``ms`` or
  ``min``, at the start of the name or after ``_``, ``-`` or a space, e.g.
  ``film_t12.5s.jpg`` or ``run-t1500ms.png`` (``t=12.5s`` also works).

:func:`fit_rate` fits a straight line by ordinary least squares.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

__all__ = [
    "NAME_PATTERNS",
    "RateFit",
    "fit_rate",
    "time_from_name",
    "exif_time",
    "name_times",
    "natural_key",
]

_DATE_TIME = re.compile(
    r"(?<!\d)(\d{4})(\d{2})(\d{2})[-_T](\d{2})(\d{2})(\d{2})(?:[.,](\d{1,6}))?(?!\d)"
)
_DATE_TIME_DASHED = re.compile(
    r"(?<!\d)(\d{4})-(\d{2})-(\d{2})[ _T](\d{2})[-.:](\d{2})[-.:](\d{2})(?:[.,](\d{1,6}))?(?!\d)"
)
_ELAPSED = re.compile(r"(?:^|(?<=[_\-\s]))t=?(\d+(?:\.\d+)?)(ms|s|min)(?![A-Za-z0-9])", re.I)
_UNITS_S = {"ms": 1e-3, "s": 1.0, "min": 60.0}

#: The file-name time patterns, by name (see the module docstring).
NAME_PATTERNS = {
    "YYYYMMDD-HHMMSS[.fff]": _DATE_TIME,
    "YYYY-MM-DD_HH-MM-SS[.fff]": _DATE_TIME_DASHED,
    "t<number>s|ms|min": _ELAPSED,
}

# ------------------------------------------------------------------------ times


def time_from_name(name: str) -> tuple[str, float | dt.datetime] | None:
    """The time written in a file name, or None.

    Returns
    -------
    tuple or None
        ``("clock", datetime)`` for a date and clock time, ``("elapsed",
        seconds)`` for an elapsed time; see the module docstring for the forms.
    """
    stem = Path(name).name
    for pattern in (_DATE_TIME, _DATE_TIME_DASHED):
        m = pattern.search(stem)
        if m:
            y, mo, d, h, mi, s = (int(v) for v in m.groups()[:6])
            frac = m.group(7)
            try:
                when = dt.datetime(y, mo, d, h, mi, s)
            except ValueError:
                continue
            if frac:
                when += dt.timedelta(seconds=float("0." + frac))
            return "clock", when
    m = _ELAPSED.search(stem)
    if m:
        return "elapsed", float(m.group(1)) * _UNITS_S[m.group(2).lower()]
    return None


def exif_time(text: str | None) -> dt.datetime | None:
    """An EXIF date-time text (``YYYY:MM:DD HH:MM:SS``) as a datetime, or None."""
    if not text:
        return None
    try:
        return dt.datetime.strptime(text.strip()[:19], "%Y:%m:%d %H:%M:%S")
    except ValueError:
        return None


def natural_key(path: Path) -> list:
    """Sort key of a file name with its numbers compared as numbers (``f2`` before ``f10``)."""
    return [int(p) if p.isdigit() else p.lower() for p in re.split(r"(\d+)", path.name)]


def name_times(paths: Sequence[Path]) -> tuple[list[float], dt.datetime | None] | None:
    """Seconds from the file names, with the clock start (None for elapsed times).

    None unless every name holds a time and all of one kind; clock times count
    from the earliest.
    """
    found = [time_from_name(p.name) for p in paths]
    if not found or any(f is None for f in found) or len({f[0] for f in found}) != 1:
        return None
    if found[0][0] == "elapsed":
        return [float(f[1]) for f in found], None
    start = min(f[1] for f in found)
    return [(f[1] - start).total_seconds() for f in found], start


# ------------------------------------------------------------------------ the fit


@dataclass(frozen=True)
class RateFit:
    """A least-squares line ``thickness = intercept + rate * time``.

    Attributes
    ----------
    rate_nm_per_s : float
        Slope, nm/s (< 0: thinning, > 0: growth); NaN with fewer than 2 points.
    rate_std_error_nm_per_s : float
        Standard error of the slope, ``sqrt(SSR / (n - 2) / Sxx)``, nm/s;
        NaN with fewer than 3 points.
    intercept_nm : float
        Thickness at time 0, nm.
    r_squared : float
        ``1 - SSR / SST`` (NaN when the thickness does not vary).
    n : int
        Points used.
    """

    rate_nm_per_s: float
    rate_std_error_nm_per_s: float
    intercept_nm: float
    r_squared: float
    n: int

    def to_dict(self) -> dict:
        """JSON-ready (NaN becomes None)."""
        out = {}
        for k, v in self.__dict__.items():
            out[k] = None if isinstance(v, float) and not math.isfinite(v) else v
        return out


def fit_rate(time_s: np.ndarray, thickness_nm: np.ndarray) -> RateFit:
    """Ordinary least-squares line through (time, thickness); non-finite points are left out.

    Parameters
    ----------
    time_s : ndarray of shape (N,)
        Times, s.
    thickness_nm : ndarray of shape (N,)
        Thicknesses, nm.

    Returns
    -------
    RateFit
    """
    t = np.asarray(time_s, dtype=np.float64)
    y = np.asarray(thickness_nm, dtype=np.float64)
    ok = np.isfinite(t) & np.isfinite(y)
    t, y = t[ok], y[ok]
    n = int(t.size)
    nan = math.nan
    if n < 2 or np.ptp(t) == 0:
        return RateFit(nan, nan, float(y.mean()) if n else nan, nan, n)
    tm, ym = t.mean(), y.mean()
    sxx = float(np.sum((t - tm) ** 2))
    rate = float(np.sum((t - tm) * (y - ym)) / sxx)
    intercept = float(ym - rate * tm)
    ssr = float(np.sum((y - intercept - rate * t) ** 2))
    sst = float(np.sum((y - ym) ** 2))
    se = math.sqrt(ssr / (n - 2) / sxx) if n > 2 else nan
    r2 = 1.0 - ssr / sst if sst > 0 else nan
    return RateFit(rate, se, intercept, r2, n)
