"""Film thickness from a narrowband fringe photo: phase, sign, order, one map.

:func:`measure_fringes` composes :mod:`~fringemap.fringes.phase` and
:mod:`~fringemap.fringes.unwrap` (wrapped and unwrapped phase of one or more
lines) with what fixes the two things the fringes cannot say on their own
(:mod:`~fringemap.fringes.reference`):

* the **sign**: intensity is even in the phase, so a dome and a dimple of the
  same shape give the same picture. Per region of connected fringes, in this
  order: two anchors of different thickness; ``thicker_at`` hints; the
  white-light colour map of the same scene; a single anchor plus the
  requirement that the film be nowhere thinner than zero; with the
  Fourier-transform method, one carrier gives every region the same sign;
  the several-line phase match;
* the **offset** (absolute thickness): an anchor in the region; the colour
  map (median difference over its confident pixels); or, with two or three
  lines, the fringe order whose thickness makes every line's phase agree
  within the lines' unambiguous range (synthetic wavelength).

Thickness from phase: ``Δt = Δφ λ / (4π n cos θ_film)``, with ``n cos θ_film
/ λ`` averaged over the band (:func:`~fringemap.fringes.source.fringe_wavenumber`).
"""

from __future__ import annotations

import time
import warnings
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from .. import __version__
from ..errors import FringemapWarning, MeasurementError, OptionError
from ..optics.stack import Stack
from ..result import REASON_CODES, ThicknessMap
from .phase import film_mask, fringe_channel, fringe_envelope, wrapped_phase
from .reference import (
    Region,
    apply_colour,
    apply_lines,
    model_offset,
    sign_from_anchors,
    sign_from_hints,
    sign_from_positivity,
    unambiguous_range_nm,
    value_at,
)
from .source import (
    CHANNELS,
    NarrowSource,
    VisibilityLimit,
    coherence_limit,
    fringe_wavenumber,
    narrow_source,
    parse_lines,
)
from .unwrap import refine_stationary, unwrap_coarse_to_fine

__all__ = ["FringeResult", "measure_fringes", "unambiguous_range_nm", "Settings"]


class Settings:
    """Tuning constants of :func:`measure_fringes` (documented defaults)."""

    #: local fringe visibility (U − L) / (U + L) below which a pixel has no usable fringes
    min_modulation = 0.08
    #: phase reliability (0-1) below which a pixel is left out of the unwrapping
    min_quality = 0.3
    #: a film must show at least this many fringes for its envelope to be found
    min_fringes = 1.5
    #: brightness (fraction of the 99.5th percentile) below which a pixel is not film
    film_level = 0.05
    #: half-width (px) of the dark bands inside a film that still count as film
    dark_band_px = 10
    #: mean line-phase mismatch (1 − cos) a chosen fringe order may have, and the
    #: margin by which it must beat the runner-up
    max_mismatch = 0.25
    min_margin = 0.05
    #: colour pixels used to fix a region: confidence at least this
    colour_confidence = 0.5
    #: regions below this fraction of the fringe area are left out without a warning
    quiet_region = 0.02


@dataclass(frozen=True)
class FringeResult:
    """The outcome of :func:`measure_fringes`.

    Attributes
    ----------
    map : ThicknessMap
        Thickness (nm), confidence, reasons, stats, provenance.
    limits : tuple of VisibilityLimit
        Where each line's fringes fade (same order as the lines).
    method : str
        ``"fourier"`` or ``"spiral"``.
    unambiguous_range_nm : float or None
        Thickness range the lines resolve without an anchor (None for one line).
    regions : tuple of dict
        Per region: pixels, sign and offset and where each came from.
    """

    map: ThicknessMap
    limits: tuple[VisibilityLimit, ...]
    method: str
    unambiguous_range_nm: float | None
    regions: tuple = field(default=(), repr=False)


# ------------------------------------------------------------------------------ helpers


def _parse_points(anchors, thicker_at, shape):
    from ..measure import parse_anchor
    from ..roi import parse_xy

    h, w = shape
    out_a = []
    for a in anchors:
        x, y, t = parse_anchor(a) if isinstance(a, str) else tuple(float(v) for v in a)
        if not (0 <= x <= w - 1 and 0 <= y <= h - 1):
            raise OptionError(
                f"anchor {x:g},{y:g} lies outside the {w}x{h} photo", where="--anchor"
            )
        out_a.append((x, y, t))
    out_h = []
    for p in thicker_at:
        x, y = parse_xy(p, "--thicker-at") if isinstance(p, str) else tuple(map(float, p))
        if not (0 <= x <= w - 1 and 0 <= y <= h - 1):
            raise OptionError(
                f"point {x:g},{y:g} lies outside the {w}x{h} photo", where="--thicker-at"
            )
        out_h.append((x, y))
    return out_a, out_h


