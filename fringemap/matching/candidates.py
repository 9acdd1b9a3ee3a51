"""Per-pixel thickness candidates: the local minima of the colour distance.

Along the colour table the distance ``d(t)`` between a pixel's colour and the
model's colour at thickness ``t`` has one local minimum per competing fringe
order. :func:`find_candidates` returns the ``K`` lowest minima per pixel,
refined below the table step by fitting a parabola through the minimum and its
two neighbours. It is exhaustive over the table, so the pipeline uses it on a
downsampled image (and on the few full-resolution pixels at steps);
:func:`fringemap.matching.fullres.fullres_match` is the full-resolution pass that
looks only near a predicted thickness.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit, prange

from ..errors import OptionError
from .space import _dist

__all__ = ["Candidates", "find_candidates"]


@dataclass(frozen=True)
class Candidates:
    """K candidate thicknesses per pixel, best first.

    Attributes
    ----------
    thickness_nm : ndarray of shape (P, K)
        Candidate thicknesses (nm); NaN where fewer than K minima exist.
    cost : ndarray of shape (P, K)
        Colour distance at each candidate (encoded units squared); inf if absent.
    """

    thickness_nm: np.ndarray
    cost: np.ndarray


@njit(cache=True, inline="always")
def _refine(dm, d0, dp):
    den = dm - 2.0 * d0 + dp
    if den <= 0.0:
        return 0.0, d0
    off = 0.5 * (dm - dp) / den
    if off > 0.5:
        off = 0.5
    elif off < -0.5:
        off = -0.5
    return off, d0 - 0.25 * (dm - dp) * off


@njit(cache=True, inline="always")
def _descend(q0, q1, q2, qq, mu, e, ee, j, dj, limit):
    """From table entry j (distance dj) downhill to the nearest local minimum of the
    distance, at most ``limit`` entries away, refined by a parabola through it and its
    neighbours: (entry, offset in -0.5..0.5, distance). Shared by every table search."""
    n = e.shape[0]
    best = dj
    dm = (
        _dist(q0, q1, q2, qq, e[j - 1, 0], e[j - 1, 1], e[j - 1, 2], ee[j - 1], mu)
        if j > 0
        else np.inf
    )
    dp = (
        _dist(q0, q1, q2, qq, e[j + 1, 0], e[j + 1, 1], e[j + 1, 2], ee[j + 1], mu)
        if j < n - 1
        else np.inf
    )
    bi = j
    if dm < best and dm <= dp:
        while bi > 0 and bi > j - limit and dm < best:
            dp, best, bi = best, dm, bi - 1
            dm = np.inf
            if bi > 0:
                i = bi - 1
                dm = _dist(q0, q1, q2, qq, e[i, 0], e[i, 1], e[i, 2], ee[i], mu)
    elif dp < best:
        while bi < n - 1 and bi < j + limit and dp < best:
            dm, best, bi = best, dp, bi + 1
            dp = np.inf
            if bi < n - 1:
                i = bi + 1
                dp = _dist(q0, q1, q2, qq, e[i, 0], e[i, 1], e[i, 2], ee[i], mu)
    if 0 < bi < n - 1:
        off, c = _refine(dm, best, dp)
        return bi, off, c
    return bi, 0.0, best


@njit(cache=True, parallel=True, nogil=True)
def _candidates_kernel(q, e_full, ee_full, stride, lam, k, t0, step, out_t, out_c):
    # the scan runs over every stride-th entry; with stride > 1 each minimum it finds
    # is then followed downhill on the full table and refined there
    e = e_full[::stride]
    ee = ee_full[::stride]
    n = e.shape[0]
    n_px = q.shape[0]
    chunk = 256
    e0 = e[:, 0].copy()
    e1 = e[:, 1].copy()
    e2 = e[:, 2].copy()
    eec = ee.copy()
    for ch in prange((n_px + chunk - 1) // chunk):
        # per chunk of pixels: the distances, padded with inf at both ends, and the
        # local-minimum flags
        d = np.empty(n + 2)
        d[0] = np.inf
        d[n + 1] = np.inf
        is_min = np.empty(n, dtype=np.uint8)
        found = np.empty(k)
        for p in range(ch * chunk, min(n_px, ch * chunk + chunk)):
            q0, q1, q2 = q[p, 0], q[p, 1], q[p, 2]
            qq = q0 * q0 + q1 * q1 + q2 * q2
            mu = lam * qq
            inv = 1.0 / (qq + mu)
            # the distance to every entry (the same formula as _dist) and the local
            # minima, each in a branch-free loop the compiler can vectorise
            for i in range(n):
                qe = q0 * e0[i] + q1 * e1[i] + q2 * e2[i]
                s = (qe + mu) * inv
                d[i + 1] = eec[i] - 2.0 * s * qe + s * s * qq + mu * (s - 1.0) * (s - 1.0)
            for i in range(n):
                is_min[i] = (d[i + 1] <= d[i]) & (d[i + 1] < d[i + 2])
            for j in range(k):
                out_t[p, j] = np.nan
                out_c[p, j] = np.inf
            for i in range(n):  # a few minima per order: the rest is skipped cheaply
                if is_min[i] == 0:
                    continue
                d0 = d[i + 1]
                if i == 0 or i == n - 1:
                    t, c = t0 + i * stride * step, d0
                else:
                    off, c = _refine(d[i], d0, d[i + 2])
                    t = t0 + (i + off) * stride * step
                _insert(p, t, c, out_t, out_c)
            if stride > 1:
                _refine_on_full_table(
                    p, q0, q1, q2, qq, mu, e_full, ee_full, t0, step, stride, out_t, out_c, found
                )


@njit(cache=True, inline="always")
def _insert(p, t, c, out_t, out_c):
    """Put (t, c) into pixel p's list of the k best, kept sorted by cost."""
    k = out_t.shape[1]
    if c < out_c[p, k - 1]:
        j = k - 1
        while j > 0 and out_c[p, j - 1] > c:
            out_c[p, j] = out_c[p, j - 1]
            out_t[p, j] = out_t[p, j - 1]
            j -= 1
        out_c[p, j] = c
        out_t[p, j] = t


