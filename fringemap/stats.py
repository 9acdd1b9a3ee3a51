"""Uniformity statistics, site readings, line profiles and the physical scale.

Thickness maps are float arrays of shape (H, W) in nm; NaN (or any non-finite
value) marks an unmeasured pixel. Pixel coordinates follow
:mod:`fringemap.roi`: ``x`` to the right (column), ``y`` down (row), whole
numbers at pixel centres. Angles are measured from +x towards +y, which on a
screen (y down) turns clockwise.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, fields

import numpy as np

from fringemap.errors import FringemapError, OptionError

__all__ = [
    "Spec",
    "parse_spec",
    "UniformityStats",
    "uniformity",
    "SITE_LAYOUTS",
    "site_pattern",
    "SiteTable",
    "site_readings",
    "Scale",
    "parse_scale",
    "scale_from_points",
    "Profile",
    "profile",
    "thickness_gradient",
    "PlaneFit",
    "plane_fit",
]


def _json_value(value):
    """A value made JSON-ready: numpy scalars to Python, NaN/inf to None."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def _csv_cell(value: float) -> str:
    return "" if not math.isfinite(value) else format(value, ".9g")


def _as_map(thickness_nm: np.ndarray) -> np.ndarray:
    t = np.asarray(thickness_nm, dtype=np.float64)
    if t.ndim != 2:
        raise FringemapError(f"expected a thickness map of shape (H, W), got shape {t.shape}")
    return t


def _region(t: np.ndarray, mask: np.ndarray | None) -> np.ndarray:
    if mask is None:
        return np.ones(t.shape, dtype=bool)
    m = np.asarray(mask).astype(bool)
    if m.shape != t.shape:
        raise OptionError(
            f"expected a region mask of shape {t.shape}, got shape {m.shape}", where="--roi"
        )
    return m


# --------------------------------------------------------------------------- spec


@dataclass(frozen=True)
class Spec:
    """A thickness specification ``target_nm ± tol_nm``.

    A pixel is in spec when ``|t - target_nm| <= tol_nm`` (bounds included).
    """

    target_nm: float
    tol_nm: float


_SPEC_RE = re.compile(r"^\s*([^±+]+?)\s*(?:±|\+/-|\+-)\s*(.+?)\s*(?:nm)?\s*$")


def parse_spec(text: str) -> Spec:
    """Parse ``--spec`` text ``TARGET±TOL`` (also ``TARGET+-TOL``, ``TARGET+/-TOL``), in nm.

    Parameters
    ----------
    text : str
        e.g. ``"100±5"``, ``"100 +/- 5"``, ``"100+-5nm"``.

    Returns
    -------
    Spec

    Raises
    ------
    OptionError
        Not of that form, non-numbers, TARGET not finite and > 0, or TOL not
        finite and > 0 (``where="--spec"``).
    """
    expected = "TARGET±TOL in nm (e.g. 100±5, 100+-5 or 100+/-5) with TARGET > 0 and TOL > 0"
    match = _SPEC_RE.match(text)
    if not match:
        raise OptionError(f"expected {expected}, got {text!r}", where="--spec")
    try:
        target, tol = float(match.group(1)), float(match.group(2))
    except ValueError:
        raise OptionError(f"expected {expected}, got {text!r}", where="--spec") from None
    if not (math.isfinite(target) and math.isfinite(tol) and target > 0 and tol > 0):
        raise OptionError(f"expected {expected}, got {text!r}", where="--spec")
    return Spec(target, tol)


# --------------------------------------------------------------------- uniformity


