"""Camera calibration from a photo of the standard 24-patch colour chart.

Steps:

1. the user gives the four outer corners of the patch grid, clockwise from
   the top-left (the corner of *dark skin*); a homography maps the grid into
   the photo and each patch's central half (half its side each way) is
   sampled, with a trimmed mean per channel;
2. the reference colours are the chart's spectral reflectances (colour-science
   ``SDS_COLOURCHECKERS["ISO 17321-1"]``) rendered through the *same*
   renderer as the colour table (the recipe's light and sensor), so the
   correction maps the camera's linear RGB into the table's matching space;
3. the 3×3 least-squares matrix (Cheung et al. 2004 [1]_) and the degree-2
   root-polynomial correction (Finlayson, Mackiewicz & Hurlbert 2015 [2]_)
   are fitted; the one with the smaller mean leave-one-out CIEDE2000 error
   is kept (``method="auto"``).

Checks: corners outside the photo, not clockwise or not convex
(:class:`~fringemap.errors.OptionError` at ``--corners``); a patch whose
colour varies too much (no chart there) or a neutral row that does not run
from light to dark (wrong corner order) is an error naming the patch; up to
two clipped patches are left out with a warning, more is an error.

References
----------
.. [1] V. Cheung, S. Westland, D. Connah & C. Ripamonti, Coloration Technology
   120(1), 19-25 (2004), doi:10.1111/j.1478-4408.2004.tb00201.x.
.. [2] G. D. Finlayson, M. Mackiewicz & A. Hurlbert, IEEE Trans. Image
   Process. 24(5), 1460-1470 (2015), doi:10.1109/TIP.2015.2405336.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import cv2
import numpy as np

from ..errors import FringemapWarning, OptionError
from ..matching.space import encode
from .common import MatchingSpace, as_photo, chart_reflectances, trimmed_mean
from .methods import CORRECTION_METHODS, TERMS, check_method, expand_terms, fit_correction
from .model import CameraModel

__all__ = [
    "ROWS",
    "COLUMNS",
    "GAP_RATIO",
    "parse_corners",
    "check_corners",
    "sample_patches",
    "PatchSamples",
    "ChartCalibration",
    "calibrate_from_chart",
]

ROWS, COLUMNS = 4, 6
#: width of the dark gap between patches, as a fraction of a patch's side
GAP_RATIO = 0.15
#: robust spread (encoded units, 0-1) above which a patch is not one flat colour
MAX_PATCH_SPREAD = 0.06
#: fraction of a patch's samples that may be clipped before it counts as clipped
MAX_CLIPPED_FRACTION = 0.02
#: clipped patches that may be left out (with a warning) before it is an error
MAX_EXCLUDED = 2
#: smallest patch side (px) the corners may describe
MIN_PATCH_PX = 8
_NEUTRALS = slice(18, 24)  # white 9.5 ... black 2
_CHART_METHODS = ("cheung2004", "finlayson2015")


def parse_corners(text: str) -> np.ndarray:
    """``X1,Y1,...,X4,Y4`` (px) → (4, 2) array: top-left, top-right, bottom-right, bottom-left."""
    try:
        v = [float(x) for x in str(text).replace(";", ",").split(",")]
    except ValueError:
        raise OptionError(
            f"expected 8 numbers X1,Y1,...,X4,Y4 (pixels), got {text!r}", where="--corners"
        ) from None
    if len(v) != 8 or not np.all(np.isfinite(v)):
        raise OptionError(
            f"expected 8 finite numbers X1,Y1,...,X4,Y4 (pixels), got {len(v)}: {text!r}",
            where="--corners",
        )
    return np.array(v).reshape(4, 2)


def check_corners(corners, shape: tuple[int, int]) -> np.ndarray:
    """Validate the grid's corners (4, 2) (x, y px) for a photo of ``shape`` (H, W).

    They must lie inside the photo, run clockwise on screen from the
    top-left and form a convex quadrilateral with patches >= MIN_PATCH_PX wide.
    """
    c = np.asarray(corners, dtype=np.float64)
    if c.shape != (4, 2) or not np.all(np.isfinite(c)):
        raise OptionError(f"expected 4 (x, y) corners, got shape {c.shape}", where="--corners")
    h, w = shape
    for i, (x, y) in enumerate(c):
        if not (0 <= x <= w - 1 and 0 <= y <= h - 1):
            raise OptionError(
                f"corner {i + 1} ({x:g},{y:g}) lies outside the {w}x{h} photo", where="--corners"
            )
    edges = np.roll(c, -1, axis=0) - c
    cross = (
        edges[:, 0] * np.roll(edges, -1, axis=0)[:, 1]
        - edges[:, 1] * np.roll(edges, -1, axis=0)[:, 0]
    )
    if np.all(cross < 0):
        raise OptionError(
            "corners run counter-clockwise: give top-left (dark skin), top-right, bottom-right, "
            "bottom-left",
            where="--corners",
        )
    if not np.all(cross > 0):
        raise OptionError(
            "corners do not form a convex quadrilateral (crossed or concave): give top-left "
            "(dark skin), top-right, bottom-right, bottom-left",
            where="--corners",
        )
    side = min(
        (np.linalg.norm(edges[0]) + np.linalg.norm(edges[2])) / 2 / (COLUMNS * (1 + GAP_RATIO)),
        (np.linalg.norm(edges[1]) + np.linalg.norm(edges[3])) / 2 / (ROWS * (1 + GAP_RATIO)),
    )
    if side < MIN_PATCH_PX:
        raise OptionError(
            f"the chart is too small: patches are ~{side:.1f} px wide, at least {MIN_PATCH_PX} "
            "px are needed",
            where="--corners",
        )
    return c


def _grid_to_image(corners: np.ndarray) -> np.ndarray:
    """Homography (3, 3) from grid coordinates (u, v) in [0, 1]² to image (x, y) px."""
    src = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], dtype=np.float32)
    return cv2.getPerspectiveTransform(src, corners.astype(np.float32)).astype(np.float64)


def _patch_centres() -> tuple[np.ndarray, float, float]:
    """Patch centres (24, 2) in grid coordinates, and a patch's size (du, dv) there."""
    du = 1.0 / (COLUMNS + (COLUMNS - 1) * GAP_RATIO)
    dv = 1.0 / (ROWS + (ROWS - 1) * GAP_RATIO)
    r, c = np.divmod(np.arange(ROWS * COLUMNS), COLUMNS)
    centres = np.stack([(c * (1 + GAP_RATIO) + 0.5) * du, (r * (1 + GAP_RATIO) + 0.5) * dv], 1)
    return centres, du, dv


