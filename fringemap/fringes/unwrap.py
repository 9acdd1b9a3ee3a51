"""Unwrapping a fringe phase, coarse to fine, and refitting it at stationary points.

:func:`unwrap_coarse_to_fine` runs the reliability-sorting unwrapper of
Herráez et al. [1]_ (scikit-image's ``unwrap_phase``) on a block-averaged
copy of a large map and carries the result back to every pixel;
:func:`refine_stationary` refits the phase where its gradient vanishes.

References
----------
.. [1] M. A. Herráez, D. R. Burton, M. J. Lalor & M. A. Gdeisat, "Fast
   two-dimensional phase-unwrapping algorithm based on sorting by reliability
   following a noncontinuous path", Appl. Opt. 41, 7437 (2002),
   doi:10.1364/AO.41.007437.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import ndimage

from ._arrays import block_mean, gauss, safe_unwrap, upsample

__all__ = ["Unwrapped", "unwrap_coarse_to_fine", "refine_stationary"]


@dataclass(frozen=True)
class Unwrapped:
    """An unwrapped phase (radians, NaN off the mask), its regions and the coarse factor.

    ``labels``: int32 (H, W), 0 off the mask, 1..N for the connected regions
    (each unwrapped on its own, so offsets between regions are unknown);
    ``factor``: block size of the coarse unwrapping (1 = full resolution).
    """

    phase: np.ndarray = field(repr=False)
    labels: np.ndarray = field(repr=False)
    n_regions: int
    factor: int


def unwrap_coarse_to_fine(
    wrapped: np.ndarray,
    *,
    mask: np.ndarray,
    max_pixels: int = 1_500_000,
    min_region_px: int = 200,
) -> Unwrapped:
    """Unwrap a wrapped phase map, coarse to fine for large images.

    The phasor ``e^{iφ}`` is averaged over f×f blocks, with f the smallest
    factor that brings the film under ``max_pixels`` but never so large
    that a fringe spans fewer than 4 blocks. The coarse phase is unwrapped by
    the reliability-sorting algorithm of Herráez et al. (2002) as
    implemented by ``skimage.restoration.unwrap_phase``, upsampled
    bilinearly, and each full-resolution pixel takes its wrapped phase plus
    the multiple of 2π that brings it nearest the upsampled phase.

    Parameters
    ----------
    wrapped : ndarray of shape (H, W)
        Wrapped phase, radians.
    mask : ndarray of bool (H, W)
        Pixels to unwrap.
    max_pixels : int
        Largest number of pixels handed to the unwrapper.
    min_region_px : int
        Regions smaller than this (full-resolution pixels) are dropped.

    Returns
    -------
    Unwrapped
    """
    h, w = mask.shape
    phi = np.asarray(wrapped, dtype=np.float64)
    dx = np.angle(np.exp(1j * (phi[:, 1:] - phi[:, :-1])))[mask[:, 1:] & mask[:, :-1]]
    dy = np.angle(np.exp(1j * (phi[1:] - phi[:-1])))[mask[1:] & mask[:-1]]
    grads = np.abs(np.concatenate([dx, dy]))
    g99 = float(np.percentile(grads, 99)) if grads.size else 0.0
    f_dense = max(1, int(np.floor(np.pi / (2 * g99)))) if g99 > 0 else 64
    f_speed = max(1, int(np.ceil(np.sqrt(np.count_nonzero(mask) / max_pixels))))
    f = max(1, min(f_speed, f_dense))
    zc, frac = block_mean(np.exp(1j * phi), mask, f)
    valid_c = (frac >= 0.5) & (np.abs(zc) >= 0.5) if f > 1 else mask.copy()
    labels_c, n = ndimage.label(valid_c)
    if n:
        sizes = ndimage.sum_labels(frac, labels_c, index=np.arange(1, n + 1)) * f * f
        keep = np.flatnonzero(sizes >= min_region_px) + 1
        remap = np.zeros(n + 1, dtype=np.int32)
        remap[keep] = np.arange(1, keep.size + 1)
        labels_c = remap[labels_c]
        n = int(keep.size)
        valid_c = labels_c > 0
    if n == 0:
        return Unwrapped(np.full((h, w), np.nan), np.zeros((h, w), np.int32), 0, f)
    uc = safe_unwrap(np.angle(zc), valid_c)
    if f == 1:
        ref = uc
        labels = labels_c.astype(np.int32)
    else:
        ref = upsample(uc, valid_c, f, (h, w))
        labels = np.repeat(np.repeat(labels_c, f, axis=0), f, axis=1)[:h, :w].astype(np.int32)
        labels[~mask] = 0
    k = np.round((ref - phi) / (2 * np.pi))
    out = np.where(labels > 0, phi + 2 * np.pi * k, np.nan)
    return Unwrapped(out, labels, n, f)


# --------------------------------------------------------------- stationary points


def refine_stationary(
    phase: np.ndarray,
    cos_phase: np.ndarray,
    *,
    labels: np.ndarray,
    max_points: int = 6000,
) -> tuple[np.ndarray, int]:
    """Refit the phase around stationary points (a dome's top, a dimple's bottom, a saddle).

    Where the phase gradient vanishes the fringe pattern is not locally a
    plane wave and the analytic-signal quadrature is biased. Around each such
    point (a zone inside the film, away from its edges, whose phase gradient
    is below a quarter of the map's 75th percentile and points in all
    directions, unlike a gentle slope) the normalised intensity
    is fitted, by nonlinear least squares, with ``a + b cos(P(x, y))``, P a
    quadratic started from the unwrapped phase; the fitted P replaces the
    phase in the zone and is blended into it over a rim of the zone's radius.
    A fit is kept only if it matches the intensity better than the phase it
    replaces.

    Parameters
    ----------
    phase : ndarray of shape (H, W)
        Unwrapped phase, radians; NaN off the regions.
    cos_phase : ndarray of shape (H, W)
        Normalised intensity (:attr:`Envelope.cos_phase`).
    labels : ndarray of int (H, W)
        Regions (0 = none).
    max_points : int
        Pixels sampled per fit.

    Returns
    -------
    phase : ndarray of shape (H, W)
        The refined phase.
    n_refined : int
        Number of zones refitted.
    """
    from scipy.optimize import least_squares

    ok = labels > 0
    if ok.sum() < 100:
        return phase, 0
    filled = np.where(ok, phase, 0.0)
    gy, gx = np.gradient(filled)
    g = gauss(np.hypot(gx, gy), 2.0, ok & ndimage.binary_erosion(ok, iterations=2))
    busy = float(np.percentile(g[ok], 75))
    if busy <= 0:
        return phase, 0
    zones, n = ndimage.label(ok & (g < 0.25 * busy))
    out = phase.copy()
    done = 0
    rng = np.random.default_rng(0)
    for z, sl in enumerate(ndimage.find_objects(zones), start=1):
        zone = zones == z
        if zone.sum() < 20:
            continue
        lab = np.bincount(labels[zone]).argmax()
        edge = ndimage.binary_dilation(zone) & (labels != lab)
        if (
            edge.any()
            or sl[0].start == 0
            or sl[1].start == 0
            or sl[0].stop == ok.shape[0]
            or sl[1].stop == ok.shape[1]
        ):
            continue  # a flat margin of the film, not a point inside it
        gxz, gyz = gx[zone], gy[zone]
        norm = np.maximum(np.hypot(gxz, gyz), 1e-12)
        if np.hypot(np.mean(gxz / norm), np.mean(gyz / norm)) > 0.5:
            continue  # the slope keeps one direction: a gentle slope, not a stationary point
        radius = float(np.sqrt(zone.sum() / np.pi))
        rim = 0.5 * radius + 8.0
        dist = ndimage.distance_transform_edt(~zone)
        window = (dist <= rim) & (labels == lab)
        ys, xs = np.nonzero(window)
        if ys.size > max_points:
            pick = rng.choice(ys.size, max_points, replace=False)
            ys, xs = ys[pick], xs[pick]
        yc, xc = ys.mean(), xs.mean()
        scale = max(radius + rim, 1.0)
        u, v = (xs - xc) / scale, (ys - yc) / scale
        basis = np.column_stack([np.ones_like(u), u, v, u * u, u * v, v * v])
        p0, *_ = np.linalg.lstsq(basis, phase[ys, xs], rcond=None)
        cv = cos_phase[ys, xs]

        def resid(p, basis=basis, cv=cv):
            return p[6] + p[7] * np.cos(basis @ p[:6]) - cv

        fit = least_squares(resid, np.concatenate([p0, [0.0, 1.0]]), method="lm")
        before = float(np.sqrt(np.mean((np.cos(phase[ys, xs]) - cv) ** 2)))
        after = float(np.sqrt(np.mean(fit.fun**2)))
        if not fit.success or after >= before or not 0.5 < fit.x[7] < 1.5:
            continue
        yy, xx = np.nonzero(window)
        full = np.column_stack([np.ones(yy.size), (xx - xc) / scale, (yy - yc) / scale])
        full = np.column_stack([full, full[:, 1] ** 2, full[:, 1] * full[:, 2], full[:, 2] ** 2])
        model = full @ fit.x[:6]
        k = np.round(np.median(phase[yy, xx] - model) / (2 * np.pi))
        model += 2 * np.pi * k
        w = np.clip(1.0 - dist[yy, xx] / rim, 0.0, 1.0)
        out[yy, xx] = w * model + (1 - w) * phase[yy, xx]
        done += 1
    return out, done