@dataclass(frozen=True)
class UniformityStats:
    """Statistics of the measured pixels of a region.

    With ``t`` the finite thickness values (nm) of the region's pixels and
    ``Pq`` their q-th percentile (numpy's default linear interpolation):

    - ``count_px`` = number of values; ``region_px`` = pixels in the region
    - ``coverage`` = count_px / region_px (0 when the region is empty), 0-1
    - ``mean_nm``, ``median_nm``; ``std_nm`` is the population standard
      deviation, ``sqrt(mean((t - mean)**2))`` (ddof = 0)
    - ``min_nm``, ``max_nm``, ``range_nm = max - min``; ``p1_nm`` ... ``p99_nm``
    - ``cv_percent = std / mean * 100``
    - ``nonuniformity_percent = (max - min) / (2 * mean) * 100``
    - ``robust_nonuniformity_percent = (P99 - P1) / (2 * mean) * 100``
    - ``in_spec_fraction`` = fraction of values with ``|t - target| <= tol``
    - ``passed = in_spec_fraction >= spec_required_fraction`` (False when
      nothing was measured)

    Values that cannot be computed (no measured pixel, mean of 0) are NaN;
    the spec fields are None when no spec was given.
    """

    count_px: int
    region_px: int
    coverage: float
    mean_nm: float
    median_nm: float
    std_nm: float
    min_nm: float
    max_nm: float
    range_nm: float
    p1_nm: float
    p5_nm: float
    p95_nm: float
    p99_nm: float
    cv_percent: float
    nonuniformity_percent: float
    robust_nonuniformity_percent: float
    spec_target_nm: float | None = None
    spec_tol_nm: float | None = None
    spec_required_fraction: float | None = None
    in_spec_fraction: float | None = None
    passed: bool | None = None

    def to_dict(self) -> dict:
        """The fields as a JSON-ready dict (Python numbers; NaN becomes None)."""
        return {f.name: _json_value(getattr(self, f.name)) for f in fields(self)}


def _percent_of_mean(numerator: float, mean: float, factor: float = 1.0) -> float:
    if not math.isfinite(mean) or mean == 0:
        return math.nan
    return float(numerator / (factor * mean) * 100.0)


def uniformity(
    thickness_nm: np.ndarray,
    *,
    mask: np.ndarray | None = None,
    spec: Spec | None = None,
    required_fraction: float = 0.99,
) -> UniformityStats:
    """Uniformity statistics of a thickness map over a region.

    Parameters
    ----------
    thickness_nm : numpy.ndarray
        Float, shape (H, W), nm; non-finite values are unmeasured.
    mask : numpy.ndarray, optional
        Bool, shape (H, W): the region (default: the whole map).
    spec : Spec, optional
        Target and tolerance to judge the measured pixels against.
    required_fraction : float
        Fraction (0-1) of measured pixels that must be in spec to pass;
        default 0.99.

    Returns
    -------
    UniformityStats
        See its docstring for every formula. An empty region or one with
        nothing measured gives ``count_px = 0``, ``coverage = 0`` and NaN
        statistics (no exception).

    Raises
    ------
    OptionError
        Mask of another shape (``--roi``), required_fraction outside 0-1
        (``--spec``).
    """
    if not (0.0 <= required_fraction <= 1.0):
        raise OptionError(
            f"expected a required in-spec fraction in 0-1, got {required_fraction!r}",
            where="--spec",
        )
    t = _as_map(thickness_nm)
    region = _region(t, mask)
    values = t[region & np.isfinite(t)]
    count = int(values.size)
    region_px = int(np.count_nonzero(region))
    coverage = count / region_px if region_px else 0.0
    if count:
        mean = float(values.mean())
        std = float(np.sqrt(np.mean((values - mean) ** 2)))
        lo, hi = float(values.min()), float(values.max())
        p1, p5, p50, p95, p99 = (float(v) for v in np.percentile(values, [1, 5, 50, 95, 99]))
    else:
        mean = std = lo = hi = p1 = p5 = p50 = p95 = p99 = math.nan
    spec_fields: dict = {}
    if spec is not None:
        if count:
            in_spec = float(np.count_nonzero(np.abs(values - spec.target_nm) <= spec.tol_nm))
            fraction = in_spec / count
            passed = fraction >= required_fraction
        else:
            fraction, passed = math.nan, False
        spec_fields = dict(
            spec_target_nm=spec.target_nm,
            spec_tol_nm=spec.tol_nm,
            spec_required_fraction=float(required_fraction),
            in_spec_fraction=fraction,
            passed=bool(passed),
        )
    return UniformityStats(
        count_px=count,
        region_px=region_px,
        coverage=float(coverage),
        mean_nm=mean,
        median_nm=p50,
        std_nm=std,
        min_nm=lo,
        max_nm=hi,
        range_nm=hi - lo,
        p1_nm=p1,
        p5_nm=p5,
        p95_nm=p95,
        p99_nm=p99,
        cv_percent=_percent_of_mean(std, mean),
        nonuniformity_percent=_percent_of_mean(hi - lo, mean, 2.0),
        robust_nonuniformity_percent=_percent_of_mean(p99 - p1, mean, 2.0),
        **spec_fields,
    )


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
            dict(zip(self._COLUMNS, (i, *map(_json_value, row)), strict=True))
            for i, row in enumerate(columns, start=1)
        ]

    def to_csv_text(self) -> str:
        """CSV with a header naming units; unmeasured values are empty cells."""
        lines = [",".join(self._COLUMNS)]
        for row in self.to_rows():
            cells = [str(row["site"])]
            for name in self._COLUMNS[1:-1]:
                cells.append(_csv_cell(math.nan if row[name] is None else row[name]))
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
    t = _as_map(thickness_nm)
    usable = _region(t, mask) & np.isfinite(t)
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


