"""Regions of interest: which pixels of a thickness map a measurement uses.

Coordinates are in pixels with ``x`` to the right (column index) and ``y``
down (row index). Whole-number coordinates are pixel centres: the pixel in row
``i`` and column ``j`` sits at ``(x, y) = (j, i)``.

Command-line forms of ``--roi`` (see :func:`parse_roi`):

=========================  ==================================================
text                       region
=========================  ==================================================
``all``                    every pixel of the image
``rect:X0,Y0,X1,Y1``       columns ``X0 <= x < X1`` and rows ``Y0 <= y < Y1``
``X0,Y0,X1,Y1``            the same rectangle, without the prefix
``circle:CX,CY,R``         pixels whose centre is within ``R`` px of (CX, CY)
``mask:PATH``              nonzero pixels of an 8-bit image of the same size
=========================  ==================================================
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import cv2
import numpy as np

from fringemap.errors import InputFileError, OptionError

__all__ = [
    "FullRoi",
    "RectRoi",
    "CircleRoi",
    "MaskRoi",
    "Roi",
    "parse_roi",
    "roi_mask",
    "edge_exclusion_mask",
    "parse_xy",
    "parse_segment",
]

_WHERE = "--roi"
_FORMS = "all, rect:X0,Y0,X1,Y1, X0,Y0,X1,Y1, circle:CX,CY,R or mask:PATH"


@dataclass(frozen=True)
class FullRoi:
    """The whole image."""

    def __str__(self) -> str:
        return "all"


@dataclass(frozen=True)
class RectRoi:
    """An axis-aligned rectangle, inclusive at ``x0, y0`` and exclusive at ``x1, y1``.

    Parameters
    ----------
    x0, y0, x1, y1 : int
        Corners in px; ``x0 < x1`` and ``y0 < y1``. The rectangle may reach
        past the image border; only its part inside the image is used.
    """

    x0: int
    y0: int
    x1: int
    y1: int

    def __str__(self) -> str:
        return f"rect:{self.x0},{self.y0},{self.x1},{self.y1}"


@dataclass(frozen=True)
class CircleRoi:
    """A disc of pixels whose centres are within ``r_px`` of ``(cx_px, cy_px)``.

    Parameters
    ----------
    cx_px, cy_px : float
        Centre in px (may be fractional or outside the image).
    r_px : float
        Radius in px, > 0. A pixel is inside when
        ``(x - cx)**2 + (y - cy)**2 <= r**2``.
    """

    cx_px: float
    cy_px: float
    r_px: float

    def __str__(self) -> str:
        return f"circle:{self.cx_px:.12g},{self.cy_px:.12g},{self.r_px:.12g}"


@dataclass(frozen=True)
class MaskRoi:
    """A region drawn as an image: nonzero pixels are inside.

    Parameters
    ----------
    path : str
        The file the mask was read from.
    pixels : numpy.ndarray
        Read-only bool array, shape (H, W), True inside. Not used in
        comparisons or hashing (two masks from one path compare equal).
    """

    path: str
    pixels: np.ndarray = field(compare=False, repr=False)

    def __str__(self) -> str:
        return f"mask:{self.path}"


Roi = FullRoi | RectRoi | CircleRoi | MaskRoi


def _numbers(text: str, count: int, *, option: str, form: str, original: str) -> list[float]:
    """Split ``text`` on commas into ``count`` finite floats, or raise OptionError."""
    parts = text.split(",")
    if len(parts) != count:
        raise OptionError(
            f"expected {form} ({count} comma-separated numbers), got {original!r}",
            where=option,
        )
    values = []
    for part in parts:
        try:
            value = float(part.strip())
        except ValueError:
            raise OptionError(
                f"expected {form} with numbers, got {part.strip()!r} in {original!r}",
                where=option,
            ) from None
        if not math.isfinite(value):
            raise OptionError(
                f"expected {form} with finite numbers, got {part.strip()!r} in {original!r}",
                where=option,
            )
        values.append(value)
    return values


def _parse_rect(body: str, original: str) -> RectRoi:
    form = "rect:X0,Y0,X1,Y1"
    values = _numbers(body, 4, option=_WHERE, form=form, original=original)
    if not all(v.is_integer() for v in values):
        raise OptionError(f"expected {form} in whole pixels, got {original!r}", where=_WHERE)
    x0, y0, x1, y1 = (int(v) for v in values)
    if x0 >= x1 or y0 >= y1:
        raise OptionError(
            f"expected {form} with X0 < X1 and Y0 < Y1, got {original!r}", where=_WHERE
        )
    return RectRoi(x0, y0, x1, y1)


def _parse_circle(body: str, original: str) -> CircleRoi:
    form = "circle:CX,CY,R"
    cx, cy, r = _numbers(body, 3, option=_WHERE, form=form, original=original)
    if r <= 0:
        raise OptionError(f"expected {form} with radius R > 0 px, got {original!r}", where=_WHERE)
    return CircleRoi(cx, cy, r)


def _read_mask(path: str) -> MaskRoi:
    if not path.strip():
        raise OptionError(f"expected mask:PATH with a file path, got 'mask:{path}'", where=_WHERE)
    # read the bytes here (not cv2.imread): a missing or unreadable file gets its own
    # message, and OpenCV prints no warning of its own on the terminal
    try:
        data = np.fromfile(path, dtype=np.uint8)
    except FileNotFoundError:
        raise InputFileError(
            f"mask image {path!r} does not exist; check the file name and folder", where=_WHERE
        ) from None
    except IsADirectoryError:
        raise InputFileError(
            f"mask image {path!r} is a folder; give the path of an image file", where=_WHERE
        ) from None
    except OSError as exc:
        raise InputFileError(
            f"mask image {path!r} cannot be read ({exc.strerror or type(exc).__name__})",
            where=_WHERE,
        ) from None
    image = cv2.imdecode(data, cv2.IMREAD_GRAYSCALE) if data.size else None
    if image is None:
        raise InputFileError(
            f"expected a readable 8-bit mask image, could not read {path!r}", where=_WHERE
        )
    pixels = image != 0
    pixels.setflags(write=False)
    return MaskRoi(path, pixels)


def parse_roi(text: str) -> Roi:
    """Parse the text of ``--roi`` into a region.

    Parameters
    ----------
    text : str
        One of the forms in the module docstring. Prefixes are
        case-insensitive; spaces around numbers are ignored.

    Returns
    -------
    FullRoi, RectRoi, CircleRoi or MaskRoi

    Raises
    ------
    OptionError
        Malformed text (``where="--roi"``).
    InputFileError
        ``mask:PATH`` names a file that cannot be read as an image.
    """
    stripped = text.strip()
    kind, sep, body = stripped.partition(":")
    kind = kind.strip().lower()
    if not sep:
        if kind == "all":
            return FullRoi()
        if stripped.count(",") == 3:
            return _parse_rect(stripped, text)
        raise OptionError(f"expected {_FORMS}, got {text!r}", where=_WHERE)
    if kind == "rect":
        return _parse_rect(body, text)
    if kind == "circle":
        return _parse_circle(body, text)
    if kind == "mask":
        return _read_mask(body)
    raise OptionError(f"expected {_FORMS}, got {text!r}", where=_WHERE)


def _check_shape(shape: tuple[int, ...]) -> tuple[int, int]:
    if len(shape) < 2 or shape[0] < 1 or shape[1] < 1:
        raise OptionError(f"expected an image shape (H, W) >= 1 px, got {shape}", where=_WHERE)
    return int(shape[0]), int(shape[1])


def roi_mask(roi: Roi, shape: tuple[int, ...]) -> np.ndarray:
    """The pixels of an image that lie inside a region.

    Parameters
    ----------
    roi : FullRoi, RectRoi, CircleRoi or MaskRoi
        The region, e.g. from :func:`parse_roi`.
    shape : tuple of int
        Image shape ``(H, W)`` in px (extra trailing dimensions are ignored).

    Returns
    -------
    numpy.ndarray
        Bool, shape (H, W), True inside the region.

    Raises
    ------
    OptionError
        The region holds no pixel of the image (it lies outside or is empty),
        or a mask image has another size (``where="--roi"``).
    """
    h, w = _check_shape(shape)
    if isinstance(roi, FullRoi):
        return np.ones((h, w), dtype=bool)
    if isinstance(roi, MaskRoi):
        if roi.pixels.shape != (h, w):
            mh, mw = roi.pixels.shape[:2]
            raise OptionError(
                f"expected a mask of the image size {w}x{h} px (WxH), "
                f"got {mw}x{mh} px in {roi.path!r}",
                where=_WHERE,
            )
        mask = roi.pixels.copy()
    elif isinstance(roi, RectRoi):
        mask = np.zeros((h, w), dtype=bool)
        x0, x1 = max(roi.x0, 0), min(roi.x1, w)
        y0, y1 = max(roi.y0, 0), min(roi.y1, h)
        if x0 < x1 and y0 < y1:
            mask[y0:y1, x0:x1] = True
    elif isinstance(roi, CircleRoi):
        ys = np.arange(h, dtype=np.float64)[:, None] - roi.cy_px
        xs = np.arange(w, dtype=np.float64)[None, :] - roi.cx_px
        mask = xs * xs + ys * ys <= roi.r_px * roi.r_px
    else:
        raise OptionError(f"expected a region of interest, got {type(roi).__name__}", where=_WHERE)
    if not mask.any():
        raise OptionError(
            f"expected a region overlapping the {w}x{h} px (WxH) image, got {roi} with no pixel in it",
            where=_WHERE,
        )
    return mask


def edge_exclusion_mask(mask: np.ndarray, *, exclusion_px: float) -> np.ndarray:
    """Shrink a region by removing every pixel within a distance of its edge.

    The distance of a pixel is the Euclidean distance (px) from its centre to
    the centre of the nearest pixel outside the region
    (:func:`scipy.ndimage.distance_transform_edt`); pixels beyond the image
    border count as outside, so a region touching the border is shrunk there
    too. A pixel is kept when its distance is ``> exclusion_px``, so
    ``exclusion_px = 0`` keeps the region as it is and ``exclusion_px = 1``
    removes its outermost ring of pixels.

    Parameters
    ----------
    mask : numpy.ndarray
        Bool (or 0/nonzero), shape (H, W): the region, e.g. the wafer.
    exclusion_px : float
        Width of the edge band to remove, px, finite and >= 0.

    Returns
    -------
    numpy.ndarray
        Bool, shape (H, W), a subset of ``mask``.

    Raises
    ------
    OptionError
        ``exclusion_px`` negative or not finite, or so large that nothing is
        left (``where="--edge-exclusion"``).
    """
    where = "--edge-exclusion"
    if not math.isfinite(exclusion_px) or exclusion_px < 0:
        raise OptionError(f"expected a distance >= 0 px, got {exclusion_px!r}", where=where)
    region = np.asarray(mask).astype(bool)
    if region.ndim != 2:
        raise OptionError(f"expected a 2-D mask, got shape {region.shape}", where=where)
    if exclusion_px == 0 or not region.any():
        return region.copy()
    from scipy import ndimage  # only here: keeps start-up light

    distance = ndimage.distance_transform_edt(np.pad(region, 1))[1:-1, 1:-1]
    kept = distance > exclusion_px
    if not kept.any():
        raise OptionError(
            f"expected an exclusion smaller than the region's depth of {distance.max():g} px, "
            f"got {exclusion_px:g} px",
            where=where,
        )
    return kept


def parse_xy(text: str, option: str) -> tuple[float, float]:
    """Parse a point ``X,Y`` (px) given to ``option``.

    Parameters
    ----------
    text : str
        Two finite comma-separated numbers, e.g. ``"120,48.5"``.
    option : str
        Option name for errors, e.g. ``"--center"``.

    Returns
    -------
    tuple of float
        ``(x, y)`` in px.

    Raises
    ------
    OptionError
        Not two finite numbers (``where=option``).
    """
    x, y = _numbers(text, 2, option=option, form="X,Y", original=text)
    return x, y


def parse_segment(text: str, option: str) -> tuple[tuple[float, float], tuple[float, float]]:
    """Parse a line segment ``X1,Y1:X2,Y2`` (px) given to ``option``.

    Parameters
    ----------
    text : str
        Two points separated by a colon, e.g. ``"10,20:300,20"``.
    option : str
        Option name for errors, e.g. ``"--profile"``.

    Returns
    -------
    tuple
        ``((x1, y1), (x2, y2))`` in px.

    Raises
    ------
    OptionError
        Not two points of finite numbers (``where=option``).
    """
    form = "X1,Y1:X2,Y2"
    parts = text.split(":")
    if len(parts) != 2:
        raise OptionError(f"expected {form} (two points joined by ':'), got {text!r}", where=option)
    a = _numbers(parts[0], 2, option=option, form=form, original=text)
    b = _numbers(parts[1], 2, option=option, form=form, original=text)
    return (a[0], a[1]), (b[0], b[1])
