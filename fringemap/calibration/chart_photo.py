"""A simulated photo of the 24-patch chart, with the true corners of its patch grid.

Test and demo data for :mod:`fringemap.calibration.chart`: the chart's
spectral reflectances (colour-science ``SDS_COLOURCHECKERS["ISO 17321-1"]``)
rendered through a light and a camera's sensitivities exactly as
:func:`fringemap.simulate.render_photo` renders films.
"""

from __future__ import annotations

from typing import NamedTuple

import cv2
import numpy as np

from ..colour.transfer import srgb_encode
from .chart import COLUMNS, GAP_RATIO, ROWS, check_corners
from .common import chart_reflectances

__all__ = ["render_chart_photo", "ChartPhoto"]


class ChartPhoto(NamedTuple):
    """A simulated chart photo and the true corners (4, 2) of its patch grid (x, y px)."""

    image: np.ndarray
    corners: np.ndarray


def render_chart_photo(
    *,
    light,
    sensor,
    white_balance_error=(1.0, 1.0, 1.0),
    shape: tuple[int, int] = (480, 640),
    noise: float = 0.01,
    seed: int = 0,
    corners=None,
    exposure: float = 0.85,
    lamp_gradient: float = 0.0,
    blur_px: float = 0.7,
) -> ChartPhoto:
    """Render an 8-bit sRGB-encoded photo of the 24-patch chart (test and demo data).

    The chart (patches with dark gaps and a dark border, reflectance 0.03)
    lies on a mid-grey table (0.2), seen in perspective: its grid corners go to
    ``corners`` (default: a mildly tilted view). Formation as in
    :func:`fringemap.simulate.render_photo`: colour × white-balance error ×
    exposure (brightest patch channel at ``exposure``) × lamp ramp across x,
    blur, clip, sRGB encoding, Gaussian noise on encoded values, 8 bits.

    Parameters
    ----------
    light, sensor : str, Light or Detector
        The illuminant and the camera's sensitivities.
    white_balance_error : (float, float, float)
        Per-channel multipliers of a mis-set white balance.
    shape : (int, int)
        Photo size (H, W) in px.
    noise : float
        Noise std, fraction of full scale (encoded values).
    seed : int
        Noise seed.
    corners : ndarray (4, 2), optional
        Where the grid's corners go (x, y px), clockwise from the top-left.
    exposure : float
        Linear value of the brightest patch's brightest channel (0-1).
    lamp_gradient : float
        Illumination ramp across x (±lamp_gradient/2 at the sides).
    blur_px : float
        Gaussian blur sigma (px).

    Returns
    -------
    ChartPhoto
        ``(image uint8 (H, W, 3), corners (4, 2))``.
    """
    from ..colour.render import Renderer
    from ..colour.spectra import parse_detector, parse_light

    h, w = (int(v) for v in shape)
    if corners is None:
        corners = np.array(
            [[0.18 * w, 0.20 * h], [0.84 * w, 0.16 * h], [0.86 * w, 0.82 * h], [0.15 * w, 0.78 * h]]
        )
    corners = check_corners(corners, (h, w))
    wb = np.asarray(white_balance_error, dtype=np.float64)
    renderer = Renderer(parse_light(light, where="light"), parse_detector(sensor, where="sensor"))
    _, spectra = chart_reflectances()
    colours = renderer.rgb(spectra) * wb
    border = renderer.rgb(np.full(spectra.shape[1], 0.03)) * wb
    table = renderer.rgb(np.full(spectra.shape[1], 0.2)) * wb
    p, g, m = 60, int(round(60 * GAP_RATIO)), 24  # canonical patch, gap, border (px)
    cw, ch = COLUMNS * p + (COLUMNS - 1) * g, ROWS * p + (ROWS - 1) * g
    canvas = np.empty((ch + 2 * m, cw + 2 * m, 3), dtype=np.float32)
    canvas[:] = border
    for i, col in enumerate(colours):
        r, c = divmod(i, COLUMNS)
        y0, x0 = m + r * (p + g), m + c * (p + g)
        canvas[y0 : y0 + p, x0 : x0 + p] = col
    src = np.array([[m, m], [m + cw, m], [m + cw, m + ch], [m, m + ch]], dtype=np.float32) - 0.5
    hmg = cv2.getPerspectiveTransform(src, corners.astype(np.float32))
    img = cv2.warpPerspective(
        canvas,
        hmg,
        (w, h),
        flags=cv2.INTER_LINEAR,
        borderMode=cv2.BORDER_CONSTANT,
        borderValue=tuple(map(float, table)),
    )
    # the canvas border stops at the chart's edge: outside it, the table
    inside = cv2.warpPerspective(np.ones(canvas.shape[:2], np.float32), hmg, (w, h)) > 0.5
    img[~inside] = table.astype(np.float32)
    ramp = 1 + lamp_gradient * (np.arange(w) / max(w - 1, 1) - 0.5)
    img = img * ramp[None, :, None].astype(np.float32)
    img *= np.float32(exposure / colours.max())
    if blur_px > 0:
        img = cv2.GaussianBlur(img, (0, 0), sigmaX=blur_px)
    img = srgb_encode(np.clip(img, 0, 1))
    rng = np.random.default_rng(seed)
    img = np.clip(img + rng.normal(0, noise, img.shape).astype(np.float32), 0, 1)
    return ChartPhoto(np.round(img * 255).astype(np.uint8), corners)
