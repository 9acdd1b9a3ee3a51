"""Self-calibration: camera gains (and optionally a 3×3 matrix) from the film photo itself.

Without a chart or a reference area, the film's own colours still say a lot
about the camera: every measured pixel should show the colour table's colour
at its measured thickness, up to brightness.

First, a global search: the red and blue gains (relative to green) are
searched on a grid over ``gain_limits`` for the ones that bring the photo's
colours closest to the table's colour curve (each pixel's nearest colour
over the whole table, chromaticity-led distance of :mod:`fringemap.matching.space`).
This does not depend on a first, possibly wrong, thickness map, and it is
needed: alternating fits started from a large white-balance error move only a
few per cent per round, because the thicknesses measured with the wrong
balance adapt to it. Then self-calibration alternates

(a) :func:`fringemap.measure.measure` with the current correction, on a
    downsampled copy of the photo (``work_side`` px) for speed;
(b) a robust fit of per-channel gains ``g`` with ``g ⊙ p_i ∝ c(t_i)``
    between the photo's linear colours ``p_i`` at measured pixels and the
    table's colours at their thicknesses (each pixel's brightness free,
    weighted by the pipeline's confidence, Tukey-biweight reweighting,
    at most ``samples`` random pixels;
    :func:`~fringemap.calibration.methods.gains_up_to_scale`),

until the gains change by less than ``tolerance``. Safeguards: gains stay
within ``gain_limits``, at most ``max_rounds`` rounds, and a round whose
residual (the pipeline's median colour-match residual, encoded units) grows is
undone. With ``matrix=True`` a full 3×3 matrix is then fitted the same way
(:func:`~fringemap.calibration.methods.matrix_up_to_scale`) and kept only if
it lowers the residual.

The alternation minimises the same colour residual the pipeline minimises
(thickness given the correction, correction given the thickness), so it
converges to a local optimum. Per-channel gains remove a white-balance error;
they cannot remove a camera's spectral mismatch with the table's detector
(use a chart, or the camera's own curves as ``camera.sensor``). The full 3×3
fit is poorly determined by one film's colours and is rarely kept.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import cv2
import numpy as np

from ..errors import OptionError
from ..matching.candidates import find_candidates
from ..matching.space import INTENSITY_WEIGHT_CHROMA, encode
from .common import as_photo
from .methods import gains_up_to_scale, matrix_up_to_scale
from .model import CameraModel

__all__ = ["self_calibrate", "SelfCalibration", "SelfCalibrationReport"]


@dataclass(frozen=True)
class SelfCalibrationReport:
    """How a self-calibration went.

    Attributes
    ----------
    converged : bool
        The last change was below the tolerance.
    rounds : int
        Fit-and-measure rounds done.
    residual_before, residual_after : float
        The pipeline's median colour-match residual (rms, encoded units 0-1)
        without and with the correction.
    coverage_before, coverage_after : float
        Fraction of the region of interest measured, without and with it.
    reverted : bool
        A round made the residual grow and was undone.
    history : tuple of dict
        Per round: ``stage`` ("gains" or "matrix"), ``matrix`` (3×3 list),
        ``residual``, ``coverage``, ``change``, ``kept``.
    work_shape : (int, int)
        Size (H, W) of the downsampled photo the rounds measured.
    """

    converged: bool
    rounds: int
    residual_before: float
    residual_after: float
    coverage_before: float
    coverage_after: float
    reverted: bool
    history: tuple[dict, ...]
    work_shape: tuple[int, int]

    def summary(self) -> str:
        """One line for logs and result warnings."""
        state = "converged" if self.converged else "did not converge"
        rev = ", a growing round was undone" if self.reverted else ""
        return (
            f"self-calibration {state} in {self.rounds} rounds{rev}: colour residual "
            f"{self.residual_before:.4f} -> {self.residual_after:.4f}, coverage "
            f"{100 * self.coverage_before:.1f} -> {100 * self.coverage_after:.1f} %"
        )


@dataclass(frozen=True)
class SelfCalibration:
    """The correction found by :func:`self_calibrate` and its report."""

    model: CameraModel
    report: SelfCalibrationReport


def _downsampled(photo, roi_mask, anchors, work_side: int):
    """A smaller Photo (area averages), its ROI mask and anchors, and the factor."""
    from ..io import Photo

    h, w = photo.shape
    f = max(1, int(np.ceil(max(h, w) / work_side)))
    if f == 1:
        return photo, roi_mask, anchors, 1
    size = (w // f, h // f)
    lin = cv2.resize(photo.linear[: size[1] * f, : size[0] * f], size, interpolation=cv2.INTER_AREA)
    sat = cv2.resize(
        photo.saturated[: size[1] * f, : size[0] * f].astype(np.float32),
        size,
        interpolation=cv2.INTER_AREA,
    )
    small = Photo(
        linear=np.ascontiguousarray(lin, dtype=np.float32),
        path=photo.path,
        bit_depth=photo.bit_depth,
        encoding="linear",
        saturated=sat > 0,
    )
    roi = (
        cv2.resize(
            roi_mask[: size[1] * f, : size[0] * f].astype(np.float32),
            size,
            interpolation=cv2.INTER_AREA,
        )
        > 0.5
    )
    anc = tuple(
        (min(size[0] - 1, (x + 0.5) / f - 0.5), min(size[1] - 1, (y + 0.5) / f - 0.5), t)
        for x, y, t in anchors
    )
    return small, roi, anc, f


def _samples(photo, result, table, samples: int, rng):
    """Photo colours (N, 3), table colours (N, 3) and weights (N,) at measured pixels."""
    t = result.thickness_nm.ravel()
    conf = result.confidence.ravel()
    idx = np.flatnonzero(np.isfinite(t) & (conf > 0))
    if idx.size > samples:
        idx = rng.choice(idx, samples, replace=False)
    p = photo.linear.reshape(-1, 3)[idx].astype(np.float64)
    c = table.colour_at(t[idx])
    return p, c, conf[idx].astype(np.float64)


def _usable_colours(photo, result, samples: int, rng) -> np.ndarray:
    """Linear colours (N, 3) of pixels the pipeline could judge (film, not dark or clipped)."""
    from ..result import REASON_CODES

    skip = [REASON_CODES[k] for k in ("outside-roi", "no-film", "saturated", "too-dark")]
    idx = np.flatnonzero(~np.isin(result.reasons.ravel(), skip))
    if idx.size > samples:
        idx = rng.choice(idx, samples, replace=False)
    return photo.linear.reshape(-1, 3)[idx].astype(np.float64)


def _curve_distance(p, gains, e_tab, step, y_tab99) -> float:
    """Mean distance (encoded, truncated at 0.1) of the corrected colours to the table's curve."""
    q = p * gains
    lum = q @ np.array([0.2126, 0.7152, 0.0722])
    q = q * (y_tab99 / max(float(np.percentile(lum, 99)), 1e-12))
    cand = find_candidates(
        encode(q), e_tab, t0_nm=0.0, step_nm=step, k=1, intensity_weight=INTENSITY_WEIGHT_CHROMA
    )
    return float(np.mean(np.sqrt(np.clip(cand.cost[:, 0], 0.0, 0.01))))


