"""Reflectance and transmittance of a film stack, vectorised over thickness × wavelength.

The stack, from the light's side::

    ambient | film (unknown thickness t) | under-layers (fixed) | substrate

is solved with the characteristic (transfer) matrix method for coherent
layers [1]_ [2]_: each interface contributes ``(1/t_ij) [[1, r_ij], [r_ij, 1]]``
and each layer of thickness ``d`` a propagation matrix
``diag(exp(-iδ), exp(iδ))`` with ``δ = 2π n d cos θ / λ``. The angle in each
layer follows Snell's law with complex indices. Conventions follow [2]_:
``k >= 0`` is absorption, angles are measured from the normal in the ambient,
``p`` reflection uses ``r_p = (n_j cos θ_i − n_i cos θ_j) / (n_j cos θ_i + n_i cos θ_j)``.

A thick substrate may also reflect from its back face; that path is added
incoherently (intensities, not amplitudes), which is what a camera sees for a
millimetre glass slide [3]_. A lens's aperture is modelled by averaging over a
cone of incidence angles weighted by solid angle.

All lengths are in nm; angles in degrees at this module's public functions.

References
----------
.. [1] M. Born & E. Wolf, *Principles of Optics*, 7th ed., §1.6 (1999).
.. [2] S. J. Byrnes, "Multilayer optical calculations", arXiv:1603.02720 (2016).
.. [3] C. C. Katsidis & D. I. Siapkas, "General transfer-matrix method for optical
   multilayer systems with coherent, partially coherent, and incoherent
   interference", Appl. Opt. 41, 3978 (2002), doi:10.1364/AO.41.003978.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..errors import OptionError
from .materials import Material, parse_material

__all__ = ["Layer", "Stack", "Optics", "reflectance", "stack_optics"]

POLARISATIONS = ("s", "p", "unpolarised")


@dataclass(frozen=True)
class Layer:
    """A fixed under-layer: a material and its thickness in nm."""

    material: Material
    thickness_nm: float

    def __post_init__(self):
        if not np.isfinite(self.thickness_nm) or self.thickness_nm < 0:
            raise OptionError(
                f"layer thickness must be a finite number >= 0 nm, got {self.thickness_nm!r}",
                where="stack.layers",
            )


@dataclass(frozen=True)
class Stack:
    """A film of unknown thickness on a substrate, optionally over fixed under-layers.

    Attributes
    ----------
    film, substrate, ambient : Material
        The film measured, the substrate it lies on (for a free film such as
        soap, the medium behind it) and the medium the light comes from.
    layers : tuple of Layer
        Fixed layers between film and substrate, top first.
    substrate_thickness_nm : float or None
        If given, the substrate is a slab this thick whose back face (into
        ``back_medium``) also reflects; added incoherently.
    back_medium : Material or None
        Medium behind a finite substrate (default: the ambient).
    """

    film: Material
    substrate: Material
    ambient: Material
    layers: tuple[Layer, ...] = ()
    substrate_thickness_nm: float | None = None
    back_medium: Material | None = None

    @classmethod
    def from_names(
        cls,
        *,
        film,
        substrate,
        ambient="air",
        layers=(),
        substrate_thickness_nm=None,
        back_medium=None,
    ) -> Stack:
        """Build a stack from material specifications (names, numbers, CSV paths).

        ``layers`` is a sequence of ``(material, thickness_nm)`` pairs, top first.
        """
        return cls(
            film=parse_material(film, where="--film"),
            substrate=parse_material(substrate, where="--substrate"),
            ambient=parse_material(ambient, where="--ambient"),
            layers=tuple(
                Layer(parse_material(m, where="stack.layers"), float(d)) for m, d in layers
            ),
            substrate_thickness_nm=substrate_thickness_nm,
            back_medium=None
            if back_medium is None
            else parse_material(back_medium, where="stack.back_medium"),
        )

    def describe(self) -> dict:
        """A JSON-ready description (names and sources of every material)."""

        def m(x: Material) -> dict:
            return {"name": x.name, "source": x.source}

        return {
            "ambient": m(self.ambient),
            "film": m(self.film),
            "layers": [{**m(la.material), "thickness_nm": la.thickness_nm} for la in self.layers],
            "substrate": m(self.substrate),
            "substrate_thickness_nm": self.substrate_thickness_nm,
            "back_medium": None if self.back_medium is None else m(self.back_medium),
        }


@dataclass(frozen=True)
class Optics:
    """Power reflectance, transmittance and absorptance, shape ``(T, W)``.

    ``T`` is the number of film thicknesses, ``W`` of wavelengths.
    """

    R: np.ndarray
    T: np.ndarray
    A: np.ndarray = field(repr=False)


def _cos_theta(n: np.ndarray, n0_sin0: np.ndarray) -> np.ndarray:
    """cos θ in a medium of index ``n`` from Snell's invariant, forward branch.

    The branch is chosen so the wave propagates or decays away from the
    interface: ``Im(n cos θ) > 0``, or ``Re(n cos θ) > 0`` when lossless
    (the convention of [2]_).
    """
    sin_t = n0_sin0 / n
    cos_t = np.sqrt(1.0 - sin_t**2 + 0j)
    ncos = n * cos_t
    flip = (np.abs(ncos.imag) > 100 * np.finfo(float).eps * np.abs(ncos)) & (ncos.imag < 0)
    flip |= (np.abs(ncos.imag) <= 100 * np.finfo(float).eps * np.abs(ncos)) & (ncos.real < 0)
    return np.where(flip, -cos_t, cos_t)


def _interface(ni, nj, ci, cj, pol):
    if pol == "s":
        den = ni * ci + nj * cj
        return (ni * ci - nj * cj) / den, 2 * ni * ci / den
    den = nj * ci + ni * cj
    return (nj * ci - ni * cj) / den, 2 * ni * ci / den


def _amplitudes(indices, thicknesses, wl, n0_sin0, pol):
    """Amplitude reflection and transmission coefficients of a coherent multilayer.

    ``indices``: complex arrays broadcastable to ``(T, W)``, incidence medium
    first, exit medium last. ``thicknesses``: one array (nm) per inner layer,
    broadcastable to ``(T, W)``.
    """
    cos = [_cos_theta(n, n0_sin0) for n in indices]
    # running matrix M = [[a, b], [c, d]]
    r, t = _interface(indices[0], indices[1], cos[0], cos[1], pol)
    a, b, c, d = 1 / t, r / t, r / t, 1 / t
    for j in range(1, len(indices) - 1):
        delta = 2 * np.pi * indices[j] * cos[j] * thicknesses[j - 1] / wl
        # guard against overflow of exp(-i δ) for strongly absorbing, thick layers
        delta = np.where(delta.imag > 35, delta.real + 35j, delta)
        e_p = np.exp(1j * delta)
        e_m = 1 / e_p
        r, t = _interface(indices[j], indices[j + 1], cos[j], cos[j + 1], pol)
        # L = diag(e_m, e_p) @ [[1, r], [r, 1]] / t
        l00, l01, l10, l11 = e_m / t, e_m * r / t, e_p * r / t, e_p / t
        a, b, c, d = a * l00 + b * l10, a * l01 + b * l11, c * l00 + d * l10, c * l01 + d * l11
    return c / a, 1 / a


def _powers(r, t, n_in, c_in, n_out, c_out, pol):
    R = np.abs(r) ** 2
    if pol == "s":
        T = np.abs(t) ** 2 * (n_out * c_out).real / (n_in * c_in).real
    else:
        T = np.abs(t) ** 2 * (n_out * np.conj(c_out)).real / (n_in * np.conj(c_in)).real
    return R, T


def _coherent(indices, thicknesses, wl, n0_sin0, pol):
    """Power reflectance and transmittance of a coherent multilayer (general path)."""
    r, t = _amplitudes(indices, thicknesses, wl, n0_sin0, pol)
    c_in = _cos_theta(indices[0], n0_sin0)
    c_out = _cos_theta(indices[-1], n0_sin0)
    return _powers(r, t, indices[0], c_in, indices[-1], c_out, pol)


def _film_on_base(indices, thicknesses, wl, n0_sin0, pol):
    """Fast path: Airy summation for the top film over a fixed base.

    The base (under-layers and substrate, seen from inside the film) is solved
    once per wavelength; only the film's phase depends on thickness:
    ``r = (r01 + rb e^{2iδ}) / (1 + r01 rb e^{2iδ})``.
    """
    n0, n1 = indices[0], indices[1]
    rb, tb = _amplitudes(indices[1:], thicknesses[1:], wl, n0_sin0, pol)
    c0 = _cos_theta(n0, n0_sin0)
    c1 = _cos_theta(n1, n0_sin0)
    r01, t01 = _interface(n0, n1, c0, c1, pol)
    phase = (2 * np.pi / wl) * (n1 * c1)  # (1, W)
    e1 = np.exp(1j * phase * thicknesses[0])  # (T, W)
    e2 = e1 * e1
    den = 1 + r01 * rb * e2
    r = (r01 + rb * e2) / den
    t = t01 * tb * e1 / den
    c_out = _cos_theta(indices[-1], n0_sin0)
    return _powers(r, t, n0, c0, indices[-1], c_out, pol)


def _check_angle(angle_deg: float) -> float:
    if not np.isfinite(angle_deg) or not (0 <= angle_deg < 90):
        raise OptionError(
            f"angle of incidence must be >= 0 and < 90 degrees, got {angle_deg!r}", where="--angle"
        )
    return float(angle_deg)


def _optics_one_angle(stack, t, wl, theta_rad, pol):
    wlr = wl[None, :]
    n0 = stack.ambient.index(wl)[None, :]
    if np.any(np.abs(n0.imag) > 1e-9):
        raise OptionError("the ambient medium must be transparent (k = 0)", where="--ambient")
    n0_sin0 = n0 * np.sin(theta_rad)
    n_film = stack.film.index(wl)[None, :]
    n_sub = stack.substrate.index(wl)[None, :]
    inner = [n_film] + [la.material.index(wl)[None, :] for la in stack.layers]
    thick = [t[:, None]] + [np.full((1, 1), la.thickness_nm) for la in stack.layers]
    indices = [n0, *inner, n_sub]
    if pol == "unpolarised":
        # at normal incidence s and p coincide
        pols = ("s",) if theta_rad == 0 else ("s", "p")
    else:
        pols = (pol,)
    out_R, out_T = 0.0, 0.0
    for p in pols:
        if stack.substrate_thickness_nm is None:
            R, T = _film_on_base(indices, thick, wlr, n0_sin0, p)
        else:
            R, T = _with_back_face(stack, indices, thick, wlr, n0_sin0, p)
        out_R = out_R + R / len(pols)
        out_T = out_T + T / len(pols)
    return np.broadcast_to(out_R, (t.size, wl.size)), np.broadcast_to(out_T, (t.size, wl.size))


def _with_back_face(stack, indices, thick, wl, n0_sin0, pol):
    """Incoherent sum of the front stack and the substrate's back face."""
    n_sub = indices[-1]
    back = stack.back_medium or stack.ambient
    n_back = back.index(wl[0])[None, :]
    Rf, Tf = _film_on_base(indices, thick, wl, n0_sin0, pol)
    # reflectance of the front stack seen from inside the substrate
    Rr, _ = _coherent(indices[::-1], thick[::-1], wl, n0_sin0, pol)
    Rb, Tb = _coherent([n_sub, n_back], [], wl, n0_sin0, pol)
    cos_s = _cos_theta(n_sub, n0_sin0)
    att = np.exp(-4 * np.pi * (n_sub * cos_s).imag * stack.substrate_thickness_nm / wl)
    denom = 1 - Rr * Rb * att**2
    R = Rf + Tf * Tf * Rb * att**2 / denom
    T = Tf * Tb * att / denom
    return R, T


