"""Report figures of a measured thickness map: maps, histogram and line profiles.

Every function draws one PNG (150 dpi) with matplotlib's object API
(:class:`matplotlib.figure.Figure` on an Agg canvas, never ``pyplot``), so
figures can be drawn from several threads and importing this module does not
import matplotlib. Files are written atomically with
:func:`fringemap.io.write.atomic_path`.

Conventions: maps are float arrays of shape (H, W), thickness in nm, NaN for
unmeasured pixels; image axes are in px (x right, y down, whole numbers at
pixel centres) or in mm when a scale is given. Maps larger than
``max_side_px`` along either side are reduced for drawing only (see
:func:`block_mean`); statistics are never computed from the reduced copy
except the default colour limits.

Colour maps
-----------
* thickness: ``viridis``. Perceptually uniform (equal steps in thickness look
  like equal steps in colour), lightness rises monotonically so the map still
  reads in greyscale print, it is safe for the common colour-vision
  deficiencies, and its hue sweep (blue, green, yellow) is wider than
  ``cividis``'s, which makes small thickness differences easier to tell
  apart. No viridis colour is a neutral grey, so unmeasured pixels drawn in
  mid grey cannot be mistaken for data.
* confidence: ``cividis``, also perceptually uniform, deliberately different
  from the thickness map so the two are never confused side by side;
  unmeasured pixels are a light grey that ``cividis`` never reaches.
"""

from __future__ import annotations

import math
import os
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np
from numba import njit, prange

from .. import __version__
from ..errors import FringemapError, OptionError, OutputError

__all__ = [
    "DPI",
    "THICKNESS_CMAP",
    "CONFIDENCE_CMAP",
    "NAN_GREY",
    "block_mean",
    "draw_thickness_map",
    "draw_reason_map",
    "draw_confidence_map",
    "draw_histogram",
    "draw_profiles",
    "BAND_SHARE",
]

#: Resolution of every report figure (dots per inch).
DPI = 150
#: Colour map of thickness (see the module docstring for the choice).
THICKNESS_CMAP = "viridis"
#: Colour map of confidence (0-1).
CONFIDENCE_CMAP = "cividis"
#: Colour of unmeasured pixels in thickness maps (neutral mid grey, sRGB 0-1).
NAN_GREY = (0.62, 0.62, 0.62)
#: Colour of unmeasured pixels in confidence maps (light neutral grey).
_NAN_LIGHT = (0.86, 0.86, 0.86)
#: Colour of reason codes without a label/colour.
_UNKNOWN_CODE = (0.35, 0.35, 0.35)

_TITLE_PT = 12.5
_LABEL_PT = 10.5
_TICK_PT = 9.5
_NOTE_PT = 8.5


# ----------------------------------------------------------------------- helpers


