"""Command-line options for statistics and the report; each sets a recipe ``[report]`` key.

Values are checked here, so an error names the option that was typed
(``--spec``, ``--scale``...); values from a recipe file are checked by the
recipe and name its key (``report.spec``...).
"""

from __future__ import annotations

import argparse
import math

__all__ = ["add_report_options", "report_overrides"]


def add_report_options(p: argparse.ArgumentParser) -> None:
    """Add ``--spec``, ``--scale``, ``--scale-points``, ``--edge-exclusion``, ``--sites``,
    ``--profile``, ``--region`` and ``--report`` to a parser."""
    g = p.add_argument_group(
        "statistics and report (override the recipe's [report] section; "
        "formulas in docs/statistics.md)"
    )
    g.add_argument(
        "--spec",
        metavar="TARGET±TOL",
        help="thickness specification in nm, e.g. 100±5 or 100+-5: in-spec share and "
        "pass/fail of the evaluation area",
    )
    scale = g.add_mutually_exclusive_group()
    scale.add_argument("--scale", metavar="PX_PER_MM", help="photo scale in pixels per mm")
    scale.add_argument(
        "--scale-points",
        metavar="X1,Y1:X2,Y2=MM",
        help="photo scale from two points (px) a known distance apart (mm)",
    )
    g.add_argument(
        "--edge-exclusion",
        metavar="MM",
        help="leave a band this wide along the ROI edge (the wafer edge for a circle ROI) "
        "out of the statistics; needs a scale",
    )
    g.add_argument(
        "--sites",
        metavar="N",
        help="read 1, 5, 9 or 49 sites laid out on a circle ROI: <stem>.sites.csv",
    )
    g.add_argument(
        "--profile",
        metavar="X1,Y1:X2,Y2",
        action="append",
        help="thickness along a line in px (repeatable): <stem>.profiles.csv and .png",
    )
    g.add_argument(
        "--region",
        metavar="ROI",
        action="append",
        help="an extra region for statistics, same forms as --roi (repeatable)",
    )
    g.add_argument(
        "--report",
        action="store_true",
        default=None,
        help="also write <stem>.report.html (one self-contained page) and <stem>.report.pdf",
    )


def report_overrides(args) -> dict:
    """Recipe overrides ``{"report.KEY": value}`` from the parsed options (checked).

    Options a command does not have are skipped, so any command may call this.

    Raises
    ------
    OptionError
        A malformed value, naming the option.
    """
    from ..errors import OptionError
    from ..geometry import parse_scale, parse_scale_points
    from ..report.settings import relabel
    from ..roi import parse_roi, parse_segment
    from ..sites import SITE_LAYOUTS
    from ..stats import parse_spec

    out: dict = {}
    spec = getattr(args, "spec", None)
    if spec is not None:
        parse_spec(spec)
        out["report.spec"] = spec.strip()
    scale = getattr(args, "scale", None)
    if scale is not None:
        out["report.scale_px_per_mm"] = parse_scale(scale).px_per_mm
        out["report.scale_points"] = ""
    points = getattr(args, "scale_points", None)
    if points is not None:
        out["report.scale_px_per_mm"] = parse_scale_points(points).px_per_mm
        out["report.scale_points"] = points.strip()
    exclusion = getattr(args, "edge_exclusion", None)
    if exclusion is not None:
        try:
            value = float(exclusion)
        except ValueError:
            value = math.nan
        if not (math.isfinite(value) and value >= 0):
            raise OptionError(
                f"expected a width in mm (a number >= 0), got {exclusion!r}",
                where="--edge-exclusion",
            )
        out["report.edge_exclusion_mm"] = value
    sites = getattr(args, "sites", None)
    if sites is not None:
        known = ", ".join(str(k) for k in SITE_LAYOUTS)
        if sites.strip() not in {str(k) for k in SITE_LAYOUTS}:
            raise OptionError(f"expected a site count of {known}, got {sites!r}", where="--sites")
        out["report.sites"] = int(sites)
    profiles = getattr(args, "profile", None)
    if profiles:
        for text in profiles:
            parse_segment(text, "--profile")
        out["report.profiles"] = [t.strip() for t in profiles]
    regions = getattr(args, "region", None)
    if regions:
        for text in regions:
            with relabel("--region"):
                parse_roi(text)
        out["report.regions"] = [t.strip() for t in regions]
    if getattr(args, "report", None):
        out["report.write_report"] = True
    return out