def stack_optics(
    stack: Stack,
    *,
    thickness_nm: np.ndarray,
    wavelength_nm: np.ndarray,
    angle_deg: float,
    polarisation: str = "unpolarised",
    numerical_aperture: float = 0.0,
    n_aperture_angles: int = 7,
) -> Optics:
    """Reflectance, transmittance and absorptance of ``stack`` for each film thickness.

    Parameters
    ----------
    stack : Stack
        The film stack.
    thickness_nm : array_like of shape (T,)
        Film thicknesses (nm), each >= 0.
    wavelength_nm : array_like of shape (W,)
        Vacuum wavelengths (nm).
    angle_deg : float
        Angle of incidence in the ambient, degrees from the normal, 0 <= angle < 90.
    polarisation : {"s", "p", "unpolarised"}
        Polarisation of the light; "unpolarised" averages s and p.
    numerical_aperture : float
        If > 0, average over a cone of half-angle ``asin(NA / n_ambient)``
        around ``angle_deg``, weighted by solid angle (Gauss-Legendre nodes).
    n_aperture_angles : int
        Number of angles in that average.

    Returns
    -------
    Optics
        ``R``, ``T`` and ``A = 1 − R − T`` of shape (T, W). For a free film
        the transmitted medium is the substrate (e.g. air).
    """
    t = np.atleast_1d(np.asarray(thickness_nm, dtype=np.float64))
    wl = np.atleast_1d(np.asarray(wavelength_nm, dtype=np.float64))
    if t.ndim != 1 or wl.ndim != 1:
        raise OptionError("thickness_nm and wavelength_nm must be 1-D", where="stack_optics")
    if not np.all(np.isfinite(t)) or np.any(t < 0):
        raise OptionError("film thicknesses must be finite and >= 0 nm", where="thickness_nm")
    if not np.all(np.isfinite(wl)) or np.any(wl <= 0):
        raise OptionError("wavelengths must be finite and > 0 nm", where="wavelength_nm")
    if polarisation not in POLARISATIONS:
        raise OptionError(
            f"polarisation must be one of {', '.join(POLARISATIONS)}, got {polarisation!r}",
            where="polarisation",
        )
    theta0 = np.deg2rad(_check_angle(angle_deg))
    if not np.isfinite(numerical_aperture) or not (0 <= numerical_aperture < 1):
        raise OptionError(
            f"numerical aperture must be in [0, 1), got {numerical_aperture!r}", where="--aperture"
        )
    if numerical_aperture == 0:
        R, T = _optics_one_angle(stack, t, wl, theta0, polarisation)
    else:
        n_amb = float(np.real(stack.ambient.index(np.array([550.0]))[0]))
        half = np.arcsin(min(numerical_aperture / n_amb, 0.999))
        x, w = np.polynomial.legendre.leggauss(n_aperture_angles)
        # polar angle u within the cone around the axis; weight sin(u) du (solid angle)
        u = 0.5 * half * (x + 1)
        wts = 0.5 * half * w * np.sin(u)
        R = np.zeros((t.size, wl.size))
        T = np.zeros((t.size, wl.size))
        # rays in the cone around an oblique axis: approximate by the angle |θ0 ± u|
        for ui, wi in zip(u, wts, strict=True):
            for th in {abs(theta0 - ui), min(theta0 + ui, np.deg2rad(89.9))}:
                share = wi / (2 if theta0 > 0 else 1)
                Ri, Ti = _optics_one_angle(stack, t, wl, th, polarisation)
                R += share * Ri
                T += share * Ti
        R /= wts.sum()
        T /= wts.sum()
    R = np.ascontiguousarray(R)
    T = np.ascontiguousarray(T)
    return Optics(R=R, T=T, A=1.0 - R - T)


def reflectance(
    stack: Stack,
    *,
    thickness_nm: np.ndarray,
    wavelength_nm: np.ndarray,
    angle_deg: float,
    polarisation: str = "unpolarised",
    numerical_aperture: float = 0.0,
) -> np.ndarray:
    """Power reflectance (0-1) of shape (T, W); see :func:`stack_optics`."""
    return stack_optics(
        stack,
        thickness_nm=thickness_nm,
        wavelength_nm=wavelength_nm,
        angle_deg=angle_deg,
        polarisation=polarisation,
        numerical_aperture=numerical_aperture,
    ).R
