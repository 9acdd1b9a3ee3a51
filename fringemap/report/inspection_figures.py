"""The figures of the inspection report, drawn once as PNG bytes for the HTML and the PDF.

The maps, histogram and profiles come from :mod:`fringemap.report.figures`;
this module adds the photo with the measurement locations drawn on it (ROI,
evaluation area, extra regions, sites and profile lines), and draws all
figures in a few threads (each on its own Agg canvas) to keep the report
fast.
"""

from __future__ import annotations

import math
import os
import tempfile
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import cv2
import numpy as np

from ..colour.transfer import srgb_encode
from ..measure import parse_anchor
from ..result import REASON_COLOURS, REASONS
from ..roi import CircleRoi, FullRoi, RectRoi
from .analysis import Analysis

__all__ = ["ReportFigure", "photo_srgb8", "draw_locations", "render_figures"]

#: long side of the photo as shown in the report, px
PHOTO_SIDE_PX = 900


@dataclass(frozen=True)
class ReportFigure:
    """One figure of the report: PNG bytes, size in px, a title and a caption."""

    key: str
    title: str
    caption: str
    png: bytes
    width_px: int
    height_px: int


def photo_srgb8(linear: np.ndarray, max_side_px: int = PHOTO_SIDE_PX) -> tuple[np.ndarray, int]:
    """A downsampled 8-bit sRGB rendering of a linear photo.

    Parameters
    ----------
    linear : numpy.ndarray
        Linear-light RGB, float, shape (H, W, 3), nominally 0-1.
    max_side_px : int
        Longest side of the result, px.

    Returns
    -------
    tuple
        ``(rgb, factor)``: uint8 array of shape (h, w, 3), averaged over
        ``factor`` x ``factor`` blocks in linear light (area resampling),
        clipped to 0-1 and sRGB-encoded; and the reduction factor.
    """
    lin = np.asarray(linear, dtype=np.float32)
    h, w = lin.shape[:2]
    k = max(1, math.ceil(max(h, w) / max_side_px))
    if k > 1:
        lin = cv2.resize(
            lin, (max(1, round(w / k)), max(1, round(h / k))), interpolation=cv2.INTER_AREA
        )
    enc = srgb_encode(np.clip(np.nan_to_num(lin), 0.0, 1.0))
    return np.round(enc * 255.0).astype(np.uint8), k


def _outline(ax, roi, mask: np.ndarray, step: int, **style) -> None:
    """Draw a region's edge: exact for circles and rectangles, a contour otherwise."""
    from matplotlib.patches import Circle, Rectangle

    if isinstance(roi, FullRoi):
        return
    if isinstance(roi, CircleRoi):
        ax.add_patch(Circle((roi.cx_px, roi.cy_px), roi.r_px, fill=False, **style))
    elif isinstance(roi, RectRoi):
        ax.add_patch(
            Rectangle(
                (roi.x0 - 0.5, roi.y0 - 0.5), roi.x1 - roi.x0, roi.y1 - roi.y0, fill=False, **style
            )
        )
    else:
        small = mask[::step, ::step].astype(np.float32)
        ys = np.arange(small.shape[0]) * step
        xs = np.arange(small.shape[1]) * step
        ax.contour(
            xs,
            ys,
            small,
            levels=[0.5],
            colors=[style.get("edgecolor", "white")],
            linewidths=style.get("linewidth", 1.5),
            linestyles=style.get("linestyle", "-"),
        )


