"""The inspection report of one photo: ``<stem>.report.html`` and ``<stem>.report.pdf``.

:func:`write_report` analyses the measured map (:mod:`fringemap.report.analysis`),
draws the figures once (:mod:`fringemap.report.inspection_figures`), describes
the content once (:mod:`fringemap.report.inspection_content`) and renders it
twice: a single self-contained HTML page (images embedded, inline style, no
script, no network) and an A4 PDF with the same content. Both files are
written all or nothing.

An empty measurement (nothing measured in the evaluation area) still gives a
report: the statistics are shown as dashes and a box states the problem and
the most common reasons.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
from pathlib import Path

from .. import __version__
from ..result import ThicknessMap
from .analysis import Analysis
from .inspection_content import (
    CAUTION,
    FigureRow,
    KeyFigure,
    Paragraph,
    ReportContent,
    Section,
    count,
    num,
    pc,
    pct,
    profile_table,
    sig,
    site_tables,
    stats_table,
    wedge_table,
    with_unit,
)
from .inspection_figures import ReportFigure
from .inspection_setup import problem_text, provenance_table, reason_table, setup_table

__all__ = ["write_report", "report_paths", "build_content"]


def report_paths(out_dir: str | Path, stem: str) -> dict[str, Path]:
    """The paths :func:`write_report` writes, by kind (``report_html``, ``report_pdf``)."""
    out = Path(out_dir)
    return {"report_html": out / f"{stem}.report.html", "report_pdf": out / f"{stem}.report.pdf"}


def write_report(
    result: ThicknessMap, photo, out_dir: str | Path, stem: str, *, analysis=None
) -> dict[str, Path]:
    """Write the HTML and PDF inspection report of a measured photo.

    Parameters
    ----------
    result : ThicknessMap
        The measurement (its recipe's ``[report]`` section sets spec, scale,
        edge exclusion, sites, profiles and regions).
    photo : Photo or None
        The photo that was measured (its ``linear`` RGB is shown, sRGB-encoded);
        None leaves the photo out.
    out_dir : str or Path
        Existing, writable output folder.
    stem : str
        File stem: ``<stem>.report.html`` and ``<stem>.report.pdf``.
    analysis : Analysis, optional
        A ready analysis of ``result`` (default: computed here).

    Returns
    -------
    dict of str to Path
        ``{"report_html": ..., "report_pdf": ...}``.

    Raises
    ------
    OptionError
        Report settings that do not fit the photo (e.g. a profile off the image).
    OutputError
        A file cannot be written.
    """
    from ..io.write import atomic_path, write_text
    from .analysis import analyse
    from .inspection_figures import render_figures
    from .inspection_html import render_html
    from .inspection_pdf import render_pdf

    if analysis is None:
        analysis = analyse(result, result.recipe)
    figures = render_figures(result, photo, analysis)
    content = build_content(result, photo, analysis, figures)
    paths = report_paths(out_dir, stem)
    with contextlib.ExitStack() as stack:
        tmp = {kind: stack.enter_context(atomic_path(p)) for kind, p in paths.items()}
        write_text(tmp["report_html"], render_html(content))
        render_pdf(content, tmp["report_pdf"])
    return paths


def build_content(
    result, photo, analysis: Analysis, figures: dict[str, ReportFigure]
) -> ReportContent:
    """Assemble the report's content: header, caution, key figures and sections."""
    s = analysis.settings
    ev = analysis.evaluation.stats
    sample = Path(result.source).name if result.source else "in-memory photo"
    spec_text = "" if s.spec is None else f"{s.spec.target_nm:g} ± {s.spec.tol_nm:g} nm"
    keys = [
        KeyFigure(
            "Mean thickness",
            with_unit(num(ev.mean_nm, 1), "nm"),
            f"σ {num(ev.std_nm, 2)} nm · median {num(ev.median_nm, 1)} nm",
        ),
        KeyFigure("Non-uniformity", pc(ev.nonuniformity_percent), "(max − min) / (2 · mean)"),
        KeyFigure(
            "Robust non-uniformity", pc(ev.robust_nonuniformity_percent), "(P99 − P1) / (2 · mean)"
        ),
        KeyFigure(
            "Range",
            with_unit(f"{num(ev.min_nm)} \u2013 {num(ev.max_nm)}", "nm", ev.count_px > 0),
            f"max − min = {num(ev.range_nm)} nm",
        ),
        KeyFigure(
            "Coverage",
            pct(ev.coverage, 1),
            f"{count(ev.count_px)} of {count(ev.region_px)} px measured",
        ),
    ]
    if s.spec is not None:
        keys.insert(
            1,
            KeyFigure(
                "In spec",
                pct(ev.in_spec_fraction),
                f"|t − {s.spec.target_nm:g}| ≤ {s.spec.tol_nm:g} nm",
            ),
        )
    if analysis.plane is not None:
        keys.append(
            KeyFigure(
                "Wedge angle",
                with_unit(sig(analysis.plane.wedge_angle_urad), "µrad"),
                "atan(|∇t| · 10⁻⁶) of the plane fit",
            )
        )
    area = (
        "evaluation area (ROI less the edge exclusion)"
        if analysis.evaluation.name == "evaluation"
        else "region of interest"
    )
    sections = [
        Section(
            "Photo and thickness map",
            (FigureRow(tuple(figures[k] for k in ("photo", "thickness") if k in figures)),),
        ),
        Section(
            "Statistics",
            (
                Paragraph(
                    f"The verdict, key figures, sites and wedge use the {area}. Only measured "
                    "pixels count (t = film thickness of a measured pixel, n = their number)."
                ),
                stats_table(analysis),
            ),
        ),
        Section("Thickness distribution", (FigureRow((figures["histogram"],)),)),
    ]
    if analysis.sites is not None:
        sections.append(Section("Site readings", tuple(site_tables(analysis))))
    if analysis.profiles:
        sections.append(
            Section("Profiles", (FigureRow((figures["profiles"],)), profile_table(analysis)))
        )
    if analysis.plane is not None:
        sections.append(Section("Wedge and gradient", (wedge_table(analysis),)))
    sections.append(
        Section(
            "Confidence and reasons",
            (FigureRow((figures["confidence"], figures["reasons"])), reason_table(result)),
        )
    )
    sections.append(
        Section("Measurement set-up", (setup_table(result, photo), provenance_table(result)))
    )
    now = _dt.datetime.now().astimezone()
    return ReportContent(
        title="Film thickness inspection report",
        sample=sample,
        generated=now.strftime("%Y-%m-%d %H:%M %Z").strip(),
        software=f"fringemap {__version__}",
        verdict=analysis.verdict,
        verdict_reason=analysis.verdict_reason,
        spec_text=spec_text,
        problem=problem_text(result, analysis),
        warnings=(*result.warnings, *analysis.notes),
        caution=CAUTION,
        key_figures=tuple(keys),
        sections=tuple(sections),
    )
