"""Full-resolution kernels: one fused pass per pixel after the coarse stages.

Per pixel, in one parallel loop over rows (numba):

1. divide the linear colour by the gain field (bilinear from its coarse grid);
2. encode it through a look-up table of the IEC 61966-2-1 transfer function;
3. descend the colour distance along the table from the coarse map's
   prediction (bilinear from the coarse map) to the nearest local minimum,
   refined by a parabola through the minimum and its two neighbours;
4. flag pixels whose minimum lies farther from the prediction than a window
   (the prediction was off: a step, a scratch) for an exhaustive search.

This replaces several full-size temporary arrays by one pass, which is what
keeps a 12-megapixel photo within memory and time.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from ..colour.transfer import srgb_encode
from .candidates import _descend
from .space import _dist

__all__ = [
    "ENCODE_LUT",
    "NO_LUT",
    "linear_at",
    "dark_mask",
    "block_mean",
    "halve_block_mean",
    "fill_nearest",
    "fullres_match",
    "interp_coarse",
    "label_lookup",
]

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


@njit(cache=True, inline="always")
def _px(img, lut, y, x, c):
    """Linear value of channel c at (y, x): ``lut[img]`` for stored codes (``lut``
    not empty), else ``img`` itself (already linear)."""
    v = img[y, x, c]
    if lut.shape[0] > 0:
        return np.float64(lut[int(v)])
    return np.float64(v)


NO_LUT = np.zeros(0, dtype=np.float32)


@njit(cache=True, parallel=True, nogil=True)
def dark_mask(img, lut, threshold):
    """Pixels whose linear luminance (Rec. 709 weights) is below ``threshold``.

    ``img`` is linear RGB (H, W, 3) with ``lut`` = :data:`NO_LUT`, or stored
    integer codes with ``lut`` their linear values (as in every kernel here).
    """
    h, w = img.shape[0], img.shape[1]
    out = np.empty((h, w), dtype=np.bool_)
    for y in prange(h):
        for x in range(w):
            lum = (
                0.2126 * _px(img, lut, y, x, 0)
                + 0.7152 * _px(img, lut, y, x, 1)
                + 0.0722 * _px(img, lut, y, x, 2)
            )
            out[y, x] = lum < threshold
    return out


@njit(cache=True, parallel=True, nogil=True)
def label_lookup(labels, table):
    """``table[labels]`` for a 2-D label image (one parallel pass, no index copy)."""
    h, w = labels.shape
    out = np.empty((h, w), dtype=table.dtype)
    for y in prange(h):
        for x in range(w):
            out[y, x] = table[labels[y, x]]
    return out


@njit(cache=True, parallel=True, nogil=True)
def block_mean(img, lut, usable, f):
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
                        s0 += _px(img, lut, y, x, 0)
                        s1 += _px(img, lut, y, x, 1)
                        s2 += _px(img, lut, y, x, 2)
                        n += 1
            if n > 0:
                mean[by, bx, 0] = s0 / n
                mean[by, bx, 1] = s1 / n
                mean[by, bx, 2] = s2 / n
            frac[by, bx] = n / (f * f)
    return mean, frac


def halve_block_mean(mean: np.ndarray, frac: np.ndarray):
    """:func:`block_mean` at twice the block size, from its result at this one (the
    usable pixels of each 2 × 2 group of blocks pooled): (hc // 2, wc // 2, 3), (hc // 2,
    wc // 2). Equal to ``block_mean(..., 2 * f)`` up to rounding, without reading the
    photo again."""
    h2, w2 = frac.shape[0] // 2, frac.shape[1] // 2
    n = frac[: 2 * h2, : 2 * w2]
    s = np.nan_to_num(mean[: 2 * h2, : 2 * w2]) * n[..., None]
    total = s.reshape(h2, 2, w2, 2, 3).sum(axis=(1, 3))
    count = n.reshape(h2, 2, w2, 2).sum(axis=(1, 3))
    with np.errstate(invalid="ignore", divide="ignore"):
        pooled = np.where(count[..., None] > 0, total / count[..., None], np.nan)
    return pooled, count / 4.0


@njit(cache=True)
def _nearest_seeds(valid):
    """Per pixel, the coordinates of a nearest ``valid`` pixel (Euclidean), by two
    raster sweeps that pass nearest-seed coordinates between 8-neighbours (a
    vector distance transform after Danielsson, Comput. Graph. Image Process.
    14, 227 (1980)); -1 where there is no valid pixel at all."""
    h, w = valid.shape
    sy = np.full((h, w), -1, dtype=np.int64)
    sx = np.full((h, w), -1, dtype=np.int64)
    d2 = np.full((h, w), np.iinfo(np.int64).max, dtype=np.int64)  # squared, whole px
    for y in range(h):
        for x in range(w):
            if valid[y, x]:
                sy[y, x] = y
                sx[y, x] = x
                d2[y, x] = 0
    for _ in range(2):
        for sweep in range(2):
            # forward: from the row above and the left; backward: from below and the right
            sign = 1 if sweep == 0 else -1
            for yy in range(h):
                y = yy if sweep == 0 else h - 1 - yy
                for xx in range(w):
                    x = xx if sweep == 0 else w - 1 - xx
                    for k in range(4):  # (-1, -1), (-1, 0), (-1, 1), (0, -1) times sign
                        y1 = y - sign * (1 if k < 3 else 0)
                        x1 = x + sign * (k - 1 if k < 3 else -1)
                        if y1 < 0 or y1 >= h or x1 < 0 or x1 >= w:
                            continue
                        s = sy[y1, x1]
                        if s < 0:
                            continue
                        a = y - s
                        b = x - sx[y1, x1]
                        dd = a * a + b * b
                        if dd < d2[y, x]:
                            d2[y, x] = dd
                            sy[y, x] = s
                            sx[y, x] = sx[y1, x1]
    return sy, sx


def fill_nearest(values: np.ndarray) -> np.ndarray:
    """A 2-D map with each NaN replaced by the value of a nearest finite pixel.

    Returns a copy; a map with no finite value comes back unchanged (all NaN).
    """
    values = np.asarray(values)
    finite = np.isfinite(values)
    if finite.all() or not finite.any():
        return values.copy()
    sy, sx = _nearest_seeds(finite)
    return values[sy, sx]


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


@njit(cache=True, inline="always")
def _d_at(i, q0, q1, q2, qq, e, ee, mu):
    return _dist(q0, q1, q2, qq, e[i, 0], e[i, 1], e[i, 2], ee[i], mu)


@njit(cache=True, parallel=True, nogil=True)
def _fullres_kernel(
    img, lut_img, usable, pred_c, gain_c, ys0, ys1, fys, xs0, xs1, fxs, e, ee, lut, lam, t0, step,
    half, out_t, out_c, out_edge,
):  # fmt: skip
    h, w = usable.shape
    n = e.shape[0]
    for y in prange(h):
        y0, y1, fy = ys0[y], ys1[y], fys[y]
        for x in range(w):
            if not usable[y, x]:
                out_t[y, x] = np.nan
                out_c[y, x] = np.inf
                out_edge[y, x] = False
                continue
            x0, x1, fx = xs0[x], xs1[x], fxs[x]
            pred = _interp(pred_c, y0, y1, fy, x0, x1, fx)
            inv_g = 1.0 / _interp(gain_c, y0, y1, fy, x0, x1, fx)
            q0 = _enc(_px(img, lut_img, y, x, 0) * inv_g, lut)
            q1 = _enc(_px(img, lut_img, y, x, 1) * inv_g, lut)
            q2 = _enc(_px(img, lut_img, y, x, 2) * inv_g, lut)
            qq = q0 * q0 + q1 * q1 + q2 * q2
            mu = lam * qq
            c = int(round((pred - t0) / step))
            c = min(n - 1, max(0, c))
            # descend the distance along the table from the predicted entry to the
            # nearest local minimum (at most 2·half entries away)
            d0 = _d_at(c, q0, q1, q2, qq, e, ee, mu)
            bi, off, cost = _descend(q0, q1, q2, qq, mu, e, ee, c, d0, 2 * half)
            out_t[y, x] = t0 + (bi + off) * step
            out_c[y, x] = cost
            # far from the prediction: a step or a scratch the coarse map smoothed over
            out_edge[y, x] = abs(bi - c) >= half


def linear_at(img: np.ndarray, code_lut: np.ndarray, ys: np.ndarray, xs: np.ndarray):
    """Linear RGB (P, 3) float32 of the pixels (``ys``, ``xs``) of an image as the
    kernels take it (linear, or codes with their ``code_lut``)."""
    values = img[ys, xs]
    return code_lut[values] if code_lut.size else values.astype(np.float32, copy=False)


def interp_coarse(grid: np.ndarray, ys: np.ndarray, xs: np.ndarray, shape, factor: int):
    """A coarse map (block size ``factor`` px) bilinearly interpolated at full-resolution
    pixels (``ys``, ``xs``) of a photo of ``shape`` (H, W); float64, same as the kernel."""
    gy0, gy1, fy = (a[ys] for a in _axis_weights(shape[0], grid.shape[0], int(factor)))
    gx0, gx1, fx = (a[xs] for a in _axis_weights(shape[1], grid.shape[1], int(factor)))
    g = np.asarray(grid, dtype=np.float64)
    return (
        g[gy0, gx0] * (1 - fy) * (1 - fx)
        + g[gy0, gx1] * (1 - fy) * fx
        + g[gy1, gx0] * fy * (1 - fx)
        + g[gy1, gx1] * fy * fx
    )


def fullres_match(
    img: np.ndarray,
    usable: np.ndarray,
    *,
    code_lut: np.ndarray = NO_LUT,
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
    img : ndarray (H, W, 3)
        Linear, white-balanced (and camera-corrected) photo, float32; or its
        stored integer codes, with ``code_lut`` their linear values.
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
        Distance from the prediction (nm) beyond which a pixel is flagged
        ``at_edge``; the descent stops at twice this distance.
    intensity_weight : float
        λ of the colour distance.

    Returns
    -------
    thickness_nm, cost, at_edge : ndarrays (H, W)
        Thickness (nm, float32, NaN where not usable), colour cost (float32,
        inf where not usable) and the far-from-prediction flag (bool).
    """
    h, w = usable.shape
    e = np.ascontiguousarray(table_encoded, dtype=np.float64)
    ee = np.sum(e * e, axis=1)
    half = max(2, int(np.ceil(window_nm / step_nm)))
    out_t = np.empty((h, w), dtype=np.float32)
    out_c = np.empty((h, w), dtype=np.float32)
    out_edge = np.empty((h, w), dtype=np.bool_)
    pred_c = np.ascontiguousarray(predicted_coarse_nm, dtype=np.float64)
    ys = _axis_weights(h, pred_c.shape[0], int(factor))
    xs = _axis_weights(w, pred_c.shape[1], int(factor))
    _fullres_kernel(
        img if code_lut.size else np.ascontiguousarray(img, dtype=np.float32),
        code_lut,
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
        out_t,
        out_c,
        out_edge,
    )
    return out_t, out_c, out_edge


@njit(cache=True, inline="always")
def _poor(cost, y, x, thr):
    c = cost[y, x]
    return np.isfinite(c) and c > thr


@njit(cache=True, parallel=True, nogil=True)
def _redo_rows(cost, edge, thr, fill, counts, ys, xs, offsets):
    h, w = edge.shape
    for y in prange(h):
        n = 0 if not fill else offsets[y]
        for x in range(w):
            take = edge[y, x]
            if not take and _poor(cost, y, x, thr):
                near = 0
                for y1 in range(max(0, y - 1), min(h, y + 2)):
                    for x1 in range(max(0, x - 1), min(w, x + 2)):
                        if _poor(cost, y1, x1, thr):
                            near += 1
                take = near >= 3
            if take:
                if fill:
                    ys[n] = y
                    xs[n] = x
                n += 1
        if not fill:
            counts[y] = n


def redo_pixels(cost: np.ndarray, at_edge: np.ndarray, threshold: float):
    """Pixels for the exhaustive search, in raster order: (ys, xs) int64 arrays.

    A pixel is taken when it is ``at_edge`` (its minimum lay far from the
    prediction) or when its cost exceeds ``threshold`` together with at least
    two of its 8 neighbours (a poor fit shared by neighbours; an isolated one
    cannot be a step). No full-size temporary array is made.
    """
    h, _ = at_edge.shape
    counts = np.zeros(h, dtype=np.int64)
    none = np.empty(0, dtype=np.int64)
    _redo_rows(cost, at_edge, float(threshold), False, counts, none, none, none)
    offsets = np.concatenate(([0], np.cumsum(counts)[:-1]))
    total = int(counts.sum())
    ys = np.empty(total, dtype=np.int64)
    xs = np.empty(total, dtype=np.int64)
    _redo_rows(cost, at_edge, float(threshold), True, counts, ys, xs, offsets)
    return ys, xs


@njit(cache=True, nogil=True)
def _support(ys, xs, marked, scratch):
    h, w = scratch.shape
    for i in range(ys.shape[0]):
        if marked[i]:
            scratch[ys[i], xs[i]] = True
    out = np.zeros(ys.shape[0], dtype=np.int64)
    for i in range(ys.shape[0]):
        if not marked[i]:
            continue
        y, x = ys[i], xs[i]
        n = 0
        for y1 in range(max(0, y - 1), min(h, y + 2)):
            for x1 in range(max(0, x - 1), min(w, x + 2)):
                if scratch[y1, x1]:
                    n += 1
        out[i] = n
    for i in range(ys.shape[0]):  # leave the scratch array as it was (all False)
        scratch[ys[i], xs[i]] = False
    return out


def neighbour_support(ys: np.ndarray, xs: np.ndarray, marked: np.ndarray, scratch: np.ndarray):
    """For each marked pixel (``ys``, ``xs``), how many marked pixels lie in its 3×3
    neighbourhood, itself included (0 for unmarked ones).

    ``scratch`` is a bool (H, W) array, all False, used as working space and
    left all False.
    """
    return _support(ys, xs, np.asarray(marked, dtype=np.bool_), scratch)