@dataclass(frozen=True, eq=False)
class PatchSamples:
    """Robust colours of the 24 patches in a photo.

    Attributes
    ----------
    names : tuple of str
        Patch names, from dark skin.
    linear : ndarray of shape (24, 3)
        Trimmed-mean linear RGB (20 % cut at each end, per channel).
    spread : ndarray of shape (24,)
        Robust spread (interquartile range / 1.349, largest channel) in encoded units.
    clipped : ndarray of shape (24,)
        Fraction of samples with a clipped channel.
    outline : ndarray of shape (24, 4, 2)
        The sampled area of each patch in the photo (x, y px), for drawing.
    """

    names: tuple[str, ...]
    linear: np.ndarray
    spread: np.ndarray
    clipped: np.ndarray
    outline: np.ndarray


def sample_patches(photo, corners) -> PatchSamples:
    """Sample the central half of each patch of the chart with grid corners ``corners``.

    Parameters
    ----------
    photo : Photo, path or ndarray
        The chart photo.
    corners : ndarray of shape (4, 2) or str
        Outer corners of the patch grid (x, y px), clockwise from the top-left.
    """
    photo = as_photo(photo)
    if isinstance(corners, str):
        corners = parse_corners(corners)
    h, w = photo.shape
    corners = check_corners(corners, (h, w))
    hmg = _grid_to_image(corners)
    centres, du, dv = _patch_centres()
    top = (np.linalg.norm(corners[1] - corners[0]) + np.linalg.norm(corners[2] - corners[3])) / 2
    n = int(np.clip(round(0.5 * du * top), 3, 40))
    off = (np.arange(n) + 0.5) / n - 0.5  # -0.5..0.5 across the sampled half
    gu, gv = np.meshgrid(off * 0.5 * du, off * 0.5 * dv)
    uv = centres[:, None, :] + np.stack([gu.ravel(), gv.ravel()], 1)[None]  # (24, n², 2)
    box = np.array([[-1, -1], [1, -1], [1, 1], [-1, 1]]) * 0.25 * np.array([du, dv])
    outline_uv = centres[:, None, :] + box[None]

    def to_image(pts):
        hom = np.concatenate([pts, np.ones(pts.shape[:-1] + (1,))], -1) @ hmg.T
        return hom[..., :2] / hom[..., 2:3]

    xy = to_image(uv)
    xi = np.clip(np.rint(xy[..., 0]).astype(int), 0, w - 1)
    yi = np.clip(np.rint(xy[..., 1]).astype(int), 0, h - 1)
    values = photo.linear[yi, xi].astype(np.float64)  # (24, n², 3)
    enc = encode(values)
    q1, q3 = np.percentile(enc, [25, 75], axis=1)
    names, _ = chart_reflectances()
    return PatchSamples(
        names=names,
        linear=trimmed_mean(values, axis=1),
        spread=np.max((q3 - q1) / 1.349, axis=-1),
        clipped=photo.saturated[yi, xi].mean(axis=1),
        outline=to_image(outline_uv),
    )


