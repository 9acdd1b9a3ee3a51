"""The sRGB transfer function (IEC 61966-2-1:1999), vectorised.

Encoded values ``V`` in [0, 1] and linear light ``L`` in [0, 1] are related by
``L = V / 12.92`` for ``V <= 0.04045`` and ``L = ((V + 0.055) / 1.055) ** 2.4``
otherwise; the encoding is its inverse.

References
----------
.. [1] IEC 61966-2-1:1999, Multimedia systems and equipment - Colour
   measurement and management - Part 2-1: Default RGB colour space - sRGB.
"""

from __future__ import annotations

import numpy as np

__all__ = ["srgb_decode", "srgb_encode"]


def srgb_decode(values: np.ndarray) -> np.ndarray:
    """Encoded sRGB values (0-1, any shape) to linear light (0-1, same shape).

    Negative inputs map to negative outputs (odd extension) so that noise
    around zero is not folded.
    """
    v = np.asarray(values)
    if not np.issubdtype(v.dtype, np.floating):
        v = v.astype(np.float64)
    a = np.abs(v)
    out = np.where(a <= 0.04045, a / 12.92, ((a + 0.055) / 1.055) ** 2.4)
    return (np.sign(v) * out).astype(v.dtype, copy=False)


def srgb_encode(values: np.ndarray) -> np.ndarray:
    """Linear light (0-1, any shape) to encoded sRGB values (0-1, same shape).

    Negative inputs map to negative outputs (odd extension); values above 1
    are encoded with the same curve (no clipping is done here).
    """
    v = np.asarray(values)
    if not np.issubdtype(v.dtype, np.floating):
        v = v.astype(np.float64)
    a = np.abs(v)
    out = np.where(a <= 0.0031308, 12.92 * a, 1.055 * np.power(a, 1.0 / 2.4) - 0.055)
    return (np.sign(v) * out).astype(v.dtype, copy=False)
