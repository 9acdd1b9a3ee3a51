"""Synthetic photographs of films under narrowband light, with a known thickness map.

Each pixel's brightness is the stack's reflectance averaged over the light's
band (:func:`fringemap.fringes.source.band_reflectance`), so the fringes fade
with thickness exactly as the band's coherence dictates. Photo formation, in
order: linear value = exposure × gain × reflectance / (brightest fringe);
gain = vignetting (``1 − v (r / r_corner)²``) × a lamp ramp across x;
Gaussian noise (a fraction of full scale); clipping to 0-1. The result is
float32 linear RGB, as :class:`fringemap.io.Photo` holds it.

One source lights all three channels (scaled by ``channel_response``, a
colour camera under a sodium lamp, say); several sources (from
:func:`~fringemap.fringes.source.parse_lines`) are recorded one per channel,
as a colour camera records the three bands of an RGB lamp (no crosstalk).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from ..errors import OptionError
from ..optics.stack import Stack
from .source import (
    CHANNELS,
    NarrowSource,
    band_reflectance,
    fringe_period_nm,
    narrow_source,
    parse_lines,
)

__all__ = ["FringePhoto", "render_fringe_photo"]


@dataclass(frozen=True)
class FringePhoto:
    """A rendered fringe photo and its truth.

    Attributes
    ----------
    linear : ndarray of float32, shape (H, W, 3)
        Linear RGB, 0-1.
    thickness_nm : ndarray of float64, shape (H, W)
        The true film thickness, nm; NaN off the film.
    film_mask : ndarray of bool, shape (H, W)
        Where the film is.
    sources : tuple of NarrowSource
        The light(s).
    """

    linear: np.ndarray = field(repr=False)
    thickness_nm: np.ndarray = field(repr=False)
    film_mask: np.ndarray = field(repr=False)
    sources: tuple

    def photo(self):
        """The image as a :class:`fringemap.io.Photo` (linear encoding)."""
        from ..io import photo_from_array

        return photo_from_array(self.linear, encoding="linear")


def _gain(shape, vignetting: float, lamp_gradient: float) -> np.ndarray:
    h, w = shape
    y, x = np.mgrid[0:h, 0:w].astype(np.float64)
    cy, cx = (h - 1) / 2, (w - 1) / 2
    r2 = ((x - cx) ** 2 + (y - cy) ** 2) / (cx**2 + cy**2 + 1e-12)
    ramp = 1.0 + lamp_gradient * ((x - cx) / max(cx, 1e-12)) / 2
    return (1.0 - vignetting * r2) * ramp


def render_fringe_photo(
    thickness_nm: np.ndarray,
    *,
    stack: Stack,
    light: str | NarrowSource | Sequence[NarrowSource],
    angle_deg: float = 0.0,
    film_mask: np.ndarray | None = None,
    exposure: float = 0.8,
    vignetting: float = 0.3,
    lamp_gradient: float = 0.1,
    noise: float = 0.02,
    seed: int = 0,
    channel_response: tuple[float, float, float] = (1.0, 1.0, 1.0),
    background: float = 0.0,
) -> FringePhoto:
    """Render the photo of a film of thickness ``thickness_nm`` under narrowband light.

    Parameters
    ----------
    thickness_nm : ndarray of shape (H, W)
        Film thickness, nm, >= 0 on the film; NaN marks no film.
    stack : Stack
        The film stack (its film thickness comes from the map).
    light : str, NarrowSource or sequence of NarrowSource
        One source (all channels) or up to three, each recorded in its
        ``channel`` (a sequence, or a string such as ``"450/10,530/10"``; see
        :func:`~fringemap.fringes.source.parse_lines`).
    angle_deg : float
        Angle of incidence, degrees.
    film_mask : ndarray of bool (H, W), optional
        Where the film is (default: where the thickness is finite).
    exposure : float
        Linear value of the brightest fringe at the image centre (0-1].
    vignetting : float
        Gain lost at the corners, 0 <= v < 1.
    lamp_gradient : float
        Illumination ramp across x, ±lamp_gradient/2 at the sides.
    noise : float
        Gaussian noise std, fraction of full scale (0.02 = 2 %).
    seed : int
        Seed of the noise.
    channel_response : (float, float, float)
        Relative R, G, B response to a single source.
    background : float
        Linear value off the film (before gain and noise).

    Returns
    -------
    FringePhoto
    """
    t = np.asarray(thickness_nm, dtype=np.float64)
    if t.ndim != 2:
        raise OptionError(
            f"expected a thickness map (H, W), got shape {t.shape}", where="thickness_nm"
        )
    mask = np.isfinite(t) if film_mask is None else np.asarray(film_mask, bool) & np.isfinite(t)
    if not mask.any():
        raise OptionError("the thickness map has no film pixel", where="thickness_nm")
    if np.any(t[mask] < 0):
        raise OptionError("film thickness must be >= 0 nm", where="thickness_nm")
    if not (0 <= vignetting < 1) or not (0 < exposure <= 1) or noise < 0:
        raise OptionError(
            "expected 0 <= vignetting < 1, 0 < exposure <= 1, noise >= 0",
            where="render_fringe_photo",
        )
    if isinstance(light, str) and "," in light:
        sources = parse_lines(light, where="light")
    elif isinstance(light, str | NarrowSource):
        sources = (narrow_source(light),)
    else:
        sources = tuple(narrow_source(s) for s in light)
    if len(sources) > 1 and any(s.channel not in CHANNELS for s in sources):
        raise OptionError("each of several lines needs a channel (r, g or b)", where="light")
    tv = t[mask]
    lo, hi = float(tv.min()), float(tv.max())
    out = np.zeros(t.shape + (3,), dtype=np.float64)
    gain = _gain(t.shape, vignetting, lamp_gradient)
    for src in sources:
        step = fringe_period_nm(stack, src, angle_deg=angle_deg) / 128
        grid = np.arange(lo, hi + 2 * step, step)
        r = band_reflectance(stack, src, thickness_nm=grid, angle_deg=angle_deg)
        level = np.zeros(t.shape)
        level[mask] = np.interp(tv, grid, r) / max(r.max(), 1e-12)
        level[~mask] = background
        value = exposure * gain * level
        if len(sources) == 1:
            out += value[..., None] * np.asarray(channel_response, dtype=np.float64)
        else:
            out[..., CHANNELS[src.channel]] = value
    rng = np.random.default_rng(seed)
    out += rng.normal(0.0, noise, out.shape)
    linear = np.clip(out, 0.0, 1.0).astype(np.float32)
    return FringePhoto(linear, np.where(mask, t, np.nan), mask, sources)
