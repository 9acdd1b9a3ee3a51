"""Fringe phase from one narrowband image: intensity, envelope, wrapped phase.

Stages, each a function here:

1. :func:`fringe_channel` — one intensity image (H, W) from an RGB photo: a
   chosen channel, the brightest, or luminance;
2. :func:`fringe_envelope` — upper and lower envelopes from max/min filters
   (smoothed), chosen per pixel at the smallest window that spans a whole
   fringe; the normalised intensity ``cos φ = (2I − U − L) / (U − L)``;
3. :func:`wrapped_phase` — the wrapped phase φ (−π, π]: by the
   Fourier-transform method [1]_ where the fringes ride on a carrier (one
   dominant spatial frequency, as on a wedge), otherwise by a 2-D analytic
   signal from the spiral-phase (vortex) transform [2]_ with the fringe
   direction from its orientation, unwrapped in double angle [3]_.

Unwrapping follows in :mod:`fringemap.fringes.unwrap`. The sign of φ is not
known here: intensity is even in φ. The caller fixes it (anchors, hints,
colours; see :mod:`fringemap.fringes.solve`).

References
----------
.. [1] M. Takeda, H. Ina & S. Kobayashi, "Fourier-transform method of
   fringe-pattern analysis for computer-based topography and
   interferometry", J. Opt. Soc. Am. 72, 156 (1982), doi:10.1364/JOSA.72.000156.
.. [2] K. G. Larkin, D. J. Bone & M. A. Oldfield, "Natural demodulation of
   two-dimensional fringe patterns. I. General background of the spiral phase
   quadrature transform", J. Opt. Soc. Am. A 18, 1862 (2001),
   doi:10.1364/JOSAA.18.001862.
.. [3] M. A. Herráez, D. R. Burton, M. J. Lalor & M. A. Gdeisat, "Fast
   two-dimensional phase-unwrapping algorithm based on sorting by reliability
   following a noncontinuous path", Appl. Opt. 41, 7437 (2002),
   doi:10.1364/AO.41.007437.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import cv2
import numpy as np
import scipy.fft
from scipy import ndimage

from ..errors import FringemapWarning, OptionError
from ._arrays import block_extreme, block_mean, gauss, reliability, safe_unwrap, upsample

__all__ = [
    "film_mask",
    "fringe_channel",
    "Envelope",
    "fringe_envelope",
    "Phase",
    "wrapped_phase",
    "METHODS",
]

METHODS = ("auto", "fourier", "spiral")
_LUMA = np.array([0.2126, 0.7152, 0.0722])
#: correlation with luminance below which a channel shows its own picture (a colour photo)
_COLOUR_CORRELATION = 0.9


# ---------------------------------------------------------------------------- channel


def film_mask(
    intensity: np.ndarray, usable: np.ndarray, *, level: float, dark_band_px: int
) -> np.ndarray:
    """Where the film is: bright, once dark fringes are closed over and holes filled.

    Parameters
    ----------
    intensity : ndarray of shape (H, W)
        Linear intensity.
    usable : ndarray of bool (H, W)
        Pixels that may be film (in the region of interest, not clipped).
    level : float
        Brightness, as a fraction of the 99.5th percentile, below which a
        pixel is dark (a soap film's dark fringes are as black as the
        background, so dark bands up to ``2 dark_band_px`` wide are closed
        over and dark areas enclosed by film are filled).
    dark_band_px : int
        Half-width of the widest dark band closed over, px.

    Returns
    -------
    ndarray of bool (H, W)
        The film, eroded by 2 px (its rim mixes film and background light).
    """
    img = ndimage.gaussian_filter(intensity, 1.0)
    dark_below = level * float(np.percentile(img[usable], 99.5)) if usable.any() else 0.0
    bright = (img > dark_below) & usable
    r = int(dark_band_px)
    padded = np.pad(bright.view(np.uint8), r, mode="reflect")
    # closing by a square (separable max then min filters: fast at any size)
    closed = ndimage.minimum_filter(ndimage.maximum_filter(padded, size=2 * r + 1), 2 * r + 1)
    film = ndimage.binary_fill_holes(closed[r:-r, r:-r] > 0) & usable
    return ndimage.minimum_filter(film.view(np.uint8), size=5, mode="nearest") > 0


def fringe_channel(linear: np.ndarray, *, channel: str = "auto") -> tuple[np.ndarray, str]:
    """The intensity image of a fringe photo.

    Parameters
    ----------
    linear : ndarray of shape (H, W, 3)
        Linear RGB.
    channel : {"auto", "r", "g", "b", "lum"}
        ``"auto"`` takes the brightest channel, or luminance (with a
        :class:`~fringemap.errors.FringemapWarning`) when the channels show
        different pictures, as in a white-light colour photo.

    Returns
    -------
    intensity : ndarray of float64, shape (H, W)
    used : str
        The channel used.
    """
    if channel not in ("auto", "r", "g", "b", "lum"):
        raise OptionError(f"expected r, g, b, lum or auto, got {channel!r}", where="--channel")
    rgb = np.asarray(linear, dtype=np.float64)
    lum = rgb @ _LUMA
    if channel == "lum":
        return lum, "lum"
    if channel != "auto":
        return rgb[..., "rgb".index(channel)], channel
    means = rgb.reshape(-1, 3).mean(axis=0)
    step = max(1, int(np.sqrt(lum.size / 250_000)))
    sub = rgb[::step, ::step].reshape(-1, 3)
    ls = sub @ _LUMA
    for j in range(3):
        if means[j] < 0.1 * means.max():
            continue  # a channel the light hardly reaches: only noise
        x = sub[:, j]
        if x.std() > 0 and ls.std() > 0 and np.corrcoef(x, ls)[0, 1] < _COLOUR_CORRELATION:
            warnings.warn(
                "the photo's colour channels show different pictures (a white-light colour "
                "photo?); fringes are read from its luminance",
                FringemapWarning,
                stacklevel=2,
            )
            return lum, "lum"
    j = int(np.argmax(means))
    return rgb[..., j], "rgb"[j]


# --------------------------------------------------------------------------- envelope


@dataclass(frozen=True)
class Envelope:
    """Envelopes of a fringe image and the normalised intensity; arrays of shape (H, W).

    ``upper``, ``lower``: envelopes (linear units); ``cos_phase``: the
    normalised intensity in [−1, 1] (0 off the mask); ``modulation``:
    ``(U − L) / (U + L)``, the local fringe visibility; ``window_px``: the
    max/min window chosen per pixel.
    """

    upper: np.ndarray = field(repr=False)
    lower: np.ndarray = field(repr=False)
    cos_phase: np.ndarray = field(repr=False)
    modulation: np.ndarray = field(repr=False)
    window_px: np.ndarray = field(repr=False)


def fringe_envelope(
    intensity: np.ndarray,
    *,
    mask: np.ndarray,
    smooth_px: float = 0.8,
    plateau: float = 1.1,
    work_pixels: int = 1_500_000,
) -> Envelope:
    """Upper/lower envelopes by max/min filtering and the normalised intensity.

    Windows grow by 1.5x from 5 px to half the image side; at each pixel the
    first window after which the envelope spread ``U − L`` grows by less
    than ``plateau`` (10 %) is used: it spans a full fringe there. Filters see
    only ``mask`` pixels; each envelope is smoothed by a Gaussian of a third of
    its window. Envelopes are smooth, so for images above ``work_pixels`` they
    are found on f×f block maxima / minima and upsampled bilinearly.

    Parameters
    ----------
    intensity : ndarray of shape (H, W)
        Linear intensity.
    mask : ndarray of bool, shape (H, W)
        Film pixels.
    smooth_px : float
        Gaussian (sigma, px) applied to the intensity first, for both the
        envelopes and the normalised intensity.
    plateau : float
        Growth factor that counts as "no longer growing".
    work_pixels : int
        Largest image the envelope search runs on.
    """
    img = gauss(np.asarray(intensity, dtype=np.float64), smooth_px, mask)
    h, w = img.shape
    f = max(1, int(np.ceil(np.sqrt(h * w / work_pixels))))
    hi_in = block_extreme(np.where(mask, img, -np.inf), f, np.max)
    lo_in = block_extreme(np.where(mask, img, np.inf), f, np.min)
    mask_c = np.isfinite(hi_in)
    sizes = []
    s = 5.0
    while s <= max(6.0, min(h, w) / 2):
        sizes.append(max(3, int(round(s / f))) | 1)
        s *= 1.5
    sizes = sorted(set(sizes))
    chosen_u = np.zeros(hi_in.shape)
    chosen_l = np.zeros(hi_in.shape)
    window = np.zeros(hi_in.shape)
    done = np.zeros(hi_in.shape, dtype=bool)
    prev = None
    for size in sizes:
        u = gauss(ndimage.maximum_filter(hi_in, size=size, mode="nearest"), size / 3, mask_c)
        lo = gauss(ndimage.minimum_filter(lo_in, size=size, mode="nearest"), size / 3, mask_c)
        if prev is not None:
            pu, pl, psize = prev
            settle = ~done & ((u - lo) < plateau * (pu - pl))
            chosen_u[settle], chosen_l[settle], window[settle] = pu[settle], pl[settle], psize
            done |= settle
        prev = (u, lo, size)
    rest = ~done
    chosen_u[rest], chosen_l[rest], window[rest] = prev[0][rest], prev[1][rest], prev[2]
    if f > 1:
        chosen_u = upsample(chosen_u, mask_c, f, (h, w))
        chosen_l = upsample(chosen_l, mask_c, f, (h, w))
        window = upsample(window * f, mask_c, f, (h, w))
    spread = chosen_u - chosen_l
    total = chosen_u + chosen_l
    with np.errstate(invalid="ignore", divide="ignore"):
        c = np.where(mask & (spread > 0), (2 * img - total) / spread, 0.0)
        mod = np.where(mask & (total > 0), spread / total, 0.0)
    return Envelope(chosen_u, chosen_l, np.clip(c, -1.0, 1.0), mod, window)


# ------------------------------------------------------------------------ wrapped phase


@dataclass(frozen=True)
class Phase:
    """Wrapped phases of one or more fringe images sharing one sign convention.

    ``wrapped``: tuple of ndarray (H, W), radians in (−π, π]; ``quality``:
    ndarray (H, W), 0-1 (phase coherence over a few pixels); ``method``:
    ``"fourier"`` or ``"spiral"``; ``carrier_fraction``: share of the fringe
    spectrum's energy near its strongest frequency (0-1).
    """

    wrapped: tuple = field(repr=False)
    quality: np.ndarray = field(repr=False)
    method: str
    carrier_fraction: float


def _padded_fft(c: np.ndarray, pad: int):
    h, w = c.shape
    ph, pw = cv2.getOptimalDFTSize(h + 2 * pad), cv2.getOptimalDFTSize(w + 2 * pad)
    buf = np.zeros((ph, pw))
    buf[pad : pad + h, pad : pad + w] = c
    fy = np.fft.fftfreq(ph)[:, None]
    fx = np.fft.fftfreq(pw)[None, :]
    return scipy.fft.fft2(buf, workers=-1), fx, fy


def _crop(a: np.ndarray, pad: int, shape) -> np.ndarray:
    return a[pad : pad + shape[0], pad : pad + shape[1]]


def _carrier(spec: np.ndarray, fx: np.ndarray, fy: np.ndarray, shape):
    """Strongest spatial frequency (cycles/px) and the energy share of its two lobes."""
    f = np.hypot(fx, fy)
    f_lo = 2.0 / min(shape)
    power = np.abs(spec) ** 2
    ac = power * (f > f_lo)
    k = np.unravel_index(np.argmax(ac), ac.shape)
    kx, ky = float(fx[0, k[1]]), float(fy[k[0], 0])
    kf = np.hypot(kx, ky)
    radius = 0.5 * kf
    lobes = (np.hypot(fx - kx, fy - ky) < radius) | (np.hypot(fx + kx, fy + ky) < radius)
    total = ac.sum()
    return (kx, ky), float((ac * lobes).sum() / total) if total > 0 else 0.0


def _fourier_phase(c: np.ndarray, carrier, pad: int) -> np.ndarray:
    spec, fx, fy = _padded_fft(c, pad)
    kx, ky = carrier
    radius = 0.6 * np.hypot(kx, ky)
    d = np.hypot(fx - kx, fy - ky) / radius
    window = np.where(d < 1, 0.5 * (1 + np.cos(np.pi * d)), 0.0)
    return _crop(scipy.fft.ifft2(spec * window, workers=-1), pad, c.shape)


def _spiral(c: np.ndarray, pad: int, spectrum=None) -> np.ndarray:
    """Spiral-phase transform: ``i e^{iβ} sin φ`` for ``c = cos φ`` with ∇φ along angle β."""
    spec, fx, fy = spectrum if spectrum is not None else _padded_fft(c, pad)
    z = fx + 1j * fy
    mag = np.abs(z)
    spiral = np.where(mag > 0, z / np.where(mag > 0, mag, 1.0), 0.0)
    return _crop(scipy.fft.ifft2(spec * spiral, workers=-1), pad, c.shape)


def _direction(orient: np.ndarray, energy: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Fringe direction β (mod 2π) from the double-angle field ``orient = e^{2iβ}·a``.

    The double angle is unwrapped on a coarse grid (about 250 px across) and
    halved; each pixel then takes the one of its two possible directions
    nearest the upsampled coarse direction.
    """
    h, w = mask.shape
    f = max(1, int(round(max(h, w) / 250)))
    oc, frac = block_mean(orient, mask, f)
    ec, _ = block_mean(energy, mask, f)
    with np.errstate(invalid="ignore", divide="ignore"):
        coherence = np.where(ec > 0, np.abs(oc) / np.maximum(ec, 1e-30), 0.0)
    valid = (frac >= 0.5) & (coherence > 0.2)
    if not valid.any():
        valid = frac > 0
    beta_c = safe_unwrap(np.angle(oc), valid) / 2
    cos_u = upsample(np.cos(beta_c), valid, f, (h, w))
    sin_u = upsample(np.sin(beta_c), valid, f, (h, w))
    theta = np.angle(orient) / 2
    flip = (np.cos(theta) * cos_u + np.sin(theta) * sin_u) < 0
    return np.where(flip, theta + np.pi, theta)


