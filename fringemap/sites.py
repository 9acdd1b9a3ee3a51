"""Measurement sites on round wafers and the thickness read at each site.

Pixel coordinates follow :mod:`fringemap.roi`: ``x`` to the right (column),
``y`` down (row), whole numbers at pixel centres. Angles are measured from +x
towards +y, which on a screen (y down) turns clockwise. Thickness in nm.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fringemap._maps import as_map, csv_cell, json_value, region
from fringemap.errors import OptionError

__all__ = ["SITE_LAYOUTS", "site_pattern", "SiteTable", "site_readings"]

# -------------------------------------------------------------------------- sites

#: Site layouts for round wafers: number of sites -> rings, each ring as
#: ``(sites on the ring, radius as a fraction of the usable radius, angle of
#: its first site in degrees)``; the sites of a ring are equally spaced.
SITE_LAYOUTS: dict[int, tuple[tuple[int, float, float], ...]] = {
    1: ((1, 0.0, 0.0),),
    5: ((1, 0.0, 0.0), (4, 2.0 / 3.0, 0.0)),
    9: ((1, 0.0, 0.0), (4, 0.5, 0.0), (4, 1.0, 45.0)),
    49: ((1, 0.0, 0.0), (8, 1.0 / 3.0, 0.0), (16, 2.0 / 3.0, 0.0), (24, 1.0, 0.0)),
}


def site_pattern(
    n_sites: int,
    *,
    center_xy_px: tuple[float, float],
    radius_px: float,
    edge_exclusion_px: float = 0.0,
) -> np.ndarray:
    """Measurement sites on a round wafer, laid out by :data:`SITE_LAYOUTS`.

    The usable radius is ``radius_px - edge_exclusion_px``; ring ``k`` puts
    its ``n`` sites at ``fraction * usable`` from the centre, at angles
    ``start + 360 * i / n`` degrees (from +x towards +y).

    Parameters
    ----------
    n_sites : int
        1, 5, 9 or 49.
    center_xy_px : tuple of float
        Wafer centre ``(x, y)``, px.
    radius_px : float
        Wafer radius, px, > 0.
    edge_exclusion_px : float
        Edge band without sites, px, >= 0 and < radius_px.

    Returns
    -------
    numpy.ndarray
        Float, shape (n_sites, 2): ``x, y`` of each site in px, centre first,
        then ring by ring.

    Raises
    ------
    OptionError
        Unknown site count (``--sites``), bad radius or exclusion
        (``--edge-exclusion``).
    """
    if n_sites not in SITE_LAYOUTS:
        known = ", ".join(str(k) for k in SITE_LAYOUTS)
        raise OptionError(f"expected a site count of {known}, got {n_sites!r}", where="--sites")
    usable = radius_px - edge_exclusion_px
    if not (math.isfinite(radius_px) and radius_px > 0 and edge_exclusion_px >= 0 and usable > 0):
        raise OptionError(
            f"expected 0 <= edge exclusion < wafer radius, got {edge_exclusion_px!r} px "
            f"for a radius of {radius_px!r} px",
            where="--edge-exclusion",
        )
    cx, cy = center_xy_px
    points = []
    for count, fraction, start_deg in SITE_LAYOUTS[n_sites]:
        angles = np.deg2rad(start_deg + 360.0 * np.arange(count) / count)
        r = fraction * usable
        points.append(np.column_stack([cx + r * np.cos(angles), cy + r * np.sin(angles)]))
    return np.concatenate(points)


@dataclass(frozen=True)
class SiteTable:
    """Thickness read at measurement sites (discs of ``disc_radius_px``).

    Each field but ``disc_radius_px`` is a tuple with one entry per site:
    ``x_px``, ``y_px`` (px), ``mean_nm``, ``std_nm`` (population, ddof = 0)
    of the finite pixels in the disc, and ``count_px`` of those pixels. A site
    with no measured pixel has NaN mean and std.
    """

    x_px: tuple[float, ...]
    y_px: tuple[float, ...]
    mean_nm: tuple[float, ...]
    std_nm: tuple[float, ...]
    count_px: tuple[int, ...]
    disc_radius_px: float

    _COLUMNS = ("site", "x_px", "y_px", "mean_nm", "std_nm", "count_px")

    def to_rows(self) -> list[dict]:
        """One JSON-ready dict per site (site numbered from 1; NaN becomes None)."""
        columns = zip(self.x_px, self.y_px, self.mean_nm, self.std_nm, self.count_px, strict=True)
        return [
            dict(zip(self._COLUMNS, (i, *map(json_value, row)), strict=True))
            for i, row in enumerate(columns, start=1)
        ]

    def to_csv_text(self) -> str:
        """CSV with a header naming units; unmeasured values are empty cells."""
        lines = [",".join(self._COLUMNS)]
        for row in self.to_rows():
            cells = [str(row["site"])]
            for name in self._COLUMNS[1:-1]:
                cells.append(csv_cell(math.nan if row[name] is None else row[name]))
            cells.append(str(row["count_px"]))
            lines.append(",".join(cells))
        return "\n".join(lines) + "\n"


def site_readings(
    thickness_nm: np.ndarray,
    sites_xy: np.ndarray,
    *,
    disc_radius_px: float,
    mask: np.ndarray | None = None,
) -> SiteTable:
    """Mean and spread of the thickness in a small disc around each site.

    A pixel belongs to a site's disc when its centre is within
    ``disc_radius_px`` of the site; only finite pixels (and, with ``mask``,
    pixels inside it) count. Sites off the image read as unmeasured.

    Parameters
    ----------
    thickness_nm : numpy.ndarray
        Float, shape (H, W), nm; NaN unmeasured.
    sites_xy : numpy.ndarray
        Float, shape (N, 2): site ``x, y`` in px.
    disc_radius_px : float
        Disc radius, px, finite and >= 0 (0 reads the nearest pixel centre
        only when the site is on it).
    mask : numpy.ndarray, optional
        Bool, shape (H, W): pixels allowed in the discs.

    Returns
    -------
    SiteTable

    Raises
    ------
    OptionError
        Bad disc radius (``--site-radius``) or mask shape (``--roi``).
    """
    if not (math.isfinite(disc_radius_px) and disc_radius_px >= 0):
        raise OptionError(
            f"expected a site disc radius >= 0 px, got {disc_radius_px!r}", where="--site-radius"
        )
    t = as_map(thickness_nm)
    usable = region(t, mask) & np.isfinite(t)
    sites = np.asarray(sites_xy, dtype=np.float64).reshape(-1, 2)
    h, w = t.shape
    r = float(disc_radius_px)
    means, stds, counts = [], [], []
    for x, y in sites:
        x0, x1 = max(math.ceil(x - r), 0), min(math.floor(x + r) + 1, w)
        y0, y1 = max(math.ceil(y - r), 0), min(math.floor(y + r) + 1, h)
        values = np.empty(0)
        if x0 < x1 and y0 < y1:
            yy, xx = np.mgrid[y0:y1, x0:x1]
            disc = ((xx - x) ** 2 + (yy - y) ** 2 <= r * r) & usable[y0:y1, x0:x1]
            values = t[y0:y1, x0:x1][disc]
        counts.append(int(values.size))
        if values.size:
            mean = float(values.mean())
            means.append(mean)
            stds.append(float(np.sqrt(np.mean((values - mean) ** 2))))
        else:
            means.append(math.nan)
            stds.append(math.nan)
    return SiteTable(
        x_px=tuple(float(v) for v in sites[:, 0]),
        y_px=tuple(float(v) for v in sites[:, 1]),
        mean_nm=tuple(means),
        std_nm=tuple(stds),
        count_px=tuple(counts),
        disc_radius_px=r,
    )
