"""Array helpers shared by the fringe stages: smoothing, block averages, upsampling.

All work on (H, W) maps; masks are bool (H, W). Internal to :mod:`fringemap.fringes`.
"""

from __future__ import annotations

import cv2
import numpy as np
from scipy import ndimage

__all__: list[str] = []


def blur(a: np.ndarray, sigma: float, mode: str) -> np.ndarray:
    """Gaussian blur; wide ones (sigma > 4 px) on a block-averaged copy, for speed."""
    f = int(sigma // 2) if sigma > 4 else 1
    if f <= 1:
        return ndimage.gaussian_filter(a, sigma, mode=mode)
    h, w = a.shape
    hc, wc = -(-h // f), -(-w // f)
    pad = np.pad(
        a, ((0, hc * f - h), (0, wc * f - w)), mode="edge" if mode == "nearest" else "constant"
    )
    small = pad.reshape(hc, f, wc, f).mean(axis=(1, 3))
    small = ndimage.gaussian_filter(small, sigma / f, mode=mode)
    return cv2.resize(small, (wc * f, hc * f), interpolation=cv2.INTER_LINEAR)[:h, :w]


def gauss(a: np.ndarray, sigma: float, weight: np.ndarray | None = None) -> np.ndarray:
    """Gaussian smoothing (real or complex), normalised over ``weight`` (masked)."""
    if sigma <= 0:
        return a
    if np.iscomplexobj(a):
        return gauss(a.real, sigma, weight) + 1j * gauss(a.imag, sigma, weight)
    if weight is None:
        return blur(a, sigma, "nearest")
    w = weight.astype(np.float64)
    num = blur(np.where(weight, a, 0.0), sigma, "constant")
    den = blur(w, sigma, "constant")
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 1e-6, num / np.maximum(den, 1e-12), 0.0)


def block_extreme(a: np.ndarray, f: int, how) -> np.ndarray:
    """f×f block maxima (``how=np.max``) or minima of ``a``; edge blocks padded by repetition."""
    if f == 1:
        return a
    h, w = a.shape
    hc, wc = -(-h // f), -(-w // f)
    pad = np.pad(a, ((0, hc * f - h), (0, wc * f - w)), mode="edge")
    return how(pad.reshape(hc, f, wc, f), axis=(1, 3))


def block_mean(a: np.ndarray, weight: np.ndarray, f: int):
    """Weighted f×f block means of ``a`` (real or complex) and the weight fraction."""
    if f == 1:
        return np.where(weight, a, 0), weight.astype(np.float64)
    h, w = weight.shape
    hc, wc = -(-h // f), -(-w // f)
    pa = np.zeros((hc * f, wc * f), dtype=a.dtype)
    pw = np.zeros((hc * f, wc * f))
    pa[:h, :w] = np.where(weight, a, 0)
    pw[:h, :w] = weight
    sa = pa.reshape(hc, f, wc, f).sum(axis=(1, 3))
    sw = pw.reshape(hc, f, wc, f).sum(axis=(1, 3))
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(sw > 0, sa / np.maximum(sw, 1e-12), 0)
    return mean, sw / (f * f)


def upsample(coarse: np.ndarray, valid: np.ndarray, f: int, shape) -> np.ndarray:
    """Fill invalid coarse cells from their nearest valid cell, then bilinear to ``shape``."""
    if not valid.all():
        idx = ndimage.distance_transform_edt(~valid, return_distances=False, return_indices=True)
        coarse = coarse[tuple(idx)]
    if f == 1:
        return coarse
    hc, wc = coarse.shape
    big = cv2.resize(coarse.astype(np.float64), (wc * f, hc * f), interpolation=cv2.INTER_LINEAR)
    return big[: shape[0], : shape[1]]


def safe_unwrap(phase: np.ndarray, valid: np.ndarray) -> np.ndarray:
    from skimage.restoration import unwrap_phase

    p = np.where(phase >= np.pi, phase - 2 * np.pi, phase)
    out = unwrap_phase(np.ma.masked_array(p, mask=~valid), rng=0)
    return np.ma.filled(out, 0.0)


def wrap(a: np.ndarray) -> np.ndarray:
    return (a + np.pi) % (2 * np.pi) - np.pi


def reliability(phi: np.ndarray, scale_rad: float = 1.0) -> np.ndarray:
    """``exp(−D² / 2 scale²)`` with D the root-sum-square of the wrapped second
    differences along rows, columns and both diagonals (the measure of
    Herráez et al. 2002): 1 for a smooth phase, small at noise and breaks."""
    p = np.pad(phi, 1, mode="edge")
    c = p[1:-1, 1:-1]
    d2 = np.zeros_like(c)
    for (ay, ax), (by, bx) in (
        ((0, 1), (2, 1)),
        ((1, 0), (1, 2)),
        ((0, 0), (2, 2)),
        ((0, 2), (2, 0)),
    ):
        a = p[ay : ay + c.shape[0], ax : ax + c.shape[1]]
        b = p[by : by + c.shape[0], bx : bx + c.shape[1]]
        d2 += (wrap(a - c) - wrap(c - b)) ** 2
    return np.exp(-d2 / (2 * scale_rad**2))
