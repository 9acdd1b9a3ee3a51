"""Lights and detectors as spectra on one wavelength grid (nm).

Every spectrum used by fringemap is resampled once, by linear interpolation,
onto :data:`GRID_NM` (380-780 nm in 2 nm steps) so later products are plain
array sums. colour-science's own spectral classes would extend and realign
spectra with a warning on every call whose grids differ; doing it once here
avoids that.

Lights (:func:`parse_light`):

* CIE illuminants bundled in colour-science: ``D65``, ``D50``, ``D55``, ``D75``,
  ``A``, the fluorescent series ``F1``-``F12`` (also spelt ``FL1``-``FL12``),
  ``FL3.1``-``FL3.15``, the LED series ``LED-B1``... [1]_;
* a blackbody: ``blackbody:3200`` or ``3200K`` (Planck's law);
* a narrow line ``589`` or a Gaussian band ``546/10`` (centre/FWHM, nm);
* a CSV spectrum ``wavelength_nm,power``.

Detectors (:func:`parse_detector`): ``cie1931`` (2° observer), ``cie1964``
(10° observer) [1]_, two measured camera sensitivity sets that colour-science
bundles (``camera-a``, ``camera-b``) [2]_, and a CSV ``wavelength_nm,r,g,b``.

References
----------
.. [1] CIE 015:2018, *Colorimetry*, 4th ed., doi:10.25039/TR.015.2018.
.. [2] colour-science datasets ``MSDS_CAMERA_SENSITIVITIES`` (measured by the
   UK National Physical Laboratory).
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np

from ..errors import OptionError

__all__ = [
    "GRID_NM",
    "Light",
    "Detector",
    "parse_light",
    "parse_detector",
    "light_names",
    "detector_names",
]

GRID_NM = np.arange(380.0, 781.0, 2.0)

_H = 6.62607015e-34
_C = 2.99792458e8
_KB = 1.380649e-23


@dataclass(frozen=True)
class Light:
    """A light's relative spectral power on :data:`GRID_NM` (max = 1)."""

    name: str
    description: str
    power: np.ndarray = field(repr=False, compare=False)
    centre_nm: float | None = None
    fwhm_nm: float | None = None

    @property
    def narrowband(self) -> bool:
        """True for a line or band light (given by centre/FWHM)."""
        return self.centre_nm is not None


@dataclass(frozen=True)
class Detector:
    """Three spectral sensitivities on :data:`GRID_NM`, shape (W, 3).

    ``kind`` is ``"observer"`` for a CIE observer (channels are x̄, ȳ, z̄) and
    ``"camera"`` for camera sensitivities (channels are R, G, B).
    """

    name: str
    description: str
    kind: str
    curves: np.ndarray = field(repr=False, compare=False)


def _resample(wl: np.ndarray, values: np.ndarray, grid: np.ndarray = GRID_NM) -> np.ndarray:
    """Linear interpolation onto ``grid``; zero outside the data."""
    values = np.asarray(values, dtype=np.float64)
    if values.ndim == 1:
        return np.interp(grid, wl, values, left=0.0, right=0.0)
    return np.stack(
        [np.interp(grid, wl, values[:, j], left=0.0, right=0.0) for j in range(values.shape[1])],
        axis=-1,
    )


@lru_cache(maxsize=1)
def _colour():
    import colour  # slow to import; only when a table is built

    return colour


_CIE_LIGHTS = ("A", "C", "D50", "D55", "D60", "D65", "D75", "E")


@lru_cache(maxsize=1)
def light_names() -> list[str]:
    """Names of the bundled CIE illuminants (F-series spelt both ways)."""
    from ..data import bundle

    keys = [k[6:] for k in bundle() if k.startswith("light/")]
    if not keys:
        colour = _colour()
        keys = list(colour.SDS_ILLUMINANTS)
    names = [k for k in keys if k in _CIE_LIGHTS or k.startswith(("FL", "LED"))]
    return names + [f"F{k[2:]}" for k in names if re.fullmatch(r"FL\d+", k)]


def _planck(wl_nm: np.ndarray, temperature_k: float) -> np.ndarray:
    lam = wl_nm * 1e-9
    with np.errstate(over="ignore"):
        return 1.0 / (lam**5 * (np.exp(_H * _C / (lam * _KB * temperature_k)) - 1.0))


