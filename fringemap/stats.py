"""Uniformity statistics and thickness specifications.

Thickness maps are float arrays of shape (H, W) in nm; NaN (or any non-finite
value) marks an unmeasured pixel. The formulas are listed in
:class:`UniformityStats` and in ``docs/statistics.md``.

Site layouts and readings live in :mod:`fringemap.sites`; the physical scale,
profiles, gradients and plane fits in :mod:`fringemap.geometry`. Their names
are re-exported here so ``from fringemap.stats import site_pattern`` keeps
working.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, fields

import numba
import numpy as np
from numba import njit, prange

from fringemap._maps import as_map, json_value, region
from fringemap.errors import OptionError
from fringemap.geometry import (
    PlaneFit,
    Profile,
    Scale,
    parse_scale,
    plane_fit,
    profile,
    scale_from_points,
    thickness_gradient,
)
from fringemap.sites import SITE_LAYOUTS, SiteTable, site_pattern, site_readings

__all__ = [
    "Spec",
    "parse_spec",
    "UniformityStats",
    "uniformity",
    "SITE_LAYOUTS",
    "site_pattern",
    "SiteTable",
    "site_readings",
    "Scale",
    "parse_scale",
    "scale_from_points",
    "Profile",
    "profile",
    "thickness_gradient",
    "PlaneFit",
    "plane_fit",
]

# --------------------------------------------------------------------------- spec


@dataclass(frozen=True)
class Spec:
    """A thickness specification ``target_nm ± tol_nm``.

    A pixel is in spec when ``|t - target_nm| <= tol_nm`` (bounds included).
    """

    target_nm: float
    tol_nm: float


_SPEC_RE = re.compile(r"^\s*([^±+]+?)\s*(?:±|\+/-|\+-)\s*(.+?)\s*(?:nm)?\s*$")


def parse_spec(text: str) -> Spec:
    """Parse ``--spec`` text ``TARGET±TOL`` (also ``TARGET+-TOL``, ``TARGET+/-TOL``), in nm.

    Parameters
    ----------
    text : str
        e.g. ``"100±5"``, ``"100 +/- 5"``, ``"100+-5nm"``.

    Returns
    -------
    Spec

    Raises
    ------
    OptionError
        Not of that form, non-numbers, TARGET not finite and > 0, or TOL not
        finite and > 0 (``where="--spec"``).
    """
    expected = "TARGET±TOL in nm (e.g. 100±5, 100+-5 or 100+/-5) with TARGET > 0 and TOL > 0"
    match = _SPEC_RE.match(text)
    if not match:
        raise OptionError(f"expected {expected}, got {text!r}", where="--spec")
    try:
        target, tol = float(match.group(1)), float(match.group(2))
    except ValueError:
        raise OptionError(f"expected {expected}, got {text!r}", where="--spec") from None
    if not (math.isfinite(target) and math.isfinite(tol) and target > 0 and tol > 0):
        raise OptionError(f"expected {expected}, got {text!r}", where="--spec")
    return Spec(target, tol)


# --------------------------------------------------------------------- uniformity


@dataclass(frozen=True)
class UniformityStats:
    """Statistics of the measured pixels of a region.

    With ``t`` the finite thickness values (nm) of the region's pixels and
    ``Pq`` their q-th percentile (numpy's default linear interpolation):

    - ``count_px`` = number of values; ``region_px`` = pixels in the region
    - ``coverage`` = count_px / region_px (0 when the region is empty), 0-1
    - ``mean_nm``, ``median_nm``; ``std_nm`` is the population standard
      deviation, ``sqrt(mean((t - mean)**2))`` (ddof = 0)
    - ``min_nm``, ``max_nm``, ``range_nm = max - min``; ``p1_nm`` ... ``p99_nm``
    - ``cv_percent = std / mean * 100``
    - ``nonuniformity_percent = (max - min) / (2 * mean) * 100``
    - ``robust_nonuniformity_percent = (P99 - P1) / (2 * mean) * 100``
    - ``in_spec_fraction`` = fraction of values with ``|t - target| <= tol``
    - ``passed = in_spec_fraction >= spec_required_fraction`` (False when
      nothing was measured)

    Values that cannot be computed (no measured pixel, mean of 0) are NaN;
    the spec fields are None when no spec was given.
    """

    count_px: int
    region_px: int
    coverage: float
    mean_nm: float
    median_nm: float
    std_nm: float
    min_nm: float
    max_nm: float
    range_nm: float
    p1_nm: float
    p5_nm: float
    p95_nm: float
    p99_nm: float
    cv_percent: float
    nonuniformity_percent: float
    robust_nonuniformity_percent: float
    spec_target_nm: float | None = None
    spec_tol_nm: float | None = None
    spec_required_fraction: float | None = None
    in_spec_fraction: float | None = None
    passed: bool | None = None

    def to_dict(self) -> dict:
        """The fields as a JSON-ready dict (Python numbers; NaN becomes None)."""
        return {f.name: json_value(getattr(self, f.name)) for f in fields(self)}


# ------------------------------------------- exact order statistics of float32 maps
#
# A two-pass radix selection: float32 values map to unsigned keys that sort as
# the values do; the first pass counts the keys' upper 16 bits (and the count,
# sum, min and max), the second the lower 16 bits inside the few upper bins that
# hold a wanted rank (and the squared deviations from the mean). The ranks'
# values are then exact, without copying or partially sorting the values:
# percentiles of a 12-megapixel map in a few hundredths of a second.


@njit(cache=True)
def _sort_key(bits):
    if bits & np.uint32(0x80000000):
        return ~bits
    return bits | np.uint32(0x80000000)


@njit(cache=True)
def _key_value(key):
    if key & np.uint32(0x80000000):
        bits = key & np.uint32(0x7FFFFFFF)
    else:
        bits = ~key
    return np.array([bits], dtype=np.uint32).view(np.float32)[0]


#: values per block of the sums: each block is summed in order, then the block sums in
#: order, so that the float sums do not depend on how many threads share the work
_BLOCK = 1 << 16


@njit(cache=True, parallel=True, nogil=True)
def _first_pass(t, bits, area, everywhere, upper, nchunk):
    n = t.shape[0]
    nblocks = (n + _BLOCK - 1) // _BLOCK
    parts = np.zeros((nchunk, upper.shape[0]), dtype=np.int64)
    counts = np.zeros(nchunk, dtype=np.int64)
    block_sums = np.zeros(nblocks)
    los = np.full(nchunk, np.inf)
    his = np.full(nchunk, -np.inf)
    for ch in prange(nchunk):  # whole blocks of the map per thread, merged below
        count = 0
        lo = np.inf
        hi = -np.inf
        for b in range(ch * nblocks // nchunk, (ch + 1) * nblocks // nchunk):
            total = 0.0
            for i in range(b * _BLOCK, min(n, (b + 1) * _BLOCK)):
                v = t[i]
                if not (everywhere or area[i]) or not np.isfinite(v):
                    continue
                count += 1
                total += v
                lo = min(lo, v)
                hi = max(hi, v)
                parts[ch, _sort_key(bits[i]) >> 16] += 1
            block_sums[b] = total
        counts[ch] = count
        los[ch] = lo
        his[ch] = hi
    for ch in range(nchunk):
        upper += parts[ch]
    total = 0.0
    for b in range(nblocks):
        total += block_sums[b]
    return counts.sum(), total, los.min(), his.max()


@njit(cache=True, parallel=True, nogil=True)
def _second_pass(t, bits, area, everywhere, mean, slot, lower, nchunk):
    n = t.shape[0]
    nblocks = (n + _BLOCK - 1) // _BLOCK
    parts = np.zeros((nchunk,) + lower.shape, dtype=np.uint32)  # < 2**32 px per chunk
    block_sums = np.zeros(nblocks)
    for ch in prange(nchunk):
        for b in range(ch * nblocks // nchunk, (ch + 1) * nblocks // nchunk):
            ss = 0.0
            for i in range(b * _BLOCK, min(n, (b + 1) * _BLOCK)):
                v = t[i]
                if not (everywhere or area[i]) or not np.isfinite(v):
                    continue
                d = v - mean
                ss += d * d
                key = _sort_key(bits[i])
                s = slot[key >> 16]
                if s >= 0:
                    parts[ch, s, key & 0xFFFF] += 1
            block_sums[b] = ss
    for ch in range(nchunk):
        lower += parts[ch]
    ss = 0.0
    for b in range(nblocks):
        ss += block_sums[b]
    return ss


@njit(cache=True)
def _rank_values(ranks, upper, slot, lower):
    cum_upper = np.cumsum(upper)
    out = np.empty(ranks.shape[0])
    for j in range(ranks.shape[0]):
        r = ranks[j]
        b = np.searchsorted(cum_upper, r, side="right")
        before = cum_upper[b - 1] if b > 0 else 0
        cum_lower = np.cumsum(lower[slot[b]])
        low = np.searchsorted(cum_lower, r - before, side="right")
        out[j] = _key_value(np.uint32((b << 16) | low))
    return out


def _float32_moments(t: np.ndarray, area: np.ndarray | None, qs: np.ndarray):
    """count, mean, std (ddof 0), min, max and percentiles ``qs`` (numpy's linear rule)
    of the finite values of ``t`` inside ``area`` (None: everywhere)."""
    flat = np.ascontiguousarray(t).reshape(-1)
    bits = flat.view(np.uint32)
    # area None: every pixel (no full-size mask made)
    everywhere = area is None
    region_flat = np.ones(1, dtype=bool) if everywhere else np.ascontiguousarray(area).reshape(-1)
    upper = np.zeros(1 << 16, dtype=np.int64)
    # one chunk per thread (a few at most: each keeps its own histograms), and chunks
    # of at most 2**31 values so that their 32-bit counts cannot overflow; the results
    # do not depend on the number of chunks
    nchunk = max(min(numba.get_num_threads(), 8), -(-flat.size // 2**31))
    count, total, lo, hi = _first_pass(flat, bits, region_flat, everywhere, upper, nchunk)
    if count == 0:
        return 0, math.nan, math.nan, math.nan, math.nan, np.full(qs.shape, math.nan)
    mean = total / count
    # ranks around each percentile's virtual index (numpy: q/100 · (n − 1))
    virtual = qs / 100.0 * (count - 1)
    below = np.floor(virtual).astype(np.int64)
    above = np.minimum(below + 1, count - 1)
    ranks = np.concatenate([below, above])
    cum_upper = np.cumsum(upper)
    bins = np.unique(np.searchsorted(cum_upper, ranks, side="right"))
    slot = np.full(1 << 16, -1, dtype=np.int64)
    slot[bins] = np.arange(bins.size)
    lower = np.zeros((bins.size, 1 << 16), dtype=np.int64)
    ss = _second_pass(flat, bits, region_flat, everywhere, mean, slot, lower, nchunk)
    values = _rank_values(ranks, upper, slot, lower)
    a, b = values[: qs.size], values[qs.size :]
    frac = virtual - below
    # numpy's interpolation, evaluated from the nearer end
    pct = np.where(frac >= 0.5, b - (b - a) * (1 - frac), a + (b - a) * frac)
    return count, mean, math.sqrt(ss / count), lo, hi, pct


def _percent_of_mean(numerator: float, mean: float, factor: float = 1.0) -> float:
    if not math.isfinite(mean) or mean == 0:
        return math.nan
    return float(numerator / (factor * mean) * 100.0)


def uniformity(
    thickness_nm: np.ndarray,
    *,
    mask: np.ndarray | None = None,
    spec: Spec | None = None,
    required_fraction: float = 0.99,
) -> UniformityStats:
    """Uniformity statistics of a thickness map over a region.

    Parameters
    ----------
    thickness_nm : numpy.ndarray
        Float, shape (H, W), nm; non-finite values are unmeasured.
    mask : numpy.ndarray, optional
        Bool, shape (H, W): the region (default: the whole map).
    spec : Spec, optional
        Target and tolerance to judge the measured pixels against.
    required_fraction : float
        Fraction (0-1) of measured pixels that must be in spec to pass;
        default 0.99.

    Returns
    -------
    UniformityStats
        See its docstring for every formula. An empty region or one with
        nothing measured gives ``count_px = 0``, ``coverage = 0`` and NaN
        statistics (no exception).

    Raises
    ------
    OptionError
        Mask of another shape (``--roi``), required_fraction outside 0-1
        (``--spec``).
    """
    if not (0.0 <= required_fraction <= 1.0):
        raise OptionError(
            f"expected a required in-spec fraction in 0-1, got {required_fraction!r}",
            where="--spec",
        )
    t = as_map(thickness_nm)
    qs = np.array([1.0, 5.0, 50.0, 95.0, 99.0])
    if t.dtype == np.float32 and mask is None:  # the whole map: no mask needed
        area = None
        region_px = t.size
    else:
        area = region(t, mask)
        region_px = int(np.count_nonzero(area))
    if t.dtype == np.float32:
        count, mean, std, lo, hi, pct = _float32_moments(t, area, qs)
    else:
        values = t[area & np.isfinite(t)]
        count = int(values.size)
        if count:
            mean = float(values.mean(dtype=np.float64))
            dev = values - mean
            std = float(np.sqrt(np.einsum("i,i->", dev, dev) / count))
            lo, hi = float(values.min()), float(values.max())
            pct = np.percentile(values, qs)
        else:
            mean = std = lo = hi = math.nan
            pct = np.full(qs.shape, math.nan)
    p1, p5, p50, p95, p99 = (float(v) for v in pct)
    lo, hi, mean, std = float(lo), float(hi), float(mean), float(std)
    coverage = count / region_px if region_px else 0.0
    spec_fields: dict = {}
    if spec is not None:
        if count:
            with np.errstate(invalid="ignore"):
                inside = np.abs(t - spec.target_nm) <= spec.tol_nm
            fraction = float(np.count_nonzero(inside if area is None else inside & area)) / count
            passed = fraction >= required_fraction
        else:
            fraction, passed = math.nan, False
        spec_fields = dict(
            spec_target_nm=spec.target_nm,
            spec_tol_nm=spec.tol_nm,
            spec_required_fraction=float(required_fraction),
            in_spec_fraction=fraction,
            passed=bool(passed),
        )
    return UniformityStats(
        count_px=count,
        region_px=region_px,
        coverage=float(coverage),
        mean_nm=mean,
        median_nm=p50,
        std_nm=std,
        min_nm=lo,
        max_nm=hi,
        range_nm=hi - lo,
        p1_nm=p1,
        p5_nm=p5,
        p95_nm=p95,
        p99_nm=p99,
        cv_percent=_percent_of_mean(std, mean),
        nonuniformity_percent=_percent_of_mean(hi - lo, mean, 2.0),
        robust_nonuniformity_percent=_percent_of_mean(p99 - p1, mean, 2.0),
        **spec_fields,
    )
