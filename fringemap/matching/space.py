"""The matching space and the colour distance between a pixel and the model.

Pixels and colour-table entries are compared after the sRGB-like encoding
``E`` of IEC 61966-2-1 applied to linear, white-balanced RGB: camera noise and
JPEG errors are close to uniform in encoded values, so a Euclidean distance
there weighs every channel and brightness about as the noise does.

The photo's brightness is not known exactly (exposure, lamp power,
vignetting), so the distance lets the pixel's encoded colour ``q`` be scaled
by a factor ``s`` near 1, with a penalty on how far ``s`` strays::

    d(q, e) = min_s |s q − e|² + μ (s − 1)²,   μ = λ |q|²

which has the closed form ``s* = (q·e + μ) / (q·q + μ)``. Small ``λ``
compares chromaticity (direction in encoded RGB) and ignores intensity;
large ``λ`` compares full colours. The pipeline starts with a small ``λ``,
estimates a smooth gain field from the image, then matches with a larger one.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from ..colour.transfer import srgb_encode

__all__ = ["encode", "distance", "INTENSITY_WEIGHT_CHROMA", "INTENSITY_WEIGHT_FULL"]

#: λ for the first, chromaticity-led pass (gain unknown)
INTENSITY_WEIGHT_CHROMA = 0.02
#: λ once the gain field is known
INTENSITY_WEIGHT_FULL = 3.0


def encode(linear: np.ndarray) -> np.ndarray:
    """Linear RGB (..., 3) → encoded matching-space values (..., 3), float64.

    Negative values (noise, over-corrected colours) are clipped to 0.
    """
    return srgb_encode(np.clip(np.asarray(linear, dtype=np.float64), 0.0, None))


@njit(cache=True, inline="always")
def _dist(q0, q1, q2, qq, e0, e1, e2, ee, mu):
    qe = q0 * e0 + q1 * e1 + q2 * e2
    s = (qe + mu) / (qq + mu)
    return ee - 2.0 * s * qe + s * s * qq + mu * (s - 1.0) * (s - 1.0)


def distance(q: np.ndarray, e: np.ndarray, *, intensity_weight: float) -> np.ndarray:
    """Scale-penalised distance between encoded colours ``q`` (..., 3) and ``e`` (..., 3).

    Reference implementation in numpy (the kernels use the same formula).
    """
    q = np.asarray(q, dtype=np.float64)
    e = np.asarray(e, dtype=np.float64)
    qq = np.sum(q * q, axis=-1)
    qe = np.sum(q * e, axis=-1)
    ee = np.sum(e * e, axis=-1)
    mu = intensity_weight * qq
    s = (qe + mu) / (qq + mu)
    return ee - 2 * s * qe + s * s * qq + mu * (s - 1) ** 2