@njit(cache=True, _nrt=False)  # allocates nothing: no reference counting (see select)
def _refine_on_full_table(p, q0, q1, q2, qq, mu, e, ee, t0, step, stride, out_t, out_c, found_t):
    """Follow each of pixel p's candidates (from the strided scan) downhill on the full
    table and refine it there; the list is rebuilt, best first, without duplicates (two
    scan minima that lead to the same minimum). ``found_t`` (K,) is working space."""
    k = out_t.shape[1]
    n = e.shape[0]
    for j in range(k):
        found_t[j] = out_t[p, j]
    for j in range(k):
        out_t[p, j] = np.nan
        out_c[p, j] = np.inf
    for j in range(k):
        if not np.isfinite(found_t[j]):
            continue
        i = min(n - 1, max(0, int(round((found_t[j] - t0) / step))))
        di = _dist(q0, q1, q2, qq, e[i, 0], e[i, 1], e[i, 2], ee[i], mu)
        bi, off, c = _descend(q0, q1, q2, qq, mu, e, ee, i, di, 2 * stride)
        t = t0 + (bi + off) * step
        duplicate = False
        for m in range(k):
            if abs(out_t[p, m] - t) < 0.5 * step:  # NaN compares False
                duplicate = True
        if not duplicate:
            _insert(p, t, c, out_t, out_c)


def find_candidates(
    q: np.ndarray,
    table_encoded: np.ndarray,
    *,
    t0_nm: float,
    step_nm: float,
    k: int,
    intensity_weight: float,
    stride: int = 1,
) -> Candidates:
    """The ``k`` best local minima of the colour distance for each pixel.

    Parameters
    ----------
    q : ndarray of shape (P, 3)
        Encoded pixel colours (gain-corrected).
    table_encoded : ndarray of shape (N, 3)
        Encoded colour-table entries on a regular thickness grid.
    t0_nm, step_nm : float
        First thickness and step of the grid (nm).
    k : int
        Number of candidates kept per pixel.
    intensity_weight : float
        λ of :mod:`fringemap.matching.space`.
    stride : int
        Scan every ``stride``-th entry only (the ``k`` best minima of the scan,
        by a parabola through each), then follow each of them downhill on the
        full table and refine it there: about ``stride`` times less work where
        the minima are wider than the stride (1: every entry).
    """
    if int(stride) < 1:
        raise OptionError(f"expected a stride >= 1, got {stride!r}", where="stride")
    q = np.ascontiguousarray(q, dtype=np.float64).reshape(-1, 3)
    e = np.ascontiguousarray(table_encoded, dtype=np.float64)
    ee = np.sum(e * e, axis=1)
    out_t = np.empty((q.shape[0], k))
    out_c = np.empty((q.shape[0], k))
    _candidates_kernel(
        q,
        e,
        ee,
        int(stride),
        float(intensity_weight),
        int(k),
        float(t0_nm),
        float(step_nm),
        out_t,
        out_c,
    )
    return Candidates(thickness_nm=out_t, cost=out_c)