def _search_gains(p, table, lo_g: float, hi_g: float) -> np.ndarray:
    """Gains (3,) bringing colours ``p`` (N, 3) closest to the table's curve: a 2-D grid search.

    The red and blue gains relative to green are searched on a 9 × 9
    logarithmic grid over the allowed range, then three times on 5 × 5 grids
    of half the previous spacing around the best. Each pixel's nearest table
    colour is found over the whole table (on a ~4 nm grid), so the search does
    not depend on any earlier thickness estimate.
    """
    stride = max(1, int(round(4.0 / table.step_nm)))
    e_tab = encode(table.rgb)[::stride]
    y99 = float(np.percentile(table.rgb @ np.array([0.2126, 0.7152, 0.0722]), 99))
    lo, hi = np.log(lo_g), np.log(hi_g)
    axis = np.linspace(lo, hi, 9)
    spacing = axis[1] - axis[0]
    best = (np.inf, np.zeros(2))
    centre = np.zeros(2)
    for level in range(4):
        offsets = axis if level == 0 else np.arange(-2, 3) * spacing
        for a in offsets:
            for b in offsets:
                lr, lb = (a, b) if level == 0 else (centre[0] + a, centre[1] + b)
                if not (lo <= lr <= hi and lo <= lb <= hi):
                    continue
                g = np.exp([lr, 0.0, lb])
                d = _curve_distance(p, g / g.mean(), e_tab, table.step_nm * stride, y99)
                if d < best[0]:
                    best = (d, np.array([lr, lb]))
        centre, spacing = best[1], spacing / 2
    g = np.exp([best[1][0], 0.0, best[1][1]])
    return np.clip(g / g.mean(), lo_g, hi_g)


