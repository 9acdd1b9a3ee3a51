"""Physical scale, line profiles, thickness gradients and plane (wedge) fits.

Thickness maps are float arrays of shape (H, W) in nm; NaN marks an
unmeasured pixel. Pixel coordinates follow :mod:`fringemap.roi`: ``x`` to the
right (column), ``y`` down (row), whole numbers at pixel centres. Angles are
measured from +x towards +y, which on a screen (y down) turns clockwise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numpy as np

from fringemap._maps import as_map, csv_cell, json_value, region
from fringemap.errors import OptionError

__all__ = [
    "Scale",
    "parse_scale",
    "scale_from_points",
    "parse_scale_points",
    "Profile",
    "profile",
    "check_segment",
    "thickness_gradient",
    "PlaneFit",
    "plane_fit",
]

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


def parse_scale_points(text: str, *, where: str = "--scale-points") -> Scale:
    """Parse ``X1,Y1:X2,Y2=MM``: two image points (px) that are MM apart on the sample.

    Parameters
    ----------
    text : str
        e.g. ``"120,400:880,400=80"`` (two marks 80 mm apart, 760 px apart
        in the photo: 9.5 px/mm).
    where : str
        Option or recipe key named in errors.

    Returns
    -------
    Scale

    Raises
    ------
    OptionError
        Not of that form, a distance not > 0 mm, or coincident points.
    """
    from fringemap.roi import parse_segment

    form = "X1,Y1:X2,Y2=MM (two points in px and their distance in mm)"
    points, sep, mm = str(text).rpartition("=")
    if not sep:
        raise OptionError(f"expected {form}, got {text!r}", where=where)
    try:
        distance = float(mm.strip().removesuffix("mm"))
    except ValueError:
        raise OptionError(f"expected {form}, got {text!r}", where=where) from None
    try:
        p1, p2 = parse_segment(points, where)
        return scale_from_points(p1, p2, distance)
    except OptionError as exc:
        raise OptionError(exc.message, where=where) from None


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
            lines.append(",".join(csv_cell(float(v)) for v in row))
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


def check_segment(
    start_xy: tuple[float, float],
    end_xy: tuple[float, float],
    shape: tuple[int, ...],
    *,
    where: str = "--profile",
) -> tuple[tuple[float, float], tuple[float, float]]:
    """Check that a segment lies on an image and has two distinct end points.

    Parameters
    ----------
    start_xy, end_xy : tuple of float
        End points ``(x, y)`` in px.
    shape : tuple of int
        Image shape ``(H, W)`` in px.
    where : str
        Option or recipe key named in errors.

    Returns
    -------
    tuple
        ``((x1, y1), (x2, y2))`` as floats, px.

    Raises
    ------
    OptionError
        An end point outside ``0..W-1`` x ``0..H-1`` or both points equal.
    """
    h, w = int(shape[0]), int(shape[1])
    points = []
    for point in (start_xy, end_xy):
        px, py = float(point[0]), float(point[1])
        if not (0 <= px <= w - 1 and 0 <= py <= h - 1):
            raise OptionError(
                f"expected end points within x 0..{w - 1}, y 0..{h - 1} px of the {w}x{h} px "
                f"(WxH) image, got ({px:g}, {py:g})",
                where=where,
            )
        points.append((px, py))
    if points[0] == points[1]:
        raise OptionError(
            f"expected two distinct end points, got ({points[0][0]:g}, {points[0][1]:g}) twice",
            where=where,
        )
    return points[0], points[1]


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
    t = as_map(thickness_nm)
    if not (math.isfinite(step_px) and step_px > 0):
        raise OptionError(f"expected a profile step > 0 px, got {step_px!r}", where=where)
    (xa, ya), (xb, yb) = check_segment(start_xy, end_xy, t.shape, where=where)
    length = math.hypot(xb - xa, yb - ya)
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
    t = as_map(thickness_nm)
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
        return {f.name: json_value(getattr(self, f.name)) for f in fields(self)}


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
    t = as_map(thickness_nm)
    use = region(t, mask) & np.isfinite(t)
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
            direction = math.degrees(math.atan2(by, bx)) % 360.0
            if direction >= 360.0:  # a tiny negative angle rounds up to 360: that is 0
                direction = 0.0
            return PlaneFit(
                count_px=int(z.size),
                intercept_nm=float(zm - bx * xm - by * ym),
                slope_x_nm_per_mm=float(bx),
                slope_y_nm_per_mm=float(by),
                magnitude_nm_per_mm=magnitude,
                direction_deg=direction,
                wedge_angle_urad=math.atan(magnitude * 1e-6) * 1e6,
                residual_rms_nm=rms,
            )
    return PlaneFit(int(z.size), nan, nan, nan, nan, nan, nan, nan)