def _normalised(power: np.ndarray, where: str) -> np.ndarray:
    if not np.all(np.isfinite(power)) or np.any(power < 0) or power.max() <= 0:
        raise OptionError("light spectrum must be finite, >= 0 and not all zero", where=where)
    return power / power.max()


def _read_csv_columns(path: Path, ncols: int, what: str, where: str) -> np.ndarray:
    from .._csv import read_numeric_csv

    data = np.array(read_numeric_csv(path, columns=(ncols,), what=what, where=where, min_rows=3))
    if np.any(np.diff(data[:, 0]) <= 0):
        raise OptionError(f"{path}: wavelengths must increase strictly", where=where)
    if data[0, 0] > GRID_NM[0] + 20 or data[-1, 0] < GRID_NM[-1] - 20:
        raise OptionError(
            f"{path}: {what} must cover about 400-760 nm, got {data[0, 0]:g}-{data[-1, 0]:g} nm",
            where=where,
        )
    return data


def _band(centre: float, fwhm: float) -> np.ndarray:
    # evaluate on a fine grid and bin to GRID_NM so narrow lines keep their area
    fine = np.arange(GRID_NM[0] - 1, GRID_NM[-1] + 1.001, 0.05)
    sigma = max(fwhm, 0.05) / (2 * np.sqrt(2 * np.log(2)))
    g = np.exp(-0.5 * ((fine - centre) / sigma) ** 2)
    # split each fine sample linearly between its two grid neighbours: keeps area and centre
    pos = np.clip((fine - GRID_NM[0]) / 2.0, 0, GRID_NM.size - 1 - 1e-9)
    lo = np.floor(pos).astype(int)
    frac = pos - lo
    out = np.bincount(lo, weights=g * (1 - frac), minlength=GRID_NM.size)
    out += np.bincount(lo + 1, weights=g * frac, minlength=GRID_NM.size + 1)[: GRID_NM.size]
    return out


def parse_light(spec: str | Light, *, where: str = "--light") -> Light:
    """Make a :class:`Light` from a name, ``blackbody:K``, ``NNN`` / ``NNN/FWHM`` or CSV path."""
    if isinstance(spec, Light):
        return spec
    if not isinstance(spec, str) or not spec.strip():
        raise OptionError(f"expected a light name, got {spec!r}", where=where)
    text = spec.strip()
    m = re.fullmatch(r"(?:blackbody:)?\s*(\d+(?:\.\d*)?)\s*[kK]", text) or re.fullmatch(
        r"blackbody:\s*(\d+(?:\.\d*)?)", text, flags=re.I
    )
    if m:
        temp = float(m.group(1))
        if not 500 <= temp <= 50000:
            raise OptionError(
                f"blackbody temperature must be 500-50000 K, got {temp:g}", where=where
            )
        return Light(
            f"blackbody:{temp:g}K",
            f"blackbody at {temp:g} K",
            _normalised(_planck(GRID_NM, temp), where),
        )
    m = re.fullmatch(r"(\d+(?:\.\d*)?)(?:\s*/\s*(\d+(?:\.\d*)?))?(?:\s*nm)?", text)
    if m:
        centre = float(m.group(1))
        fwhm = float(m.group(2)) if m.group(2) else 1.0
        if not GRID_NM[0] + 5 <= centre <= GRID_NM[-1] - 5:
            raise OptionError(f"line centre must be within 385-775 nm, got {centre:g}", where=where)
        if not 0 < fwhm <= 100:
            raise OptionError(
                f"band width (FWHM) must be in (0, 100] nm, got {fwhm:g}", where=where
            )
        return Light(
            text,
            f"band at {centre:g} nm, FWHM {fwhm:g} nm",
            _normalised(_band(centre, fwhm), where),
            centre_nm=centre,
            fwhm_nm=fwhm,
        )
    if text.lower().endswith(".csv") or Path(text).is_file():
        path = Path(text)
        if not path.is_file():
            raise OptionError(f"light spectrum file {text!r} not found", where=where)
        data = _read_csv_columns(path, 2, "light", where)
        return Light(
            path.name,
            f"spectrum from {path.name}",
            _normalised(_resample(data[:, 0], data[:, 1]), where),
        )
    return _named_light(text.upper(), where)