# -------------------------------------------------------------------------- scale


@dataclass(frozen=True)
class Scale:
    """Physical scale of the photo: ``px_per_mm`` pixels per millimetre (> 0)."""

    px_per_mm: float

    def __post_init__(self) -> None:
        try:
            value = float(self.px_per_mm)
        except (TypeError, ValueError):
            value = math.nan
        if not (math.isfinite(value) and value > 0):
            raise OptionError(
                f"expected a scale > 0 px/mm, got {self.px_per_mm!r}", where="--scale"
            )
        object.__setattr__(self, "px_per_mm", value)

    @property
    def mm_per_px(self) -> float:
        """Size of one pixel, mm."""
        return 1.0 / self.px_per_mm

    def to_mm(self, length_px):
        """A length (or array of lengths) in px converted to mm."""
        return np.asarray(length_px, dtype=np.float64) / self.px_per_mm


def parse_scale(text: str) -> Scale:
    """Parse ``--scale`` text: a number of pixels per millimetre, e.g. ``"12.5"``.

    Raises
    ------
    OptionError
        Not a finite number > 0 (``where="--scale"``).
    """
    try:
        value = float(text.strip())
    except ValueError:
        raise OptionError(
            f"expected a scale in px/mm (a number > 0), got {text!r}", where="--scale"
        ) from None
    return Scale(value)


def scale_from_points(
    p1_xy: tuple[float, float], p2_xy: tuple[float, float], distance_mm: float
) -> Scale:
    """The scale from two image points ``distance_mm`` apart on the sample.

    Parameters
    ----------
    p1_xy, p2_xy : tuple of float
        Points ``(x, y)`` in px.
    distance_mm : float
        Their real distance, mm, > 0.

    Raises
    ------
    OptionError
        Distance not > 0 or coincident points (``where="--scale"``).
    """
    if not (math.isfinite(distance_mm) and distance_mm > 0):
        raise OptionError(f"expected a distance > 0 mm, got {distance_mm!r}", where="--scale")
    length_px = math.hypot(p2_xy[0] - p1_xy[0], p2_xy[1] - p1_xy[1])
    if not (math.isfinite(length_px) and length_px > 0):
        raise OptionError(
            f"expected two distinct points, got {tuple(p1_xy)} and {tuple(p2_xy)}", where="--scale"
        )
    return Scale(length_px / distance_mm)


# ------------------------------------------------------------------------ profile


@dataclass(frozen=True)
class Profile:
    """Values sampled along a line; every field is a float array of shape (N,).

    ``distance_px`` from the start point, ``x_px``, ``y_px`` of the sample,
    ``thickness_nm`` and ``confidence`` (NaN where unmeasured or not given).
    """

    distance_px: np.ndarray
    x_px: np.ndarray
    y_px: np.ndarray
    thickness_nm: np.ndarray
    confidence: np.ndarray

    def to_csv_text(self, scale: Scale | None = None) -> str:
        """CSV with a header naming units; adds ``distance_mm`` when a scale is given."""
        names = ["distance_px"] + (["distance_mm"] if scale else []) + ["x_px", "y_px"]
        names += ["thickness_nm", "confidence"]
        columns = [self.distance_px] + ([scale.to_mm(self.distance_px)] if scale else [])
        columns += [self.x_px, self.y_px, self.thickness_nm, self.confidence]
        lines = [",".join(names)]
        for row in zip(*columns, strict=True):
            lines.append(",".join(_csv_cell(float(v)) for v in row))
        return "\n".join(lines) + "\n"