@dataclass(frozen=True, eq=False)
class ChartCalibration:
    """The outcome of a chart calibration.

    Attributes
    ----------
    model : CameraModel
        The chosen correction.
    samples : PatchSamples
        The patches as measured.
    reference : ndarray of shape (24, 3)
        The patches' colours in the matching space.
    corrected : ndarray of shape (24, 3)
        The measured colours after the correction, at the chart photo's exposure.
    delta_e : ndarray of shape (24,)
        CIEDE2000 between ``corrected`` and ``reference`` per patch.
    used : ndarray of bool, shape (24,)
        Patches the fit used (False: clipped and left out).
    leave_one_out : dict of str to ndarray (24,)
        Leave-one-out CIEDE2000 per patch for each method tried (NaN where unused).
    space : MatchingSpace
        The matching space (light and sensor).
    warnings : tuple of str
        Soft problems (left-out patches).
    """

    model: CameraModel
    samples: PatchSamples
    reference: np.ndarray
    corrected: np.ndarray
    delta_e: np.ndarray
    used: np.ndarray
    leave_one_out: dict
    space: MatchingSpace = field(repr=False)
    warnings: tuple[str, ...] = ()


def _check_patches(s: PatchSamples) -> np.ndarray:
    """Raise for patches without a chart; return the mask of usable (unclipped) patches."""
    for i in range(ROWS * COLUMNS):
        if s.spread[i] > MAX_PATCH_SPREAD and s.clipped[i] <= MAX_CLIPPED_FRACTION:
            raise OptionError(
                f"patch {i + 1} ({s.names[i]}) is not one flat colour (spread "
                f"{s.spread[i]:.3f}, expected <= {MAX_PATCH_SPREAD}): is the chart there? check "
                "the corners",
                where="--corners",
            )
    used = s.clipped <= MAX_CLIPPED_FRACTION
    lum = s.linear.sum(axis=1)
    neutral = np.arange(ROWS * COLUMNS)[_NEUTRALS]
    ok = neutral[used[neutral]]
    if ok.size >= 2 and (np.any(np.diff(lum[ok]) >= 0) or lum[ok[0]] < 2 * lum[ok[-1]]):
        raise OptionError(
            f"patches {neutral[0] + 1}-{neutral[-1] + 1} ({s.names[neutral[0]]} ... "
            f"{s.names[neutral[-1]]}) do not run from light to dark: the corners are probably "
            "in the wrong order (top-left = dark skin, then clockwise)",
            where="--corners",
        )
    return used


def _fit(measured, reference, method, space, objective):
    """The method's least-squares fit, refined to minimise CIEDE2000 if ``objective`` says so."""
    matrix, terms = fit_correction(measured, reference, method=method)
    if objective == "delta-e":
        from scipy.optimize import least_squares

        x = expand_terms(measured, terms)
        ref_lab = space.lab(reference)

        def residuals(v):
            return space.delta_e_lab(x @ v.reshape(3, -1).T, ref_lab)

        sol = least_squares(
            residuals, matrix.ravel(), method="lm", ftol=1e-6, xtol=1e-6, max_nfev=60
        )
        if np.all(np.isfinite(sol.x)) and sol.cost <= 0.5 * np.sum(residuals(matrix.ravel()) ** 2):
            matrix = sol.x.reshape(3, -1)
    return CameraModel(method=method, matrix=matrix, terms=terms)


def _leave_one_out(measured, reference, used, method, space, objective) -> np.ndarray:
    out = np.full(measured.shape[0], np.nan)
    idx = np.flatnonzero(used)
    for k in idx:
        rest = idx[idx != k]
        m = _fit(measured[rest], reference[rest], method, space, objective)
        out[k] = space.delta_e(m.apply(measured[k]), reference[k])
    return out


def _choose(loo: dict) -> str:
    """The simplest method whose mean leave-one-out error is within one standard error of the best.

    The "one-standard-error rule" of model selection (common practice, e.g.
    Hastie, Tibshirani & Friedman, *The Elements of Statistical Learning*,
    2nd ed., §7.10): the paired per-patch differences give the standard error.
    """
    names = sorted(loo, key=lambda m: TERMS[CORRECTION_METHODS[m].terms])  # simplest first
    best = min(names, key=lambda m: float(np.nanmean(loo[m])))
    for m in names:
        d = loo[m] - loo[best]
        d = d[np.isfinite(d)]
        se = float(np.std(d, ddof=1) / np.sqrt(d.size)) if d.size > 1 else 0.0
        if float(np.mean(d)) <= se:
            return m
    return best  # pragma: no cover - best is always within 0 of itself