@lru_cache(maxsize=32)
def _named_light(key: str, where: str) -> Light:
    from ..data import bundle

    dataset_key = "FL" + key[1:] if re.fullmatch(r"F\d+", key) else key
    power = bundle().get(f"light/{dataset_key}")
    if power is None:
        return _named_light_live(key, where)
    return Light(dataset_key, f"CIE illuminant {dataset_key}", power)


def _named_light_live(key: str, where: str) -> Light:
    colour = _colour()
    names = {n.upper(): n for n in light_names()}
    if key not in names:
        close = difflib.get_close_matches(key, list(names), n=3, cutoff=0.5)
        hint = f"; did you mean {', '.join(close)}?" if close else ""
        raise OptionError(
            f"unknown light {key!r}{hint} (CIE names like D65, A, F11; blackbody:3200; "
            "589 or 546/10 for narrow bands; or a CSV file)",
            where=where,
        )
    name = names[key]
    dataset_key = "FL" + name[1:] if re.fullmatch(r"F\d+", name) else name
    sd = colour.SDS_ILLUMINANTS[dataset_key]
    power = _resample(np.asarray(sd.wavelengths), np.asarray(sd.values))
    return Light(dataset_key, f"CIE illuminant {dataset_key}", _normalised(power, where))


_DETECTORS = {
    "cie1931": ("observer", "CIE 1931 2 Degree Standard Observer", "CIE 1931 2° observer"),
    "cie1964": ("observer", "CIE 1964 10 Degree Standard Observer", "CIE 1964 10° observer"),
    "camera-a": ("camera", "Nikon 5100 (NPL)", "measured camera sensitivities, set A"),
    "camera-b": ("camera", "Sigma SDMerill (NPL)", "measured camera sensitivities, set B"),
}
_DETECTOR_ALIASES = {"cie2": "cie1931", "cie10": "cie1964", "human": "cie1931", "srgb": "cie1931"}


def detector_names() -> list[str]:
    """Names of the built-in detectors."""
    return list(_DETECTORS)


def parse_detector(spec: str | Detector, *, where: str = "--sensor") -> Detector:
    """Make a :class:`Detector` from a built-in name or a CSV ``wavelength_nm,r,g,b``."""
    if isinstance(spec, Detector):
        return spec
    if not isinstance(spec, str) or not spec.strip():
        raise OptionError(f"expected a detector name or CSV path, got {spec!r}", where=where)
    text = spec.strip()
    if text.lower().endswith(".csv") or Path(text).is_file():
        path = Path(text)
        if not path.is_file():
            raise OptionError(f"sensitivity file {text!r} not found", where=where)
        data = _read_csv_columns(path, 4, "sensitivity", where)
        curves = _resample(data[:, 0], data[:, 1:])
        if np.any(curves < 0) or np.any(curves.sum(axis=0) <= 0):
            raise OptionError(f"{path}: sensitivities must be >= 0 and not all zero", where=where)
        return Detector(path.name, f"camera sensitivities from {path.name}", "camera", curves)
    key = _DETECTOR_ALIASES.get(text.lower(), text.lower())
    if key not in _DETECTORS:
        close = difflib.get_close_matches(key, list(_DETECTORS), n=3, cutoff=0.4)
        hint = f"; did you mean {', '.join(close)}?" if close else ""
        raise OptionError(
            f"unknown detector {text!r}{hint} (choose {', '.join(_DETECTORS)} or a CSV)",
            where=where,
        )
    return _named_detector(key)


@lru_cache(maxsize=8)
def _named_detector(key: str) -> Detector:
    from ..data import bundle

    curves = bundle().get(f"detector/{key}")
    if curves is None:
        return _named_detector_live(key)
    kind, _dataset_key, description = _DETECTORS[key]
    return Detector(key, f"{description} (colour-science datasets)", kind, curves)


def _named_detector_live(key: str) -> Detector:
    colour = _colour()
    kind, dataset_key, description = _DETECTORS[key]
    if kind == "observer":
        msds = colour.MSDS_CMFS[dataset_key]
    else:
        msds = colour.MSDS_CAMERA_SENSITIVITIES[dataset_key]
    curves = _resample(np.asarray(msds.wavelengths), np.asarray(msds.values))
    if kind == "camera":
        curves = curves / curves.max()
    return Detector(key, f"{description} (colour-science datasets)", kind, curves)