def wrapped_phase(
    cos_phases,
    *,
    mask: np.ndarray,
    method: str = "auto",
    smooth_px: float = 1.0,
    carrier_threshold: float = 0.6,
) -> Phase:
    """Wrapped phase of each normalised fringe image, with one shared sign.

    Parameters
    ----------
    cos_phases : sequence of ndarray (H, W)
        Normalised intensities (:attr:`Envelope.cos_phase`), one per line;
        the first sets the carrier (Fourier method) and all share one fringe
        direction field (spiral method), so their phases have the same sign.
    mask : ndarray of bool (H, W)
        Pixels with fringes.
    method : {"auto", "fourier", "spiral"}
        ``"auto"``: Fourier-transform method when at least
        ``carrier_threshold`` of the fringe spectrum's energy lies near one
        frequency pair, spiral otherwise.
    smooth_px : float
        Gaussian (sigma, px) applied to the complex fringe signal ``e^{iφ}``
        (averages noise without biasing a smoothly varying phase).

    Returns
    -------
    Phase
    """
    if method not in METHODS:
        raise OptionError(f"expected one of {', '.join(METHODS)}, got {method!r}", where="--method")
    cs = [np.where(mask, np.asarray(c, dtype=np.float64), 0.0) for c in cos_phases]
    pad = 16
    spec, fx, fy = _padded_fft(cs[0], pad)
    carrier, fraction = _carrier(spec, fx, fy, mask.shape)
    use = method if method != "auto" else ("fourier" if fraction >= carrier_threshold else "spiral")
    signals = []
    if use == "fourier":
        for c in cs:
            sp, _, _ = _padded_fft(c, pad)
            (kx, ky), _ = _carrier(sp, fx, fy, mask.shape)
            if kx * carrier[0] + ky * carrier[1] < 0:  # the lobe on the reference's side
                kx, ky = -kx, -ky
            signals.append(_fourier_phase(c, (kx, ky), pad))
    else:
        spirals = [_spiral(c, pad, (spec, fx, fy) if j == 0 else None) for j, c in enumerate(cs)]
        orient = sum(gauss(-(s**2), 3.0, mask) for s in spirals)
        energy = sum(gauss(np.abs(s) ** 2, 3.0, mask) for s in spirals)
        beta = _direction(orient, energy, mask)
        rot = -1j * np.exp(-1j * beta)
        signals = [c + 1j * np.real(rot * s) for c, s in zip(cs, spirals, strict=True)]
    wrapped, quality = [], None
    for z in signals:
        phi = np.where(mask, np.angle(gauss(z, smooth_px, mask)), 0.0)
        q = reliability(phi)
        wrapped.append(phi)
        quality = q if quality is None else np.minimum(quality, q)
    return Phase(tuple(wrapped), np.where(mask, quality, 0.0), use, fraction)
