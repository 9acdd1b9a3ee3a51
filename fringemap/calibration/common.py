"""Pieces shared by the calibration methods: the matching space's CIELAB, photos, robust means.

The colour table stores colours in the *matching space*: white-balanced linear
RGB of the recipe's detector under the recipe's light (white = (1, 1, 1), see
:mod:`fringemap.colour.render`). A camera correction maps a photo's linear RGB
into that space, so its errors are judged there too: corrected and reference
colours are both taken to CIE 1931 XYZ with one 3×3 matrix and compared as
CIEDE2000 differences in CIELAB relative to the light's white, the table's
own Lab convention.

For a CIE observer the matrix is exact (the matching space is a linear
transform of XYZ). For camera sensitivities no exact matrix exists; a
least-squares matrix fitted over the chart's reflectances, constrained to map
the white exactly, is used, so ΔE values in a camera's space are approximate.

References
----------
.. [1] CIE 015:2018, *Colorimetry*, 4th ed., doi:10.25039/TR.015.2018.
.. [2] G. Sharma, W. Wu & E. N. Dalal, "The CIEDE2000 color-difference
   formula", Color Res. Appl. 30(1), 21-30 (2005), doi:10.1002/col.20070.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np

from ..colour.render import Renderer, xyz_to_lab
from ..colour.spectra import GRID_NM, Detector, Light, parse_detector, parse_light
from ..colour.transfer import srgb_encode
from ..errors import OptionError

__all__ = [
    "MatchingSpace",
    "ciede2000",
    "as_photo",
    "trimmed_mean",
    "chart_reflectances",
    "CHART_DATASET",
]

#: the colour-science data set of the 24-patch chart's spectral reflectances
CHART_DATASET = "ISO 17321-1"


@lru_cache(maxsize=1)
def chart_reflectances() -> tuple[tuple[str, ...], np.ndarray]:
    """The standard 24-patch chart: patch names (from dark skin) and reflectances (24, W).

    Spectra from colour-science's ``SDS_COLOURCHECKERS["ISO 17321-1"]``
    (380-780 nm, 5 nm), resampled linearly onto :data:`GRID_NM`; rows are in
    the chart's reading order (left to right, top to bottom).
    """
    import colour

    data = colour.SDS_COLOURCHECKERS[CHART_DATASET]
    names = tuple(data)
    spectra = np.stack(
        [
            np.interp(GRID_NM, np.asarray(sd.wavelengths), np.asarray(sd.values))
            for sd in data.values()
        ]
    )
    spectra.flags.writeable = False
    return names, spectra


def _constrained_matrix(src: np.ndarray, dst: np.ndarray, white_src, white_dst) -> np.ndarray:
    """3×3 ``M`` minimising |src Mᵀ − dst|² subject to ``M white_src = white_dst`` exactly."""
    # Lagrange: per output row k, minimise |A m − b|² s.t. w·m = d
    a = np.asarray(src, dtype=np.float64)
    w = np.asarray(white_src, dtype=np.float64)
    ata = a.T @ a
    kkt = np.zeros((4, 4))
    kkt[:3, :3] = 2 * ata
    kkt[:3, 3] = w
    kkt[3, :3] = w
    m = np.empty((3, 3))
    for k in range(3):
        rhs = np.concatenate([2 * a.T @ dst[:, k], [white_dst[k]]])
        m[k] = np.linalg.solve(kkt, rhs)[:3]
    return m


@dataclass(frozen=True, eq=False)
class MatchingSpace:
    """The colour table's RGB space for one light and detector, with its CIELAB.

    Parameters
    ----------
    light : Light or str
        The illuminant.
    detector : Detector or str
        The detector of the table (the recipe's ``camera.sensor``).
    """

    light: Light | str
    detector: Detector | str
    renderer: Renderer = field(init=False, repr=False)
    to_xyz: np.ndarray = field(init=False, repr=False)
    to_display: np.ndarray = field(init=False, repr=False)

    def __post_init__(self):
        light = parse_light(self.light, where="--light")
        detector = parse_detector(self.detector, where="--sensor")
        object.__setattr__(self, "light", light)
        object.__setattr__(self, "detector", detector)
        r = Renderer(light, detector)
        object.__setattr__(self, "renderer", r)
        _, spectra = chart_reflectances()
        rgb = r.rgb(spectra)
        white = np.ones(3)
        m_xyz = _constrained_matrix(rgb, r.xyz(spectra), white, r.white_xyz)
        m_disp = _constrained_matrix(rgb, r.srgb_linear(spectra), white, white)
        object.__setattr__(self, "to_xyz", m_xyz)
        object.__setattr__(self, "to_display", m_disp)

    @property
    def name(self) -> str:
        """The matching space's name (as the colour table's ``space``)."""
        return self.renderer.space

    def rgb(self, spectra: np.ndarray) -> np.ndarray:
        """Matching-space RGB (..., 3) of reflectance spectra (..., W) on GRID_NM."""
        return self.renderer.rgb(spectra)

    def lab(self, rgb: np.ndarray) -> np.ndarray:
        """CIELAB (..., 3) of matching-space RGB (..., 3), relative to the light's white."""
        return xyz_to_lab(
            np.asarray(rgb, dtype=np.float64) @ self.to_xyz.T, self.renderer.white_xyz
        )

    def delta_e(self, rgb_a: np.ndarray, rgb_b: np.ndarray) -> np.ndarray:
        """CIEDE2000 difference (...) between matching-space colours (..., 3) [2]_."""
        return ciede2000(self.lab(rgb_a), self.lab(rgb_b))

    def delta_e_lab(self, rgb: np.ndarray, lab_ref: np.ndarray) -> np.ndarray:
        """CIEDE2000 (...) between matching-space colours (..., 3) and CIELAB colours (..., 3)."""
        return ciede2000(self.lab(rgb), lab_ref)

    def display(self, rgb: np.ndarray) -> np.ndarray:
        """Encoded sRGB (..., 3), 0-1 clipped, to show matching-space colours on a screen."""
        lin = np.asarray(rgb, dtype=np.float64) @ self.to_display.T
        return np.clip(srgb_encode(np.clip(lin, 0, None)), 0, 1)