def _new_figure(width_in: float, height_in: float, *, constrained: bool = False):
    """A Figure on its own Agg canvas (no pyplot state)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(
        figsize=(width_in, height_in),
        dpi=DPI,
        layout="constrained" if constrained else None,
        facecolor="white",
    )
    FigureCanvasAgg(fig)
    return fig


def warm_up() -> None:
    """Import matplotlib and draw a tiny figure with text, a colour bar and an image
    into memory: the first real figure then skips the font loading and caches."""
    import io

    fig, ax, box, size = _map_axes((8, 8), right_in=1.0)
    mappable = _coloured_image(ax, np.eye(8), THICKNESS_CMAP, NAN_GREY, 0.0, 1.0, None)
    _style_image_axes(ax, ((0, 8), (8, 0)), "px")
    _colourbar(fig, mappable, box, size, "thickness (nm)")
    _title(ax, "warm-up")
    fig.savefig(io.BytesIO(), format="png", dpi=20)


def _save_png(fig, path: str | os.PathLike[str]) -> Path:
    """Write ``fig`` as a PNG to ``path`` atomically; return the path."""
    from ..io.write import atomic_path

    target = Path(os.fspath(path))
    with atomic_path(target) as tmp:
        fig.savefig(
            tmp,
            format="png",
            dpi=DPI,
            facecolor="white",
            metadata={"Software": f"fringemap {__version__}"},
            # zlib level 3: about 40 % faster than the default 6, files about 20 % larger
            pil_kwargs={"compress_level": 3},
        )
    if not target.is_file():  # pragma: no cover - atomic_path raises first
        raise OutputError("was not written", where=str(target))
    return target


def _as_map(values, name: str) -> np.ndarray:
    a = np.asarray(values)
    if a.ndim != 2 or a.size == 0:
        raise FringemapError(f"expected a non-empty {name} map of shape (H, W), got {a.shape}")
    return a


def _reduction(shape: tuple[int, int], max_side_px: int) -> int:
    """Whole-number reduction factor so both sides are at most ``max_side_px``."""
    if not (isinstance(max_side_px, int | np.integer) and max_side_px >= 16):
        raise OptionError(
            f"max_side_px must be a whole number >= 16, got {max_side_px!r}", where="max_side_px"
        )
    return max(1, math.ceil(max(shape) / int(max_side_px)))


def block_mean(values: np.ndarray, factor: int) -> np.ndarray:
    """NaN-aware mean over ``factor`` x ``factor`` blocks of a 2-D map.

    A block is NaN when fewer than half of its (real, non-padding) pixels are
    finite, so unmeasured areas keep roughly their size on the reduced map.
    Partial blocks at the right and bottom edges average the pixels they
    hold.

    Parameters
    ----------
    values : ndarray of shape (H, W)
        Float map (any units); non-finite values are unmeasured.
    factor : int
        Block side, px (>= 1).

    Returns
    -------
    ndarray of shape (ceil(H / factor), ceil(W / factor)), float32
    """
    a = np.asarray(values)
    if a.dtype not in (np.float32, np.float64):
        a = a.astype(np.float32)
    k = int(factor)
    if k <= 1:
        return a.astype(np.float32)
    return _block_nanmean(np.ascontiguousarray(a), k)


@njit(cache=True, parallel=True, nogil=True)
def _block_nanmean(a, k):
    h, w = a.shape
    hc, wc = -(-h // k), -(-w // k)
    out = np.empty((hc, wc), dtype=np.float32)
    for by in prange(hc):
        y1 = min(h, by * k + k)
        for bx in range(wc):
            x1 = min(w, bx * k + k)
            total = 0.0
            count = 0
            for y in range(by * k, y1):
                for x in range(bx * k, x1):
                    v = a[y, x]
                    if np.isfinite(v):
                        total += v
                        count += 1
            real = (y1 - by * k) * (x1 - bx * k)
            out[by, bx] = total / count if count > 0 and 2 * count >= real else np.nan
    return out


def _extent(shape_full: tuple[int, int], factor: int, mm_per_px: float | None):
    """imshow extent of a reduced map so it sits over the original px grid."""
    h, w = shape_full
    hp, wp = -(-h // factor) * factor, -(-w // factor) * factor
    s = 1.0 if mm_per_px is None else mm_per_px
    # reduced pixel j covers original px j*k - 0.5 ... (j+1)*k - 0.5
    ext = (-0.5 * s, (wp - 0.5) * s, (hp - 0.5) * s, -0.5 * s)
    lims = ((-0.5 * s, (w - 0.5) * s), ((h - 0.5) * s, -0.5 * s))
    return ext, lims


def _map_axes(
    shape: tuple[int, int], *, right_in: float, title_lines: int = 1, side_in: float = 7.0
):
    """Figure with an image axes sized to the map's aspect ratio.

    Returns ``fig, ax, (x0_in, y0_in, w_in, h_in), (fig_w_in, fig_h_in)``: the
    axes' box and the figure's size in inches (for placing a colour bar or
    legend to the right of the axes).
    """
    h, w = shape
    aspect = h / w
    if aspect <= 1:
        aw, ah = side_in, side_in * aspect
    else:
        aw, ah = side_in / aspect, side_in
    # very long, thin maps: keep a readable box (the image is then stretched)
    aw, ah = max(aw, 2.5), max(ah, 1.2)
    left, bottom = 0.95, 0.7
    top = 0.25 + 0.28 * title_lines
    fw, fh = left + aw + right_in, bottom + ah + top
    fig = _new_figure(fw, fh)
    ax = fig.add_axes((left / fw, bottom / fh, aw / fw, ah / fh))
    return fig, ax, (left, bottom, aw, ah), (fw, fh)


_PIXEL_IMAGE = None


def _pixel_image_class():
    """An artist that draws an RGBA image into its axes by nearest-neighbour sampling,
    one sample per output pixel (defined on first use: matplotlib is imported lazily)."""
    global _PIXEL_IMAGE
    if _PIXEL_IMAGE is None:
        from matplotlib.artist import Artist

        class PixelImage(Artist):
            zorder = 0  # under the spines, ticks and any text or scale bar

            def __init__(self, ax, rgba, extent):
                super().__init__()
                self._rgba = np.ascontiguousarray(rgba, dtype=np.uint8)
                self._extent = extent
                self.set_clip_box(ax.bbox)
                self.axes = ax

            def draw(self, renderer):
                if not self.get_visible():
                    return
                box = self.axes.bbox
                x0, x1 = round(box.x0), round(box.x1)
                y0, y1 = round(box.y0), round(box.y1)
                if x1 <= x0 or y1 <= y0:
                    return
                (xa, xb), (ya, yb) = self.axes.get_xlim(), self.axes.get_ylim()
                left, right, bottom, top = self._extent
                nh, nw = self._rgba.shape[:2]
                # the data coordinate at the centre of each output column and row (rows
                # from the top), and the image pixel that covers it
                u = xa + (np.arange(x1 - x0) + 0.5) / (x1 - x0) * (xb - xa)
                v = yb + (np.arange(y1 - y0) + 0.5) / (y1 - y0) * (ya - yb)
                cols = np.floor((u - left) / (right - left) * nw).astype(np.int64)
                rows = np.floor((v - top) / (bottom - top) * nh).astype(np.int64)
                # one 32-bit word per RGBA pixel: a quarter of the gathers
                words = self._rgba.view(np.uint32).reshape(nh, nw)
                out = np.zeros((rows.size, cols.size), dtype=np.uint32)  # transparent
                cin = (cols >= 0) & (cols < nw)
                rin = (rows >= 0) & (rows < nh)
                out[np.ix_(rin, cin)] = words[rows[rin]][:, cols[cin]]
                out = out.view(np.uint8).reshape(rows.size, cols.size, 4)
                gc = renderer.new_gc()
                gc.set_clip_rectangle(box)
                renderer.draw_image(gc, x0, y0, out[::-1])  # Agg puts row 0 at the bottom
                gc.restore()

        _PIXEL_IMAGE = PixelImage
    return _PIXEL_IMAGE


def _coloured_image(ax, values, cmap_name: str, bad, vmin: float, vmax: float, extent):
    """Colour a float map to 8-bit RGBA ourselves and show it; return a mappable
    for the colour bar.

    The map is coloured once, before drawing, and drawn by nearest-neighbour
    sampling at the output's pixels (:func:`_pixel_image_class`): exactly the
    colour map's colours on screen, and none of the float resampling and
    masked-array work of ``imshow`` on a megapixel map. ``extent`` is
    (left, right, bottom, top) in data coordinates, as for ``imshow`` (default:
    pixel centres at whole numbers).
    """
    import matplotlib
    from matplotlib.cm import ScalarMappable
    from matplotlib.colors import Normalize

    cmap = matplotlib.colormaps[cmap_name].with_extremes(bad=bad)
    norm = Normalize(vmin=vmin, vmax=vmax)
    rgba = cmap(norm(np.ma.masked_invalid(values)), bytes=True)
    if extent is None:
        h, w = rgba.shape[:2]
        extent = (-0.5, w - 0.5, h - 0.5, -0.5)
    ax.add_artist(_pixel_image_class()(ax, rgba, extent))
    return ScalarMappable(norm=norm, cmap=cmap)


def _style_image_axes(ax, lims, unit: str) -> None:
    ax.set_xlim(*lims[0])
    ax.set_ylim(*lims[1])
    ax.set_aspect("auto")
    ax.set_xlabel(f"x ({unit})", fontsize=_LABEL_PT)
    ax.set_ylabel(f"y ({unit})", fontsize=_LABEL_PT)
    ax.tick_params(labelsize=_TICK_PT)


def _colourbar(fig, mappable, box_in, fig_in, label: str, *, extend: str = "neither"):
    left, bottom, aw, ah = box_in
    fw, fh = fig_in
    cax = fig.add_axes(((left + aw + 0.2) / fw, bottom / fh, 0.2 / fw, ah / fh))
    cb = fig.colorbar(mappable, cax=cax, extend=extend)
    cb.set_label(label, fontsize=_LABEL_PT)
    cb.ax.tick_params(labelsize=_TICK_PT)
    return cb


def _nice_length(limit: float) -> float:
    """Largest 1, 2 or 5 x 10^k not above ``limit`` (> 0)."""
    exp = math.floor(math.log10(limit))
    for m in (5.0, 2.0, 1.0):
        if m * 10.0**exp <= limit:
            return m * 10.0**exp
    return 10.0**exp  # pragma: no cover


def _scale_bar(ax, width_mm: float) -> None:
    """A scale bar (a round number of mm, about a fifth of the width), lower right."""
    from matplotlib.font_manager import FontProperties
    from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar

    length = _nice_length(width_mm / 5.0)
    label = f"{length:g} mm" if length >= 1 else f"{length * 1000:g} µm"
    bar = AnchoredSizeBar(
        ax.transData,
        length,
        label,
        loc="lower right",
        pad=0.4,
        borderpad=0.6,
        sep=4,
        color="black",
        frameon=True,
        size_vertical=0,
        fontproperties=FontProperties(size=_NOTE_PT + 0.5),
    )
    bar.size_bar.get_children()[0].set_linewidth(3.0)
    bar.patch.set_facecolor("white")
    bar.patch.set_alpha(0.92)
    bar.patch.set_edgecolor("0.4")
    ax.add_artist(bar)


def _check_scale(scale_px_per_mm) -> float | None:
    if scale_px_per_mm is None:
        return None
    try:
        v = float(scale_px_per_mm)
    except (TypeError, ValueError):
        v = math.nan
    if not (math.isfinite(v) and v > 0):
        raise OptionError(f"expected a scale > 0 px/mm, got {scale_px_per_mm!r}", where="--scale")
    return 1.0 / v


def _title(ax, title: str) -> None:
    ax.set_title(title, fontsize=_TITLE_PT, loc="left", pad=8)


# ------------------------------------------------------------------ thickness map


def draw_thickness_map(
    thickness_nm: np.ndarray,
    path: str | os.PathLike[str],
    *,
    title: str,
    vmin_nm: float | None = None,
    vmax_nm: float | None = None,
    scale_px_per_mm: float | None = None,
    max_side_px: int = 1600,
) -> Path:
    """Draw a thickness map as a heat map with a colour bar.

    Parameters
    ----------
    thickness_nm : ndarray of shape (H, W)
        Film thickness, nm; NaN (or any non-finite value) for unmeasured
        pixels, which are drawn in neutral grey (:data:`NAN_GREY`).
    path : str or path-like
        PNG file to write.
    title : str
        Figure title.
    vmin_nm, vmax_nm : float, optional
        Colour limits, nm. By default the 0.5th and 99.5th percentiles of
        the measured values (of the drawing copy), so a few wild pixels do
        not wash out the map; the colour bar then shows arrows for values
        beyond the limits.
    scale_px_per_mm : float, optional
        Pixels per mm (> 0): axes in mm and a scale bar; otherwise axes in px.
    max_side_px : int
        Maps with a longer side are reduced by a whole factor with a
        NaN-aware block mean (:func:`block_mean`) before drawing.

    Returns
    -------
    pathlib.Path
        ``path``.
    """
    t = _as_map(thickness_nm, "thickness")
    mm_per_px = _check_scale(scale_px_per_mm)
    k = _reduction(t.shape, max_side_px)
    shown = block_mean(t, k)
    finite = shown[np.isfinite(shown)]
    lo_auto, hi_auto = 0.0, 1.0
    if finite.size:
        lo_auto, hi_auto = (float(v) for v in np.percentile(finite, [0.5, 99.5]))
    lo = lo_auto if vmin_nm is None else float(vmin_nm)
    hi = hi_auto if vmax_nm is None else float(vmax_nm)
    if not (math.isfinite(lo) and math.isfinite(hi)):
        raise OptionError(f"colour limits must be finite, got {lo!r}, {hi!r} nm", where="vmin_nm")
    if hi < lo:
        raise OptionError(f"vmax_nm ({hi:g}) must not be below vmin_nm ({lo:g})", where="vmax_nm")
    if hi == lo:  # a flat map: centre it in a 2 nm window
        lo, hi = lo - 1.0, hi + 1.0
    extend = "neither"
    if finite.size:
        below, above = bool(finite.min() < lo), bool(finite.max() > hi)
        extend = {(True, True): "both", (True, False): "min", (False, True): "max"}.get(
            (below, above), "neither"
        )

    fig, ax, box, fig_in = _map_axes(t.shape, right_in=1.55)
    ext, lims = _extent(t.shape, k, mm_per_px)
    im = _coloured_image(ax, shown, THICKNESS_CMAP, NAN_GREY, lo, hi, ext)
    unit = "px" if mm_per_px is None else "mm"
    _style_image_axes(ax, lims, unit)
    _title(ax, title)
    _colourbar(fig, im, box, fig_in, "thickness (nm)", extend=extend)
    if mm_per_px is not None:
        _scale_bar(ax, t.shape[1] * mm_per_px)
    notes = []
    if not finite.size:
        ax.text(
            0.5,
            0.5,
            "no measured pixels",
            transform=ax.transAxes,
            ha="center",
            va="center",
            fontsize=_LABEL_PT,
            color="black",
        )
    else:
        measured = float(np.isfinite(t).mean()) * 100.0
        notes.append(f"{measured:.1f} % of pixels measured")
    notes.append("grey = not measured")
    if k > 1:
        notes.append(f"drawn at 1/{k} resolution ({k}\u00d7{k} px block means)")
    _footnote(fig, box, fig_in, " \u00b7 ".join(notes))
    return _save_png(fig, path)


def _footnote(fig, box_in, fig_in, text: str) -> None:
    """Small grey note under the axes' x label, left-aligned with the axes."""
    left, _, _, _ = box_in
    fw, fh = fig_in
    fig.text(left / fw, 0.06 / fh, text, fontsize=_NOTE_PT, color="0.35", ha="left", va="bottom")


