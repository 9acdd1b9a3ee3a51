"""The colour table: film thickness (nm) → the colour the detector records.

For one stack, light, detector and viewing geometry the table samples the
film thickness on a regular grid and stores, per thickness, the white-balanced
linear RGB in the matching space (what the calibrated camera should record,
perfect white = 1), CIE XYZ, CIELAB and encoded sRGB (IEC 61966-2-1) for
display. Everything downstream (matching, simulation, charts) reads colours
from here, so the forward model is computed in one place.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, field

import numpy as np

from .. import __version__
from ..errors import OptionError
from ..optics.stack import Stack, reflectance
from .render import Renderer, lab_chroma
from .spectra import GRID_NM, Detector, Light, parse_detector, parse_light
from .transfer import srgb_encode

__all__ = ["ColourTable", "build_colour_table", "order_marks_nm", "MAX_TABLE_ROWS"]

#: Most thicknesses one table may hold (e.g. 0:100000 nm in 1 nm steps): a larger
#: range or finer step is refused before memory is spent on it.
MAX_TABLE_ROWS = 100_001


@dataclass(frozen=True)
class ColourTable:
    """Colours of a film versus its thickness.

    Attributes
    ----------
    thickness_nm : ndarray of shape (N,)
        Regular thickness grid (nm).
    rgb : ndarray of shape (N, 3)
        White-balanced linear RGB in the matching space (white = 1).
    xyz : ndarray of shape (N, 3)
        CIE 1931 XYZ, perfect white has Y = 1.
    lab : ndarray of shape (N, 3)
        CIELAB relative to the light's white.
    srgb : ndarray of shape (N, 3)
        Encoded sRGB (0-1, clipped) of the white-balanced colour, for display.
    space : str
        Name of the matching space (``srgb-linear`` or ``camera:NAME``).
    description : dict
        Stack, light, detector, angle: what the table was made for.
    """

    thickness_nm: np.ndarray
    rgb: np.ndarray
    xyz: np.ndarray
    lab: np.ndarray
    srgb: np.ndarray
    space: str
    description: dict = field(compare=False)

    @property
    def step_nm(self) -> float:
        """Thickness step of the grid (nm)."""
        return float(self.thickness_nm[1] - self.thickness_nm[0])

    @property
    def chroma(self) -> np.ndarray:
        """CIELAB chroma C*ab per entry, shape (N,)."""
        return lab_chroma(self.lab)

    @property
    def key(self) -> str:
        """A hash identifying the table's inputs (for caches)."""
        blob = json.dumps(
            {"v": __version__, "d": self.description, "n": int(self.thickness_nm.size)},
            sort_keys=True,
            default=str,
        ).encode()
        return hashlib.sha256(blob).hexdigest()[:20]

    def colour_at(self, thickness_nm: np.ndarray) -> np.ndarray:
        """Linear RGB at arbitrary thicknesses (nm, any shape), by linear interpolation."""
        t = np.asarray(thickness_nm, dtype=np.float64)
        out = np.empty(t.shape + (3,))
        for c in range(3):
            out[..., c] = np.interp(t, self.thickness_nm, self.rgb[:, c])
        return out


def build_colour_table(
    stack: Stack,
    *,
    light: Light | str,
    detector: Detector | str,
    angle_deg: float,
    thickness_range_nm: tuple[float, float],
    step_nm: float = 1.0,
    numerical_aperture: float = 0.0,
) -> ColourTable:
    """Render the colour table for a stack, light and detector.

    Parameters
    ----------
    stack : Stack
        The film stack.
    light : Light or str
        The illuminant (see :func:`fringemap.colour.spectra.parse_light`).
    detector : Detector or str
        The detector (see :func:`fringemap.colour.spectra.parse_detector`).
    angle_deg : float
        Viewing/illumination angle in the ambient (degrees from the normal).
    thickness_range_nm : (float, float)
        Smallest and largest film thickness (nm), 0 <= min < max.
    step_nm : float
        Thickness step (nm), > 0.
    numerical_aperture : float
        Aperture of the viewing lens (0 = a single angle).

    Returns
    -------
    ColourTable
    """
    light = parse_light(light)
    detector = parse_detector(detector)
    lo, hi = (float(v) for v in thickness_range_nm)
    if not (np.isfinite(lo) and np.isfinite(hi)) or lo < 0 or hi <= lo:
        raise OptionError(
            f"thickness range must satisfy 0 <= MIN < MAX (nm), got {lo:g}:{hi:g}", where="--range"
        )
    if not np.isfinite(step_nm) or step_nm <= 0 or step_nm > (hi - lo) / 4:
        raise OptionError(
            f"thickness step must be > 0 and at most a quarter of the range, got {step_nm:g} nm",
            where="--step",
        )
    n = int(np.floor((hi - lo) / step_nm + 1e-9)) + 1
    if n > MAX_TABLE_ROWS:
        raise OptionError(
            f"the colour table would have {n} thicknesses ({lo:g}:{hi:g} nm in steps of "
            f"{step_nm:g} nm), more than {MAX_TABLE_ROWS}; narrow --range or raise --step",
            where="--range",
        )
    t = lo + step_nm * np.arange(n)
    R = reflectance(
        stack,
        thickness_nm=t,
        wavelength_nm=GRID_NM,
        angle_deg=angle_deg,
        numerical_aperture=numerical_aperture,
    )
    renderer = Renderer(light, detector)
    xyz = renderer.xyz(R)
    lab = renderer.lab(R)
    rgb = renderer.rgb(R)
    srgb = np.clip(srgb_encode(np.clip(renderer.srgb_linear(R), 0, None)), 0, 1)
    description = {
        "stack": stack.describe(),
        "light": light.name,
        "detector": detector.name,
        "angle_deg": float(angle_deg),
        "numerical_aperture": float(numerical_aperture),
        "range_nm": [lo, float(t[-1])],
        "step_nm": float(step_nm),
    }
    return ColourTable(
        thickness_nm=t,
        rgb=rgb,
        xyz=xyz,
        lab=lab,
        srgb=srgb,
        space=renderer.space,
        description=description,
    )


def order_marks_nm(
    stack: Stack, *, angle_deg: float, max_nm: float, reference_nm: float = 550.0
) -> np.ndarray:
    """Thicknesses (nm) where the optical path ``2 n t cos θ`` is a whole number of waves.

    Marks ``t_m = m λ_ref / (2 n cos θ_film)`` for m = 1, 2, ... up to
    ``max_nm``, with λ_ref = 550 nm by default: the usual way of counting
    interference orders on a colour chart.
    """
    n = float(np.real(stack.film.index(np.array([reference_nm]))[0]))
    n0 = float(np.real(stack.ambient.index(np.array([reference_nm]))[0]))
    sin_f = n0 * np.sin(np.deg2rad(angle_deg)) / n
    cos_f = np.sqrt(1 - sin_f**2)
    period = reference_nm / (2 * n * cos_f)
    return period * np.arange(1, int(max_nm / period) + 1)