def draw_locations(
    photo_linear: np.ndarray, analysis: Analysis, path, *, title: str, anchor_texts=()
) -> Path:
    """The photo (sRGB) with the ROI, evaluation area, regions, sites, profiles and anchors.

    Axes are in px of the original photo (x right, y down), the coordinates
    that ``--roi``, ``--profile``, ``--region`` and ``--anchor`` take;
    ``anchor_texts`` are ``X,Y=NM`` points of known thickness.
    """
    import matplotlib
    from matplotlib import patheffects
    from matplotlib.lines import Line2D
    from matplotlib.patches import Circle

    from .figures import _map_axes, _save_png, _title

    rgb, k = photo_srgb8(photo_linear)
    h, w = photo_linear.shape[:2]
    fig, ax, box, fig_in = _map_axes((h, w), right_in=2.0)
    ax.imshow(rgb, extent=(-0.5, w - 0.5, h - 0.5, -0.5), interpolation="antialiased")
    ax.set_xlim(-0.5, w - 0.5)
    ax.set_ylim(h - 0.5, -0.5)
    ax.set_aspect("auto")
    ax.set_xlabel("x (px)", fontsize=10.5)
    ax.set_ylabel("y (px)", fontsize=10.5)
    ax.tick_params(labelsize=9.5)
    _title(ax, title)
    halo = [patheffects.withStroke(linewidth=3.2, foreground="black")]
    s = analysis.settings
    handles = []
    step = max(1, math.ceil(max(h, w) / 600))
    roi_style = dict(edgecolor="white", linewidth=1.6, linestyle="-", path_effects=halo)
    _outline(ax, s.roi, analysis.regions[0].mask, step, **roi_style)
    if not isinstance(s.roi, FullRoi):
        handles.append(Line2D([], [], color="white", lw=1.6, label="ROI", path_effects=halo))
    if analysis.evaluation.name == "evaluation":
        ev_style = dict(edgecolor="#ffd21f", linewidth=1.5, linestyle="--")
        if isinstance(s.roi, CircleRoi):
            r = s.roi.r_px - s.edge_exclusion_px
            ax.add_patch(Circle((s.roi.cx_px, s.roi.cy_px), r, fill=False, **ev_style))
        else:
            _outline(ax, None, analysis.evaluation.mask, step, **ev_style)
        handles.append(
            Line2D(
                [],
                [],
                color="#ffd21f",
                lw=1.5,
                ls="--",
                label=f"edge excl. {s.edge_exclusion_mm:g} mm",
            )
        )
    extras = analysis.regions[len(analysis.regions) - len(s.regions) :]
    for (name, _text, roi), region in zip(s.regions, extras, strict=True):
        _outline(ax, roi, region.mask, step, edgecolor="#7fe3ff", linewidth=1.3, linestyle=":")
        y0 = np.argmax(region.mask.any(axis=1))
        x0 = np.argmax(region.mask.any(axis=0))
        ax.text(
            x0 + 4,
            y0 + 4,
            name,
            color="#7fe3ff",
            fontsize=9,
            ha="left",
            va="top",
            path_effects=halo,
        )
    if s.regions:
        handles.append(Line2D([], [], color="#7fe3ff", lw=1.3, ls=":", label="regions R1…"))
    if analysis.sites is not None:
        sites = analysis.sites
        size = 6.5 if sites.count > 9 else 8.5
        for i, (x, y) in enumerate(zip(sites.table.x_px, sites.table.y_px, strict=True), 1):
            ax.add_patch(
                Circle(
                    (x, y),
                    max(sites.disc_radius_px, 3 * k),
                    fill=False,
                    edgecolor="#00e5ff",
                    linewidth=1.4,
                    path_effects=halo,
                )
            )
            ax.text(
                x + sites.disc_radius_px + 2 * k,
                y - sites.disc_radius_px,
                str(i),
                color="white",
                fontsize=size,
                ha="left",
                va="bottom",
                path_effects=halo,
            )
        handles.append(
            Line2D(
                [], [], marker="o", ls="", mfc="none", mec="#00e5ff", label=f"{sites.count} sites"
            )
        )
    palette = matplotlib.colormaps["tab10"].colors
    for j, p in enumerate(analysis.profiles):
        colour = palette[j % len(palette)]
        (xa, ya), (xb, yb) = p.start_xy_px, p.end_xy_px
        ax.annotate(
            "",
            xy=(xb, yb),
            xytext=(xa, ya),
            arrowprops=dict(
                arrowstyle="-|>", color=colour, lw=2.0, shrinkA=0, shrinkB=0, path_effects=halo
            ),
        )
        ax.text(
            xa,
            ya,
            p.name,
            color="white",
            fontsize=9.5,
            fontweight="bold",
            ha="right" if xa > xb else "left",
            va="bottom" if ya <= yb else "top",
            bbox=dict(boxstyle="round,pad=0.25", facecolor=colour, edgecolor="white", lw=0.8),
        )
    anchors = [parse_anchor(a) for a in anchor_texts]
    for x, y, nm in anchors:
        ax.plot([x], [y], marker="^", ms=9, mfc="white", mec="black", mew=1.0, ls="")
        ax.text(
            x + 8 * k,
            y,
            f"{nm:g} nm",
            color="white",
            fontsize=8.5,
            ha="left",
            va="center",
            path_effects=halo,
        )
    if anchors:
        handles.append(Line2D([], [], marker="^", ls="", mfc="white", mec="black", label="anchors"))
    if analysis.profiles:
        handles.append(Line2D([], [], color=palette[0], lw=2.0, label="profiles P1…"))
    if handles:
        left, bottom, aw, ah = box
        fw, fh = fig_in
        legend = fig.legend(
            handles=handles,
            loc="upper left",
            bbox_to_anchor=((left + aw + 0.12) / fw, (bottom + ah) / fh),
            frameon=True,
            fontsize=9.5,
            borderaxespad=0.0,
            handlelength=1.8,
        )
        legend.get_frame().set_facecolor("0.35")
        legend.get_frame().set_edgecolor("0.35")
        for text in legend.get_texts():
            text.set_color("white")
    if k > 1:
        from .figures import _footnote

        _footnote(fig, box, fig_in, f"shown at 1/{k} resolution (area average in linear light)")
    return _save_png(fig, path)


