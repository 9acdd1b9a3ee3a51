"""Measure one photo: the pipeline from linear colour to a thickness map.

Stages, in order (each lives in its own module):

1. :mod:`fringemap.io` — the photo in linear, white-balanced RGB;
2. :mod:`fringemap.calibration` — the camera correction, if any;
3. :mod:`fringemap.matching` — a smooth gain field and the K candidate
   thicknesses per pixel, on a downsampled copy of the photo;
4. :mod:`fringemap.orders` — one candidate per pixel, spatially continuous;
5. full resolution — each pixel's best thickness near the coarse map,
   with an exhaustive search where that fails (steps, scratches);
6. reasons and confidence; 7. :mod:`fringemap.stats`.

:func:`measure` is the Python API's main entry point.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from pathlib import Path

import cv2
import numpy as np

from . import __version__
from .colour.table import ColourTable, order_marks_nm
from .colour.transfer import srgb_decode
from .confidence import classify, mask_reasons
from .errors import MeasurementError, OptionError
from .matching.candidates import find_candidates
from .matching.fullres import (
    NO_LUT,
    block_mean,
    dark_mask,
    fill_nearest,
    fullres_match,
    halve_block_mean,
    interp_coarse,
    label_lookup,
    linear_at,
    neighbour_support,
    redo_pixels,
)
from .matching.gain import fit_gain_field
from .matching.space import INTENSITY_WEIGHT_CHROMA, INTENSITY_WEIGHT_FULL, encode
from .orders.select import select_orders
from .recipe import Recipe
from .result import REASON_CODES, ThicknessMap

__all__ = ["measure", "MeasureSettings", "parse_anchor"]

#: encoded luminance below which a pixel is too dark to have a colour
DARK_ENCODED = 0.06
#: encoded value at or above which a channel counts as clipped
SATURATED_ENCODED = 0.985
#: CIELAB chroma below which the table's colours count as faded (beyond range)
FADED_CHROMA = 2.0
#: long side of the downsampled image used for gain and order selection (px)
COARSE_SIDE = 256
#: candidates per pixel
K = 6
#: Rec. 709 / sRGB luminance weights
_Y709 = np.array([0.2126, 0.7152, 0.0722])


class MeasureSettings:
    """Tuning constants of the pipeline (documented defaults; rarely changed)."""

    dark_encoded = DARK_ENCODED
    faded_chroma = FADED_CHROMA
    coarse_side = COARSE_SIDE
    k = K
    off_model_factor = 12.0
    #: beyond range where the coarse map's thickness noise exceeds this fraction of a period
    max_coarse_sigma = 0.02


def parse_anchor(text: str, *, where: str = "--anchor") -> tuple[float, float, float]:
    """``X,Y=NM`` → (x_px, y_px, thickness_nm); errors name ``where``."""
    try:
        xy, nm = text.split("=")
        x, y = (float(v) for v in xy.split(","))
        t = float(nm)
    except ValueError:
        raise OptionError(f"expected X,Y=NM (pixels, nm), got {text!r}", where=where) from None
    if not all(np.isfinite([x, y, t])) or t < 0:
        raise OptionError(f"anchor values must be finite and NM >= 0, got {text!r}", where=where)
    return x, y, t


def _gain_samples(linear, t, table: ColourTable):
    c = table.colour_at(np.nan_to_num(t))
    cc = np.sum(c * c, axis=-1)
    pc = np.sum(linear * c, axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        g = pc / cc
    g[~np.isfinite(t) | (cc < 1e-6)] = np.nan
    return g, cc


def _running(values: np.ndarray, n: int) -> np.ndarray:
    """Windows of ``n`` samples centred on each sample of a 1-D array (edges repeated),
    shape (len, n): the window of sample i spans i - n//2 ... i - n//2 + n - 1."""
    padded = np.pad(values, (n // 2, (n - 1) // 2), mode="edge")
    return np.lib.stride_tricks.sliding_window_view(padded, n)


def _faded_mask(
    table: ColourTable,
    e_tab: np.ndarray,
    period_nm: float,
    threshold: float,
    noise_rms: float,
    max_sigma_nm: float,
) -> np.ndarray:
    """Table entries beyond the white-light range.

    An entry is faded when the running maximum of CIELAB chroma over one
    order period is below ``threshold``, or when the colour changes so little
    with thickness that the noise (``noise_rms``, encoded units) blurs the
    thickness by more than ``max_sigma_nm``: ``noise / mean|de/dt| > max_sigma``.
    """
    n = max(3, int(round(period_nm / table.step_nm)))
    chroma = _running(table.chroma, n).max(axis=1)
    slope = np.sqrt(np.sum(np.gradient(e_tab, table.step_nm, axis=0) ** 2, axis=1))
    slope_env = _running(slope, n).mean(axis=1)
    faded = (chroma < threshold) | (noise_rms / np.maximum(slope_env, 1e-12) > max_sigma_nm)
    # only the thick end counts as "faded": thin films are legitimately grey
    first_colour = np.argmax(table.chroma > 2 * threshold)
    faded[: first_colour + n] = False
    return faded


def _collapse_faded(ct: np.ndarray, cc: np.ndarray, t_faded: float) -> None:
    """Merge candidates in the faded zone into one at ``t_faded`` (in place).

    Beyond the white-light range the colour no longer says which thickness it
    is, so all candidates there are one hypothesis, "beyond range", at the
    zone's start: neighbours in a faded area then agree (no jumps) and the
    hypothesis competes fairly with the thin-film look-alikes.
    """
    if not np.isfinite(t_faded):
        return
    faded = ct >= t_faded
    if not faded.any():
        return
    c_f = np.where(faded, cc, np.inf)
    best = np.argmin(c_f, axis=-1)
    keep = np.zeros_like(faded)
    np.put_along_axis(keep, best[..., None], True, axis=-1)
    drop = faded & ~keep
    ct[faded] = t_faded
    ct[drop] = np.nan
    cc[drop] = np.inf


def _background(dark: np.ndarray, roi_mask: np.ndarray | None) -> np.ndarray:
    """Large dark areas (>= 0.5 % of the photo) and their 2 px rim: no film there
    (``roi_mask`` None: the whole photo is the region)."""
    h, w = dark.shape
    mask = (dark if roi_mask is None else dark & roi_mask).view(np.uint8)
    try:  # 16-bit labels: half the memory of 32-bit ones (and faster on a large photo)
        n, labels, stats, _ = cv2.connectedComponentsWithStatsWithAlgorithm(
            mask, 8, cv2.CV_16U, cv2.CCL_DEFAULT
        )
    except cv2.error:  # more than 65535 dark specks
        n, labels, stats, _ = cv2.connectedComponentsWithStats(mask, connectivity=8)
    if n <= 1:
        return np.zeros((h, w), dtype=bool)
    big = np.zeros(n, dtype=np.uint8)
    big[1:] = stats[1:, cv2.CC_STAT_AREA] >= 0.005 * h * w
    if not big.any():
        return np.zeros((h, w), dtype=bool)
    no_film = label_lookup(labels, big)
    del labels
    # the blurred rim of the background mixes film and background light: not film
    cv2.dilate(no_film, np.ones((5, 5), np.uint8), dst=no_film)
    no_film = no_film.view(bool)
    if roi_mask is not None:
        no_film &= roi_mask
    return no_film


def measure(
    photo,
    recipe: Recipe,
    *,
    table: ColourTable | None = None,
    roi_mask: np.ndarray | None = None,
    anchors: tuple[tuple[float, float, float], ...] = (),
    camera=None,
    progress: Callable[[str], None] | None = None,
) -> ThicknessMap:
    """Measure film thickness over a photo.

    Parameters
    ----------
    photo : Photo, str, Path or ndarray
        A :class:`fringemap.io.Photo`, a path to an image file, or an RGB
        array (uint8/uint16 taken as sRGB-encoded, float as linear).
    recipe : Recipe
        Stack, light, camera and search range.
    table : ColourTable, optional
        A prebuilt colour table for ``recipe`` (saves rebuilding it in batches).
    roi_mask : ndarray of bool (H, W), optional
        Where to measure; outside it the thickness is NaN (reason outside-roi).
        Default: the recipe's ``measure.roi``.
    anchors : tuple of (x_px, y_px, thickness_nm)
        Points of known thickness (bare substrate = 0). Default: the recipe's.
    camera : CameraModel, optional
        A colour correction from :mod:`fringemap.calibration` applied to the
        linear photo before matching.
    progress : callable, optional
        Called with a short stage name as the work proceeds.

    Returns
    -------
    ThicknessMap
    """
    from .io import Photo, photo_from_array, read_photo
    from .roi import parse_roi
    from .roi import roi_mask as make_roi_mask
    from .stats import uniformity

    t_start = time.perf_counter()
    say = progress or (lambda stage: None)
    if isinstance(photo, str | Path):
        photo = read_photo(photo)
    elif isinstance(photo, np.ndarray):
        photo = photo_from_array(
            photo, encoding="linear" if np.issubdtype(photo.dtype, np.floating) else "srgb"
        )
    if not isinstance(photo, Photo):
        raise OptionError(
            f"expected a Photo, path or array, got {type(photo).__name__}", where="photo"
        )
    where = photo.path or "photo"
    h, w = photo.shape
    if camera is not None:
        img, code_lut = np.ascontiguousarray(camera.apply(photo.linear), dtype=np.float32), NO_LUT
    elif photo.codes is not None:
        # 8- and 16-bit photos are matched from their stored codes: no float copy
        img, code_lut = photo.codes, photo.code_lut
    else:
        img, code_lut = np.ascontiguousarray(photo.linear, dtype=np.float32), NO_LUT
    if table is None:
        say("colour table")
        table = recipe.colour_table()
    stack = recipe.stack()

    # ---- masks that need no model --------------------------------------------------
    if roi_mask is None:
        roi_mask = make_roi_mask(parse_roi(recipe.get("measure", "roi")), (h, w))
    anchor_where = "--anchor"
    if not anchors:
        anchor_where = recipe.label("measure.anchors", "--anchor")
        anchors = tuple(
            parse_anchor(a, where=anchor_where) for a in recipe.get("measure", "anchors")
        )
    for x, y, _ in anchors:
        if not (0 <= x < w and 0 <= y < h):
            raise OptionError(
                f"anchor {x:g},{y:g} lies outside the {w}x{h} photo", where=anchor_where
            )
    # the whole photo as the region (the usual case) spares a few full-size masks
    whole = bool(roi_mask.all())
    region_mask = None if whole else roi_mask
    saturated = photo.saturated
    n_saturated = np.count_nonzero(saturated)
    dark = dark_mask(img, code_lut, float(srgb_decode(np.array(MeasureSettings.dark_encoded))))
    if n_saturated > 0.98 * h * w:
        raise MeasurementError(
            "the photo is saturated almost everywhere: lower the exposure", where=where
        )
    ys_s, xs_s = np.mgrid[0 : h : max(1, h // 200), 0 : w : max(1, w // 200)]
    sample = linear_at(img, code_lut, ys_s.ravel(), xs_s.ravel()) @ _Y709
    if float(np.percentile(sample, 99.9)) < float(srgb_decode(np.array(0.02))):
        raise MeasurementError("the photo is black: nothing was recorded", where=where)
    # what the masks decide, as reason codes (0 = usable): one uint8 map in place of the
    # dark and background masks, filled in later by the match
    reasons = mask_reasons(
        roi=roi_mask, saturated=saturated, dark=dark, no_film=_background(dark, region_mask)
    )
    del dark
    usable = reasons == REASON_CODES["measured"]

    # ---- coarse level: gain field and order selection ------------------------------
    f = max(1, int(np.ceil(max(h, w) / MeasureSettings.coarse_side)))
    lin_c, frac_c = block_mean(img, code_lut, usable, f)
    valid_c = frac_c >= 0.5
    hc, wc = valid_c.shape
    e_tab = encode(table.rgb)
    t0, step = float(table.thickness_nm[0]), table.step_nm
    stride = max(1, int(round(2.0 / step)))  # the coarse search uses a ~2 nm grid
    e_coarse = e_tab[::stride]
    n_ref = float(np.real(stack.film.index(np.array([550.0]))[0]))
    angle = recipe.get("light", "angle_deg")
    period = 550.0 / (2 * n_ref * np.sqrt(1 - (np.sin(np.deg2rad(angle)) / n_ref) ** 2))
    tau, max_jump = 0.15 * period, 0.45 * period
    anchors_c = tuple(
        (min(wc - 1, int(x // f)), min(hc - 1, int(y // f)), t) for x, y, t in anchors
    )

    y_tab = table.rgb @ np.array([0.2126, 0.7152, 0.0722])
    if not valid_c.any():
        # nothing with a colour: say so with reasons rather than invent a film
        thick_out = np.full((h, w), np.nan, dtype=np.float32)
        return ThicknessMap(
            thickness_nm=thick_out,
            confidence=np.zeros((h, w), dtype=np.float32),
            reasons=reasons,
            stats=uniformity(thick_out, mask=region_mask),
            recipe=recipe,
            source=photo.path,
            provenance={"software": f"fringemap {__version__}", "colour_table": table.key},
            warnings=("no film found: no pixel in the region of interest has a usable colour",),
        )
    g0 = float(np.percentile((lin_c @ _Y709)[valid_c], 99))
    g0 = g0 / float(np.percentile(y_tab, 99))
    e_chroma_full = encode(table.rgb * (0.4 / np.maximum(y_tab, 0.01))[:, None])
    e_chroma = e_chroma_full[::stride]
    gain = None
    passes = (
        INTENSITY_WEIGHT_CHROMA,
        INTENSITY_WEIGHT_CHROMA,
        INTENSITY_WEIGHT_FULL,
        INTENSITY_WEIGHT_FULL,
    )
    sel = None
    q_c = None
    # the faded end of the table (beyond the white-light range), judged with a nominal
    # noise for now: 1 % of full scale averaged over the coarse blocks
    faded_c = _faded_mask(
        table,
        e_tab,
        period,
        MeasureSettings.faded_chroma,
        0.01 / f,
        MeasureSettings.max_coarse_sigma * period,
    )
    t_faded = float(table.thickness_nm[np.argmax(faded_c)]) if faded_c.any() else np.inf
    # the first, chromaticity-led passes only need the gain's broad shape: half resolution
    f_half = 2 * f
    lin_h, frac_h = halve_block_mean(lin_c, frac_c)
    levels = {f: (lin_c, valid_c), f_half: (lin_h, frac_h >= 0.5)}
    full_lin_c, full_valid_c = lin_c, valid_c
    factors = [
        f_half if lam == INTENSITY_WEIGHT_CHROMA and valid_c.sum() > 4000 else f for lam in passes
    ]
    gain_c = np.full(levels[factors[0]][1].shape, g0, dtype=np.float64)
    for i, lam in enumerate(passes):
        say(f"gain and orders, pass {i + 1}/{len(passes)}")
        lin_c, valid_c = levels[factors[i]]
        hc, wc = valid_c.shape
        fi = factors[i]
        anchors_c = tuple(
            (min(wc - 1, int(x // fi)), min(hc - 1, int(y // fi)), t) for x, y, t in anchors
        )
        if (
            0 < i < len(passes) - 1
            and sel is not None
            and sel.region_size.size
            and sel.region_margin[int(np.argmax(sel.region_size))] > 50.0
        ):
            # passes that only refine the gain keep the main area's order from the pass
            # before (a soft anchor at its seed): order hypotheses are tested in the first
            # pass (chromaticity) and the last (full colour)
            main = int(np.argmax(sel.region_size))
            sy, sx = divmod(int(sel.region_seed[main]), sel.region.shape[1])
            ratio = factors[i - 1] / fi
            anchors_c = anchors_c + (
                (
                    min(wc - 1, int((sx + 0.5) * ratio)),
                    min(hc - 1, int((sy + 0.5) * ratio)),
                    float(sel.thickness_nm[sy, sx]),
                ),
            )
        if gain_c.shape != (hc, wc):
            gain_c = gain.evaluate((hc, wc)).astype(np.float64)
        if i == 0:
            # first pass: every colour scaled to one luminance, so the unknown exposure
            # cannot matter (chromaticity only); the gain field is learnt from its result
            q_c = encode(lin_c * (0.4 / np.maximum(lin_c @ _Y709, 1e-4))[..., None])
            e_pass, e_scan = e_chroma, e_chroma_full
        else:
            q_c = encode(lin_c / gain_c[..., None])
            e_pass, e_scan = e_coarse, e_tab
        cands = find_candidates(  # a ~4 nm scan, each minimum refined on the full table
            q_c[valid_c],
            e_scan,
            t0_nm=t0,
            step_nm=step,
            k=MeasureSettings.k,
            intensity_weight=lam,
            stride=2 * stride,
        )
        noise = max(float(np.median(cands.cost[:, 0])), 3 * 0.002**2)
        ct = np.full((hc, wc, MeasureSettings.k), np.nan)
        cc = np.full((hc, wc, MeasureSettings.k), np.inf)
        ct[valid_c] = cands.thickness_nm
        cc[valid_c] = cands.cost / noise
        _collapse_faded(ct, cc, t_faded)
        sel = select_orders(
            ct,
            cc,
            valid=valid_c,
            tau_nm=tau,
            max_jump_nm=max_jump,
            anchors=anchors_c,
            colours=np.nan_to_num(q_c),
            table_encoded=e_pass,
            t0_nm=t0,
            step_nm=step * stride,
            intensity_weight=lam,
            noise=noise,
        )
        if i == 0:
            sel_chroma = sel
        if i == len(passes) - 1:
            break
        samples, cc_model = _gain_samples(lin_c, sel.thickness_nm, table)
        # neutral colours say little about thickness (thin and faded films are both grey):
        # the gain is learnt from coloured pixels and carried smoothly to the grey ones
        chroma_t = np.interp(np.nan_to_num(sel.thickness_nm), table.thickness_nm, table.chroma)
        colourful = np.clip(chroma_t / 10.0, 0.02, 1.0)
        weights = np.where(
            valid_c, colourful * cc_model / (1.0 + np.nan_to_num(sel.cost, nan=1e3)), 0.0
        )
        gain = fit_gain_field(samples, weights)
        nxt = levels[factors[i + 1]][1].shape
        gain_c = gain.evaluate(nxt).astype(np.float64)
    coarse_noise = noise
    lin_c, valid_c = full_lin_c, full_valid_c
    hc, wc = valid_c.shape

    # ---- full resolution -----------------------------------------------------------
    say("full resolution")
    filled = fill_nearest(sel.thickness_nm)
    pred_c = np.nan_to_num(filled, nan=t0)
    thick, cost, edge = fullres_match(
        img,
        usable,
        code_lut=code_lut,
        predicted_coarse_nm=pred_c,
        gain_coarse=gain_c,
        factor=f,
        table_encoded=e_tab,
        t0_nm=t0,
        step_nm=step,
        window_nm=0.06 * period + 6,
        intensity_weight=INTENSITY_WEIGHT_FULL,
    )
    # the noise level at full resolution: robust, from a sample of the pixels that fit
    sample_c = cost[:: max(1, h // 300), :: max(1, w // 300)]
    sample_c = sample_c[np.isfinite(sample_c)]
    noise_full = max(float(np.median(sample_c)) if sample_c.size else 1e-4, 3 * 0.002**2)
    # pixels whose prediction was off (steps, scratches): search the whole table there.
    # A poor fit alone counts only where neighbours share it: an isolated pixel (noise,
    # a JPEG block, a speck of dust) cannot be a step, and no jump would be accepted there
    ys, xs = redo_pixels(cost, edge, MeasureSettings.off_model_factor * noise_full)
    n_redo = int(ys.size)
    if n_redo:
        g = interp_coarse(gain_c, ys, xs, (h, w), f)
        q = encode(linear_at(img, code_lut, ys, xs) / g[:, None])
        gc = find_candidates(  # a ~4 nm scan, each minimum refined on the full table
            q,
            e_tab,
            t0_nm=t0,
            step_nm=step,
            k=MeasureSettings.k,
            intensity_weight=INTENSITY_WEIGHT_FULL,
            stride=2 * stride,
        )
        p = interp_coarse(pred_c, ys, xs, (h, w), f)[:, None]
        score = gc.cost / noise_full + ((gc.thickness_nm - p) / (0.3 * period)) ** 2
        score = np.where(np.isfinite(score), score, np.inf)
        best = np.argmin(score, axis=1)
        rows = np.arange(ys.size)
        t_alt = gc.thickness_nm[rows, best]
        c_alt = gc.cost[rows, best]
        # an order jump away from the coarse map must fit clearly better than the local
        # match (a scratch does; a JPEG block or a speck of dust does not)
        far = np.abs(t_alt - p[:, 0]) > 0.5 * period
        better = c_alt < np.where(far, 0.5, 1.0) * cost[ys, xs]
        # ... and be shared by neighbours: a real step is wider than one isolated pixel
        edge[...] = False  # reused as working space
        support = neighbour_support(ys, xs, better & far, edge)
        better &= ~far | (support >= 3)  # itself and at least two neighbours
        thick[ys[better], xs[better]] = t_alt[better]
        cost[ys[better], xs[better]] = c_alt[better]

    # ---- reasons and confidence ----------------------------------------------------
    say("reasons")
    faded = _faded_mask(
        table,
        e_tab,
        period,
        MeasureSettings.faded_chroma,
        np.sqrt(coarse_noise / 3),
        MeasureSettings.max_coarse_sigma * period,
    )
    slope = np.sqrt(np.sum(np.gradient(e_tab, step, axis=0) ** 2, axis=1))
    thick_out, reasons, conf = classify(
        reasons=reasons,
        thickness_nm=thick,
        cost=cost,
        predicted_coarse_nm=pred_c,
        region_coarse=sel.region,
        factor=f,
        region_margin=sel.region_margin,
        region_size=sel.region_size,
        faded=faded,
        slope_per_nm=slope,
        t0_nm=t0,
        step_nm=step,
        t_faded_nm=t_faded,
        t_max_nm=float(table.thickness_nm[-1]),
        noise=noise_full,
        off_model_factor=MeasureSettings.off_model_factor,
    )
    # the full-resolution intermediates are no longer needed: free them before statistics
    # (keeps the peak memory of a 12-megapixel photo lower)
    del thick, cost, edge, usable
    gain_full_centre = float(gain.evaluate_at(np.array([h // 2]), np.array([w // 2]), (h, w))[0])
    gain_corner = float(gain.evaluate_at(np.array([0]), np.array([0]), (h, w))[0])

    warnings: list[str] = []
    n_sat_roi = n_saturated if whole else np.count_nonzero(saturated & roi_mask)
    sat_frac = n_sat_roi / (h * w)
    if sat_frac > 0.01:
        warnings.append(f"{100 * sat_frac:.1f} % of pixels are saturated: lower the exposure")
    stats = uniformity(thick_out, mask=region_mask)
    if stats.coverage < 0.01:
        inside = reasons[roi_mask]
        off = np.count_nonzero(inside == REASON_CODES["off-model"])
        far = np.count_nonzero(inside == REASON_CODES["beyond-range"])
        if max(off, far) > 0.5 * inside.size:
            what = "lie beyond the search range" if far > off else "fit no colour of this stack"
            warnings.append(
                f"nothing measured: most pixels {what}; check --film, --substrate, --light, "
                "--sensor and --range against the photo"
            )
        else:
            warnings.append("no film found: coverage is below 1 % of the region of interest")
    # how sure chromaticity alone is of the main area's order (exposure cannot help a
    # uniform film): the largest chroma-pass region's margin
    chroma_margin = (
        float(sel_chroma.region_margin[np.argmax(sel_chroma.region_size)])
        if sel_chroma.region_size.size
        else 0.0
    )
    big_regions = np.argsort(-sel.region_size)[:3]
    for r in big_regions:
        share = sel.region_size[r] / max(1, int(valid_c.sum()))
        margin_r = float(sel.region_margin[r])
        if r == big_regions[0]:
            margin_r = min(margin_r, chroma_margin)
        if share > 0.1 and not sel.region_anchored[r] and margin_r < 1.0 and stats.count_px:
            warnings.append(
                f"the fringe order of a film area covering {100 * share:.0f} % of the photo is "
                f"uncertain (order margin {margin_r:.2f}): another order fits almost as well; "
                "give an --anchor X,Y=NM of known thickness"
            )
    provenance = {
        "software": f"fringemap {__version__}",
        "colour_table": table.key,
        "matching_space": table.space,
        "coarse_factor_px": f,
        "exhaustive_search_px": n_redo,
        "gain": {
            "degree": gain.degree,
            "residual_rms": gain.residual_rms,
            "centre": gain_full_centre,
            "corner_to_centre": gain_corner / gain_full_centre,
        },
        "noise_rms_encoded": float(np.sqrt(noise_full / 3)),
        "coarse_noise_rms_encoded": float(np.sqrt(coarse_noise / 3)),
        "order_period_nm": float(period),
        "order_marks_nm": [
            float(v) for v in order_marks_nm(stack, angle_deg=angle, max_nm=table.thickness_nm[-1])
        ],
        "regions": [
            {
                "size_coarse_px": int(sel.region_size[r]),
                "order_margin": float(min(sel.region_margin[r], 1e6)),
                "anchored": bool(sel.region_anchored[r]),
            }
            for r in big_regions
        ],
        "chromaticity_order_margin": min(chroma_margin, 1e6),
        "anchors": [list(a) for a in anchors],
        "seconds": round(time.perf_counter() - t_start, 3),
    }
    return ThicknessMap(
        thickness_nm=thick_out,
        confidence=conf,
        reasons=reasons,
        stats=stats,
        recipe=recipe,
        source=photo.path,
        provenance=provenance,
        warnings=tuple(warnings),
    )