def _default_recipe(stack: Stack, light_text: str, angle_deg: float):
    from ..recipe import Recipe

    try:
        return Recipe.from_dict(
            {
                "stack": {
                    "film": stack.film.name,
                    "substrate": stack.substrate.name,
                    "ambient": stack.ambient.name,
                },
                "light": {"source": light_text, "angle_deg": float(angle_deg)},
            }
        )
    except OptionError:
        return Recipe.from_dict({})


def measure_fringes(
    photo,
    *,
    stack: Stack,
    light: str | NarrowSource | Sequence[str | NarrowSource],
    angle_deg: float = 0.0,
    anchors: Sequence = (),
    thicker_at: Sequence = (),
    channel: str = "auto",
    colour_map: ThicknessMap | None = None,
    method: str = "auto",
    roi_mask: np.ndarray | None = None,
    thickness_range_nm: tuple[float, float] | None = None,
    visibility_fraction: float = 0.05,
    max_unwrap_pixels: int = 1_500_000,
    recipe=None,
) -> FringeResult:
    """Measure film thickness from a photo of narrowband interference fringes.

    Parameters
    ----------
    photo : Photo, str, Path or ndarray (H, W, 3)
        The fringe photo (float arrays are taken as linear).
    stack : Stack
        The film stack.
    light : str, NarrowSource, or a sequence of them
        One narrow source (``"589"``, ``"546/10"``, a CSV), or 2-3 lines each
        recorded in its own channel (a sequence, or ``"450/10,530/10"``; see
        :func:`~fringemap.fringes.source.parse_lines`).
    angle_deg : float
        Angle of incidence, degrees.
    anchors : sequence of ``"X,Y=NM"`` or (x_px, y_px, thickness_nm)
        Points of known thickness.
    thicker_at : sequence of ``"X,Y"`` or (x_px, y_px)
        Points where the film is thicker than its median over the connected
        region of fringes around them (a dome's top, a wedge's thick end).
    channel : {"auto", "r", "g", "b", "lum"}
        Channel read for a single source (see
        :func:`~fringemap.fringes.phase.fringe_channel`).
    colour_map : ThicknessMap, optional
        The white-light result (:func:`fringemap.measure.measure`) of a colour
        photo of the same scene, same pixel grid: fixes sign and offset per
        region where it is confident, and fills pixels without fringes.
    method : {"auto", "fourier", "spiral"}
        Wrapped-phase method (see :func:`~fringemap.fringes.phase.wrapped_phase`).
    roi_mask : ndarray of bool (H, W), optional
        Where to measure.
    thickness_range_nm : (float, float), optional
        Thicknesses searched when the lines alone fix a region's fringe order;
        default 0 to the lines' unambiguous range (or the fade-out limit).
    visibility_fraction : float
        Threshold of :func:`~fringemap.fringes.source.coherence_limit`.
    max_unwrap_pixels : int
        Largest image handed to the unwrapper (coarse-to-fine above it).
    recipe : Recipe, optional
        Recorded in the result (default: one describing ``stack`` and ``light``).

    Returns
    -------
    FringeResult

    Raises
    ------
    OptionError
        Bad light, channel, anchor or hint (off the photo, or not on fringes).
    MeasurementError
        No usable fringes, too few fringes for an envelope, or nothing that
        fixes the absolute thickness (no anchor, colour map or second line).
    """
    from ..io import Photo, photo_from_array, read_photo
    from ..stats import uniformity

    t_start = time.perf_counter()
    if isinstance(photo, str) or hasattr(photo, "__fspath__"):
        photo = read_photo(photo)
    elif isinstance(photo, np.ndarray):
        enc = "linear" if np.issubdtype(photo.dtype, np.floating) else "srgb"
        photo = photo_from_array(photo, encoding=enc)
    if not isinstance(photo, Photo):
        raise OptionError(
            f"expected a Photo, path or array, got {type(photo).__name__}", where="photo"
        )
    where = photo.path or "photo"
    h, w = photo.shape
    if isinstance(light, str) and "," in light:
        sources = parse_lines(light)
    elif isinstance(light, str | NarrowSource):
        sources = (narrow_source(light),)
    else:
        sources = tuple(narrow_source(s, where="--lines") for s in light)
        if not 1 <= len(sources) <= 3:
            raise OptionError(f"expected 1 to 3 lines, got {len(sources)}", where="--lines")
    multi = len(sources) > 1
    if multi and any(s.channel not in CHANNELS for s in sources):
        raise OptionError("each of several lines needs a channel (r, g or b)", where="--lines")
    anchors_xy, hints_xy = _parse_points(anchors, thicker_at, (h, w))
    roi = np.ones((h, w), bool) if roi_mask is None else np.asarray(roi_mask, bool)
    if roi.shape != (h, w):
        raise OptionError(f"region mask must have shape {(h, w)}, got {roi.shape}", where="--roi")
    if colour_map is not None and colour_map.shape != (h, w):
        raise OptionError(
            f"the colour photo is {colour_map.shape[1]}x{colour_map.shape[0]} px, the fringe "
            f"photo {w}x{h}: they must be taken from the same place",
            where="--colour-photo",
        )

    # ---- per line: intensity, envelope --------------------------------------------------
    caught: list[str] = []
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always", FringemapWarning)
        if multi:
            intens = [photo.linear[..., CHANNELS[s.channel]].astype(np.float64) for s in sources]
            used = [s.channel for s in sources]
        else:
            i0, u0 = fringe_channel(photo.linear, channel=channel)
            intens, used = [i0], [u0]
    caught += [str(r.message) for r in rec if issubclass(r.category, FringemapWarning)]
    usable = roi & ~photo.saturated
    film = film_mask(
        sum(intens), usable, level=Settings.film_level, dark_band_px=Settings.dark_band_px
    )
    if film.sum() < 0.01 * h * w:
        raise MeasurementError("no lit film found in the photo (too dark?)", where=where)
    envs = [fringe_envelope(i, mask=film) for i in intens]
    ks = np.array([fringe_wavenumber(stack, s, angle_deg=angle_deg) for s in sources])
    limits = tuple(
        coherence_limit(stack, s, angle_deg=angle_deg, fraction=visibility_fraction)
        for s in sources
    )
    fringy = film & np.logical_and.reduce([e.modulation >= Settings.min_modulation for e in envs])
    if fringy.sum() < 0.02 * film.sum():
        raise MeasurementError(
            "no fringes found on the film (too thick for this light's coherence, or flat): "
            "the fringe envelope cannot be found",
            where=where,
        )

    # ---- wrapped and unwrapped phase ----------------------------------------------------
    ref = int(np.argmax(ks))
    order = [ref] + [i for i in range(len(sources)) if i != ref]
    ph = wrapped_phase([envs[i].cos_phase for i in order], mask=fringy, method=method)
    phis = [None] * len(sources)
    for j, i in enumerate(order):
        phis[i] = ph.wrapped[j]
    valid = fringy & (ph.quality >= Settings.min_quality)
    un = unwrap_coarse_to_fine(phis[ref], mask=valid, max_pixels=max_unwrap_pixels)
    labels = un.labels
    if un.n_regions == 0:
        raise MeasurementError("no connected area of usable fringes on the film", where=where)
    period = 1 / (2 * ks[ref])
    phase_u, n_stationary = refine_stationary(un.phase, envs[ref].cos_phase, labels=labels)
    t_rel = phase_u / (4 * np.pi * ks[ref])
    fin = labels > 0
    span = float(np.ptp(np.percentile(phase_u[fin], [0.5, 99.5]))) / (2 * np.pi)
    if span < Settings.min_fringes:
        raise MeasurementError(
            f"too few fringes ({span:.1f}) to find the fringe envelope; at least "
            f"{Settings.min_fringes:g} are needed (thin films are measured in white light by "
            "`fringemap map`)",
            where=where,
        )

    # ---- anchors and hints on the fringe map ---------------------------------------------
    anchors_r: dict[int, list] = {}
    for x, y, t in anchors_xy:
        found = value_at(t_rel, labels, x, y)
        if found is None:
            raise OptionError(f"anchor {x:g},{y:g} is not on the film's fringes", where="--anchor")
        anchors_r.setdefault(found[1], []).append((found[0], t))
    hints_r: dict[int, list] = {}
    for x, y in hints_xy:
        found = value_at(t_rel, labels, x, y)
        if found is None:
            raise OptionError(
                f"point {x:g},{y:g} is not on the film's fringes", where="--thicker-at"
            )
        hints_r.setdefault(found[1], []).append(found[0])

    colour_t = None
    if colour_map is not None:
        colour_t = np.where(
            (colour_map.reasons == REASON_CODES["measured"])
            & (colour_map.confidence >= Settings.colour_confidence)
            & np.isfinite(colour_map.thickness_nm),
            colour_map.thickness_nm.astype(np.float64),
            np.nan,
        )

    # ---- sign and offset per region ------------------------------------------------------
    psis = np.zeros(len(sources))
    psis_from = "model"
    urange = unambiguous_range_nm(ks) if multi else None
    if multi:
        psis = np.array([model_offset(stack, s, angle_deg) for s in sources])
    lim = min(v.thickness_nm for v in limits)
    t_range = thickness_range_nm or (0.0, min(urange, lim) if multi else lim)
    flat_labels = labels.ravel()
    idx = np.argsort(flat_labels, kind="stable")
    bounds = np.searchsorted(flat_labels[idx], np.arange(1, un.n_regions + 2))
    regions = [Region(r, idx[bounds[r - 1] : bounds[r]]) for r in range(1, un.n_regions + 1)]
    flat_t = t_rel.ravel()
    flat_pu = phase_u.ravel()
    rng = np.random.default_rng(0)
    # anchored regions first: they calibrate the lines' phase offsets
    for reg in regions:
        a_r = anchors_r.get(reg.label, [])
        tr = flat_t[reg.pixels]
        sign_from_anchors(reg, a_r, period)
        if not reg.sign and reg.label in hints_r:
            sign_from_hints(reg, hints_r[reg.label], tr)
        if not reg.sign and colour_t is not None:
            apply_colour(reg, tr, colour_t.ravel()[reg.pixels], period)
        if not reg.sign and len(a_r) == 1:
            sign_from_positivity(reg, tr, a_r[0], period)
        if reg.sign and a_r:
            reg.offset = float(np.mean([t - reg.sign * v for v, t in a_r]))
            reg.offset_from = "anchor"
            res = max(abs(t - reg.sign * v - reg.offset) for v, t in a_r)
            if res > period / 4:
                reg.notes.append(f"anchors disagree with the fringe count by {res:.0f} nm")
    if ph.method == "fourier":  # one carrier, one sign for every region
        signs = [r.sign * r.pixels.size for r in regions if r.sign]
        if signs:
            glob = int(np.sign(np.sum(signs)))
            for reg in regions:
                if not reg.sign:
                    reg.sign, reg.sign_from = glob, "carrier"
    if multi:
        cal = [r for r in regions if r.offset_from == "anchor"]
        if cal:
            for i in range(len(sources)):
                d = np.concatenate(
                    [
                        r.sign * phis[i].ravel()[r.pixels]
                        - 4 * np.pi * ks[i] * (r.sign * flat_t[r.pixels] + r.offset)
                        for r in cal
                    ]
                )
                psis[i] = float(np.angle(np.mean(np.exp(1j * d))))
            psis_from = "anchors"
    for reg in regions:
        tr = flat_t[reg.pixels]
        if (
            reg.offset is None
            and colour_t is not None
            and reg.sign_from != "colour"
            and not any("colour" in n for n in reg.notes)
        ):
            apply_colour(reg, tr, colour_t.ravel()[reg.pixels], period)
        if reg.offset is None and multi:
            apply_lines(
                reg,
                flat_pu[reg.pixels],
                [p.ravel()[reg.pixels] for p in phis],
                ks,
                psis,
                ref,
                t_range,
                rng,
                max_mismatch=Settings.max_mismatch,
                min_margin=Settings.min_margin,
            )

    # ---- assemble ------------------------------------------------------------------------
    thick = np.full(h * w, np.nan)
    resolved = [r for r in regions if r.sign and r.offset is not None]
    for reg in resolved:
        thick[reg.pixels] = reg.sign * flat_t[reg.pixels] + reg.offset
    thick = thick.reshape(h, w)
    if not resolved:
        hint = (
            "give an --anchor X,Y=NM on the film"
            if not anchors_xy
            else "give a second --anchor, a --thicker-at X,Y point or a --colour-photo"
        )
        raise MeasurementError(
            f"the fringes alone do not fix the film's sign and absolute thickness: {hint}",
            where=where,
        )
    total_px = sum(r.pixels.size for r in regions)
    for reg in regions:
        if reg.pixels.size >= Settings.quiet_region * total_px:
            caught += [f"region {reg.label}: {note}" for note in reg.notes]
    unresolved = [r for r in regions if not (r.sign and r.offset is not None)]
    px = sum(r.pixels.size for r in unresolved)
    if px >= Settings.quiet_region * total_px:
        caught.append(
            f"{len(unresolved)} region(s) of fringes ({px} px) have no anchor or "
            "other reference: left unmeasured (ambiguous-order)"
        )

    reasons = np.full((h, w), REASON_CODES["ambiguous-order"], dtype=np.uint8)
    reasons[~film] = REASON_CODES["no-film"]
    reasons[film & ~fringy] = REASON_CODES["beyond-range"]
    reasons[photo.saturated] = REASON_CODES["saturated"]
    reasons[~roi] = REASON_CODES["outside-roi"]
    ok = np.isfinite(thick)
    for reg in resolved:
        below = float(np.mean(thick.ravel()[reg.pixels] < -period / 2))
        if below > 0.01:
            caught.append(
                f"region {reg.label}: {100 * below:.0f} % of it comes out thinner "
                f"than zero with the sign from {reg.sign_from}; check the anchors "
                "and --thicker-at points"
            )
    beyond = ok & (thick > lim)
    negative = ok & (thick < -period / 2)
    thick[beyond | negative] = np.nan
    reasons[beyond] = REASON_CODES["beyond-range"]
    reasons[negative] = REASON_CODES["off-model"]
    ok = np.isfinite(thick)
    reasons[ok] = REASON_CODES["measured"]
    mod = np.minimum.reduce([e.modulation for e in envs])
    confidence = np.where(ok, ph.quality * np.clip(mod / 0.3, 0, 1), 0.0)
    filled = 0
    if colour_t is not None:
        fill = ~ok & np.isfinite(colour_t) & roi
        thick[fill] = colour_t[fill]
        confidence[fill] = colour_map.confidence[fill]
        reasons[fill] = REASON_CODES["measured"]
        filled = int(fill.sum())
    thick[~roi] = np.nan
    confidence[~np.isfinite(thick)] = 0.0
    for msg in caught:
        warnings.warn(msg, FringemapWarning, stacklevel=2)
    light_text = ",".join(s.name if not multi else f"{s.channel}={s.name}" for s in sources)
    if recipe is None:
        recipe = _default_recipe(stack, light_text, angle_deg)
    stats = uniformity(thick, mask=roi)
    provenance = {
        "software": f"fringemap {__version__}",
        "mode": "fringes",
        "method": ph.method,
        "carrier_fraction": ph.carrier_fraction,
        "lines": [
            {
                "light": s.name,
                "channel": c,
                "centre_nm": s.centre_nm,
                "fwhm_nm": s.fwhm_nm,
                "fringe_period_nm": 1 / (2 * k),
                **v.to_dict(),
            }
            for s, c, k, v in zip(sources, used, ks, limits, strict=True)
        ],
        "reference_line": sources[ref].name,
        "line_phase_offsets_rad": psis.tolist() if multi else None,
        "line_phase_offsets_from": psis_from if multi else None,
        "unambiguous_range_nm": urange,
        "unwrap_factor": un.factor,
        "stationary_points_refitted": n_stationary,
        "regions": [r.record() for r in regions],
        "anchors": [list(a) for a in anchors_xy],
        "thicker_at": [list(p) for p in hints_xy],
        "colour_filled_px": filled if colour_map is not None else None,
        "elapsed_s": round(time.perf_counter() - t_start, 3),
    }
    result = ThicknessMap(
        thickness_nm=thick.astype(np.float32),
        confidence=confidence.astype(np.float32),
        reasons=reasons,
        stats=stats,
        recipe=recipe,
        source=photo.path,
        provenance=provenance,
        warnings=tuple(caught),
    )
    return FringeResult(result, limits, ph.method, urange, tuple(r.record() for r in regions))
