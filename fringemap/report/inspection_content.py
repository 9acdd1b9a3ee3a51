"""What the inspection report says, independent of how it is drawn (HTML or PDF).

:func:`fringemap.report.inspection.build_content` turns a measured map, its
:class:`Analysis` and the report figures into a :class:`ReportContent`: a header with the verdict, the
caution, key figures, and sections made of paragraphs, tables and figures.
The HTML page (:mod:`fringemap.report.inspection_html`) and the PDF
(:mod:`fringemap.report.inspection_pdf`) both render this one description,
so the two always carry the same content.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .analysis import FORMULAS, REQUIRED_IN_SPEC, Analysis
from .inspection_figures import ReportFigure

__all__ = [
    "CAUTION",
    "Paragraph",
    "Table",
    "FigureRow",
    "KeyFigure",
    "Section",
    "ReportContent",
    "num",
    "sig",
    "pct",
    "pc",
    "with_unit",
    "count",
    "stats_table",
    "site_tables",
    "wedge_table",
    "profile_table",
]

#: The caution printed in every report (and in the README).
CAUTION = (
    "These thicknesses are estimated optically, from the colours in a photograph; they are "
    "not a certified measurement. Check them against a calibrated instrument before you "
    "accept or reject any part on their strength, and follow your site's quality procedures "
    "and the local codes that apply. If the sample is lit by a laser or an ultraviolet lamp, "
    "keep to the usual eye-safety rules."
)


@dataclass(frozen=True)
class Paragraph:
    """A paragraph of plain text; ``style`` is ``"text"``, ``"note"`` (a highlighted remark)
    or ``"small"`` (a footnote to a table)."""

    text: str
    style: str = "text"


@dataclass(frozen=True)
class Table:
    """A table of text cells.

    ``formula_column`` is the index of a column of formulas (drawn smaller,
    in grey), ``align`` holds ``"l"`` or ``"r"`` per column.
    """

    title: str
    header: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    align: tuple[str, ...]
    formula_column: int | None = None
    note: str = ""


@dataclass(frozen=True)
class FigureRow:
    """One or two figures side by side."""

    figures: tuple[ReportFigure, ...]


@dataclass(frozen=True)
class KeyFigure:
    """A headline number: label, value with unit, and the formula or detail under it."""

    label: str
    value: str
    detail: str


@dataclass(frozen=True)
class Section:
    """A numbered section: a title and its blocks (Paragraph, Table or FigureRow)."""

    title: str
    blocks: tuple


@dataclass(frozen=True)
class ReportContent:
    """Everything the report shows, in order."""

    title: str
    sample: str
    generated: str
    software: str
    verdict: str
    verdict_reason: str
    spec_text: str
    problem: str | None
    warnings: tuple[str, ...]
    caution: str
    key_figures: tuple[KeyFigure, ...]
    sections: tuple[Section, ...]


# ------------------------------------------------------------------- formatting


def _ok(v) -> bool:
    return v is not None and not (isinstance(v, float) and not math.isfinite(v))


def num(v, digits: int = 1) -> str:
    """A number with ``digits`` decimals, or an em dash when missing (never "-0.0")."""
    if not _ok(v):
        return "\u2014"
    if abs(v) < 0.5 * 10.0**-digits:
        v = 0.0
    return f"{v:,.{digits}f}"


def sig(v, digits: int = 3) -> str:
    """A number to ``digits`` significant figures (small slopes and angles)."""
    if not _ok(v):
        return "\u2014"
    if v == 0 or abs(v) >= 10.0**digits:
        return num(v, 0)
    return f"{v:.{digits}g}"


def pct(share, digits: int = 2) -> str:
    """A share (0-1) as a percentage."""
    return f"{100.0 * share:.{digits}f} %" if _ok(share) else "\u2014"


def with_unit(text: str, unit: str, ok: bool = True) -> str:
    """``text unit``, or a bare dash when the value is missing."""
    return "\u2014" if (not ok or text == "\u2014") else f"{text} {unit}"


def count(n: int) -> str:
    return f"{n:,}"


# --------------------------------------------------------------------- sections


def stats_table(analysis: Analysis) -> Table:
    regions = analysis.regions
    spec = analysis.settings.spec
    rows: list[tuple[str, ...]] = []

    def row(label, values, formula=""):
        rows.append((label, *values, formula))

    st = [r.stats for r in regions]
    row("Measured / region pixels", [f"{count(s.count_px)} / {count(s.region_px)}" for s in st])
    row("Coverage", [pct(s.coverage, 1) for s in st], FORMULAS["coverage"])
    row("Mean (nm)", [num(s.mean_nm, 2) for s in st], FORMULAS["mean_nm"])
    row("Median (nm)", [num(s.median_nm, 2) for s in st], FORMULAS["median_nm"])
    row("Standard deviation σ (nm)", [num(s.std_nm, 2) for s in st], FORMULAS["std_nm"])
    row("Minimum / maximum (nm)", [f"{num(s.min_nm)} / {num(s.max_nm)}" for s in st])
    row("Range (nm)", [num(s.range_nm, 1) for s in st], FORMULAS["range_nm"])
    row(
        "P1 / P99 (nm)",
        [f"{num(s.p1_nm)} / {num(s.p99_nm)}" for s in st],
        "1st and 99th percentiles",
    )
    row(
        "P5 / P95 (nm)",
        [f"{num(s.p5_nm)} / {num(s.p95_nm)}" for s in st],
        "5th and 95th percentiles",
    )
    row("Coefficient of variation", [pc(s.cv_percent) for s in st], FORMULAS["cv_percent"])
    row(
        "Non-uniformity",
        [pc(s.nonuniformity_percent) for s in st],
        FORMULAS["nonuniformity_percent"],
    )
    row(
        "Robust non-uniformity",
        [pc(s.robust_nonuniformity_percent) for s in st],
        FORMULAS["robust_nonuniformity_percent"],
    )
    if spec is not None:
        row("In spec", [pct(s.in_spec_fraction) for s in st], FORMULAS["in_spec_fraction"])
        row(
            f"In spec ≥ {REQUIRED_IN_SPEC:.0%}",
            ["yes" if s.passed else ("no" if s.count_px else "\u2014") for s in st],
            f"target {spec.target_nm:g} nm, tol ±{spec.tol_nm:g} nm",
        )
    header = ("Quantity", *(r.label for r in regions), "Formula")
    align = ("l", *("r" for _ in regions), "l")
    note = "σ is the population standard deviation (divides by n). Percentiles by linear interpolation."
    return Table("", header, tuple(rows), align, formula_column=len(header) - 1, note=note)


def pc(v) -> str:
    return f"{v:.2f} %" if _ok(v) else "\u2014"


def site_tables(analysis: Analysis) -> list:
    sites = analysis.sites
    mm = analysis.mm_per_px
    spec = analysis.settings.spec
    d = sites.to_dict(mm)
    if mm:
        pos_head = ("x (mm)", "y (mm)", "r (mm)")
    else:
        pos_head = ("x (px)", "y (px)", "r (px)")
    header = ("Site", *pos_head, "Mean (nm)", "σ (nm)", "Pixels")
    if spec is not None:
        header += ("Δ target (nm)", "In spec")
    cx, cy = sites.centre_xy_px
    rows = []
    for r in d["sites"]:
        if mm:
            x, y = r["x_mm"], r["y_mm"]
        else:
            x, y = r["x_px"] - cx, r["y_px"] - cy
        cells = [str(r["site"]), num(x), num(y), num(math.hypot(x, y))]
        cells += [num(r["mean_nm"], 2), num(r["std_nm"], 2), count(r["count_px"])]
        if spec is not None:
            dev = None if r["mean_nm"] is None else r["mean_nm"] - spec.target_nm
            cells += [
                f"{dev:+.2f}" if dev is not None else "\u2014",
                {True: "yes", False: "no", None: "\u2014"}[r["in_spec"]],
            ]
        rows.append(tuple(cells))
    align = ("r",) * (len(header) - (1 if spec is not None else 0)) + (("c",) if spec else ())
    unit = "mm" if mm else "px"
    disc = f"{sites.disc_radius_px * mm:.2g} mm" if mm else f"{sites.disc_radius_px:.1f} px"
    summary = (
        f"{sites.measured_sites} of {sites.count} sites measured. Site means: mean "
        f"{num(sites.mean_nm, 2)} nm, σ {num(sites.std_nm, 2)} nm, range {num(sites.min_nm)}"
        f"\u2013{num(sites.max_nm)} nm, site non-uniformity {pc(sites.nonuniformity_percent)} "
        f"= {FORMULAS['site_nonuniformity_percent']}."
    )
    if not sites.measured_sites:
        summary = f"None of the {sites.count} sites has a measured pixel in its disc."
    note = (
        f"Each site reads the mean of the measured pixels within a disc of radius {disc} "
        f"({FORMULAS['site_mean_nm']}), inside the evaluation area. Positions in {unit} from the "
        "wafer centre, x right, y down; rings at equal angles from +x (see docs/statistics.md)."
    )
    blocks: list = [Paragraph(summary)]
    half = (len(rows) + 1) // 2 if len(rows) > 25 else len(rows)
    title = f"{sites.count}-site readings"
    blocks.append(Table(title, header, tuple(rows[:half]), align))
    if half < len(rows):  # long layouts in two halves, side by side where there is room
        blocks.append(Table(title + " (continued)", header, tuple(rows[half:]), align))
    blocks.append(Paragraph(note, "small"))
    return blocks


def wedge_table(analysis: Analysis) -> Table:
    p, g = analysis.plane, analysis.gradient
    arcsec = (
        p.wedge_angle_urad * 180.0 * 3600.0 / math.pi / 1e6 if _ok(p.wedge_angle_urad) else None
    )
    rows = (
        ("Fitted pixels", count(p.count_px), FORMULAS["plane"]),
        ("Slope along x, bx (nm/mm)", sig(p.slope_x_nm_per_mm), "least-squares coefficient"),
        ("Slope along y, by (nm/mm)", sig(p.slope_y_nm_per_mm), "least-squares coefficient"),
        ("Slope magnitude (nm/mm)", sig(p.magnitude_nm_per_mm), FORMULAS["magnitude_nm_per_mm"]),
        ("Direction of rise (°)", num(p.direction_deg, 1), FORMULAS["direction_deg"]),
        (
            "Wedge angle (µrad / arcsec)",
            f"{sig(p.wedge_angle_urad)} / {sig(arcsec)}",
            FORMULAS["wedge_angle_urad"],
        ),
        (
            "Residual RMS about the plane (nm)",
            num(p.residual_rms_nm, 2),
            FORMULAS["residual_rms_nm"],
        ),
        (
            "Local gradient: median / P95 (nm/mm)",
            f"{num(g.median_nm_per_mm, 2)} / {num(g.p95_nm_per_mm, 2)}",
            FORMULAS["local_gradient_nm_per_mm"],
        ),
        ("Local gradient: maximum (nm/mm)", num(g.max_nm_per_mm, 1), "largest pixel value (noisy)"),
    )
    return Table(
        "Plane fit, wedge and gradient (evaluation area)",
        ("Quantity", "Value", "Formula"),
        rows,
        ("l", "r", "l"),
        formula_column=2,
    )


def profile_table(analysis: Analysis) -> Table:
    mm = analysis.mm_per_px
    rows = []
    for p in analysis.profiles:
        s = p.summary(mm)
        length = f"{s['length_mm']:.2f} mm" if mm else f"{s['length_px']:.1f} px"
        rows.append(
            (
                p.name,
                f"{p.start_xy_px[0]:g}, {p.start_xy_px[1]:g}",
                f"{p.end_xy_px[0]:g}, {p.end_xy_px[1]:g}",
                length,
                pct(s["measured_fraction"], 1),
                num(s["mean_nm"], 2),
                f"{num(s['min_nm'])} \u2013 {num(s['max_nm'])}",
            )
        )
    return Table(
        "Profile summary",
        (
            "Line",
            "From x, y (px)",
            "To x, y (px)",
            "Length",
            "Measured",
            "Mean (nm)",
            "Min – max (nm)",
        ),
        tuple(rows),
        ("l", "r", "r", "r", "r", "r", "r"),
        note="Samples 1 px apart, bilinear; samples that lean mostly on unmeasured pixels are gaps.",
    )
