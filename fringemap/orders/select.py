"""Fringe-order selection: one candidate per pixel, spatially continuous.

Each pixel has K candidate thicknesses (one per competing fringe order) with
colour costs. Picking each pixel's best candidate alone gives the wrong order
wherever noise makes another order's colour fit slightly better. Here the
choice follows the film's continuity instead, by quality-guided region
growing after Herráez et al. [1]_: start from the most reliable pixel (the
one whose best candidate beats its second best by the widest margin), then
repeatedly take the frontier pixel whose best continuation is cheapest —
candidate cost plus a penalty on the jump from the thickness predicted by its
already-assigned neighbours (with linear extrapolation, so steep films are
followed). A frontier pixel whose every candidate would jump by more than
``max_jump_nm`` is not joined: that is a step (a scratch, a coating edge) or a
separate piece of film, and it is grown later from a seed of its own.

Absolute order. Region growing fixes orders relative to the seed. For each
region the seed's alternative candidates are tried as hypotheses: the region
is regrown from each and scored by its total colour cost; the lowest wins and
the score gap, per pixel, says how sure the choice is. Anchors (points of
known thickness) override this for the regions they lie in.

References
----------
.. [1] M. A. Herráez, D. R. Burton, M. J. Lalor & M. A. Gdeisat, "Fast
   two-dimensional phase-unwrapping algorithm based on sorting by
   reliability following a noncontinuous path", Appl. Opt. 41, 7437 (2002),
   doi:10.1364/AO.41.007437.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit

from ..matching.candidates import _descend
from ..matching.space import _dist

__all__ = ["OrderSelection", "select_orders"]


@dataclass(frozen=True)
class OrderSelection:
    """The chosen thickness per pixel and how it was decided.

    Attributes
    ----------
    thickness_nm : ndarray (H, W)
        Chosen thickness, NaN where no valid candidate.
    cost : ndarray (H, W)
        Colour cost of the chosen candidate (normalised by the noise level).
    region : ndarray of int32 (H, W)
        Region label (-1 where invalid); regions are grown separately.
    region_margin : ndarray (R,)
        Per region, mean cost gap per pixel between the chosen order
        hypothesis and the next best (large = sure).
    region_size : ndarray (R,)
        Pixels per region.
    region_anchored : ndarray of bool (R,)
        Whether an anchor fixed the region's order.
    region_seed : ndarray of int (R,)
        Flat index of each region's seed pixel.
    """

    thickness_nm: np.ndarray
    cost: np.ndarray
    region: np.ndarray
    region_margin: np.ndarray
    region_size: np.ndarray
    region_anchored: np.ndarray
    region_seed: np.ndarray


#: order margins (cost per pixel) above this are all "sure"; hypotheses that far behind
#: (over the whole region, or over the tenth of it they have covered first) are not
#: grown to the end, and the margin is reported as this value
MARGIN_CAP = 100.0


# The helpers of the growth below allocate nothing, so they are compiled without
# numba's reference counting (``_nrt=False``): array arguments are then passed without
# the atomic count updates that otherwise dominate their cost (about 40 % of the
# selection's time). _workspace and _select_all allocate and keep it.

# --- a small binary heap on parallel arrays (numba has no priority queue of tuples) ---


@njit(cache=True, _nrt=False)
def _heap_push(keys, vals, size, key, val):
    i = size
    keys[i] = key
    vals[i] = val
    while i > 0:
        parent = (i - 1) // 2
        if keys[parent] <= keys[i]:
            break
        keys[parent], keys[i] = keys[i], keys[parent]
        vals[parent], vals[i] = vals[i], vals[parent]
        i = parent
    return size + 1


@njit(cache=True, _nrt=False)
def _heap_pop(keys, vals, size):
    key, val = keys[0], vals[0]
    size -= 1
    keys[0] = keys[size]
    vals[0] = vals[size]
    i = 0
    while True:
        left = 2 * i + 1
        right = left + 1
        small = i
        if left < size and keys[left] < keys[small]:
            small = left
        if right < size and keys[right] < keys[small]:
            small = right
        if small == i:
            break
        keys[small], keys[i] = keys[i], keys[small]
        vals[small], vals[i] = vals[i], vals[small]
        i = small
    return key, val, size


@njit(cache=True, _nrt=False)
def _predict(p, h, w, state_t, assigned):
    """Thickness predicted at pixel p from assigned 4-neighbours (with extrapolation)."""
    y, x = p // w, p % w
    total = 0.0
    count = 0
    for dy, dx in ((-1, 0), (1, 0), (0, -1), (0, 1)):
        y1, x1 = y + dy, x + dx
        if y1 < 0 or y1 >= h or x1 < 0 or x1 >= w:
            continue
        n1 = y1 * w + x1
        if not assigned[n1] or not np.isfinite(state_t[n1]):
            continue
        y2, x2 = y1 + dy, x1 + dx
        est = state_t[n1]
        if 0 <= y2 < h and 0 <= x2 < w:
            n2 = y2 * w + x2
            if assigned[n2] and np.isfinite(state_t[n2]):
                est = 2.0 * state_t[n1] - state_t[n2]
                # damp extrapolation: halfway between flat and linear
                est = 0.5 * (est + state_t[n1])
        total += est
        count += 1
    if count == 0:
        return np.nan
    return total / count


@njit(cache=True, _nrt=False)
def _local_min(p, pred, q, e, ee, lam, t0, step, half, noise):
    """The local minimum of the distance nearest ``pred`` on the table, found by descent
    from the predicted entry (at most ``half`` entries away): (t, normalised cost)."""
    n = e.shape[0]
    q0, q1, q2 = q[p, 0], q[p, 1], q[p, 2]
    qq = q0 * q0 + q1 * q1 + q2 * q2
    mu = lam * qq
    c = int(round((pred - t0) / step))
    if c < -half or c > n - 1 + half:
        return np.nan, np.inf
    c = min(n - 1, max(0, c))
    d0 = _dist(q0, q1, q2, qq, e[c, 0], e[c, 1], e[c, 2], ee[c], mu)
    bi, off, best = _descend(q0, q1, q2, qq, mu, e, ee, c, d0, half)
    return t0 + (bi + off) * step, best / noise


@njit(cache=True, _nrt=False)
def _best_choice(p, pred, cand_t, cand_c, tau, max_jump, lm):
    """The cheapest continuation at pixel p: (thickness, cost, score); score inf if none.

    Candidates are the pixel's precomputed local minima and, when the table is
    given (``lm``), the local minimum nearest the prediction (by descent) — so the
    growth can follow a branch whose minimum is shallow or shifted by a colour
    mismatch, instead of jumping to another order.
    """
    best = np.inf
    bt = np.nan
    bc = np.inf
    if not np.isfinite(pred):
        return bt, bc, best
    for k in range(cand_t.shape[1]):
        t = cand_t[p, k]
        if not np.isfinite(t):
            continue
        jump = abs(t - pred)
        if jump > max_jump:
            continue
        sc = cand_c[p, k] + (jump / tau) ** 2
        if sc < best:
            best = sc
            bt = t
            bc = cand_c[p, k]
    q, e, ee, lam, t0, step, half, noise, use = lm
    if use:
        t, c = _local_min(p, pred, q, e, ee, lam, t0, step, half, noise)
        if np.isfinite(t):
            jump = abs(t - pred)
            if jump <= max_jump:
                sc = c + (jump / tau) ** 2
                if sc < best:
                    best = sc
                    bt = t
                    bc = c
    return bt, bc, best


@njit(cache=True, _nrt=False)
def _choice(p, pred, cand_t, cand_c, tau, max_jump, lm, memo, memo_gen, gen):
    """:func:`_best_choice`, remembered per pixel (``memo``, valid where ``memo_gen``
    is this growth's number ``gen``) for the last prediction asked."""
    if memo_gen[p] == gen and memo[p, 0] == pred:
        return memo[p, 1], memo[p, 2], memo[p, 3]
    t, c, score = _best_choice(p, pred, cand_t, cand_c, tau, max_jump, lm)
    memo_gen[p] = gen
    memo[p, 0] = pred
    memo[p, 1] = t
    memo[p, 2] = c
    memo[p, 3] = score
    return t, c, score


@njit(cache=True)
def _workspace(n):
    """Heap keys and values, choice memo and its growth numbers, visit list: for one
    growth at a time over n pixels (untouched pages cost nothing until used)."""
    return (
        np.empty(4 * n + 4),
        np.empty(4 * n + 4, dtype=np.int64),
        np.empty((n, 4)),
        np.zeros(n, dtype=np.int64),
        np.empty(n, dtype=np.int64),
    )


@njit(cache=True, _nrt=False)
def _grow(
    seed_p,
    seed_t,
    seed_c,
    allowed,
    cand_t,
    cand_c,
    h,
    w,
    tau,
    max_jump,
    lm,
    out_t,
    out_c,
    assigned,
    abort_cost,
    ref_c,
    trail_cap,
    min_count,
    ws,
    gen,
):
    """Grow from a seed over pixels with allowed[p]: (pixels assigned, cost sum, stop).

    ``stop`` is 0 when the growth ran to its end, 1 when it stopped because the
    cost sum exceeded ``abort_cost``, 2 when, after at least ``min_count``
    pixels, its cost over the pixels it covered exceeded the reference costs
    ``ref_c`` there by more than ``trail_cap`` per pixel (a hypothesis that far
    behind the chosen labelling; ``trail_cap = inf`` never stops).
    The assigned pixels are listed, in order, in the workspace's visit list
    (``ws[4][:count]``); ``gen`` is a number unique to this growth (> 0).
    """
    keys, vals, memo, memo_gen, visit = ws
    size = 0
    count = 0
    cost_sum = 0.0
    ref_sum = 0.0
    p, t, c = seed_p, seed_t, seed_c
    while True:
        # assign p, then queue its neighbours and take the cheapest that is still current
        out_t[p] = t
        out_c[p] = c
        assigned[p] = True
        visit[count] = p
        count += 1
        cost_sum += c
        if cost_sum > abort_cost:
            return count, cost_sum, 1
        ref_sum += ref_c[p]
        if count >= min_count and cost_sum - ref_sum > trail_cap * count:
            return count, cost_sum, 2
        size = _push_neighbours(
            p,
            h,
            w,
            allowed,
            assigned,
            keys,
            vals,
            size,
            cand_t,
            cand_c,
            out_t,
            tau,
            max_jump,
            lm,
            memo,
            memo_gen,
            gen,
        )
        p = -1
        while size > 0:
            key, q, size = _heap_pop(keys, vals, size)
            if assigned[q]:
                continue
            pred = _predict(q, h, w, out_t, assigned)
            t, c, score = _choice(q, pred, cand_t, cand_c, tau, max_jump, lm, memo, memo_gen, gen)
            if not np.isfinite(score):
                continue  # may be reached again from another side
            if score > key + 1e-12:
                # priority went stale (more neighbours assigned since): requeue
                if size < keys.shape[0]:
                    size = _heap_push(keys, vals, size, score, q)
                continue
            p = q
            break
        if p < 0:
            break
    return count, cost_sum, 0


@njit(cache=True, _nrt=False)
def _push_neighbours(
    p,
    h,
    w,
    allowed,
    assigned,
    keys,
    vals,
    size,
    cand_t,
    cand_c,
    out_t,
    tau,
    max_jump,
    lm,
    memo,
    memo_gen,
    gen,
):
    y, x = p // w, p % w
    for dy, dx in ((-1, 0), (1, 0), (0, -1), (0, 1)):
        y1, x1 = y + dy, x + dx
        if y1 < 0 or y1 >= h or x1 < 0 or x1 >= w:
            continue
        q = y1 * w + x1
        if assigned[q] or not allowed[q]:
            continue
        pred = _predict(q, h, w, out_t, assigned)
        t, c, score = _choice(q, pred, cand_t, cand_c, tau, max_jump, lm, memo, memo_gen, gen)
        if not np.isfinite(score) or size >= keys.shape[0]:
            continue
        size = _heap_push(keys, vals, size, score, q)
    return size


@njit(cache=True, _nrt=False)
def _reset(ws, count, hyp_t, hyp_c, hyp_a):
    """Put a hypothesis's maps back to NaN / inf / False where its growth wrote."""
    visit = ws[4]
    for i in range(count):
        p = visit[i]
        hyp_t[p] = np.nan
        hyp_c[p] = np.inf
        hyp_a[p] = False


@njit(cache=True, nogil=True)
def _select_all(
    cand_t,
    cand_c,
    valid,
    order,
    h,
    w,
    tau,
    max_jump,
    min_region,
    anchor_pix,
    anchor_t,
    miss_cost,
    lm,
):
    n = h * w
    kk = cand_t.shape[1]
    out_t = np.full(n, np.nan)
    out_c = np.full(n, np.inf)
    assigned = np.zeros(n, dtype=np.bool_)
    region = np.full(n, -1, dtype=np.int32)
    margins = np.zeros(n)
    sizes = np.zeros(n, dtype=np.int64)
    anchored = np.zeros(n, dtype=np.bool_)
    seeds = np.zeros(n, dtype=np.int64)
    # workspaces: one for the main growth and two for hypotheses (the one being grown
    # and the best so far); hypothesis maps stay NaN / inf / False outside the pixels
    # a growth visits, and are reset there (work per region, not per photo)
    main_ws = _workspace(n)
    hyp_ws = [_workspace(n), _workspace(n)]
    hyp_t = np.full((2, n), np.nan)
    hyp_c = np.full((2, n), np.inf)
    hyp_a = np.zeros((2, n), dtype=np.bool_)
    hyp_count = np.zeros(2, dtype=np.int64)
    members = np.zeros(n, dtype=np.bool_)
    gen = 0
    r = 0
    # anchors seed first, with the candidate nearest to the known thickness
    seed_list = np.concatenate((anchor_pix, order))
    for idx in range(seed_list.shape[0]):
        s = seed_list[idx]
        if s < 0 or assigned[s] or not valid[s]:
            continue
        sk = 0
        is_anchor = idx < anchor_pix.shape[0]
        if is_anchor:
            best = np.inf
            for k in range(kk):
                if np.isfinite(cand_t[s, k]) and abs(cand_t[s, k] - anchor_t[idx]) < best:
                    best = abs(cand_t[s, k] - anchor_t[idx])
                    sk = k
        gen += 1
        size_r, base_cost, _ = _grow(
            s,
            cand_t[s, sk],
            cand_c[s, sk],
            valid,
            cand_t,
            cand_c,
            h,
            w,
            tau,
            max_jump,
            lm,
            out_t,
            out_c,
            assigned,
            np.inf,
            out_c,
            np.inf,
            n,
            main_ws,
            gen,
        )
        visit = main_ws[4]
        for i in range(size_r):
            region[visit[i]] = r
            members[visit[i]] = True
        sizes[r] = size_r
        anchored[r] = is_anchor
        seeds[r] = s
        # order hypotheses: regrow the region from the seed's other candidates
        if not is_anchor and size_r >= min_region:
            best_cost = base_cost
            second = np.inf
            capped = False
            best_b = -1  # buffer holding the best hypothesis (-1: the chosen labelling)
            cur = 0
            for k in range(kk):
                if k == sk or not np.isfinite(cand_t[s, k]):
                    continue
                # a hypothesis whose partial cost already exceeds the second best can
                # be neither best nor second (costs are not negative), and one that
                # trails the chosen labelling by MARGIN_CAP per pixel, over the part of
                # the region it has covered (a tenth at least), only says "sure": stop it
                bound = min(second, best_cost + MARGIN_CAP * size_r)
                gen += 1
                cnt, csum, stop = _grow(
                    s,
                    cand_t[s, k],
                    cand_c[s, k],
                    members,
                    cand_t,
                    cand_c,
                    h,
                    w,
                    tau,
                    max_jump,
                    lm,
                    hyp_t[cur],
                    hyp_c[cur],
                    hyp_a[cur],
                    bound,
                    out_c,
                    MARGIN_CAP,
                    max(min_region, size_r // 10),
                    hyp_ws[cur],
                    gen,
                )
                hyp_count[cur] = cnt
                keep = False
                if stop == 2:
                    capped = True
                elif stop == 1:
                    capped |= bound < second
                else:
                    # a hypothesis that merges back into the chosen labelling is no
                    # alternative
                    differ = 0
                    for i in range(size_r):
                        p = visit[i]
                        t_h = hyp_t[cur, p]
                        if np.isfinite(t_h) and abs(t_h - out_t[p]) > 0.6 * max_jump:
                            differ += 1
                    if differ >= 0.5 * size_r:
                        total = csum + (size_r - cnt) * miss_cost
                        if total < best_cost:
                            second = best_cost
                            best_cost = total
                            keep = True
                        elif total < second:
                            second = total
                if keep:
                    if best_b >= 0:  # the former best is no longer needed
                        _reset(
                            hyp_ws[best_b],
                            hyp_count[best_b],
                            hyp_t[best_b],
                            hyp_c[best_b],
                            hyp_a[best_b],
                        )
                    best_b = cur
                    cur = 1 - cur
                else:
                    _reset(hyp_ws[cur], cnt, hyp_t[cur], hyp_c[cur], hyp_a[cur])
            if best_b >= 0:
                # adopt the better hypothesis; pixels it could not reach keep their value
                for i in range(size_r):
                    p = visit[i]
                    if np.isfinite(hyp_t[best_b, p]):
                        out_t[p] = hyp_t[best_b, p]
                        out_c[p] = hyp_c[best_b, p]
                _reset(
                    hyp_ws[best_b], hyp_count[best_b], hyp_t[best_b], hyp_c[best_b], hyp_a[best_b]
                )
            margins[r] = (second - best_cost) / size_r if np.isfinite(second) else 1e9
            if capped:
                margins[r] = min(margins[r], MARGIN_CAP)
        else:
            margins[r] = 1e9 if is_anchor else 0.0
        for i in range(size_r):
            members[visit[i]] = False
        r += 1
    return out_t, out_c, region, margins[:r], sizes[:r], anchored[:r], seeds[:r]


def select_orders(
    cand_t: np.ndarray,
    cand_c: np.ndarray,
    *,
    valid: np.ndarray,
    tau_nm: float,
    max_jump_nm: float,
    min_region_px: int = 12,
    anchors: tuple[tuple[int, int, float], ...] = (),
    colours: np.ndarray | None = None,
    table_encoded: np.ndarray | None = None,
    t0_nm: float = 0.0,
    step_nm: float = 1.0,
    intensity_weight: float = 0.0,
    noise: float = 1.0,
) -> OrderSelection:
    """Choose one candidate per pixel by quality-guided region growing.

    Parameters
    ----------
    cand_t, cand_c : ndarray (H, W, K)
        Candidate thicknesses (nm) and costs normalised by the noise level
        (so a good match costs about 1 per channel).
    valid : ndarray of bool (H, W)
        Pixels that take part.
    tau_nm : float
        Jump (nm) between neighbours that costs as much as one unit of colour cost.
    max_jump_nm : float
        Larger jumps are steps: not crossed by growth.
    min_region_px : int
        Regions smaller than this are not tested for their absolute order.
    anchors : tuple of (x, y, thickness_nm)
        Points of known thickness, in this grid's pixel coordinates.
    colours, table_encoded : ndarray (H, W, 3) and (N, 3), optional
        Encoded pixel colours and colour table (on the grid ``t0_nm``,
        ``step_nm``). When given, growth also considers the local minimum of
        the distance nearest each pixel's prediction, found by descent within
        a quarter order (distance with ``intensity_weight``, cost divided by
        ``noise``).
    """
    h, w, k = cand_t.shape
    ct = np.ascontiguousarray(cand_t.reshape(h * w, k), dtype=np.float64)
    cc = np.ascontiguousarray(cand_c.reshape(h * w, k), dtype=np.float64)
    v = np.ascontiguousarray(valid.reshape(-1)) & np.isfinite(ct[:, 0])
    with np.errstate(invalid="ignore"):
        gap = np.where(np.isfinite(cc[:, 1]), cc[:, 1] - cc[:, 0], 50.0)
        reliability = np.minimum(gap, 50.0) - 0.5 * np.minimum(cc[:, 0], 50.0)
    reliability[~v] = -np.inf
    order = np.argsort(-reliability, kind="stable").astype(np.int64)
    order = order[v[order]]
    apix = np.array([int(y) * w + int(x) for x, y, _ in anchors], dtype=np.int64)
    at = np.array([t for _, _, t in anchors], dtype=np.float64)
    good = cc[v, 0]
    miss = float(np.percentile(good, 90)) * 4 + 4.0 if good.size else 10.0
    if colours is not None and table_encoded is not None:
        e = np.ascontiguousarray(table_encoded, dtype=np.float64)
        lm = (
            np.ascontiguousarray(colours.reshape(h * w, 3), dtype=np.float64),
            e,
            np.sum(e * e, axis=1),
            float(intensity_weight),
            float(t0_nm),
            float(step_nm),
            max(1, int(np.ceil(0.5 * max_jump_nm / step_nm))),
            float(noise),
            True,
        )
    else:
        e = np.zeros((1, 3))
        lm = (np.zeros((h * w, 3)), e, np.zeros(1), 0.0, 0.0, 1.0, 1, 1.0, False)
    out_t, out_c, region, margins, sizes, anchored, seeds = _select_all(
        ct,
        cc,
        v,
        order,
        h,
        w,
        float(tau_nm),
        float(max_jump_nm),
        int(min_region_px),
        apix,
        at,
        miss,
        lm,
    )
    cost = np.where(np.isfinite(out_t), out_c, np.nan)
    return OrderSelection(
        thickness_nm=out_t.reshape(h, w),
        cost=cost.reshape(h, w),
        region=region.reshape(h, w),
        region_margin=margins,
        region_size=sizes,
        region_anchored=anchored,
        region_seed=seeds,
    )