def _sample(image: np.ndarray, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Bilinear sampling that skips non-finite neighbours.

    The four pixels around each point are weighted bilinearly; non-finite
    ones are dropped and the remaining weights renormalised. When the finite
    neighbours carry less than half the weight the result is NaN, so a
    sample never leans mostly on unmeasured pixels.
    """
    h, w = image.shape
    x0 = np.clip(np.floor(x).astype(np.intp), 0, w - 1)
    y0 = np.clip(np.floor(y).astype(np.intp), 0, h - 1)
    fx, fy = x - x0, y - y0
    total = np.zeros_like(x)
    weight = np.zeros_like(x)
    for dy, wy in ((0, 1.0 - fy), (1, fy)):
        for dx, wx in ((0, 1.0 - fx), (1, fx)):
            v = image[np.minimum(y0 + dy, h - 1), np.minimum(x0 + dx, w - 1)]
            wgt = np.where(np.isfinite(v), wx * wy, 0.0)
            total += wgt * np.where(np.isfinite(v), v, 0.0)
            weight += wgt
    out = np.full_like(x, np.nan)
    ok = weight >= 0.5
    out[ok] = total[ok] / weight[ok]
    return out


def profile(
    thickness_nm: np.ndarray,
    confidence: np.ndarray | None,
    start_xy: tuple[float, float],
    end_xy: tuple[float, float],
    *,
    step_px: float = 1.0,
) -> Profile:
    """Thickness (and confidence) along the segment from ``start_xy`` to ``end_xy``.

    Samples are equally spaced, include both end points, and are at most
    ``step_px`` apart (``ceil(length / step_px) + 1`` samples). Values are
    sampled bilinearly, skipping unmeasured neighbours (see ``_sample``).

    Parameters
    ----------
    thickness_nm : numpy.ndarray
        Float, shape (H, W), nm; NaN unmeasured.
    confidence : numpy.ndarray or None
        Float, shape (H, W), any units (e.g. 0-1); None gives a NaN column.
    start_xy, end_xy : tuple of float
        End points ``(x, y)`` in px, within ``0..W-1`` and ``0..H-1``.
    step_px : float
        Largest spacing between samples, px, > 0.

    Returns
    -------
    Profile

    Raises
    ------
    OptionError
        End points off the image or coincident, bad step, or a confidence
        map of another shape (``where="--profile"``).
    """
    where = "--profile"
    t = _as_map(thickness_nm)
    h, w = t.shape
    if not (math.isfinite(step_px) and step_px > 0):
        raise OptionError(f"expected a profile step > 0 px, got {step_px!r}", where=where)
    for point in (start_xy, end_xy):
        px, py = float(point[0]), float(point[1])
        if not (0 <= px <= w - 1 and 0 <= py <= h - 1):
            raise OptionError(
                f"expected end points within x 0..{w - 1}, y 0..{h - 1} px of the {w}x{h} px "
                f"(WxH) image, got ({px:g}, {py:g})",
                where=where,
            )
    (xa, ya), (xb, yb) = map(float, start_xy), map(float, end_xy)
    length = math.hypot(xb - xa, yb - ya)
    if length == 0:
        raise OptionError(
            f"expected two distinct end points, got ({xa:g}, {ya:g}) twice", where=where
        )
    s = np.linspace(0.0, 1.0, math.ceil(length / step_px - 1e-9) + 1)
    x, y = xa + s * (xb - xa), ya + s * (yb - ya)
    if confidence is None:
        conf = np.full_like(s, np.nan)
    else:
        c = np.asarray(confidence, dtype=np.float64)
        if c.shape != t.shape:
            raise OptionError(
                f"expected a confidence map of shape {t.shape}, got shape {c.shape}", where=where
            )
        conf = _sample(c, x, y)
    return Profile(s * length, x, y, _sample(t, x, y), conf)


# ------------------------------------------------------------ gradient and wedge


def _axis_gradient(t: np.ndarray, axis: int) -> np.ndarray:
    """d t / d index along ``axis``: mean of the forward and backward differences
    that are finite (central difference inside, one-sided next to holes and borders)."""
    diff = np.diff(t, axis=axis)
    pad = [(0, 0), (0, 0)]
    pad[axis] = (1, 0)
    backward = np.pad(diff, pad, constant_values=np.nan)
    pad[axis] = (0, 1)
    forward = np.pad(diff, pad, constant_values=np.nan)
    ok_b, ok_f = np.isfinite(backward), np.isfinite(forward)
    n = ok_b.astype(np.float64) + ok_f
    total = np.where(ok_b, backward, 0.0) + np.where(ok_f, forward, 0.0)
    out = np.full(t.shape, np.nan)
    np.divide(total, n, out=out, where=(n > 0) & np.isfinite(t))
    return out


def thickness_gradient(thickness_nm: np.ndarray, *, scale: Scale) -> tuple[np.ndarray, np.ndarray]:
    """Thickness slope maps along x (right) and y (down), nm/mm.

    Per pixel, the slope along an axis is the mean of the finite forward and
    backward differences to its neighbours (the central difference inside a
    measured area, a one-sided difference at borders and holes) times
    ``scale.px_per_mm``; NaN where the pixel or both neighbours are
    unmeasured.

    Parameters
    ----------
    thickness_nm : numpy.ndarray
        Float, shape (H, W), nm.
    scale : Scale
        Pixels per mm.

    Returns
    -------
    tuple of numpy.ndarray
        ``(gx_nm_per_mm, gy_nm_per_mm)``, each float of shape (H, W).
    """
    t = _as_map(thickness_nm)
    return _axis_gradient(t, 1) * scale.px_per_mm, _axis_gradient(t, 0) * scale.px_per_mm


@dataclass(frozen=True)
class PlaneFit:
    """Least-squares plane ``t = intercept + slope_x * x_mm + slope_y * y_mm``.

    ``x_mm = x_px / px_per_mm`` and ``y_mm = y_px / px_per_mm`` (y down), so
    ``intercept_nm`` is the plane at pixel (0, 0).

    - ``magnitude_nm_per_mm = hypot(slope_x, slope_y)``
    - ``direction_deg`` = direction of steepest rise, ``atan2(slope_y,
      slope_x)`` in degrees, 0-360, from +x towards +y
    - ``wedge_angle_urad = atan(magnitude_nm_per_mm * 1e-6) * 1e6`` (1 nm/mm
      is a rise of 1e-6)
    - ``residual_rms_nm = sqrt(mean((t - plane)**2))``

    All NaN when fewer than 3 pixels, or pixels all on one line, were fitted.
    """

    count_px: int
    intercept_nm: float
    slope_x_nm_per_mm: float
    slope_y_nm_per_mm: float
    magnitude_nm_per_mm: float
    direction_deg: float
    wedge_angle_urad: float
    residual_rms_nm: float

    def to_dict(self) -> dict:
        """The fields as a JSON-ready dict (Python numbers; NaN becomes None)."""
        return {f.name: _json_value(getattr(self, f.name)) for f in fields(self)}


def plane_fit(
    thickness_nm: np.ndarray, *, scale: Scale, mask: np.ndarray | None = None
) -> PlaneFit:
    """Fit a plane to the measured pixels (of a region) by least squares.

    Solved on coordinates centred at their mean, by the 2x2 normal equations,
    so memory stays linear in the number of pixels.

    Parameters
    ----------
    thickness_nm : numpy.ndarray
        Float, shape (H, W), nm; NaN unmeasured.
    scale : Scale
        Pixels per mm.
    mask : numpy.ndarray, optional
        Bool, shape (H, W): the region to fit (default: whole map).

    Returns
    -------
    PlaneFit
        See its docstring for the formulas.
    """
    t = _as_map(thickness_nm)
    use = _region(t, mask) & np.isfinite(t)
    ys, xs = np.nonzero(use)
    z = t[use]
    nan = math.nan
    if z.size >= 3:
        x = xs / scale.px_per_mm
        y = ys / scale.px_per_mm
        xm, ym, zm = x.mean(), y.mean(), z.mean()
        dx, dy, dz = x - xm, y - ym, z - zm
        sxx, syy, sxy = dx @ dx, dy @ dy, dx @ dy
        det = sxx * syy - sxy * sxy
        if det > 1e-12 * max(sxx * syy, 1e-300):
            bx = (syy * (dx @ dz) - sxy * (dy @ dz)) / det
            by = (sxx * (dy @ dz) - sxy * (dx @ dz)) / det
            rms = float(np.sqrt(np.mean((dz - bx * dx - by * dy) ** 2)))
            magnitude = math.hypot(bx, by)
            return PlaneFit(
                count_px=int(z.size),
                intercept_nm=float(zm - bx * xm - by * ym),
                slope_x_nm_per_mm=float(bx),
                slope_y_nm_per_mm=float(by),
                magnitude_nm_per_mm=magnitude,
                direction_deg=math.degrees(math.atan2(by, bx)) % 360.0,
                wedge_angle_urad=math.atan(magnitude * 1e-6) * 1e6,
                residual_rms_nm=rms,
            )
    return PlaneFit(int(z.size), nan, nan, nan, nan, nan, nan, nan)