def ciede2000(lab1: np.ndarray, lab2: np.ndarray) -> np.ndarray:
    """CIEDE2000 colour difference (...) between CIELAB colours (..., 3), kL = kC = kH = 1.

    Vectorised implementation of the formula as published by the CIE and
    written out by Sharma, Wu & Dalal (2005) [2]_ (the pipeline's fits call it
    thousands of times, so it avoids colour-science's per-call overhead; the
    tests check it against ``colour.delta_E(..., method="CIE 2000")``).
    """
    lab1 = np.asarray(lab1, dtype=np.float64)
    lab2 = np.asarray(lab2, dtype=np.float64)
    l1, a1, b1 = lab1[..., 0], lab1[..., 1], lab1[..., 2]
    l2, a2, b2 = lab2[..., 0], lab2[..., 1], lab2[..., 2]
    c_mean = 0.5 * (np.hypot(a1, b1) + np.hypot(a2, b2))
    g = 0.5 * (1 - np.sqrt(c_mean**7 / (c_mean**7 + 25.0**7)))
    a1p, a2p = (1 + g) * a1, (1 + g) * a2
    c1p, c2p = np.hypot(a1p, b1), np.hypot(a2p, b2)
    h1p = np.degrees(np.arctan2(b1, a1p)) % 360
    h2p = np.degrees(np.arctan2(b2, a2p)) % 360
    dl = l2 - l1
    dc = c2p - c1p
    dh = h2p - h1p
    dh = np.where(dh > 180, dh - 360, np.where(dh < -180, dh + 360, dh))
    dh = np.where(c1p * c2p == 0, 0.0, dh)
    d_big_h = 2 * np.sqrt(c1p * c2p) * np.sin(np.radians(dh / 2))
    l_mean = 0.5 * (l1 + l2)
    cp_mean = 0.5 * (c1p + c2p)
    hsum = h1p + h2p
    h_mean = np.where(
        np.abs(h1p - h2p) <= 180, hsum / 2, np.where(hsum < 360, (hsum + 360) / 2, (hsum - 360) / 2)
    )
    h_mean = np.where(c1p * c2p == 0, hsum, h_mean)
    t = (
        1
        - 0.17 * np.cos(np.radians(h_mean - 30))
        + 0.24 * np.cos(np.radians(2 * h_mean))
        + 0.32 * np.cos(np.radians(3 * h_mean + 6))
        - 0.20 * np.cos(np.radians(4 * h_mean - 63))
    )
    d_theta = 30 * np.exp(-(((h_mean - 275) / 25) ** 2))
    r_c = 2 * np.sqrt(cp_mean**7 / (cp_mean**7 + 25.0**7))
    s_l = 1 + 0.015 * (l_mean - 50) ** 2 / np.sqrt(20 + (l_mean - 50) ** 2)
    s_c = 1 + 0.045 * cp_mean
    s_h = 1 + 0.015 * cp_mean * t
    r_t = -np.sin(np.radians(2 * d_theta)) * r_c
    return np.sqrt(
        (dl / s_l) ** 2
        + (dc / s_c) ** 2
        + (d_big_h / s_h) ** 2
        + r_t * (dc / s_c) * (d_big_h / s_h)
    )


def as_photo(photo, *, where: str = "photo"):
    """A :class:`~fringemap.io.Photo` from a Photo, a path, or an (H, W, 3) array.

    Arrays of uint8/uint16 are taken as sRGB-encoded, float arrays as linear
    (as :func:`fringemap.measure.measure` does).
    """
    from ..io import Photo, photo_from_array, read_photo

    if isinstance(photo, Photo):
        return photo
    if isinstance(photo, str | Path):
        return read_photo(photo)
    if isinstance(photo, np.ndarray):
        encoding = "linear" if np.issubdtype(photo.dtype, np.floating) else "srgb"
        return photo_from_array(photo, encoding=encoding)
    raise OptionError(f"expected a Photo, path or array, got {type(photo).__name__}", where=where)


def trimmed_mean(values: np.ndarray, *, axis: int, cut: float = 0.2) -> np.ndarray:
    """Mean after dropping the lowest and highest ``cut`` fraction along ``axis`` (per channel)."""
    v = np.sort(np.asarray(values, dtype=np.float64), axis=axis)
    n = v.shape[axis]
    k = int(np.floor(cut * n))
    if n - 2 * k < 1:
        k = (n - 1) // 2
    idx = np.arange(k, n - k)
    return np.take(v, idx, axis=axis).mean(axis=axis)