# -------------------------------------------------------------------- reason map


def _rgb01(colour, code: int) -> tuple[float, float, float]:
    try:
        c = tuple(float(v) for v in colour)
    except (TypeError, ValueError):
        raise OptionError(
            f"colour of reason {code} must be an (r, g, b) tuple, got {colour!r}", where="colours"
        ) from None
    if len(c) not in (3, 4) or not all(math.isfinite(v) and v >= 0 for v in c):
        raise OptionError(
            f"colour of reason {code} must be an (r, g, b) tuple, got {colour!r}", where="colours"
        )
    c = c[:3]
    if max(c) > 1.0:  # given as 0-255
        if max(c) > 255:
            raise OptionError(
                f"colour of reason {code} is outside 0-255: {colour!r}", where="colours"
            )
        c = tuple(v / 255.0 for v in c)
    return c  # type: ignore[return-value]


def draw_reason_map(
    reasons_uint8: np.ndarray,
    path: str | os.PathLike[str],
    *,
    labels: Mapping[int, str],
    colours: Mapping[int, Sequence[float]],
    title: str,
    scale_px_per_mm: float | None = None,
    max_side_px: int = 1600,
) -> Path:
    """Draw a per-pixel reason-code map with a legend of the reason names.

    Parameters
    ----------
    reasons_uint8 : ndarray of shape (H, W), uint8
        One reason code per pixel (the codes are defined by the caller).
    path : str or path-like
        PNG file to write.
    labels : mapping of int to str
        Name of each code, e.g. ``{0: "measured", 1: "saturated"}``. The
        legend lists the codes in this mapping plus any other code present,
        each with its share of the pixels (%).
    colours : mapping of int to tuple
        Colour of each code as ``(r, g, b)`` in 0-1 (or 0-255 if any
        component is above 1). Codes without a colour, and codes present but
        not labelled, are dark grey.
    title : str
        Figure title.
    scale_px_per_mm : float, optional
        Pixels per mm: axes in mm and a scale bar.
    max_side_px : int
        Larger maps are drawn from every k-th pixel (nearest sampling; a
        category has no mean). Shares in the legend use every pixel.

    Returns
    -------
    pathlib.Path
        ``path``.
    """
    r = _as_map(reasons_uint8, "reason")
    if r.dtype.kind not in "ui" or (r.size and (r.min() < 0 or r.max() > 255)):
        raise OptionError(
            f"reason codes must be integers 0-255, got dtype {r.dtype}", where="reasons"
        )
    r = r.astype(np.uint8, copy=False)
    mm_per_px = _check_scale(scale_px_per_mm)
    counts = np.bincount(r.ravel(), minlength=256)
    lut = np.tile(np.asarray(_UNKNOWN_CODE), (256, 1))
    for code, colour in colours.items():
        if not 0 <= int(code) <= 255:
            raise OptionError(f"reason codes must be 0-255, got {code!r}", where="colours")
        lut[int(code)] = _rgb01(colour, int(code))
    codes = sorted({int(c) for c in labels} | {int(c) for c in np.flatnonzero(counts)})
    k = _reduction(r.shape, max_side_px)
    shown = r[::k, ::k]
    rgb = lut[shown]

    from matplotlib.patches import Patch

    names = []
    for code in codes:
        name = labels.get(code, f"code {code} (no label)")
        share = 100.0 * counts[code] / r.size
        names.append((code, f"{name} \u2014 {_percent(share)}"))
    longest = max((len(n) for _, n in names), default=10)
    right = 0.45 + min(0.072 * longest + 0.55, 4.2)
    fig, ax, box, fig_in = _map_axes(r.shape, right_in=right)
    # the whole-factor stride keeps pixel j of `shown` at original px j*k
    h, w = r.shape
    s = 1.0 if mm_per_px is None else mm_per_px
    ext = (-0.5 * s, (shown.shape[1] * k - 0.5) * s, (shown.shape[0] * k - 0.5) * s, -0.5 * s)
    lims = ((-0.5 * s, (w - 0.5) * s), ((h - 0.5) * s, -0.5 * s))
    ax.imshow(
        np.round(rgb * 255).astype(np.uint8), extent=ext, interpolation="nearest", origin="upper"
    )
    _style_image_axes(ax, lims, "px" if mm_per_px is None else "mm")
    _title(ax, title)
    if mm_per_px is not None:
        _scale_bar(ax, w * mm_per_px)
    handles = [
        Patch(facecolor=tuple(lut[code]), edgecolor="0.3", linewidth=0.6, label=text)
        for code, text in names
    ]
    left, bottom, aw, ah = box
    fw, fh = fig_in
    fig.legend(
        handles=handles,
        loc="upper left",
        bbox_to_anchor=((left + aw + 0.2) / fw, (bottom + ah) / fh),
        frameon=False,
        fontsize=_TICK_PT,
        title="reason (share of pixels)",
        title_fontsize=_LABEL_PT,
        alignment="left",
        handlelength=1.6,
        handleheight=1.1,
        borderaxespad=0.0,
    )
    if k > 1:
        _footnote(
            fig, box, fig_in, f"drawn from 1 pixel in {k} along each side; shares count every pixel"
        )
    return _save_png(fig, path)


