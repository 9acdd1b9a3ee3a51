"""Figures of a time series: the region's mean thickness against time, and the kymograph.

Both are drawn with matplotlib's object API (a :class:`matplotlib.figure.Figure`
on its own Agg canvas, no ``pyplot``) and written atomically as PNG with
:func:`fringemap.io.write.atomic_path`. Times are in s, thicknesses in nm,
distances along the profile line in px. Importing this module does not import
matplotlib.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np

from .figures import DPI, NAN_GREY, THICKNESS_CMAP

__all__ = ["draw_series", "draw_kymograph"]

_LABEL_PT = 10.5
_TICK_PT = 9.5
_TITLE_PT = 12.0


def _figure(width_in: float, height_in: float):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width_in, height_in), dpi=DPI, layout="constrained", facecolor="white")
    FigureCanvasAgg(fig)
    return fig


def _save(fig, path: str | os.PathLike[str]) -> Path:
    from .figures import _save_png

    return _save_png(fig, path)


def _edges(centres: np.ndarray, half_width: float) -> np.ndarray:
    """Cell edges around sorted centres: midpoints inside, ``half_width`` beyond the ends."""
    c = np.asarray(centres, dtype=np.float64)
    if c.size == 1:
        return np.array([c[0] - half_width, c[0] + half_width])
    mid = 0.5 * (c[1:] + c[:-1])
    return np.concatenate(([c[0] - (mid[0] - c[0])], mid, [c[-1] + (c[-1] - mid[-1])]))


def draw_series(
    time_s: np.ndarray,
    mean_nm: np.ndarray,
    std_nm: np.ndarray,
    path: str | os.PathLike[str],
    *,
    title: str,
    fit=None,
) -> Path:
    """Mean thickness of the region against time, with its spread and the fitted line.

    Parameters
    ----------
    time_s, mean_nm, std_nm : ndarray of shape (N,)
        Time of each frame (s), the region's mean thickness and its standard
        deviation over the region (nm; NaN where nothing was measured).
    path : str or path-like
        PNG file to write.
    title : str
        Figure title.
    fit : RateFit, optional
        The least-squares line (:class:`fringemap.series.RateFit`), drawn and
        quoted with its standard error and R².

    Returns
    -------
    pathlib.Path
        ``path``.
    """
    t = np.asarray(time_s, dtype=np.float64)
    m = np.asarray(mean_nm, dtype=np.float64)
    s = np.asarray(std_nm, dtype=np.float64)
    fig = _figure(7.0, 4.2)
    ax = fig.add_subplot()
    ok = np.isfinite(m)
    ax.errorbar(
        t[ok],
        m[ok],
        yerr=np.nan_to_num(s[ok]),
        fmt="o",
        ms=4,
        color="#1f5fa8",
        ecolor="#9db7d9",
        elinewidth=1.0,
        capsize=2,
        label="region mean ± std over the region",
    )
    if fit is not None and math.isfinite(fit.rate_nm_per_s) and ok.any():
        tt = np.linspace(float(t[ok].min()), float(t[ok].max()), 50)
        se = fit.rate_std_error_nm_per_s
        se_text = f" ± {se:.3g}" if math.isfinite(se) else ""
        r2 = f", R² = {fit.r_squared:.4f}" if math.isfinite(fit.r_squared) else ""
        ax.plot(
            tt,
            fit.intercept_nm + fit.rate_nm_per_s * tt,
            color="#c0392b",
            lw=1.5,
            label=f"fit: {fit.rate_nm_per_s:.4g}{se_text} nm/s{r2}",
        )
    if not ok.any():
        ax.text(0.5, 0.5, "no frame measured", transform=ax.transAxes, ha="center")
    ax.set_xlabel("time (s)", fontsize=_LABEL_PT)
    ax.set_ylabel("thickness (nm)", fontsize=_LABEL_PT)
    ax.set_title(title, fontsize=_TITLE_PT, loc="left")
    ax.tick_params(labelsize=_TICK_PT)
    ax.grid(True, color="0.9")
    if ok.any():
        ax.legend(fontsize=_TICK_PT, loc="best", frameon=True)
    return _save(fig, path)


def draw_kymograph(
    thickness_nm: np.ndarray,
    time_s: np.ndarray,
    distance_px: np.ndarray,
    path: str | os.PathLike[str],
    *,
    title: str,
) -> Path:
    """Thickness along the profile line (x, px) against time (y, s, downwards), colour in nm.

    Parameters
    ----------
    thickness_nm : ndarray of shape (N, M)
        One row per frame (in time order), one column per sample along the
        line; NaN (drawn grey) where unmeasured.
    time_s : ndarray of shape (N,)
        Time of each row (s), increasing; rows may be unevenly spaced.
    distance_px : ndarray of shape (M,)
        Distance of each sample from the line's start (px).
    path : str or path-like
        PNG file to write.
    title : str
        Figure title.

    Returns
    -------
    pathlib.Path
        ``path``.
    """
    import matplotlib
    from matplotlib.colors import Normalize

    k = np.asarray(thickness_nm, dtype=np.float64)
    t = np.asarray(time_s, dtype=np.float64)
    d = np.asarray(distance_px, dtype=np.float64)
    finite = k[np.isfinite(k)]
    lo, hi = (float(v) for v in np.percentile(finite, [0.5, 99.5])) if finite.size else (0, 1)
    if hi <= lo:
        lo, hi = lo - 1.0, hi + 1.0
    cmap = matplotlib.colormaps[THICKNESS_CMAP].with_extremes(bad=NAN_GREY)
    fig = _figure(7.0, 4.8)
    ax = fig.add_subplot()
    mesh = ax.pcolormesh(
        _edges(d, 0.5),
        _edges(t, 0.5),
        np.ma.masked_invalid(k),
        cmap=cmap,
        norm=Normalize(vmin=lo, vmax=hi),
        shading="flat",
    )
    ax.invert_yaxis()
    ax.set_xlabel("distance along the profile (px)", fontsize=_LABEL_PT)
    ax.set_ylabel("time (s)", fontsize=_LABEL_PT)
    ax.set_title(title, fontsize=_TITLE_PT, loc="left")
    ax.tick_params(labelsize=_TICK_PT)
    bar = fig.colorbar(mesh, ax=ax)
    bar.set_label("thickness (nm)", fontsize=_LABEL_PT)
    bar.ax.tick_params(labelsize=_TICK_PT)
    return _save(fig, path)
