"""The analysis of a thickness map: statistics per region, verdict, sites, profiles, wedge.

:func:`analyse` turns a measured :class:`~fringemap.result.ThicknessMap` and
the ``[report]`` settings of a recipe into an :class:`Analysis`, written into
``<stem>.stats.json`` (key ``"analysis"``) and shown in the report. Every
formula is in :data:`FORMULAS` and ``docs/statistics.md``.

Regions
-------
* ``roi``: the region of interest the photo was measured in (every pixel
  whose reason is not ``outside-roi``);
* ``evaluation``: the ROI less a band of ``edge_exclusion_mm`` along its edge
  (for a circle ROI: the circle of radius ``R - exclusion``; otherwise every
  ROI pixel farther than the exclusion from the nearest pixel outside it).
  Only present when the exclusion is > 0; otherwise the ROI is evaluated;
* ``R1``, ``R2``, ...: extra regions (``report.regions``), each intersected
  with the ROI.

The specification, the verdict, the sites, the plane fit and the gradient
use the evaluation area.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .._maps import json_value
from ..errors import OptionError
from ..geometry import PlaneFit, Profile, plane_fit, profile, thickness_gradient
from ..result import REASON_CODES, ThicknessMap
from ..roi import CircleRoi, edge_exclusion_mask, roi_mask
from ..sites import SITE_LAYOUTS, SiteTable, site_pattern, site_readings
from ..stats import UniformityStats, uniformity
from .settings import ReportSettings

__all__ = [
    "REQUIRED_IN_SPEC",
    "REQUIRED_COVERAGE",
    "SITE_DISC_MM",
    "SITE_DISC_SHARE",
    "FORMULAS",
    "RegionResult",
    "SiteResult",
    "ProfileResult",
    "GradientSummary",
    "Analysis",
    "analyse",
    "optional_output_paths",
]

#: share of the measured pixels of the evaluation area that must be in spec to pass
REQUIRED_IN_SPEC = 0.99
#: share of the evaluation area that must be measured for a pass to be declared
REQUIRED_COVERAGE = 0.90
#: radius of the disc averaged at each site when the scale is known, mm
SITE_DISC_MM = 2.0
#: radius of the site disc without a scale, as a share of the wafer radius
SITE_DISC_SHARE = 0.02
#: smallest site disc radius, px
SITE_DISC_MIN_PX = 2.0

#: the formula of each reported number (plain text; t = measured thickness, nm)
FORMULAS: dict[str, str] = {
    "coverage": "measured pixels / pixels in the region",
    "mean_nm": "mean = Σt / n",
    "median_nm": "P50 (middle value)",
    "std_nm": "σ = √(Σ(t − mean)² / n)",
    "range_nm": "max − min",
    "cv_percent": "CV = σ / mean × 100 %",
    "nonuniformity_percent": "(max − min) / (2 · mean) × 100 %",
    "robust_nonuniformity_percent": "(P99 − P1) / (2 · mean) × 100 %",
    "in_spec_fraction": "share of measured pixels with |t − target| ≤ tol",
    "verdict": (
        f"pass: ≥ {REQUIRED_IN_SPEC:.0%} of measured pixels in spec and "
        f"≥ {REQUIRED_COVERAGE:.0%} of the area measured; fail: < {REQUIRED_IN_SPEC:.0%} "
        "in spec; otherwise not judged"
    ),
    "site_mean_nm": "mean of the pixels within the site disc",
    "site_nonuniformity_percent": "(max − min) / (2 · mean) × 100 % of the site means",
    "plane": "t ≈ a + bx · x + by · y, least squares over measured pixels (x, y in mm)",
    "magnitude_nm_per_mm": "|∇t| = √(bx² + by²)",
    "direction_deg": "atan2(by, bx), from +x towards +y (image y points down)",
    "wedge_angle_urad": "θ = atan(|∇t| · 10⁻⁶) (1 nm/mm = 10⁻⁶ rad)",
    "residual_rms_nm": "√(mean((t − plane)²))",
    "local_gradient_nm_per_mm": "√(∂t/∂x² + ∂t/∂y²), central differences × px/mm",
}


@dataclass(frozen=True)
class RegionResult:
    """Statistics of one region: ``name`` (roi, evaluation, R1...), a description and the mask."""

    name: str
    label: str
    stats: UniformityStats
    mask: np.ndarray = field(compare=False, repr=False)

    def to_dict(self) -> dict:
        """JSON-ready: name, label and every statistic (units in the key names)."""
        return {"name": self.name, "label": self.label, **self.stats.to_dict()}


@dataclass(frozen=True)
class SiteResult:
    """Readings at the sites of a round wafer.

    ``centre_xy_px``, ``radius_px`` describe the wafer (the circle ROI),
    ``usable_radius_px = radius_px - edge exclusion``; ``table`` holds each
    site's disc mean; ``in_spec`` is per site (None without a spec). The
    summary numbers are over the measured site means.
    """

    count: int
    centre_xy_px: tuple[float, float]
    radius_px: float
    usable_radius_px: float
    disc_radius_px: float
    table: SiteTable
    in_spec: tuple[bool | None, ...]
    mean_nm: float
    std_nm: float
    min_nm: float
    max_nm: float
    nonuniformity_percent: float
    measured_sites: int

    def to_dict(self, mm_per_px: float | None = None) -> dict:
        """JSON-ready; positions also in mm from the wafer centre when a scale is known."""
        rows = []
        cx, cy = self.centre_xy_px
        for row, ok in zip(self.table.to_rows(), self.in_spec, strict=True):
            if mm_per_px is not None:
                row["x_mm"] = round((row["x_px"] - cx) * mm_per_px, 9)
                row["y_mm"] = round((row["y_px"] - cy) * mm_per_px, 9)
            row["in_spec"] = ok
            rows.append(row)
        return {
            "count": self.count,
            "layout_rings": [list(ring) for ring in SITE_LAYOUTS[self.count]],
            "centre_xy_px": list(self.centre_xy_px),
            "radius_px": self.radius_px,
            "usable_radius_px": self.usable_radius_px,
            "disc_radius_px": self.disc_radius_px,
            "disc_radius_mm": None if mm_per_px is None else self.disc_radius_px * mm_per_px,
            "mean_nm": json_value(self.mean_nm),
            "std_nm": json_value(self.std_nm),
            "min_nm": json_value(self.min_nm),
            "max_nm": json_value(self.max_nm),
            "range_nm": json_value(self.max_nm - self.min_nm),
            "nonuniformity_percent": json_value(self.nonuniformity_percent),
            "measured_sites": self.measured_sites,
            "sites": rows,
        }


@dataclass(frozen=True)
class ProfileResult:
    """One line profile, named P1, P2, ... in the order given."""

    name: str
    start_xy_px: tuple[float, float]
    end_xy_px: tuple[float, float]
    profile: Profile

    def summary(self, mm_per_px: float | None = None) -> dict:
        """JSON-ready: end points, length, samples and thickness summary (nm)."""
        t = self.profile.thickness_nm
        ok = np.isfinite(t)
        length = float(self.profile.distance_px[-1])
        return {
            "name": self.name,
            "start_xy_px": list(self.start_xy_px),
            "end_xy_px": list(self.end_xy_px),
            "length_px": length,
            "length_mm": None if mm_per_px is None else length * mm_per_px,
            "samples": int(t.size),
            "measured_fraction": float(ok.mean()),
            "mean_nm": float(t[ok].mean()) if ok.any() else None,
            "min_nm": float(t[ok].min()) if ok.any() else None,
            "max_nm": float(t[ok].max()) if ok.any() else None,
        }


@dataclass(frozen=True)
class GradientSummary:
    """Local thickness slope magnitude over the evaluation area, nm/mm."""

    count_px: int
    mean_nm_per_mm: float
    median_nm_per_mm: float
    p95_nm_per_mm: float
    max_nm_per_mm: float

    def to_dict(self) -> dict:
        """JSON-ready (NaN becomes None)."""
        return {k: json_value(v) for k, v in self.__dict__.items()}


@dataclass(frozen=True)
class Analysis:
    """Everything computed from a thickness map for the statistics file and the report.

    Attributes
    ----------
    settings : ReportSettings
        The parsed ``[report]`` settings.
    regions : tuple of RegionResult
        ``roi``, then ``evaluation`` (with an edge exclusion), then R1, R2...
    evaluation : RegionResult
        The region judged against the spec.
    verdict : str
        ``"pass"``, ``"fail"``, ``"not judged"`` or ``"no spec"``.
    verdict_reason : str
        One sentence saying why.
    sites : SiteResult or None
    profiles : tuple of ProfileResult
    plane : PlaneFit or None
        Over the evaluation area; None without a scale.
    gradient : GradientSummary or None
        None without a scale.
    notes : tuple of str
        What could not be computed and why.
    """

    settings: ReportSettings
    regions: tuple[RegionResult, ...]
    evaluation: RegionResult
    verdict: str
    verdict_reason: str
    sites: SiteResult | None
    profiles: tuple[ProfileResult, ...]
    plane: PlaneFit | None
    gradient: GradientSummary | None
    notes: tuple[str, ...]

    @property
    def mm_per_px(self) -> float | None:
        """Pixel size in mm, or None without a scale."""
        return None if self.settings.scale is None else self.settings.scale.mm_per_px

    def to_dict(self) -> dict:
        """The ``"analysis"`` entry of ``<stem>.stats.json`` (units in key names)."""
        s = self.settings
        plane = None
        if self.plane is not None:
            plane = self.plane.to_dict()
            urad = self.plane.wedge_angle_urad
            plane["wedge_angle_arcsec"] = json_value(urad * 180.0 * 3600.0 / math.pi / 1e6)
        return {
            "settings": {
                "roi": s.roi_text,
                "spec": None if s.spec is None else f"{s.spec.target_nm:g}±{s.spec.tol_nm:g}",
                "spec_target_nm": None if s.spec is None else s.spec.target_nm,
                "spec_tol_nm": None if s.spec is None else s.spec.tol_nm,
                "required_in_spec_fraction": REQUIRED_IN_SPEC,
                "required_coverage_fraction": REQUIRED_COVERAGE,
                "scale_px_per_mm": None if s.scale is None else s.scale.px_per_mm,
                "scale_source": s.scale_source or None,
                "scale_points": s.scale_points or None,
                "edge_exclusion_mm": s.edge_exclusion_mm,
                "edge_exclusion_px": s.edge_exclusion_px,
                "sites": s.sites,
                "profiles": [[list(a), list(b)] for a, b in s.profiles],
                "regions": [text for _, text, _ in s.regions],
            },
            "verdict": self.verdict,
            "verdict_reason": self.verdict_reason,
            "evaluation_region": self.evaluation.name,
            "regions": [r.to_dict() for r in self.regions],
            "sites": None if self.sites is None else self.sites.to_dict(self.mm_per_px),
            "plane_fit": plane,
            "gradient": None if self.gradient is None else self.gradient.to_dict(),
            "profiles": [p.summary(self.mm_per_px) for p in self.profiles],
            "notes": list(self.notes),
            "formulas": dict(FORMULAS),
        }


# ------------------------------------------------------------------------ analysis


def _evaluation_mask(settings: ReportSettings, roi: np.ndarray) -> np.ndarray:
    excl = settings.edge_exclusion_px
    if excl <= 0:
        return roi
    if isinstance(settings.roi, CircleRoi):
        c = settings.roi
        shrunk = CircleRoi(c.cx_px, c.cy_px, c.r_px - excl)
        try:
            return roi & roi_mask(shrunk, roi.shape)
        except OptionError:  # the shrunk circle lies off the image
            return np.zeros_like(roi)
    if not roi.any():
        return roi
    return edge_exclusion_mask(roi, exclusion_px=excl)


def _verdict(settings: ReportSettings, stats: UniformityStats) -> tuple[str, str]:
    if settings.spec is None:
        return "no spec", "no specification was given (--spec TARGET±TOL)"
    if stats.count_px == 0:
        return "not judged", "nothing was measured in the evaluation area"
    share = stats.in_spec_fraction
    if share < REQUIRED_IN_SPEC:
        return "fail", (
            f"{share:.2%} of the measured pixels are in spec; "
            f"at least {REQUIRED_IN_SPEC:.0%} are required"
        )
    if stats.coverage < REQUIRED_COVERAGE:
        return "not judged", (
            f"only {stats.coverage:.1%} of the evaluation area was measured; "
            f"at least {REQUIRED_COVERAGE:.0%} is needed to pass"
        )
    return "pass", (
        f"{share:.2%} of the measured pixels are in spec (≥ {REQUIRED_IN_SPEC:.0%}) "
        f"over {stats.coverage:.1%} of the evaluation area (≥ {REQUIRED_COVERAGE:.0%})"
    )


def _sites(result, settings: ReportSettings, evaluation: np.ndarray) -> SiteResult:
    c = settings.roi
    excl = settings.edge_exclusion_px
    if settings.scale is not None:
        disc = SITE_DISC_MM * settings.scale.px_per_mm
    else:
        disc = SITE_DISC_SHARE * c.r_px
    disc = max(disc, SITE_DISC_MIN_PX)
    xy = site_pattern(
        settings.sites, center_xy_px=(c.cx_px, c.cy_px), radius_px=c.r_px, edge_exclusion_px=excl
    )
    table = site_readings(result.thickness_nm, xy, disc_radius_px=disc, mask=evaluation)
    means = np.array(table.mean_nm, dtype=np.float64)
    ok = np.isfinite(means)
    spec = settings.spec
    in_spec = tuple(
        None
        if spec is None or not math.isfinite(m)
        else bool(abs(m - spec.target_nm) <= spec.tol_nm)
        for m in table.mean_nm
    )
    nan = math.nan
    if ok.any():
        vals = means[ok]
        mean, lo, hi = float(vals.mean()), float(vals.min()), float(vals.max())
        std = float(vals.std())
        nonu = (hi - lo) / (2.0 * mean) * 100.0 if mean != 0 else nan
    else:
        mean = std = lo = hi = nonu = nan
    return SiteResult(
        count=settings.sites,
        centre_xy_px=(float(c.cx_px), float(c.cy_px)),
        radius_px=float(c.r_px),
        usable_radius_px=float(c.r_px - excl),
        disc_radius_px=float(disc),
        table=table,
        in_spec=in_spec,
        mean_nm=mean,
        std_nm=std,
        min_nm=lo,
        max_nm=hi,
        nonuniformity_percent=nonu,
        measured_sites=int(ok.sum()),
    )


def _gradient(result, settings: ReportSettings, evaluation: np.ndarray) -> GradientSummary:
    gx, gy = thickness_gradient(result.thickness_nm, scale=settings.scale)
    mag = np.hypot(gx, gy)[evaluation]
    mag = mag[np.isfinite(mag)]
    if not mag.size:
        return GradientSummary(0, math.nan, math.nan, math.nan, math.nan)
    p50, p95 = (float(v) for v in np.percentile(mag, [50, 95]))
    return GradientSummary(int(mag.size), float(mag.mean()), p50, p95, float(mag.max()))


def analyse(result: ThicknessMap, recipe) -> Analysis:
    """Statistics, verdict, sites, profiles and wedge of a measured map.

    Parameters
    ----------
    result : ThicknessMap
        The measured map (thickness in nm, NaN unmeasured).
    recipe : Recipe
        Its ``[report]`` section says what to compute; ``measure.roi`` names
        the region (the mask itself comes from the reason codes).

    Returns
    -------
    Analysis

    Raises
    ------
    OptionError
        Settings that do not fit the map (profile off the image, extra
        region with no pixel on it), naming the option.
    """
    settings = ReportSettings.from_recipe(recipe)
    settings.check_image(result.shape)
    t = result.thickness_nm
    roi = result.reasons != REASON_CODES["outside-roi"]
    spec = settings.spec
    stats = uniformity(t, mask=roi, spec=spec, required_fraction=REQUIRED_IN_SPEC)
    regions = [RegionResult("roi", f"ROI {settings.roi_text}", stats, roi)]
    evaluation_mask = _evaluation_mask(settings, roi)
    if settings.edge_exclusion_mm > 0:
        label = f"ROI less {settings.edge_exclusion_mm:g} mm edge exclusion"
        stats = uniformity(t, mask=evaluation_mask, spec=spec, required_fraction=REQUIRED_IN_SPEC)
        regions.append(RegionResult("evaluation", label, stats, evaluation_mask))
    evaluation = regions[-1]
    for name, text, region in settings.regions:
        mask = roi_mask(region, result.shape) & roi
        stats = uniformity(t, mask=mask, spec=spec, required_fraction=REQUIRED_IN_SPEC)
        regions.append(RegionResult(name, f"{name} {text}", stats, mask))
    verdict, reason = _verdict(settings, evaluation.stats)
    notes = []
    sites = None
    if settings.sites is not None:
        sites = _sites(result, settings, evaluation.mask)
    plane = gradient = None
    if settings.scale is not None:
        plane = plane_fit(t, scale=settings.scale, mask=evaluation.mask)
        gradient = _gradient(result, settings, evaluation.mask)
        if plane.count_px < 3 or not math.isfinite(plane.slope_x_nm_per_mm):
            notes.append("plane fit: too few measured pixels (or all on one line)")
    else:
        notes.append(
            "plane fit, wedge angle and gradients need a scale (--scale or --scale-points)"
        )
    profiles = tuple(
        ProfileResult(f"P{i}", a, b, profile(t, result.confidence, a, b))
        for i, (a, b) in enumerate(settings.profiles, start=1)
    )
    if evaluation.stats.count_px == 0:
        notes.insert(0, "nothing was measured in the evaluation area: statistics are empty")
    return Analysis(
        settings=settings,
        regions=tuple(regions),
        evaluation=evaluation,
        verdict=verdict,
        verdict_reason=reason,
        sites=sites,
        profiles=profiles,
        plane=plane,
        gradient=gradient,
        notes=tuple(notes),
    )


# ------------------------------------------------------------------------- outputs


def optional_output_paths(
    settings: ReportSettings, out_dir, stem: str, *, include_report: bool = True
) -> dict[str, Path]:
    """The files ``map`` writes besides the five standard ones, by kind.

    ``sites`` (``<stem>.sites.csv``) with sites; ``profiles_csv`` and
    ``profiles_png`` with profiles; ``report_html`` and ``report_pdf`` when
    the report is asked for in the recipe and ``include_report`` is true.
    """
    out = Path(out_dir)
    paths = {}
    if settings.sites is not None:
        paths["sites"] = out / f"{stem}.sites.csv"
    if settings.profiles:
        paths["profiles_csv"] = out / f"{stem}.profiles.csv"
        paths["profiles_png"] = out / f"{stem}.profiles.png"
    if settings.write_report and include_report:
        paths["report_html"] = out / f"{stem}.report.html"
        paths["report_pdf"] = out / f"{stem}.report.pdf"
    return paths