def calibrate_from_chart(
    photo,
    *,
    corners,
    light,
    sensor,
    method: str = "auto",
    objective: str = "delta-e",
    source: str | None = None,
) -> ChartCalibration:
    """Fit a camera correction from a photo of the 24-patch chart.

    Parameters
    ----------
    photo : Photo, path or ndarray
        The chart photo, taken with the camera settings and light of the film photos.
    corners : ndarray (4, 2) or str
        Outer corners of the patch grid (x, y px), clockwise from the top-left
        (dark skin): top-left, top-right, bottom-right, bottom-left.
    light : str or Light
        The light the chart was photographed under (the recipe's light).
    sensor : str or Detector
        The colour table's detector (the recipe's ``camera.sensor``): the
        correction maps into its matching space.
    method : {"auto", "cheung2004", "finlayson2015"}
        ``"auto"`` compares the methods' leave-one-out ΔE2000 and keeps the
        simplest one within one standard error of the best (see :func:`_choose`).
    objective : {"delta-e", "rgb"}
        ``"rgb"``: the methods' linear least squares in the matching space, as
        published; ``"delta-e"`` (default): that solution refined to minimise
        the patches' CIEDE2000 errors (Levenberg-Marquardt).
    source : str, optional
        Recorded as the model's source (default: the photo's path).

    Returns
    -------
    ChartCalibration
    """
    if method != "auto" and method not in _CHART_METHODS:
        check_method(method)  # names the registry's choices for unknown names
        raise OptionError(
            f"expected auto or one of {', '.join(_CHART_METHODS)}, got {method!r}", where="--method"
        )
    if objective not in ("delta-e", "rgb"):
        raise OptionError(
            f"expected objective delta-e or rgb, got {objective!r}", where="objective"
        )
    photo = as_photo(photo)
    space = MatchingSpace(light, sensor)
    s = sample_patches(photo, corners)
    used = _check_patches(s)
    notes, soft = [], []
    if (~used).sum() > MAX_EXCLUDED:
        bad = ", ".join(f"{i + 1} ({s.names[i]})" for i in np.flatnonzero(~used))
        raise OptionError(
            f"{(~used).sum()} patches are clipped: {bad}; at most {MAX_EXCLUDED} may be, "
            "lower the exposure",
            where=photo.path or "photo",
        )
    for i in np.flatnonzero(~used):
        text = f"patch {i + 1} ({s.names[i]}) is clipped and was left out of the fit"
        soft.append(text)
        notes.append(text)
        warnings.warn(text, FringemapWarning, stacklevel=2)
    _, spectra = chart_reflectances()
    reference = space.rgb(spectra)
    candidates = _CHART_METHODS if method == "auto" else (method,)
    # leave-one-out of the closed-form fits (the refinement would cost 24 optimisations each)
    loo = {m: _leave_one_out(s.linear, reference, used, m, space, "rgb") for m in candidates}
    chosen = _choose(loo)
    fit = _fit(s.linear[used], reference[used], chosen, space, objective)
    corrected = fit.apply(s.linear)
    de = space.delta_e(corrected, reference)
    # scale the correction so a neutral grey keeps its brightness (the photo's exposure
    # is not the chart's; the pipeline estimates the overall gain itself)
    neutral = np.zeros(ROWS * COLUMNS, dtype=bool)
    neutral[_NEUTRALS] = True
    keep = neutral & used
    scale = s.linear[keep].sum() / corrected[keep].sum()
    label = CORRECTION_METHODS[chosen].label
    if objective == "delta-e":
        label += ", refined to minimise dE2000"
    notes.insert(0, f"{label}; scaled by {scale:.4f} to keep a neutral grey's brightness")
    model = CameraModel(
        method=chosen,
        matrix=fit.matrix * scale,
        terms=fit.terms,
        light=space.light.name,
        sensor=space.detector.name,
        source=source if source is not None else photo.path,
        mean_delta_e=float(de[used].mean()),
        max_delta_e=float(de[used].max()),
        per_patch=tuple((n, float(d)) for n, d, u in zip(s.names, de, used, strict=True) if u),
        leave_one_out={m: float(np.nanmean(v)) for m, v in loo.items()},
        notes="; ".join(notes),
    )
    return ChartCalibration(
        model=model,
        samples=s,
        reference=reference,
        corrected=corrected,
        delta_e=de,
        used=used,
        leave_one_out=loo,
        space=space,
        warnings=tuple(soft),
    )
