"""Per-pixel reasons and confidence, from the match and the order decisions.

:func:`mask_reasons` first turns the masks (ROI, saturated, dark, background)
into one uint8 map of reason codes (0 where a pixel is usable); after the
match, :func:`classify` fills in the usable pixels in one numba pass from the
full-resolution match (thickness, colour cost) and the coarse order decisions:
the final thickness (NaN where not trustworthy), a reason code
(:data:`fringemap.result.REASONS`) and a confidence in 0-1::

    confidence = exp(−cost / (8 σ²)) · 1 / (1 + (σ_t / 5 nm)²) · clip(0.5 + margin/4, 0.5, 1)

with σ² the per-channel noise variance of the colour match, σ_t = σ / |de/dt|
the thickness noise implied by the colour's rate of change at that thickness,
and ``margin`` the per-pixel cost gap between the chosen order hypothesis of
the pixel's region and the next best. It is rounded to steps of 1/1024.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from .matching.fullres import _axis_weights, _interp

__all__ = ["classify", "mask_reasons"]

#: the confidence is stored in steps of 1 / CONF_STEPS
CONF_STEPS = 1024.0

MEASURED, OUTSIDE, NO_FILM, SATURATED, TOO_DARK, OFF_MODEL, AMBIGUOUS, BEYOND = range(8)


@njit(cache=True, parallel=True, nogil=True)
def _classify_kernel(
    reasons,
    thick,
    cost,
    pred_c,
    ys0,
    ys1,
    fys,
    xs0,
    xs1,
    fxs,
    region_c,
    cys,
    cxs,
    margins,
    sizes,
    faded,
    slope_factor,
    t0,
    step,
    t_faded,
    t_max,
    noise,
    off_thr,
    min_region,
):
    h, w = reasons.shape
    n = faded.shape[0]
    # thick and cost are overwritten in place by the final thickness and the confidence
    for y in prange(h):
        for x in range(w):
            t = thick[y, x]
            c = cost[y, x]
            thick[y, x] = np.nan
            cost[y, x] = 0.0
            if reasons[y, x] != MEASURED:  # already decided by the masks
                continue
            if not np.isfinite(t):
                reasons[y, x] = OFF_MODEL
                continue
            if c > off_thr:  # a colour the stack cannot show (judged first: a wrong lamp
                reasons[y, x] = OFF_MODEL  # or stack must not pass for a faded film)
                continue
            i = int(round((t - t0) / step))
            if i < 0:
                i = 0
            if i > n - 1:
                i = n - 1
            pred = _interp(pred_c, ys0[y], ys1[y], fys[y], xs0[x], xs1[x], fxs[x])
            if faded[i] or pred >= t_faded - 0.5 * step or (t >= t_max - 2 * step and t_max > t0):
                reasons[y, x] = BEYOND
                continue
            reg = region_c[cys[y], cxs[x]]
            margin = 0.0
            if reg >= 0:
                margin = margins[reg]
                if sizes[reg] < min_region and margin < 0.5:
                    reasons[y, x] = AMBIGUOUS
                    continue
            reasons[y, x] = MEASURED
            thick[y, x] = t
            m = 0.5 + margin / 4.0
            if m > 1.0:
                m = 1.0
            conf = np.exp(-0.5 * c / (4.0 * noise)) * slope_factor[i] * m
            # in steps of 1/1024: finer than it can mean, and the map compresses well
            cost[y, x] = np.round(conf * CONF_STEPS) / CONF_STEPS


@njit(cache=True, parallel=True, nogil=True)
def _mask_kernel(roi, saturated, dark, no_film, out):
    h, w = roi.shape
    for y in prange(h):
        for x in range(w):
            if not roi[y, x]:
                out[y, x] = OUTSIDE
            elif saturated[y, x]:
                out[y, x] = SATURATED
            elif no_film[y, x]:
                out[y, x] = NO_FILM
            elif dark[y, x]:
                out[y, x] = TOO_DARK
            else:
                out[y, x] = MEASURED  # usable: decided later by the match


def mask_reasons(*, roi, saturated, dark, no_film) -> np.ndarray:
    """Reason codes (uint8, (H, W)) that the masks alone decide; 0 where the pixel is
    usable. Precedence: outside the ROI, saturated, no film, too dark."""
    out = np.empty(roi.shape, dtype=np.uint8)
    _mask_kernel(roi, saturated, dark, no_film, out)
    return out


def classify(
    *,
    reasons,
    thickness_nm,
    cost,
    predicted_coarse_nm,
    region_coarse,
    factor,
    region_margin,
    region_size,
    faded,
    slope_per_nm,
    t0_nm,
    step_nm,
    t_faded_nm,
    t_max_nm,
    noise,
    off_model_factor,
    min_region_px=12,
):
    """Final thickness (nm, NaN = not measured), reasons (uint8) and confidence (0-1).

    All maps are (H, W) except ``predicted_coarse_nm`` (the coarse thickness
    map, NaN-free, nm) and ``region_coarse`` (its region labels), both on the
    coarse grid of block size ``factor`` px; ``faded`` and ``slope_per_nm`` are
    per table entry.

    ``reasons`` (uint8, from :func:`mask_reasons`) holds the codes the masks
    decide (0 where the pixel is usable); the codes of the usable pixels are
    filled in. To keep a large photo's memory low, ``reasons``, ``thickness_nm``
    and ``cost`` (float32, C-contiguous) are overwritten: they are returned as
    the final thickness, reasons and confidence.
    """
    h, w = reasons.shape
    for name, a in (("thickness_nm", thickness_nm), ("cost", cost)):
        if a.dtype != np.float32 or not a.flags.c_contiguous or a.shape != (h, w):
            raise ValueError(f"{name} must be a C-contiguous float32 array of shape {(h, w)}")
    pred_c = np.ascontiguousarray(predicted_coarse_nm, dtype=np.float64)
    hc, wc = pred_c.shape
    # the thickness noise of each table entry (colour noise over the colour slope, nm)
    # as its confidence factor 1 / (1 + (sigma_t / 5 nm)^2)
    sigma_t = np.sqrt(noise / 3.0) / np.maximum(np.asarray(slope_per_nm, dtype=np.float64), 1e-6)
    slope_factor = 1.0 / (1.0 + (sigma_t / 5.0) ** 2)
    _classify_kernel(
        reasons,
        thickness_nm,
        cost,
        pred_c,
        *_axis_weights(h, pred_c.shape[0], int(factor)),
        *_axis_weights(w, pred_c.shape[1], int(factor)),
        np.ascontiguousarray(region_coarse, dtype=np.int32),
        np.minimum(hc - 1, np.arange(h) // int(factor)),
        np.minimum(wc - 1, np.arange(w) // int(factor)),
        np.asarray(region_margin, dtype=np.float64),
        np.asarray(region_size, dtype=np.int64),
        np.asarray(faded, dtype=np.bool_),
        slope_factor,
        float(t0_nm),
        float(step_nm),
        float(t_faded_nm),
        float(t_max_nm),
        float(noise),
        float(off_model_factor * noise),
        int(min_region_px),
    )
    return thickness_nm, reasons, cost
