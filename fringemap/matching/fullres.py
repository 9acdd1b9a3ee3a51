"""Full-resolution kernels: one fused pass per pixel after the coarse stages.

Per pixel, in one parallel loop over rows (numba):

1. divide the linear colour by the gain field (bilinear from its coarse grid);
2. encode it through a look-up table of the IEC 61966-2-1 transfer function;
3. look for the best thickness within a window around the coarse map's
   prediction (bilinear from the coarse map), on a stride of the table, then
   refine on the full table and by a parabola through the minimum;
4. flag pixels whose best value sits on the window's edge (the prediction was
   off: a step, a scratch) for an exhaustive search.

This replaces several full-size temporary arrays by one pass, which is what
keeps a 12-megapixel photo within memory and time.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from ..colour.transfer import srgb_encode
from .candidates import _refine
from .space import _dist

__all__ = ["ENCODE_LUT", "dark_mask", "block_mean", "fullres_match"]

_LUT_MAX = 2.0
_LUT_N = 16384
#: sRGB encoding sampled on [0, 2] (linear interpolation between samples)
ENCODE_LUT = srgb_encode(np.linspace(0.0, _LUT_MAX, _LUT_N)).astype(np.float64)


@njit(cache=True, inline="always")
def _enc(x, lut):
    if x <= 0.0:
        return 0.0
    pos = x * ((lut.shape[0] - 1) / 2.0)
    i = int(pos)
    if i >= lut.shape[0] - 1:
        return lut[lut.shape[0] - 1]
    fr = pos - i
    return lut[i] * (1.0 - fr) + lut[i + 1] * fr


@njit(cache=True, parallel=True)
def dark_mask(linear, threshold):
    """Pixels whose linear luminance (Rec. 709 weights) is below ``threshold``."""
    h, w = linear.shape[0], linear.shape[1]
    out = np.empty((h, w), dtype=np.bool_)
    for y in prange(h):
        for x in range(w):
            lum = 0.2126 * linear[y, x, 0] + 0.7152 * linear[y, x, 1] + 0.0722 * linear[y, x, 2]
            out[y, x] = lum < threshold
    return out


@njit(cache=True, parallel=True)
def block_mean(linear, usable, f):
    """Means of usable pixels over f×f blocks: (hc, wc, 3) and usable fraction (hc, wc)."""
    h, w = usable.shape
    hc, wc = h // f, w // f
    mean = np.full((hc, wc, 3), np.nan)
    frac = np.zeros((hc, wc))
    for by in prange(hc):
        for bx in range(wc):
            s0 = 0.0
            s1 = 0.0
            s2 = 0.0
            n = 0
            for y in range(by * f, by * f + f):
                for x in range(bx * f, bx * f + f):
                    if usable[y, x]:
                        s0 += linear[y, x, 0]
                        s1 += linear[y, x, 1]
                        s2 += linear[y, x, 2]
                        n += 1
            if n > 0:
                mean[by, bx, 0] = s0 / n
                mean[by, bx, 1] = s1 / n
                mean[by, bx, 2] = s2 / n
            frac[by, bx] = n / (f * f)
    return mean, frac


def _axis_weights(n_full: int, n_coarse: int, f: int):
    """Bilinear interpolation indices and weights from a coarse axis to a full one."""
    g = np.clip((np.arange(n_full) + 0.5) / f - 0.5, 0.0, n_coarse - 1.0)
    i0 = np.floor(g).astype(np.int64)
    i1 = np.minimum(i0 + 1, n_coarse - 1)
    return i0, i1, g - i0


@njit(cache=True, inline="always")
def _interp(grid, y0, y1, fy, x0, x1, fx):
    return (
        grid[y0, x0] * (1 - fy) * (1 - fx)
        + grid[y0, x1] * (1 - fy) * fx
        + grid[y1, x0] * fy * (1 - fx)
        + grid[y1, x1] * fy * fx
    )


@njit(cache=True, parallel=True)
def _fullres_kernel(
    linear, usable, pred_c, gain_c, ys0, ys1, fys, xs0, xs1, fxs, e, ee, lut, lam, t0, step,
    half, stride, out_t, out_c, out_edge, out_pred,
):  # fmt: skip
    h, w = usable.shape
    n = e.shape[0]
    for y in prange(h):
        y0, y1, fy = ys0[y], ys1[y], fys[y]
        for x in range(w):
            x0, x1, fx = xs0[x], xs1[x], fxs[x]
            pred = _interp(pred_c, y0, y1, fy, x0, x1, fx)
            out_pred[y, x] = pred
            if not usable[y, x]:
                out_t[y, x] = np.nan
                out_c[y, x] = np.inf
                out_edge[y, x] = False
                continue
            g = _interp(gain_c, y0, y1, fy, x0, x1, fx)
            q0 = _enc(linear[y, x, 0] / g, lut)
            q1 = _enc(linear[y, x, 1] / g, lut)
            q2 = _enc(linear[y, x, 2] / g, lut)
            qq = q0 * q0 + q1 * q1 + q2 * q2
            mu = lam * qq
            c = int(round((pred - t0) / step))
            i0 = max(0, c - half)
            i1 = min(n - 1, c + half)
            best = np.inf
            bi = i0
            # strided scan, then the full table around the best sample
            for i in range(i0, i1 + 1, stride):
                d = _dist(q0, q1, q2, qq, e[i, 0], e[i, 1], e[i, 2], ee[i], mu)
                if d < best:
                    best = d
                    bi = i
            j0 = max(i0, bi - stride + 1)
            j1 = min(i1, bi + stride - 1)
            for i in range(j0, j1 + 1):
                if i == bi:
                    continue
                d = _dist(q0, q1, q2, qq, e[i, 0], e[i, 1], e[i, 2], ee[i], mu)
                if d < best:
                    best = d
                    bi = i
            if 0 < bi < n - 1:
                dm = _dist(q0, q1, q2, qq, e[bi - 1, 0], e[bi - 1, 1], e[bi - 1, 2], ee[bi - 1], mu)
                dp = _dist(q0, q1, q2, qq, e[bi + 1, 0], e[bi + 1, 1], e[bi + 1, 2], ee[bi + 1], mu)
                off, cost = _refine(dm, best, dp)
            else:
                off, cost = 0.0, best
            out_t[y, x] = t0 + (bi + off) * step
            out_c[y, x] = cost
            out_edge[y, x] = (bi <= i0 + 1 and i0 > 0) or (bi >= i1 - 1 and i1 < n - 1)


def fullres_match(
    linear: np.ndarray,
    usable: np.ndarray,
    *,
    predicted_coarse_nm: np.ndarray,
    gain_coarse: np.ndarray,
    factor: int,
    table_encoded: np.ndarray,
    t0_nm: float,
    step_nm: float,
    window_nm: float,
    intensity_weight: float,
):
    """Best thickness per full-resolution pixel near the coarse map's prediction.

    Parameters
    ----------
    linear : ndarray (H, W, 3) float32
        Linear, white-balanced (and camera-corrected) photo.
    usable : ndarray (H, W) bool
        Pixels to match.
    predicted_coarse_nm : ndarray (hc, wc)
        Coarse thickness map (nm), NaN-free.
    gain_coarse : ndarray (hc, wc)
        Gain field on the coarse grid.
    factor : int
        Block size of the coarse grid (px).
    table_encoded : ndarray (N, 3)
        Encoded colour table on a regular grid (``t0_nm``, ``step_nm``).
    window_nm : float
        Half-width of the search window around the prediction (nm).
    intensity_weight : float
        λ of the colour distance.

    Returns
    -------
    thickness_nm, cost, at_edge, predicted_nm : ndarrays (H, W)
    """
    h, w = usable.shape
    e = np.ascontiguousarray(table_encoded, dtype=np.float64)
    ee = np.sum(e * e, axis=1)
    half = max(2, int(np.ceil(window_nm / step_nm)))
    stride = max(1, int(round(2.0 / step_nm)))
    out_t = np.empty((h, w), dtype=np.float32)
    out_c = np.empty((h, w), dtype=np.float32)
    out_edge = np.empty((h, w), dtype=np.bool_)
    out_pred = np.empty((h, w), dtype=np.float32)
    pred_c = np.ascontiguousarray(predicted_coarse_nm, dtype=np.float64)
    ys = _axis_weights(h, pred_c.shape[0], int(factor))
    xs = _axis_weights(w, pred_c.shape[1], int(factor))
    _fullres_kernel(
        np.ascontiguousarray(linear, dtype=np.float32),
        np.ascontiguousarray(usable),
        pred_c,
        np.ascontiguousarray(gain_coarse, dtype=np.float64),
        *ys,
        *xs,
        e,
        ee,
        ENCODE_LUT,
        float(intensity_weight),
        float(t0_nm),
        float(step_nm),
        half,
        stride,
        out_t,
        out_c,
        out_edge,
        out_pred,
    )
    return out_t, out_c, out_edge, out_pred
