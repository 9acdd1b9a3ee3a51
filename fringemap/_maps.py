"""Small array helpers shared by the statistics modules (not public API).

Thickness maps are float arrays of shape (H, W) in nm; NaN (or any non-finite
value) marks an unmeasured pixel.
"""

from __future__ import annotations

import math

import numpy as np

from fringemap.errors import FringemapError, OptionError

__all__ = ["json_value", "csv_cell", "as_map", "region"]


def json_value(value):
    """A value made JSON-ready: numpy scalars to Python, NaN/inf to None."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def csv_cell(value: float) -> str:
    """A CSV cell: 9 significant digits, empty when not finite."""
    return "" if not math.isfinite(value) else format(value, ".9g")


def as_map(thickness_nm: np.ndarray) -> np.ndarray:
    """``thickness_nm`` as a float array of shape (H, W) (float32 kept: no copy), or error."""
    t = np.asarray(thickness_nm)
    if t.dtype not in (np.float32, np.float64):
        t = t.astype(np.float64)
    if t.ndim != 2:
        raise FringemapError(f"expected a thickness map of shape (H, W), got shape {t.shape}")
    return t


def region(t: np.ndarray, mask: np.ndarray | None) -> np.ndarray:
    """The bool region of ``t`` given by ``mask`` (all pixels when None)."""
    if mask is None:
        return np.ones(t.shape, dtype=bool)
    m = np.asarray(mask).astype(bool, copy=False)
    if m.shape != t.shape:
        raise OptionError(
            f"expected a region mask of shape {t.shape}, got shape {m.shape}", where="--roi"
        )
    return m
