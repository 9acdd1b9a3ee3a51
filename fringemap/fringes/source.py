"""Narrow light sources and how their fringes fade with film thickness.

A narrow source is kept on its own fine wavelength grid (not the 2 nm grid of
:mod:`fringemap.colour.spectra`), because the fading of the fringes with
thickness is set by the shape of the band at a scale far below 2 nm.

Sources (:func:`narrow_source`): a line ``589`` (1 nm wide unless given), a
Gaussian band ``546/10`` (centre/FWHM, nm), or a CSV spectrum
``wavelength_nm,power`` read at its own sampling. Several lines for the
several-wavelength method: :func:`parse_lines` (``450/20,530/30,630/20``,
each optionally prefixed by the camera channel that records it, ``b=450/20``).

The fringe model is the stack's reflectance averaged over the band
(:func:`band_reflectance`), so the loss of contrast of a broad band — the
temporal coherence of the light — is part of every calculation here and of
the photos rendered by :mod:`fringemap.fringes.render`.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..colour.spectra import Light, parse_light
from ..errors import OptionError
from ..optics.stack import Stack, reflectance

__all__ = [
    "NarrowSource",
    "narrow_source",
    "parse_lines",
    "band_reflectance",
    "fringe_wavenumber",
    "fringe_period_nm",
    "visibility",
    "VisibilityLimit",
    "coherence_limit",
    "CHANNELS",
]

#: camera channels a line can be recorded in, and their index in an RGB photo
CHANNELS = {"r": 0, "g": 1, "b": 2}
#: broadest band (FWHM, nm) still treated as a narrow source
MAX_FWHM_NM = 60.0
#: fine-grid samples per FWHM of a band
_SAMPLES_PER_FWHM = 40
_GAUSS_FWHM = 2.0 * np.sqrt(2.0 * np.log(2.0))


@dataclass(frozen=True)
class NarrowSource:
    """A narrow light's spectrum on a fine wavelength grid.

    Attributes
    ----------
    name : str
        The specification it was made from.
    wavelength_nm : ndarray of shape (W,)
        Vacuum wavelengths, nm, increasing.
    weight : ndarray of shape (W,)
        Relative power per sample, summing to 1.
    centre_nm : float
        Power-weighted mean wavelength, nm.
    fwhm_nm : float
        Full width at half maximum, nm: as given for a band, or
        ``2.355 × (RMS width)`` for a CSV spectrum.
    channel : str or None
        Camera channel (``"r"``, ``"g"``, ``"b"``) that records this line, if set.
    """

    name: str
    wavelength_nm: np.ndarray = field(repr=False, compare=False)
    weight: np.ndarray = field(repr=False, compare=False)
    centre_nm: float = 0.0
    fwhm_nm: float = 0.0
    channel: str | None = None


def _gaussian_source(name: str, centre: float, fwhm: float, channel) -> NarrowSource:
    step = fwhm / _SAMPLES_PER_FWHM
    wl = centre + step * np.arange(-3 * _SAMPLES_PER_FWHM, 3 * _SAMPLES_PER_FWHM + 1)
    sigma = fwhm / _GAUSS_FWHM
    w = np.exp(-0.5 * ((wl - centre) / sigma) ** 2)
    return NarrowSource(name, wl, w / w.sum(), float(centre), float(fwhm), channel)


def _csv_source(path: Path, where: str, channel) -> NarrowSource:
    from ..colour.spectra import _read_csv_columns  # the project's one CSV reader

    data = _read_csv_columns(path, 2, "light", where)
    wl, power = data[:, 0], np.clip(data[:, 1], 0.0, None)
    if power.max() <= 0:
        raise OptionError(f"{path.name}: the spectrum is zero everywhere", where=where)
    keep = power >= 1e-3 * power.max()
    lo, hi = np.flatnonzero(keep)[[0, -1]]
    lo, hi = max(lo - 1, 0), min(hi + 1, wl.size - 1)
    wl, power = wl[lo : hi + 1], power[lo : hi + 1]
    centre = float(np.sum(wl * power) / power.sum())
    rms = float(np.sqrt(np.sum((wl - centre) ** 2 * power) / power.sum()))
    fwhm = _GAUSS_FWHM * rms
    if fwhm > MAX_FWHM_NM:
        raise OptionError(
            f"{path.name} is not a narrow source (FWHM about {fwhm:.0f} nm, at most "
            f"{MAX_FWHM_NM:g} nm); white-light photos are measured by `fringemap map`",
            where=where,
        )
    step = max(min(np.min(np.diff(wl)), fwhm / _SAMPLES_PER_FWHM), 1e-3)
    fine = np.arange(wl[0], wl[-1] + 0.5 * step, step)
    w = np.interp(fine, wl, power)
    return NarrowSource(path.name, fine, w / w.sum(), centre, fwhm, channel)


def narrow_source(
    spec: str | Light | NarrowSource, *, where: str = "--light", channel: str | None = None
) -> NarrowSource:
    """Make a :class:`NarrowSource` from ``589``, ``546/10``, a CSV path or a band :class:`Light`.

    Raises
    ------
    OptionError
        A white light (``D65``...), a CSV spectrum broader than 60 nm, or a
        bad specification (one line naming ``where``).
    """
    if isinstance(spec, NarrowSource):
        return spec
    text = spec.name if isinstance(spec, Light) else spec
    light = parse_light(spec, where=where)
    if light.narrowband:
        return _gaussian_source(str(text), light.centre_nm, light.fwhm_nm, channel)
    path = Path(str(text).strip())
    if path.is_file():
        return _csv_source(path, where, channel)
    raise OptionError(
        f"light {light.name!r} is not narrow: fringes need a line (589), a band (546/10) "
        "or a CSV spectrum of a narrow source; white-light photos are measured by `fringemap map`",
        where=where,
    )


def parse_lines(text: str, *, where: str = "--lines") -> tuple[NarrowSource, ...]:
    """Parse ``450/20,530/30,630/20`` (optionally ``b=450/20,...``) into 1-3 sources.

    A line without a channel goes to the channel of its colour: blue below
    500 nm, green up to 590 nm, red above. Two lines may not share a channel.
    """
    if not isinstance(text, str) or not text.strip():
        raise OptionError(f"expected lines like 450/20,530/30, got {text!r}", where=where)
    parts = [p.strip() for p in text.split(",") if p.strip()]
    if not 1 <= len(parts) <= 3:
        raise OptionError(f"expected 1 to 3 lines, got {len(parts)} in {text!r}", where=where)
    out = []
    for part in parts:
        m = re.fullmatch(r"([rgbRGB])\s*=\s*(.+)", part)
        chan, spec = (m.group(1).lower(), m.group(2)) if m else (None, part)
        src = narrow_source(spec, where=where)
        if chan is None:
            chan = "b" if src.centre_nm < 500 else ("g" if src.centre_nm <= 590 else "r")
        out.append(
            NarrowSource(src.name, src.wavelength_nm, src.weight, src.centre_nm, src.fwhm_nm, chan)
        )
    chans = [s.channel for s in out]
    if len(set(chans)) != len(chans):
        raise OptionError(
            f"two lines fall in the same camera channel ({', '.join(chans)}); "
            "say which channel records each, e.g. b=450/20,g=530/30",
            where=where,
        )
    return tuple(out)


def band_reflectance(
    stack: Stack,
    source: NarrowSource,
    *,
    thickness_nm: np.ndarray,
    angle_deg: float,
    polarisation: str = "unpolarised",
) -> np.ndarray:
    """Reflectance averaged over the source's band, shape (T,), 0-1.

    Parameters
    ----------
    stack : Stack
        The film stack.
    source : NarrowSource
        The light; its weights are the averaging weights (a flat detector
        response across the band is assumed).
    thickness_nm : array_like of shape (T,)
        Film thicknesses, nm, >= 0.
    angle_deg : float
        Angle of incidence in the ambient, degrees.
    """
    t = np.atleast_1d(np.asarray(thickness_nm, dtype=np.float64))
    wl = source.wavelength_nm
    out = np.empty(t.size)
    chunk = max(1, int(2_000_000 // wl.size))
    for i in range(0, t.size, chunk):
        R = reflectance(
            stack,
            thickness_nm=t[i : i + chunk],
            wavelength_nm=wl,
            angle_deg=angle_deg,
            polarisation=polarisation,
        )
        out[i : i + chunk] = R @ source.weight
    return out


def fringe_wavenumber(stack: Stack, source: NarrowSource, *, angle_deg: float) -> float:
    """Mean ``n cos θ_film / λ`` over the band, 1/nm: the fringe phase per nm is 4π times it.

    ``θ_film`` follows Snell's law from the ambient (``n0 sin θ0 = n sin θ_film``).
    """
    wl = source.wavelength_nm
    n0 = stack.ambient.index(wl).real
    n = stack.film.index(wl).real
    sin_f = n0 * np.sin(np.deg2rad(angle_deg)) / n
    cos_f = np.sqrt(np.clip(1.0 - sin_f**2, 0.0, None))
    return float(np.sum(source.weight * n * cos_f / wl))


def fringe_period_nm(stack: Stack, source: NarrowSource, *, angle_deg: float) -> float:
    """Film thickness step between neighbouring fringes, ``λ / (2 n cos θ_film)``, nm."""
    return 1.0 / (2.0 * fringe_wavenumber(stack, source, angle_deg=angle_deg))


_WINDOW_SAMPLES = 32


def visibility(
    stack: Stack, source: NarrowSource, *, thickness_nm: np.ndarray, angle_deg: float
) -> np.ndarray:
    """Fringe visibility ``(max − min) / (max + min)`` of the band-averaged reflectance.

    Evaluated over one local fringe period centred on each thickness (starting
    at 0 for the thinnest), 32 samples per period.

    Parameters
    ----------
    thickness_nm : array_like of shape (C,)
        Centres of the windows, nm.

    Returns
    -------
    ndarray of shape (C,)
        Visibility, 0-1.
    """
    c = np.atleast_1d(np.asarray(thickness_nm, dtype=np.float64))
    period = fringe_period_nm(stack, source, angle_deg=angle_deg)
    start = np.maximum(c - period / 2, 0.0)
    offsets = period * np.arange(_WINDOW_SAMPLES) / _WINDOW_SAMPLES
    t = (start[:, None] + offsets[None, :]).ravel()
    r = band_reflectance(stack, source, thickness_nm=t, angle_deg=angle_deg)
    r = r.reshape(c.size, _WINDOW_SAMPLES)
    hi, lo = r.max(axis=1), r.min(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(hi + lo > 0, (hi - lo) / (hi + lo), 0.0)


@dataclass(frozen=True)
class VisibilityLimit:
    """Where the fringes of a source fade out.

    Attributes
    ----------
    thickness_nm : float
        Thinnest film whose fringe visibility is below ``fraction`` of its
        thin-film value, nm (inf if not reached within 16 coherence estimates).
    fraction : float
        The threshold, as a fraction of the thin-film visibility.
    thin_film_visibility : float
        Visibility one fringe period into the film, 0-1.
    coherence_estimate_nm : float
        ``λ² / (2 n cos θ_film Δλ)`` with Δλ the FWHM, nm.
    period_nm : float
        Thickness per fringe, ``λ / (2 n cos θ_film)``, nm.
    curve_thickness_nm, curve_visibility : ndarray of shape (C,)
        The visibility curve that was scanned (visibility relative to the
        thin-film value).
    """

    thickness_nm: float
    fraction: float
    thin_film_visibility: float
    coherence_estimate_nm: float
    period_nm: float
    curve_thickness_nm: np.ndarray = field(repr=False, compare=False)
    curve_visibility: np.ndarray = field(repr=False, compare=False)

    def to_dict(self) -> dict:
        """JSON-ready summary (without the curve)."""
        lim = self.thickness_nm
        return {
            "visibility_limit_nm": None if not np.isfinite(lim) else float(lim),
            "visibility_threshold_fraction": self.fraction,
            "thin_film_visibility": self.thin_film_visibility,
            "coherence_estimate_nm": self.coherence_estimate_nm,
            "fringe_period_nm": self.period_nm,
        }


def coherence_limit(
    stack: Stack,
    source: NarrowSource,
    *,
    angle_deg: float,
    fraction: float = 0.05,
) -> VisibilityLimit:
    """The film thickness beyond which a source's fringes have faded.

    Parameters
    ----------
    stack : Stack
        The film stack.
    source : NarrowSource
        The light.
    angle_deg : float
        Angle of incidence, degrees.
    fraction : float
        Threshold as a fraction of the thin-film visibility, 0 < fraction < 1.

    Returns
    -------
    VisibilityLimit

    Notes
    -----
    Light reflected by the film's two faces travels ``2 n t cos θ_film``
    further along one path. Interference survives while this path difference
    stays below the coherence length ``λ² / Δλ`` of the light, which gives
    the familiar rule of thumb ``t_max ≈ λ² / (2 n cos θ_film Δλ)``
    (``coherence_estimate_nm``; common practice).

    The rule of thumb is the point where the fringes are essentially gone,
    so the default threshold here is 5 % of the thin-film visibility, not
    50 % or 1/e. For a Gaussian band the visibility falls as
    ``exp(−(π Δν τ)² / (4 ln 2))`` and reaches 5 % at 0.92 times the rule of
    thumb; for a flat-topped band it is a sinc whose first zero lies exactly
    at the rule of thumb, and whose 5 % point lies at 0.95 of it. Film
    dispersion (group index above phase index) moves the computed limit a
    little below the estimate (about 1 % for water). The limit computed here
    is from the reflectance averaged over the actual band, so a CSV spectrum
    of any shape is handled.
    """
    if not (0 < fraction < 1):
        raise OptionError(
            f"visibility threshold must be in (0, 1), got {fraction!r}", where="fraction"
        )
    k = fringe_wavenumber(stack, source, angle_deg=angle_deg)
    period = 1.0 / (2.0 * k)
    n_cos = k * source.centre_nm
    estimate = source.centre_nm**2 / (2.0 * n_cos * max(source.fwhm_nm, 1e-6))
    v0 = float(visibility(stack, source, thickness_nm=[period], angle_deg=angle_deg)[0])
    if v0 <= 1e-6:
        raise OptionError(
            "this stack shows no fringes at all (equal reflectance at every thickness)",
            where="--film",
        )
    curves_t, curves_v = [], []
    lo_t = period
    limit = np.inf
    for top in (4 * estimate, 16 * estimate):
        ts = np.linspace(lo_t, max(top, lo_t + period), 241)
        vs = visibility(stack, source, thickness_nm=ts, angle_deg=angle_deg) / v0
        curves_t.append(ts)
        curves_v.append(vs)
        below = np.flatnonzero(vs < fraction)
        if below.size:
            i = below[0]
            a, b = (ts[i - 1], ts[i]) if i > 0 else (period, ts[0])
            for _ in range(12):  # bisection of the first crossing
                mid = 0.5 * (a + b)
                vm = visibility(stack, source, thickness_nm=[mid], angle_deg=angle_deg)[0] / v0
                a, b = (mid, b) if vm >= fraction else (a, mid)
            limit = 0.5 * (a + b)
            break
        lo_t = ts[-1]
    return VisibilityLimit(
        thickness_nm=float(limit),
        fraction=float(fraction),
        thin_film_visibility=v0,
        coherence_estimate_nm=float(estimate),
        period_nm=float(period),
        curve_thickness_nm=np.concatenate(curves_t),
        curve_visibility=np.concatenate(curves_v),
    )