def _robust_fit(p, c, w, fit, apply):
    """``fit`` with three rounds of Tukey-biweight reweighting on the angular residual."""
    rob = np.ones_like(w)
    est = fit(p, c, weights=w)
    for _ in range(3):
        q = apply(est, p)
        qn = q / np.maximum(np.linalg.norm(q, axis=1, keepdims=True), 1e-12)
        cn = c / np.maximum(np.linalg.norm(c, axis=1, keepdims=True), 1e-12)
        r = np.linalg.norm(qn - np.sum(qn * cn, axis=1, keepdims=True) * cn, axis=1)
        scale = 4.685 * 1.4826 * max(float(np.median(r)), 1e-6)
        rob = np.clip(1 - (r / scale) ** 2, 0, None) ** 2
        est = fit(p, c, weights=w * rob)
    return est


def self_calibrate(
    photo,
    recipe,
    *,
    table=None,
    roi_mask: np.ndarray | None = None,
    anchors: tuple[tuple[float, float, float], ...] = (),
    matrix: bool = False,
    max_rounds: int = 5,
    tolerance: float = 0.002,
    gain_limits: tuple[float, float] = (0.5, 2.0),
    work_side: int = 400,
    samples: int = 20000,
    seed: int = 0,
    progress: Callable[[str], None] | None = None,
) -> SelfCalibration:
    """Find a camera correction from the film photo itself (see the module notes).

    Parameters
    ----------
    photo : Photo, path or ndarray
        The film photo.
    recipe : Recipe
        How to measure (stack, light, sensor, ROI, anchors).
    table : ColourTable, optional
        A prebuilt colour table for ``recipe``.
    roi_mask : ndarray of bool (H, W), optional
        Where to measure (default: the recipe's ROI).
    anchors : tuple of (x_px, y_px, thickness_nm)
        Points of known thickness (default: the recipe's).
    matrix : bool
        After the gains, also try a full 3×3 matrix.
    max_rounds : int
        Most fit-and-measure rounds per stage (>= 1).
    tolerance : float
        Stop when no gain (matrix entry) changes by more than this fraction (0.002 = 0.2 %).
    gain_limits : (float, float)
        Allowed range of each gain (mean-1 normalised).
    work_side : int
        Long side (px) of the downsampled photo the rounds measure.
    samples : int
        Most pixels used per fit.
    seed : int
        Seed of the pixel subsampling.
    progress : callable, optional
        Called with a short stage name.

    Returns
    -------
    SelfCalibration
        ``model`` (method ``"self-gains"`` or ``"self-matrix"``) and ``report``.
    """
    from ..measure import measure, parse_anchor
    from ..roi import parse_roi
    from ..roi import roi_mask as make_roi_mask

    if int(max_rounds) < 1:
        raise OptionError(f"expected max_rounds >= 1, got {max_rounds!r}", where="max_rounds")
    lo_g, hi_g = (float(v) for v in gain_limits)
    if not 0 < lo_g < 1 < hi_g:
        raise OptionError(
            f"expected limits 0 < low < 1 < high, got {gain_limits!r}", where="gain_limits"
        )
    say = progress or (lambda stage: None)
    photo = as_photo(photo)
    if table is None:
        say("colour table")
        table = recipe.colour_table()
    if roi_mask is None:
        roi_mask = make_roi_mask(parse_roi(recipe.get("measure", "roi")), photo.shape)
    if not anchors:
        anchors = tuple(parse_anchor(a) for a in recipe.get("measure", "anchors"))
    small, roi, anc, _ = _downsampled(
        photo, np.asarray(roi_mask, dtype=bool), anchors, int(work_side)
    )
    rng = np.random.default_rng(seed)

    def run(m):
        model = None if m is None else CameraModel(method="self-gains", matrix=m)
        return measure(small, recipe, table=table, roi_mask=roi, anchors=anc, camera=model)

    def residual(res):
        return float(res.provenance.get("noise_rms_encoded", np.inf)), res.coverage

    say("self-calibration: first measurement")
    res = run(None)
    r0, cov0 = residual(res)
    best_m, best_r, best_cov, best_res = np.eye(3), r0, cov0, res
    history, rounds, converged, reverted = [], 0, False, False

    def gains_fit(p, c, weights):
        return np.diag(np.clip(gains_up_to_scale(p, c, weights=weights), lo_g, hi_g))

    def matrix_fit(p, c, weights):
        return matrix_up_to_scale(p, c, weights=weights)

    # round 0: a global search of the gains, independent of the first map's thicknesses
    p0 = _usable_colours(small, res, min(int(samples), 1500), rng)
    if p0.shape[0] >= 50:
        rounds += 1
        say("self-calibration: gain search")
        m = np.diag(_search_gains(p0, table, lo_g, hi_g))
        res_s = run(m)
        r, cov = residual(res_s)
        kept = r <= best_r
        history.append(
            {
                "stage": "search",
                "matrix": m.tolist(),
                "residual": r,
                "coverage": cov,
                "change": float(np.max(np.abs(m - best_m))),
                "kept": kept,
            }
        )
        if kept:
            best_m, best_r, best_cov, best_res = m, r, cov, res_s

    stages = [("gains", gains_fit)] + ([("matrix", matrix_fit)] if matrix else [])
    for stage, fit in stages:
        current = best_m
        for _ in range(int(max_rounds)):
            rounds += 1
            say(f"self-calibration: {stage}, round {rounds}")
            p, c, w = _samples(small, best_res, table, int(samples), rng)
            if p.shape[0] < 50:
                break
            m = _robust_fit(p, c, w, fit, lambda est, x: x @ est.T)
            change = float(np.max(np.abs(m - current)) / max(np.max(np.abs(current)), 1e-12))
            res = run(m)
            r, cov = residual(res)
            kept = r <= best_r
            history.append(
                {
                    "stage": stage,
                    "matrix": m.tolist(),
                    "residual": r,
                    "coverage": cov,
                    "change": change,
                    "kept": kept,
                }
            )
            if not kept:
                reverted = True
                break
            best_m, best_r, best_cov, best_res, current = m, r, cov, res, m
            if change < tolerance:
                converged = True
                break
    kind = "self-gains" if np.all(best_m[~np.eye(3, dtype=bool)] == 0) else "self-matrix"
    report = SelfCalibrationReport(
        converged=converged,
        rounds=rounds,
        residual_before=r0,
        residual_after=best_r,
        coverage_before=cov0,
        coverage_after=best_cov,
        reverted=reverted,
        history=tuple(history),
        work_shape=small.shape,
    )
    model = CameraModel(
        method=kind,
        matrix=best_m,
        terms="linear",
        light=recipe.light().name,
        sensor=recipe.detector().name,
        source=photo.path,
        notes=report.summary(),
    )
    return SelfCalibration(model=model, report=report)