def _percent(share: float) -> str:
    if share == 0:
        return "0 %"
    if share < 0.1:
        return "<0.1 %"
    return f"{share:.1f} %"


# ---------------------------------------------------------------- confidence map


def draw_confidence_map(
    confidence: np.ndarray,
    path: str | os.PathLike[str],
    *,
    title: str,
    scale_px_per_mm: float | None = None,
    max_side_px: int = 1600,
) -> Path:
    """Draw a confidence map (0-1) with a colour bar.

    Parameters
    ----------
    confidence : ndarray of shape (H, W)
        Confidence per pixel, 0 (none) to 1 (full); NaN where not measured
        (drawn light grey). Values outside 0-1 are drawn at the ends.
    path : str or path-like
        PNG file to write.
    title : str
        Figure title.
    scale_px_per_mm : float, optional
        Pixels per mm: axes in mm and a scale bar.
    max_side_px : int
        Larger maps are reduced with a NaN-aware block mean.

    Returns
    -------
    pathlib.Path
        ``path``.
    """
    c = _as_map(confidence, "confidence")
    if c.dtype.kind not in "fiub":
        raise OptionError(f"confidence must be numeric, got dtype {c.dtype}", where="confidence")
    mm_per_px = _check_scale(scale_px_per_mm)
    k = _reduction(c.shape, max_side_px)
    shown = block_mean(c.astype(np.float32, copy=False), k)

    fig, ax, box, fig_in = _map_axes(c.shape, right_in=1.45)
    ext, lims = _extent(c.shape, k, mm_per_px)
    im = _coloured_image(ax, shown, CONFIDENCE_CMAP, _NAN_LIGHT, 0.0, 1.0, ext)
    _style_image_axes(ax, lims, "px" if mm_per_px is None else "mm")
    _title(ax, title)
    cb = _colourbar(fig, im, box, fig_in, "confidence (0\u20131)")
    cb.set_ticks([0, 0.25, 0.5, 0.75, 1.0])
    if mm_per_px is not None:
        _scale_bar(ax, c.shape[1] * mm_per_px)
    notes = ["light grey = not measured"]
    measured = int(np.count_nonzero(np.isfinite(c)))
    if measured:
        low = int(np.count_nonzero(c < 0.5))  # NaN compares False
        notes.insert(0, f"{100.0 * low / measured:.1f} % of measured pixels below 0.5")
    if k > 1:
        notes.append(f"drawn at 1/{k} resolution")
    _footnote(fig, box, fig_in, " \u00b7 ".join(notes))
    return _save_png(fig, path)


