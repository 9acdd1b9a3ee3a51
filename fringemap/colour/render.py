"""Spectra to colours: XYZ, linear and encoded sRGB, camera RGB and CIELAB.

A reflectance spectrum ``R(λ)`` lit by a light ``S(λ)`` and seen by a
detector with sensitivities ``c_k(λ)`` gives the tristimulus values

    X_k = Σ_λ R(λ) S(λ) c_k(λ) / Σ_λ S(λ) c_2(λ)          (observer, CIE 015)

so that a perfect white reflector has ``Y = 1``. The white-balanced linear
sRGB of a camera set for the light is obtained by von Kries adaptation of XYZ
from the light's white to D65 with the Bradford matrix [2]_, the sRGB matrix of
IEC 61966-2-1 [3]_, and a final per-channel scale so that the perfect white is
exactly (1, 1, 1). For camera sensitivities the white-balanced camera RGB is
``Σ R S c_k / Σ S c_k`` (each channel normalised to the white).

All spectra must be on :data:`fringemap.colour.spectra.GRID_NM`. Colours are
channel-last: any leading shape ``(..., 3)``.

References
----------
.. [1] CIE 015:2018, *Colorimetry*, 4th ed., doi:10.25039/TR.015.2018.
.. [2] K. M. Lam, "Metamerism and colour constancy", PhD thesis, University of
   Bradford (1985); M. R. Luo & R. W. G. Hunt, Color Res. Appl. 23, 154 (1998).
.. [3] IEC 61966-2-1:1999, Default RGB colour space - sRGB.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .spectra import Detector, Light, parse_detector

__all__ = ["Renderer", "xyz_to_lab", "lab_chroma", "XYZ_TO_SRGB", "BRADFORD"]

XYZ_TO_SRGB = np.array(
    [[3.2406, -1.5372, -0.4986], [-0.9689, 1.8758, 0.0415], [0.0557, -0.2040, 1.0570]]
)
BRADFORD = np.array(
    [[0.8951, 0.2664, -0.1614], [-0.7502, 1.7135, 0.0367], [0.0389, -0.0685, 1.0296]]
)
D65_WHITE_XYZ = np.array([0.95047, 1.0, 1.08883])


def xyz_to_lab(xyz: np.ndarray, white_xyz: np.ndarray) -> np.ndarray:
    """CIE 1976 L*a*b* from XYZ (..., 3) relative to ``white_xyz`` (3,) (CIE 015:2018 §8.2.1)."""
    xyz = np.asarray(xyz, dtype=np.float64)
    r = xyz / np.asarray(white_xyz, dtype=np.float64)
    eps = (6 / 29) ** 3
    f = np.where(r > eps, np.cbrt(np.maximum(r, eps)), r / (3 * (6 / 29) ** 2) + 4 / 29)
    L = 116 * f[..., 1] - 16
    a = 500 * (f[..., 0] - f[..., 1])
    b = 200 * (f[..., 1] - f[..., 2])
    return np.stack([L, a, b], axis=-1)


def lab_chroma(lab: np.ndarray) -> np.ndarray:
    """CIELAB chroma C*ab = sqrt(a*² + b*²), shape (...)."""
    lab = np.asarray(lab)
    return np.hypot(lab[..., 1], lab[..., 2])


@dataclass(frozen=True)
class Renderer:
    """Turns reflectance spectra into colours for one light and detector.

    Parameters
    ----------
    light : Light
        The illuminant.
    detector : Detector
        The detector whose RGB the colour table uses ("matching space"):
        for a CIE observer that is white-balanced linear sRGB, for a camera
        its white-balanced camera RGB.
    """

    light: Light
    detector: Detector
    _xyz_weights: np.ndarray = field(init=False, repr=False, compare=False)
    _rgb_weights: np.ndarray = field(init=False, repr=False, compare=False)
    white_xyz: np.ndarray = field(init=False, repr=False, compare=False)

    def __post_init__(self):
        cie = parse_detector("cie1931")
        s = self.light.power
        w = s[:, None] * cie.curves
        w = w / w[:, 1].sum()
        object.__setattr__(self, "_xyz_weights", w)
        object.__setattr__(self, "white_xyz", w.sum(axis=0))
        if self.detector.kind == "camera":
            rgbw = s[:, None] * self.detector.curves
            rgbw = rgbw / rgbw.sum(axis=0)
        else:
            dw = s[:, None] * self.detector.curves
            dw = dw / dw[:, 1].sum()
            m = _srgb_balanced_matrix(dw.sum(axis=0))
            rgbw = dw @ m.T
        object.__setattr__(self, "_rgb_weights", rgbw)

    @property
    def space(self) -> str:
        """Name of the matching colour space."""
        if self.detector.kind == "camera":
            return f"camera:{self.detector.name}"
        return "srgb-linear"

    def xyz(self, spectra: np.ndarray) -> np.ndarray:
        """CIE 1931 XYZ (..., 3) of reflectance spectra (..., W); white has Y = 1."""
        return np.asarray(spectra) @ self._xyz_weights

    def rgb(self, spectra: np.ndarray) -> np.ndarray:
        """Linear white-balanced RGB (..., 3) in the matching space; white = (1, 1, 1)."""
        return np.asarray(spectra) @ self._rgb_weights

    def lab(self, spectra: np.ndarray) -> np.ndarray:
        """CIELAB (..., 3) relative to the light's white."""
        return xyz_to_lab(self.xyz(spectra), self.white_xyz)

    def srgb_linear(self, spectra: np.ndarray) -> np.ndarray:
        """White-balanced linear sRGB (..., 3) through the CIE 1931 observer."""
        m = _srgb_balanced_matrix(self.white_xyz)
        return self.xyz(spectra) @ m.T


def _srgb_balanced_matrix(white_xyz: np.ndarray) -> np.ndarray:
    """XYZ -> white-balanced linear sRGB: Bradford adaptation to D65, sRGB, white = 1."""
    src = BRADFORD @ white_xyz
    dst = BRADFORD @ D65_WHITE_XYZ
    cat = np.linalg.inv(BRADFORD) @ np.diag(dst / src) @ BRADFORD
    m = XYZ_TO_SRGB @ cat
    scale = 1.0 / (m @ white_xyz)
    return scale[:, None] * m