@dataclass(frozen=True)
class PreparedCamera:
    """The correction to measure one photo with, what to record about it, and soft problems."""

    model: CameraModel | None
    provenance: dict | None
    warnings: tuple[str, ...] = ()


def camera_for_photo(camera, photo, recipe, *, table=None) -> PreparedCamera:
    """Resolve ``camera`` for one photo: self-calibrate for ``"self"``, check a model's light.

    Parameters
    ----------
    camera : CameraModel, SelfCalibrationRequest or None
        As :func:`fringemap.calibration.load_camera_model` returns it.
    photo : Photo
        The photo about to be measured.
    recipe : Recipe
        Its recipe.
    table : ColourTable, optional
        A prebuilt colour table for ``recipe``.

    Returns
    -------
    PreparedCamera
        A model mismatching the recipe's light or sensor gives a warning (also
        emitted as a :class:`~fringemap.errors.FringemapWarning`); a
        self-calibration that did not converge gives one too.
    """
    from .model import SelfCalibrationRequest, recipe_mismatches

    notes: list[str] = []
    extra: dict = {}
    if isinstance(camera, SelfCalibrationRequest):
        sc = self_calibrate(photo, recipe, table=table)
        camera = sc.model
        rep = sc.report
        extra = {
            "self_calibration": {
                "converged": rep.converged,
                "rounds": rep.rounds,
                "reverted": rep.reverted,
                "residual_before": rep.residual_before,
                "residual_after": rep.residual_after,
                "coverage_before": rep.coverage_before,
                "coverage_after": rep.coverage_after,
            }
        }
        if not rep.converged:
            notes.append(rep.summary())
    elif camera is not None:
        notes += recipe_mismatches(camera, recipe)
    if camera is None:
        return PreparedCamera(None, None, tuple(notes))
    info = {
        "method": camera.method,
        "terms": camera.terms,
        "matrix": camera.matrix.tolist(),
        "light": camera.light,
        "sensor": camera.sensor,
        "source": camera.source,
        "created": camera.created,
        **extra,
    }
    return PreparedCamera(camera, info, tuple(notes))
