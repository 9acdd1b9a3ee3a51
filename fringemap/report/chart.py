"""The colour chart of a colour table: what each film thickness looks like.

Two outputs describe a :class:`~fringemap.colour.table.ColourTable`:

* :func:`chart_csv_text`, one CSV row per thickness with the display sRGB and
  CIELAB of the film's colour;
* :func:`draw_chart`, one PNG with (a) the colours as strips over a thickness
  axis (nm), with the interference orders marked, and (b) the path the colour
  takes through the CIE 1931 xy chromaticity diagram as the film thickens,
  coloured by thickness.

The figure is drawn with matplotlib's object API on an Agg canvas (no
``pyplot``), imported only when a chart is drawn, and written atomically.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np

from ..colour.table import ColourTable, order_marks_nm
from ..errors import OptionError
from ..optics.stack import Stack
from .figures import THICKNESS_CMAP, _new_figure, _save_png

__all__ = ["CSV_HEADER", "chart_csv_text", "draw_chart", "white_point_xyz"]

#: Header line of :func:`chart_csv_text`.
CSV_HEADER = "thickness_nm,srgb_r,srgb_g,srgb_b,cie_l,cie_a,cie_b"

#: Wavelengths (nm) labelled along the spectral locus.
_LOCUS_LABELS_NM = (460, 480, 490, 500, 510, 520, 540, 560, 580, 600, 620, 700)

_TITLE_PT = 14.0
_SUB_PT = 10.0
_HEAD_PT = 11.5
_LABEL_PT = 10.5
_TICK_PT = 9.5
_NOTE_PT = 8.5

# page geometry, inches
_FIG_W = 12.0
_LEFT = 0.85
_RIGHT = 0.45
_MARK_BAND = 0.34  # order marks and their labels above a strip
_STRIP_H = 0.62
_TICK_BAND = 0.36  # tick labels under a strip
_ROW_GAP = 0.10
_XY_H = 4.6


# ------------------------------------------------------------------------- CSV


def chart_csv_text(table: ColourTable) -> str:
    """The colour table as CSV text: thickness, display sRGB and CIELAB per row.

    Columns (header :data:`CSV_HEADER`): ``thickness_nm`` (nm, 4 decimals),
    ``srgb_r, srgb_g, srgb_b`` (encoded sRGB, IEC 61966-2-1, 0-1, white = 1,
    clipped to the gamut as in ``table.srgb``; 6 decimals) and ``cie_l,
    cie_a, cie_b`` (CIELAB relative to the light's white, from ``table.lab``;
    4 decimals). One row per table entry, in table order, ``\\n`` line ends.

    Parameters
    ----------
    table : ColourTable
        The colour table.

    Returns
    -------
    str
    """
    t = np.asarray(table.thickness_nm, dtype=np.float64)
    srgb = np.asarray(table.srgb, dtype=np.float64)
    lab = np.asarray(table.lab, dtype=np.float64)
    if not (srgb.shape == lab.shape == (t.size, 3)):
        raise OptionError(
            f"colour table arrays disagree: {t.size} thicknesses, sRGB {srgb.shape}, "
            f"CIELAB {lab.shape}",
            where="table",
        )
    lines = [CSV_HEADER]
    for ti, (r, g, b), (L, a, bb) in zip(t, srgb, lab, strict=True):
        lines.append(f"{ti:.4f},{r:.6f},{g:.6f},{b:.6f},{L:.4f},{a:.4f},{bb:.4f}")
    return "\n".join(lines) + "\n"


# ------------------------------------------------------------------ colorimetry


def white_point_xyz(table: ColourTable) -> np.ndarray:
    """XYZ of the light's white (Y = 1), recovered from the table itself.

    CIELAB is XYZ relative to the white, so inverting ``table.lab`` gives
    ``X / Xn``, ``Y / Yn``, ``Z / Zn`` per entry; dividing ``table.xyz`` by
    those ratios gives the white. The entry with the largest tristimulus
    values is used (the best-conditioned division).

    Parameters
    ----------
    table : ColourTable

    Returns
    -------
    ndarray of shape (3,)
    """
    lab = np.asarray(table.lab, dtype=np.float64)
    xyz = np.asarray(table.xyz, dtype=np.float64)
    fy = (lab[:, 0] + 16.0) / 116.0
    f = np.stack([fy + lab[:, 1] / 500.0, fy, fy - lab[:, 2] / 200.0], axis=-1)
    d = 6.0 / 29.0
    ratio = np.where(f > d, f**3, 3 * d * d * (f - 4.0 / 29.0))
    i = int(np.argmax(np.min(xyz, axis=1)))
    with np.errstate(divide="ignore", invalid="ignore"):
        white = xyz[i] / ratio[i]
    if not np.all(np.isfinite(white)) or np.any(white <= 0):
        return np.array([0.95047, 1.0, 1.08883])  # fall back to D65
    return white


def _xy(xyz: np.ndarray) -> np.ndarray:
    xyz = np.asarray(xyz, dtype=np.float64)
    s = xyz.sum(axis=-1, keepdims=True)
    out = np.full(xyz.shape[:-1] + (2,), np.nan)
    ok = s[..., 0] > 1e-12
    out[ok] = xyz[ok, :2] / s[ok]
    return out


def _spectral_locus() -> tuple[np.ndarray, np.ndarray]:
    """Wavelengths (nm) and xy of the CIE 1931 2° spectral locus, 380-700 nm."""
    import colour

    cmfs = colour.MSDS_CMFS["CIE 1931 2 Degree Standard Observer"]
    wl = np.asarray(cmfs.wavelengths, dtype=np.float64)
    keep = (wl >= 380) & (wl <= 700)
    return wl[keep], _xy(np.asarray(cmfs.values, dtype=np.float64)[keep])


# ---------------------------------------------------------------------- layout


def _nice_step(x: float) -> float:
    """Smallest 1, 2, 2.5 or 5 x 10^k that is >= ``x`` (> 0)."""
    exp = math.floor(math.log10(x))
    for m in (1.0, 2.0, 2.5, 5.0, 10.0):
        if m * 10.0**exp >= x * (1 - 1e-9):
            return m * 10.0**exp
    return 10.0 ** (exp + 1)  # pragma: no cover


def _strip_rows(lo: float, hi: float) -> tuple[float, float, list[tuple[float, float]]]:
    """Split ``lo..hi`` nm into rows of equal length so colours stay large.

    Ranges up to 600 nm use one row. Longer ranges use rows of 500 nm (up
    to 3000 nm), then 1000 nm, then a round length giving at most 8 rows.
    Rows start on a whole multiple of the major tick step; the last row ends
    at the first major tick at or beyond ``hi`` and is drawn shorter, at the
    same nm per inch.

    Returns ``(row_nm, major_nm, [(start, end), ...])``.
    """
    span = hi - lo
    if span <= 600:
        major = _nice_step(span / 8.0)
        return span, major, [(lo, hi)]
    if span <= 3000:
        row = 500.0
    elif span <= 6000:
        row = 1000.0
    else:
        row = _nice_step(span / 8.0)
    major = row / 5.0
    start = math.floor(lo / major + 1e-9) * major
    n = max(1, math.ceil((hi - start) / row - 1e-9))
    rows = [(start + i * row, start + (i + 1) * row) for i in range(n)]
    # the last row stops at the first major tick at or after `hi` (drawn shorter)
    last_end = min(rows[-1][1], math.ceil(hi / major - 1e-9) * major)
    rows[-1] = (rows[-1][0], max(last_end, rows[-1][0] + major))
    return row, major, rows


def _describe(table: ColourTable) -> tuple[str, str]:
    """A title and subtitle from ``table.description``."""
    d = table.description or {}
    stack = d.get("stack", {}) or {}

    def name(key):
        v = stack.get(key) or {}
        return str(v.get("name", "?")) if isinstance(v, dict) else str(v)

    film, substrate, ambient = name("film"), name("substrate"), name("ambient")
    layers = stack.get("layers") or []
    under = "".join(
        f" on {la.get('name', '?')} {float(la.get('thickness_nm', 0)):g} nm" for la in layers
    )
    title = f"Interference colours of a {film} film{under} on {substrate}"
    light = os.path.basename(str(d.get("light", "?")))
    bits = [f"light {light}", f"detector {d.get('detector', '?')}"]
    if "angle_deg" in d:
        bits.append(f"{float(d['angle_deg']):g}\u00b0 incidence")
    if float(d.get("numerical_aperture", 0) or 0) > 0:
        bits.append(f"NA {float(d['numerical_aperture']):g}")
    bits.append(f"ambient {ambient}")
    lo, hi = float(table.thickness_nm[0]), float(table.thickness_nm[-1])
    bits.append(f"{lo:g}\u2013{hi:g} nm in {table.step_nm:g} nm steps")
    return title, "  \u00b7  ".join(bits)


# ----------------------------------------------------------------------- chart


def draw_chart(
    table: ColourTable,
    stack: Stack,
    *,
    angle_deg: float,
    path: str | os.PathLike[str],
    title: str | None = None,
) -> Path:
    """Draw the colour chart of a colour table as one PNG (150 dpi).

    Panel (a) shows ``table.srgb`` as colour strips over the film thickness
    (nm), split into rows of equal length when the range is long (rows of
    500 nm up to 3000 nm, see ``_strip_rows``). Triangles above the strips
    mark the interference orders of :func:`~fringemap.colour.table.order_marks_nm`
    (optical path ``2 n t cos θ`` equal to ``m`` waves of 550 nm), labelled
    ``m=1``, ``m=2``, ... (only every k-th when they would crowd).

    Panel (b) shows the colour's chromaticity (x, y from ``table.xyz``) as the
    film thickens, on the CIE 1931 2° diagram: the spectral locus (380-700 nm)
    and the line of purples, the light's white point, and the trajectory
    coloured by thickness (the thickness colour map of the report) with a
    colour bar in nm. A second panel zooms onto the trajectory, where the
    order marks are dotted and labelled where space allows.

    Parameters
    ----------
    table : ColourTable
        The colour table to draw.
    stack : Stack
        The stack the table was made for (for the order marks).
    angle_deg : float
        Angle of incidence in the ambient (degrees); must equal the table's.
    path : str or path-like
        PNG file to write.
    title : str, optional
        Replaces the main title (film, layers, substrate); the subtitle
        (light, detector, angle, range) is kept.

    Returns
    -------
    pathlib.Path
        ``path``.

    Raises
    ------
    OptionError
        If ``angle_deg`` differs from the angle the table was made for.
    """
    t = np.asarray(table.thickness_nm, dtype=np.float64)
    if t.size < 2:
        raise OptionError("a colour table needs at least 2 thicknesses to chart", where="table")
    made_for = (table.description or {}).get("angle_deg")
    if made_for is not None and not math.isclose(float(made_for), float(angle_deg), abs_tol=1e-9):
        raise OptionError(
            f"angle {angle_deg:g}\u00b0 differs from the {float(made_for):g}\u00b0 the colour "
            "table was made for",
            where="--angle",
        )
    lo, hi = float(t[0]), float(t[-1])
    marks = order_marks_nm(stack, angle_deg=angle_deg, max_nm=hi)
    period = float(marks[0]) if marks.size else math.inf  # t_m = m * t_1
    marks = marks[marks >= lo]
    main_title, subtitle = _describe(table)
    if title:
        main_title = title

    row_nm, major, rows = _strip_rows(lo, hi)
    n_rows = len(rows)
    top = 1.05  # title + subtitle
    head = 0.42  # a section heading
    strips_h = n_rows * (_MARK_BAND + _STRIP_H + _TICK_BAND) + (n_rows - 1) * _ROW_GAP + 0.32
    strips_h += 0.1
    bottom = 0.62
    fig_h = top + head + strips_h + head + _XY_H + bottom
    fig = _new_figure(_FIG_W, fig_h)

    def rect(x_in, y_top_in, w_in, h_in):
        """Axes rectangle from inches measured from the top-left corner."""
        return (x_in / _FIG_W, 1 - (y_top_in + h_in) / fig_h, w_in / _FIG_W, h_in / fig_h)

    fig.text(
        _LEFT / _FIG_W,
        1 - 0.22 / fig_h,
        main_title,
        fontsize=_TITLE_PT,
        fontweight="bold",
        ha="left",
        va="top",
    )
    fig.text(
        _LEFT / _FIG_W,
        1 - 0.62 / fig_h,
        subtitle,
        fontsize=_SUB_PT,
        color="0.25",
        ha="left",
        va="top",
    )

    # (a) strips ---------------------------------------------------------------
    y = top
    _heading(
        fig,
        fig_h,
        y,
        "(a) Colour versus film thickness",
        "\u25bc m = interference order: optical path 2\u00b7n\u00b7t\u00b7cos\u03b8 "
        "= m \u00d7 550 nm",
    )
    y += head
    strip_w = _FIG_W - _LEFT - _RIGHT
    rgb8 = np.round(np.clip(table.srgb, 0, 1) * 255).astype(np.uint8)
    step = table.step_nm
    # label every `stride`-th mark so labels ("m=12" is about 0.45 in) never touch
    spacing_in = period * strip_w / row_nm
    stride = max(1, math.ceil(0.55 / spacing_in)) if math.isfinite(spacing_in) else 1
    for i, (start, end) in enumerate(rows):
        width = strip_w * (end - start) / row_nm  # same nm per inch in every row
        ax_m = fig.add_axes(rect(_LEFT, y, width, _MARK_BAND))
        ax_s = fig.add_axes(rect(_LEFT, y + _MARK_BAND, width, _STRIP_H))
        last = i == n_rows - 1
        sel = (t >= start - 1e-9) & (t <= end + 1e-9)
        if sel.any():
            ts = t[sel]
            ax_s.imshow(
                rgb8[sel][None, :, :],
                extent=(ts[0] - step / 2, ts[-1] + step / 2, 0, 1),
                aspect="auto",
                interpolation="nearest",
                origin="lower",
            )
        ax_s.set_xlim(start, end)
        ax_s.set_ylim(0, 1)
        ax_s.set_yticks([])
        for side in ("left", "right", "top"):
            ax_s.spines[side].set_color("0.55")
        _thickness_ticks(ax_s, major)
        if lo > start:  # grey hatch where the table does not reach
            ax_s.axvspan(
                start, lo - step / 2, facecolor="white", edgecolor="0.8", hatch="///", linewidth=0
            )
        if hi < end:
            ax_s.axvspan(
                hi + step / 2, end, facecolor="white", edgecolor="0.8", hatch="///", linewidth=0
            )
            if end - hi > 0.12 * row_nm:
                ax_s.text(
                    0.5 * (hi + end),
                    0.5,
                    "beyond the table",
                    ha="center",
                    va="center",
                    fontsize=_NOTE_PT,
                    color="0.45",
                    bbox={"facecolor": "white", "edgecolor": "none", "pad": 1.5},
                )
        in_row = marks[(marks >= start) & ((marks < end) | (last & (marks <= end)))]
        ax_m.set_xlim(start, end)
        ax_m.set_ylim(0, 1)
        ax_m.axis("off")
        for mk in in_row:
            m = int(round(mk / period)) if math.isfinite(period) else 1
            labelled = m % stride == 0 or stride == 1
            ax_m.plot(
                [mk],
                [0.13],
                marker="v",
                markersize=7 if labelled else 4.5,
                color="0.15",
                clip_on=False,
                linestyle="none",
            )
            if labelled:
                ax_m.text(
                    mk, 0.36, f"m={m}", ha="center", va="bottom", fontsize=_TICK_PT, clip_on=False
                )
        y += _MARK_BAND + _STRIP_H + _TICK_BAND + (0 if last else _ROW_GAP)
        if last:  # centred under the full strip width, whatever this row's length
            fig.text(
                (_LEFT + strip_w / 2) / _FIG_W,
                1 - (y + 0.04) / fig_h,
                "film thickness (nm)",
                fontsize=_LABEL_PT,
                ha="center",
                va="top",
            )
    y += 0.32 + 0.1

    # (b) chromaticity -----------------------------------------------------------
    _heading(
        fig,
        fig_h,
        y,
        "(b) Colour trajectory on the CIE 1931 xy chromaticity diagram",
        "trajectory coloured by film thickness; right: enlarged",
    )
    y += head
    full_box = (-0.02, 0.80, -0.02, 0.90)
    full_w = _XY_H * (full_box[1] - full_box[0]) / (full_box[3] - full_box[2])
    ax_f = fig.add_axes(rect(_LEFT, y, full_w, _XY_H))
    zoom_left = _LEFT + full_w + 0.95
    ax_z = fig.add_axes(rect(zoom_left, y, _XY_H, _XY_H))
    cax = fig.add_axes(rect(zoom_left + _XY_H + 0.25, y, 0.2, _XY_H))

    wl, locus = _spectral_locus()
    white = _xy(white_point_xyz(table))
    traj = _xy(table.xyz)
    light = os.path.basename(str((table.description or {}).get("light", "light")))

    import matplotlib
    from matplotlib.cm import ScalarMappable
    from matplotlib.colors import Normalize
    from matplotlib.patches import Rectangle

    cmap = matplotlib.colormaps[THICKNESS_CMAP]
    norm = Normalize(vmin=lo, vmax=hi)
    zoom_box = _zoom_box(traj, white)
    for ax, box, lw in ((ax_f, full_box, 1.4), (ax_z, zoom_box, 2.2)):
        _draw_locus(ax, locus)
        _draw_trajectory(ax, traj, t, cmap, norm, lw)
        _draw_ends(ax, traj)
        ax.plot(
            *white,
            marker="o",
            markersize=7,
            markerfacecolor="white",
            markeredgecolor="black",
            markeredgewidth=1.4,
            linestyle="none",
            zorder=6,
        )
        ax.set_xlim(box[0], box[1])
        ax.set_ylim(box[2], box[3])
        ax.set_xlabel("x", fontsize=_LABEL_PT, style="italic")
        ax.set_ylabel("y", fontsize=_LABEL_PT, style="italic", rotation=0, labelpad=10)
        ax.tick_params(labelsize=_TICK_PT)
        ax.grid(color="0.9", linewidth=0.6, zorder=0)
        ax.set_axisbelow(True)
    ends = _ends(traj)
    _legend(ax_f, light, t[list(ends)], marks.size > 0, _label_locus(ax_f, wl, locus))
    ax_f.add_patch(
        Rectangle(
            (zoom_box[0], zoom_box[2]),
            zoom_box[1] - zoom_box[0],
            zoom_box[3] - zoom_box[2],
            fill=False,
            edgecolor="0.25",
            linestyle="--",
            linewidth=1.0,
            zorder=7,
        )
    )
    ax_f.set_title("full diagram (dashed box: enlarged area)", fontsize=_TICK_PT, loc="left")
    ax_z.set_title("enlarged", fontsize=_TICK_PT, loc="left")
    _label_zoom(ax_z, zoom_box, (_XY_H, _XY_H), traj, t, marks, period, white, light)
    cb = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), cax=cax)
    cb.set_label("film thickness (nm)", fontsize=_LABEL_PT)
    cb.ax.tick_params(labelsize=_TICK_PT)
    return _save_png(fig, path)


def _heading(fig, fig_h: float, y_in: float, text: str, note: str) -> None:
    fig.text(
        _LEFT / _FIG_W,
        1 - (y_in + 0.06) / fig_h,
        text,
        fontsize=_HEAD_PT,
        fontweight="bold",
        ha="left",
        va="top",
    )
    fig.text(
        1 - _RIGHT / _FIG_W,
        1 - (y_in + 0.09) / fig_h,
        note,
        fontsize=_NOTE_PT + 0.5,
        color="0.3",
        ha="right",
        va="top",
    )


def _thickness_ticks(ax, major: float) -> None:
    from matplotlib.ticker import FuncFormatter, MultipleLocator

    ax.xaxis.set_major_locator(MultipleLocator(major))
    mantissa = round(major / 10.0 ** math.floor(math.log10(major)), 6)
    minor = major / (4 if mantissa == 2 else 5)  # 100 -> 20, 200 -> 50, 250 -> 50
    ax.xaxis.set_minor_locator(MultipleLocator(minor))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    ax.tick_params(axis="x", which="major", labelsize=_TICK_PT, length=5, color="0.3")
    ax.tick_params(axis="x", which="minor", length=2.5, color="0.45")


def _zoom_box(traj: np.ndarray, white: np.ndarray) -> tuple[float, float, float, float]:
    """A square xy window around the trajectory and the white point."""
    pts = np.vstack([traj[np.all(np.isfinite(traj), axis=1)], white[None, :]])
    (x0, y0), (x1, y1) = pts.min(axis=0), pts.max(axis=0)
    half = max(x1 - x0, y1 - y0) / 2 * 1.14 + 0.004
    half = max(half, 0.02)
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    return (cx - half, cx + half, cy - half, cy + half)


def _draw_locus(ax, locus: np.ndarray) -> None:
    closed = np.vstack([locus, locus[:1]])
    ax.fill(closed[:, 0], closed[:, 1], facecolor="0.965", edgecolor="none", zorder=1)
    ax.plot(locus[:, 0], locus[:, 1], color="0.1", linewidth=1.2, zorder=3)
    ax.plot(
        [locus[-1, 0], locus[0, 0]],
        [locus[-1, 1], locus[0, 1]],
        color="0.35",
        linewidth=1.0,
        linestyle="--",
        zorder=3,
    )


def _draw_trajectory(ax, traj, t, cmap, norm, lw: float) -> None:
    from matplotlib.collections import LineCollection

    seg = np.stack([traj[:-1], traj[1:]], axis=1)
    ok = np.all(np.isfinite(seg), axis=(1, 2))
    mid = 0.5 * (t[:-1] + t[1:])
    lc = LineCollection(
        seg[ok],
        colors=cmap(norm(mid[ok])),
        linewidths=lw,
        zorder=4,
        capstyle="round",
        joinstyle="round",
    )
    ax.add_collection(lc)


def _ends(traj: np.ndarray) -> tuple[int, int]:
    """Indices of the first and last entries with a chromaticity (black has none)."""
    ok = np.flatnonzero(np.all(np.isfinite(traj), axis=1))
    return (int(ok[0]), int(ok[-1])) if ok.size else (0, len(traj) - 1)


def _draw_ends(ax, traj: np.ndarray) -> None:
    """Square at the thinnest film's colour, triangle at the thickest's."""
    for i, marker in zip(_ends(traj), ("s", "^"), strict=True):
        p = traj[i]
        if np.all(np.isfinite(p)):
            ax.plot(
                *p,
                marker=marker,
                markersize=6,
                color="black",
                markerfacecolor="white",
                linestyle="none",
                zorder=7,
            )


def _label_locus(ax, wl: np.ndarray, locus: np.ndarray) -> list:
    """Tick and label chosen wavelengths on the locus, outward from its centre.

    Returns the label Text artists.
    """
    centre = np.array([0.33, 0.33])
    labels = []
    for nm in _LOCUS_LABELS_NM:
        i = int(np.argmin(np.abs(wl - nm)))
        p = locus[i]
        j0, j1 = max(i - 2, 0), min(i + 2, len(wl) - 1)
        tangent = locus[j1] - locus[j0]
        normal = np.array([tangent[1], -tangent[0]])
        normal /= np.hypot(*normal) or 1.0
        if np.dot(normal, p - centre) < 0:
            normal = -normal
        tick = p + 0.012 * normal
        ax.plot([p[0], tick[0]], [p[1], tick[1]], color="0.1", linewidth=1.0, zorder=3)
        q = p + 0.03 * normal
        ha = "left" if normal[0] > 0.3 else ("right" if normal[0] < -0.3 else "center")
        va = "bottom" if normal[1] > 0.3 else ("top" if normal[1] < -0.3 else "center")
        labels.append(
            ax.text(q[0], q[1], f"{nm}", fontsize=_NOTE_PT, ha=ha, va=va, color="0.15", zorder=5)
        )
    return labels


def _legend(ax, light: str, ends_nm: np.ndarray, with_marks: bool, avoid: list) -> None:
    """Key to the symbols of both xy panels, in the empty upper right of the diagram.

    ``ends_nm`` are the thicknesses of the start and end symbols. Texts in
    ``avoid`` that the legend would cover are removed.
    """
    from matplotlib.lines import Line2D

    def sym(marker, face, size, label, edge="black"):
        return Line2D(
            [],
            [],
            marker=marker,
            markersize=size,
            markerfacecolor=face,
            markeredgecolor=edge,
            linestyle="none",
            label=label,
        )

    handles = [
        Line2D([], [], color="0.1", linewidth=1.2, label="spectral locus, nm"),
        Line2D([], [], color="0.35", linewidth=1.0, linestyle="--", label="line of purples"),
        sym("o", "white", 7, f"white ({light})"),
        sym("s", "white", 6, f"{ends_nm[0]:g} nm (start)"),
        sym("^", "white", 6, f"{ends_nm[1]:g} nm (end)"),
    ]
    if with_marks:
        handles.append(sym("o", "black", 4.5, "order marks m", edge="white"))
    legend = ax.legend(
        handles=handles,
        loc="upper right",
        fontsize=_NOTE_PT,
        frameon=True,
        framealpha=0.95,
        edgecolor="0.7",
        borderpad=0.5,
        handlelength=1.6,
    )
    # drop any wavelength label the legend would cover
    renderer = ax.figure.canvas.get_renderer()
    box = legend.get_window_extent(renderer).padded(2)
    for text in avoid:
        if text.get_window_extent(renderer).overlaps(box):
            text.remove()


def _label_zoom(ax, box, size_in, traj, t, marks, period, white, light) -> None:
    """Dot the order marks on the enlarged trajectory and label those that fit.

    Only dots with no other dot within 0.3 in are labelled. Labels are
    placed greedily (white point, then orders) at the first of eight offsets whose box overlaps no earlier label and stays
    inside the axes; a label that fits nowhere is left out.
    """
    x0, x1, y0, y1 = box
    sx, sy = size_in[0] / (x1 - x0), size_in[1] / (y1 - y0)  # inches per xy unit
    placed: list[tuple[float, float, float, float]] = []
    char_w, text_h, gap = 0.075, 0.16, 0.1

    def place(p, text, colour="black"):
        px, py = (p[0] - x0) * sx, (p[1] - y0) * sy
        w = char_w * len(text)
        for dx, dy in ((1, 1), (1, -1), (-1, 1), (-1, -1), (1, 0), (-1, 0), (0, 1), (0, -1)):
            cx = px + dx * (gap + w / 2) if dx else px
            cy = py + dy * (gap + text_h / 2) if dy else py
            b = (cx - w / 2, cx + w / 2, cy - text_h / 2, cy + text_h / 2)
            if b[0] < 0.03 or b[1] > size_in[0] - 0.03 or b[2] < 0.03 or b[3] > size_in[1] - 0.03:
                continue
            if any(b[0] < q[1] and q[0] < b[1] and b[2] < q[3] and q[2] < b[3] for q in placed):
                continue
            placed.append(b)
            ax.text(
                x0 + cx / sx,
                y0 + cy / sy,
                text,
                ha="center",
                va="center",
                fontsize=_NOTE_PT,
                color=colour,
                zorder=8,
                bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.75, "pad": 0.6},
            )
            return True
        return False

    # keep the points themselves free of labels
    for p in [white, *[_interp_xy(traj, t, m) for m in marks]]:
        px, py = (p[0] - x0) * sx, (p[1] - y0) * sy
        placed.append((px - 0.04, px + 0.04, py - 0.04, py + 0.04))
    place(white, f"white ({light})")
    for p in traj[list(_ends(traj))]:  # start and end symbols (see _draw_ends)
        if np.all(np.isfinite(p)):
            px, py = (p[0] - x0) * sx, (p[1] - y0) * sy
            placed.append((px - 0.05, px + 0.05, py - 0.05, py + 0.05))
    dots = np.array([_interp_xy(traj, t, mk) for mk in marks]).reshape(-1, 2)
    dots_in = (dots - [x0, y0]) * [sx, sy]
    for i, (mk, p) in enumerate(zip(marks, dots, strict=True)):
        if not np.all(np.isfinite(p)):
            continue
        ax.plot(
            *p,
            marker="o",
            markersize=4.5,
            markerfacecolor="black",
            markeredgecolor="white",
            markeredgewidth=0.8,
            linestyle="none",
            zorder=7,
        )
        # a label among crowded dots could be read as another dot's: label only
        # dots with no other dot within 0.3 in
        others = np.delete(dots_in, i, axis=0)
        if others.size and np.min(np.hypot(*(others - dots_in[i]).T)) < 0.3:
            continue
        m = int(round(mk / period)) if math.isfinite(period) else 1
        place(p, f"m={m}")


def _interp_xy(traj: np.ndarray, t: np.ndarray, tk: float) -> np.ndarray:
    return np.array([np.interp(tk, t, traj[:, 0]), np.interp(tk, t, traj[:, 1])])
