"""The optional per-photo files of ``map``: ``<stem>.sites.csv``, ``<stem>.profiles.csv``
and ``<stem>.profiles.png`` (see :func:`fringemap.report.analysis.optional_output_paths`).

CSV headers name the units; unmeasured values are empty cells.
"""

from __future__ import annotations

from pathlib import Path

from ..result import ThicknessMap
from .analysis import Analysis

__all__ = ["sites_csv_text", "profiles_csv_text", "write_optional_outputs"]


def sites_csv_text(analysis: Analysis) -> str:
    """``<stem>.sites.csv``: one row per site; units in the header; empty = unmeasured."""
    sites = analysis.sites
    mm = analysis.mm_per_px
    d = sites.to_dict(mm)
    names = ["site", "x_px", "y_px"] + (["x_mm", "y_mm"] if mm else [])
    names += ["mean_nm", "std_nm", "count_px", "in_spec"]
    lines = [",".join(names)]
    for row in d["sites"]:
        cells = []
        for n in names:
            v = row.get(n)
            if v is None:
                cells.append("")
            elif isinstance(v, bool):
                cells.append("yes" if v else "no")
            elif isinstance(v, float):
                cells.append(format(v, ".9g"))
            else:
                cells.append(str(v))
        lines.append(",".join(cells))
    return "\n".join(lines) + "\n"


def profiles_csv_text(analysis: Analysis) -> str:
    """``<stem>.profiles.csv``: every profile's samples, the profile's name first."""
    lines: list[str] = []
    for p in analysis.profiles:
        body = p.profile.to_csv_text(analysis.settings.scale).splitlines()
        if not lines:
            lines.append("profile," + body[0])
        lines += [f"{p.name},{row}" for row in body[1:]]
    return "\n".join(lines) + "\n"


def write_optional_outputs(analysis: Analysis, result: ThicknessMap, tmp: dict) -> None:
    """Write the sites and profile files into the temporary paths ``tmp`` (by kind)."""
    from ..io.write import write_text
    from .figures import draw_profiles

    if "sites" in tmp and analysis.sites is not None:
        write_text(tmp["sites"], sites_csv_text(analysis))
    if "profiles_csv" in tmp and analysis.profiles:
        write_text(tmp["profiles_csv"], profiles_csv_text(analysis))
    if "profiles_png" in tmp and analysis.profiles:
        name = Path(result.source).name if result.source else "thickness"
        draw_profiles(
            [p.profile for p in analysis.profiles],
            tmp["profiles_png"],
            scale=analysis.settings.scale,
            title=f"{name}: thickness profiles",
        )