def _png_size(data: bytes) -> tuple[int, int]:
    # PNG IHDR: width and height are big-endian 32-bit integers at bytes 16-24
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")


def render_figures(result, photo, analysis: Analysis) -> dict[str, ReportFigure]:
    """Draw every report figure; returns them by key (photo, thickness, histogram,
    confidence, reasons and, with profiles, profiles). ``photo`` may be None: no photo figure."""
    from . import figures as F

    s = analysis.settings
    scale = None if s.scale is None else s.scale.px_per_mm
    name = Path(result.source).name if result.source else "photo"
    t = result.thickness_nm
    evaluation = analysis.evaluation
    spec = None if s.spec is None else (s.spec.target_nm, s.spec.tol_nm)
    hist_values = t[evaluation.mask]
    unit = "mm" if scale else "px"
    jobs = {
        "photo": (
            "Photo and measurement locations",
            "Photo as recorded (sRGB), with the region of interest, the evaluation area, "
            "sites and profile lines. Axes in px, the units of --roi and --profile.",
            lambda p: draw_locations(
                photo.linear,
                analysis,
                p,
                title=f"{name}: photo",
                anchor_texts=result.recipe.get("measure", "anchors"),
            ),
        ),
        "thickness": (
            "Thickness map",
            f"Film thickness, nm (viridis colour scale); grey = not measured. Axes in {unit}"
            + (" with a scale bar." if scale else "."),
            lambda p: F.draw_thickness_map(
                t, p, title=f"{name}: film thickness", scale_px_per_mm=scale
            ),
        ),
        "histogram": (
            "Thickness distribution",
            f"Measured pixels of the {'evaluation area' if evaluation.name == 'evaluation' else 'ROI'}"
            + ("; spec limits in red, in-spec band shaded." if spec else "; no spec given."),
            lambda p: F.draw_histogram(hist_values, p, title="Thickness distribution", spec=spec),
        ),
        "confidence": (
            "Confidence map",
            "Confidence of each thickness, 0 (none) to 1; light grey = not measured.",
            lambda p: F.draw_confidence_map(
                result.confidence, p, title="Confidence", scale_px_per_mm=scale
            ),
        ),
        "reasons": (
            "Reason map",
            "Why each pixel was or was not measured, with the share of pixels per reason.",
            lambda p: F.draw_reason_map(
                result.reasons,
                p,
                labels=REASONS,
                colours=REASON_COLOURS,
                title="Reasons",
                scale_px_per_mm=scale,
            ),
        ),
    }
    if photo is None:  # no photo at hand (Python API): the map stands alone
        del jobs["photo"]
    if analysis.profiles:
        jobs["profiles"] = (
            "Thickness profiles",
            "Thickness (top) and confidence (bottom) along each line; lines are drawn on the photo.",
            lambda p: F.draw_profiles(
                [q.profile for q in analysis.profiles], p, scale=s.scale, title="Thickness profiles"
            ),
        )
    out: dict[str, ReportFigure] = {}
    with tempfile.TemporaryDirectory(prefix="fringemap-report-") as tmp:

        def run(key):
            path = Path(tmp) / f"{key}.png"
            jobs[key][2](path)
            return key, path.read_bytes()

        workers = min(len(jobs), max(1, (os.cpu_count() or 1)))
        with ThreadPoolExecutor(max_workers=min(workers, 4)) as pool:
            done = dict(pool.map(run, list(jobs)))
    for key, (title, caption, _) in jobs.items():
        data = done[key]
        w, h = _png_size(data)
        out[key] = ReportFigure(key, title, caption, data, w, h)
    return out