# --------------------------------------------------------------------- histogram


def draw_histogram(
    thickness_nm: np.ndarray,
    path: str | os.PathLike[str],
    *,
    title: str,
    spec: tuple[float, float] | None = None,
) -> Path:
    """Histogram of the measured thicknesses, with the specification limits.

    The plotted range is the 0.1st-99.9th percentile of the measured values
    (widened to include the spec limits), with at most 200 bins
    (Freedman-Diaconis rule, at least 20); how many values fall outside is
    written in the summary box, together with the count, mean, standard
    deviation and, with a spec, the share in spec (``|t - target| <= tol``).

    Parameters
    ----------
    thickness_nm : array_like
        Thicknesses, nm, any shape; non-finite values are ignored.
    path : str or path-like
        PNG file to write.
    title : str
        Figure title.
    spec : (float, float), optional
        ``(target_nm, tol_nm)``: the target is drawn dashed, the limits
        ``target ± tol`` as solid lines over a lightly shaded in-spec band.

    Returns
    -------
    pathlib.Path
        ``path``.
    """
    t = np.asarray(thickness_nm, dtype=np.float64).ravel()
    vals = t[np.isfinite(t)]
    if spec is not None:
        try:
            target, tol = (float(v) for v in spec)
        except (TypeError, ValueError):
            raise OptionError(
                f"spec must be (target_nm, tol_nm), got {spec!r}", where="--spec"
            ) from None
        if not (math.isfinite(target) and math.isfinite(tol) and tol >= 0):
            raise OptionError(
                f"spec must be a finite target and a tolerance >= 0 nm, got {spec!r}",
                where="--spec",
            )

    fig = _new_figure(9.0, 4.8, constrained=True)
    gs = fig.add_gridspec(1, 2, width_ratios=(4.0, 1.2))
    ax = fig.add_subplot(gs[0])
    side = fig.add_subplot(gs[1])
    side.axis("off")
    _title(ax, title)
    ax.set_xlabel("thickness (nm)", fontsize=_LABEL_PT)
    ax.set_ylabel("pixels", fontsize=_LABEL_PT)
    ax.tick_params(labelsize=_TICK_PT)
    lines = [f"n     {vals.size:,}"]
    if vals.size:
        lo, q25, q75, hi = (float(v) for v in np.percentile(vals, [0.1, 25, 75, 99.9]))
        if spec is not None:
            lo, hi = min(lo, target - tol), max(hi, target + tol)
        if hi - lo < 1e-6:
            lo, hi = lo - 1.0, hi + 1.0
        width = 2.0 * (q75 - q25) / vals.size ** (1 / 3)
        bins = int(np.clip(math.ceil((hi - lo) / width) if width > 0 else 50, 20, 200))
        counts, edges = np.histogram(vals, bins=bins, range=(lo, hi))
        ax.stairs(counts, edges, fill=True, color="#4a6fa5", alpha=0.85, zorder=2)
        ax.stairs(counts, edges, color="#2b4468", linewidth=0.8, zorder=3)
        ax.set_xlim(lo - 0.02 * (hi - lo), hi + 0.02 * (hi - lo))
        ax.set_ylim(0, max(counts.max(), 1) * 1.05)
        mean, std = float(vals.mean()), float(vals.std())
        lines += [
            f"mean  {mean:.2f} nm",
            f"std   {std:.2f} nm",
            f"range {vals.min():.1f}\u2013{vals.max():.1f} nm",
        ]
        outside = vals.size - int(counts.sum())
        if outside:
            lines.append(f"{outside:,} beyond the\nplotted range")
    else:
        ax.text(
            0.5,
            0.5,
            "no measured pixels",
            transform=ax.transAxes,
            ha="center",
            va="center",
            fontsize=_LABEL_PT,
        )
    handles = []
    if spec is not None:
        from matplotlib.lines import Line2D
        from matplotlib.patches import Patch

        ax.axvspan(target - tol, target + tol, color="#7fbf7f", alpha=0.18, zorder=1, lw=0)
        ax.axvline(target, color="#b22222", linestyle="--", linewidth=1.6, zorder=4)
        for x in (target - tol, target + tol):
            ax.axvline(x, color="#b22222", linestyle="-", linewidth=1.4, zorder=4)
        handles = [
            Line2D(
                [],
                [],
                color="#b22222",
                linestyle="--",
                linewidth=1.6,
                label=f"target {target:g} nm",
            ),
            Line2D(
                [],
                [],
                color="#b22222",
                linestyle="-",
                linewidth=1.4,
                label=f"limits \u00b1{tol:g} nm",
            ),
            Patch(facecolor="#7fbf7f", alpha=0.35, label="in spec"),
        ]
        if vals.size:
            ok = np.abs(vals - target) <= tol
            lines.append(f"in spec {100.0 * ok.mean():.1f} %")
    if handles:
        side.legend(
            handles=handles,
            loc="upper left",
            fontsize=_TICK_PT,
            frameon=False,
            borderaxespad=0.0,
            handlelength=1.8,
        )
    side.text(
        0.0,
        0.76 if handles else 1.0,
        "\n".join(lines),
        transform=side.transAxes,
        ha="left",
        va="top",
        fontsize=_TICK_PT,
        family="monospace",
        linespacing=1.5,
    )
    ax.grid(axis="y", color="0.88", linewidth=0.7, zorder=0)
    ax.set_axisbelow(True)
    return _save_png(fig, path)


# ---------------------------------------------------------------------- profiles

#: Half-width of the confidence band at confidence 0, as a share of the span
#: of the plotted thickness values (see :func:`draw_profiles`).
BAND_SHARE = 0.08


def draw_profiles(
    profiles: Sequence,
    path: str | os.PathLike[str],
    *,
    scale=None,
    title: str = "Thickness profiles",
) -> Path:
    """Thickness along one or more lines, with a band that widens as confidence falls.

    Two panels share the distance axis: thickness (top) and confidence
    (bottom, 0-1). Each profile has its own colour and is named P1, P2, ...
    in the order given.

    The band around each thickness curve is a visual cue, not an
    uncertainty interval: its half-width is
    ``(1 - confidence) * BAND_SHARE * span`` nm, where ``span`` is the range
    of all plotted thicknesses (at least 1 nm) and ``BAND_SHARE`` = 0.08, so
    there is no band at confidence 1 and a band of ±8 % of the span at
    confidence 0. Confidence is clipped to 0-1; where it is unknown (NaN)
    there is no band. Unmeasured samples (NaN thickness) leave gaps.

    Parameters
    ----------
    profiles : sequence of Profile
        Objects with float arrays ``distance_px`` (px), ``thickness_nm``
        (nm) and ``confidence`` (0-1, NaN unknown) of equal length (see
        :class:`fringemap.stats.Profile`).
    path : str or path-like
        PNG file to write.
    scale : Scale, optional
        Any object with ``mm_per_px``: distances in mm instead of px.
    title : str
        Figure title.

    Returns
    -------
    pathlib.Path
        ``path``.
    """
    profiles = list(profiles)
    if not profiles:
        raise OptionError("no profiles to draw", where="--profile")
    factor, unit = 1.0, "px"
    if scale is not None:
        factor, unit = float(scale.mm_per_px), "mm"
    data = []
    for i, p in enumerate(profiles, start=1):
        d = np.asarray(p.distance_px, dtype=np.float64).ravel() * factor
        t = np.asarray(p.thickness_nm, dtype=np.float64).ravel()
        c = np.asarray(p.confidence, dtype=np.float64).ravel()
        if not (d.size == t.size == c.size):
            raise FringemapError(
                f"profile P{i} has arrays of different lengths: distance {d.size}, "
                f"thickness {t.size}, confidence {c.size}"
            )
        data.append((f"P{i}", d, t, c))
    all_t = np.concatenate([t for _, _, t, _ in data])
    all_t = all_t[np.isfinite(all_t)]
    span = max(float(np.ptp(all_t)) if all_t.size else 0.0, 1.0)
    halfmax = BAND_SHARE * span

    import matplotlib

    palette = matplotlib.colormaps["tab10"].colors
    fig = _new_figure(9.0, 6.0, constrained=True)
    gs = fig.add_gridspec(2, 1, height_ratios=(3.0, 1.15))
    ax = fig.add_subplot(gs[0])
    axc = fig.add_subplot(gs[1], sharex=ax)
    for j, (name, d, t, c) in enumerate(data):
        colour = palette[j % len(palette)]
        conf = np.clip(c, 0.0, 1.0)
        half = (1.0 - conf) * halfmax
        ok = np.isfinite(t) & np.isfinite(half)
        ax.fill_between(
            d,
            np.where(ok, t - half, np.nan),
            np.where(ok, t + half, np.nan),
            where=ok,
            color=colour,
            alpha=0.28,
            linewidth=0,
            interpolate=False,
        )
        ax.plot(d, t, color=colour, linewidth=1.6, label=name)
        axc.plot(d, conf, color=colour, linewidth=1.3)
    _title(ax, title)
    ax.set_ylabel("thickness (nm)", fontsize=_LABEL_PT)
    ax.tick_params(labelsize=_TICK_PT, labelbottom=False)
    ax.grid(color="0.9", linewidth=0.7)
    ax.legend(loc="best", fontsize=_TICK_PT, ncols=min(len(data), 6), frameon=True, framealpha=0.9)
    axc.set_ylim(-0.04, 1.04)
    axc.set_yticks([0, 0.5, 1])
    axc.axhline(0.5, color="0.55", linewidth=0.8, linestyle=":")
    axc.set_ylabel("confidence", fontsize=_LABEL_PT)
    axc.set_xlabel(f"distance along line ({unit})", fontsize=_LABEL_PT)
    axc.tick_params(labelsize=_TICK_PT)
    axc.grid(color="0.9", linewidth=0.7)
    # a figure-level x label is laid out by the constrained engine, so the note
    # never collides with the axis label
    fig.supxlabel(
        f"shaded band: half-width = (1 \u2212 confidence) \u00d7 {halfmax:.3g} nm "
        f"({BAND_SHARE:.0%} of the thickness span), none where confidence is unknown",
        x=0.99,
        ha="right",
        fontsize=_NOTE_PT,
        color="0.35",
    )
    return _save_png(fig, path)
