"""Colour-correction methods: one function per published method, behind one dispatcher.

A correction maps a camera's linear RGB ``p`` (..., 3) to the matching space
as ``M φ(p)``, where ``φ`` expands the colour into *terms* and ``M`` is a
(3, T) matrix:

* ``"linear"`` terms, ``φ(p) = (R, G, B)``: the 3×3 least-squares matrix of
  Cheung et al. (2004) [1]_ (and, with zero off-diagonal entries, a diagonal
  von Kries-type gain correction);
* ``"root-polynomial-2"``, ``φ(p) = (R, G, B, √(RG), √(GB), √(RB))``: the
  degree-2 root-polynomial correction of Finlayson, Mackiewicz & Hurlbert
  (2015) [2]_. Every term scales linearly with exposure, so the correction
  does not depend on the photo's brightness.

:func:`fit_correction` fits a registered method by (weighted) linear least
squares; :data:`CORRECTION_METHODS` lists them. :func:`gains_up_to_scale`
and :func:`matrix_up_to_scale` fit gains or a matrix when every target colour
is known only up to its own brightness (reference discs, self-calibration).

References
----------
.. [1] V. Cheung, S. Westland, D. Connah & C. Ripamonti, "A comparative study
   of the characterisation of colour cameras by means of neural networks and
   polynomial transforms", Coloration Technology 120(1), 19-25 (2004),
   doi:10.1111/j.1478-4408.2004.tb00201.x.
.. [2] G. D. Finlayson, M. Mackiewicz & A. Hurlbert, "Color correction using
   root-polynomial regression", IEEE Trans. Image Process. 24(5), 1460-1470
   (2015), doi:10.1109/TIP.2015.2405336.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from ..errors import OptionError

__all__ = [
    "TERMS",
    "expand_terms",
    "CorrectionMethod",
    "CORRECTION_METHODS",
    "fit_correction",
    "fit_cheung2004",
    "fit_finlayson2015",
    "fit_diagonal",
    "gains_up_to_scale",
    "matrix_up_to_scale",
]

#: term sets and their number of terms
TERMS: dict[str, int] = {"linear": 3, "root-polynomial-2": 6}


def expand_terms(rgb: np.ndarray, terms: str) -> np.ndarray:
    """Expand linear RGB (..., 3) into the correction's terms (..., T).

    Negative values (noise around black) are clipped to 0 under the square roots.
    """
    rgb = np.asarray(rgb)
    if terms == "linear":
        return rgb
    if terms == "root-polynomial-2":
        pos = np.clip(rgb, 0, None)
        r, g, b = pos[..., 0], pos[..., 1], pos[..., 2]
        extra = np.stack([np.sqrt(r * g), np.sqrt(g * b), np.sqrt(r * b)], axis=-1)
        return np.concatenate([rgb, extra.astype(rgb.dtype, copy=False)], axis=-1)
    raise OptionError(f"expected terms {' or '.join(TERMS)}, got {terms!r}", where="terms")


def _weighted_lstsq(a: np.ndarray, b: np.ndarray, weights: np.ndarray | None) -> np.ndarray:
    """(3, T) matrix ``M`` minimising Σ w_i |M a_i − b_i|²."""
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    sw = np.ones(a.shape[0]) if weights is None else np.sqrt(np.asarray(weights, dtype=float))
    sol, *_ = np.linalg.lstsq(a * sw[:, None], b * sw[:, None], rcond=None)
    return sol.T


def fit_cheung2004(measured, reference, *, weights=None) -> np.ndarray:
    """3×3 least-squares colour-correction matrix (Cheung et al. 2004 [1]_).

    Parameters
    ----------
    measured, reference : ndarray of shape (N, 3)
        Camera linear RGB and target matching-space RGB of N >= 3 samples.
    weights : ndarray of shape (N,), optional
        Sample weights (default 1).

    Returns
    -------
    ndarray of shape (3, 3)
        ``M`` with ``reference ≈ measured @ M.T``.
    """
    return _weighted_lstsq(expand_terms(measured, "linear"), reference, weights)


def fit_finlayson2015(measured, reference, *, weights=None) -> np.ndarray:
    """Degree-2 root-polynomial correction (Finlayson, Mackiewicz & Hurlbert 2015 [2]_).

    Returns the (3, 6) matrix acting on ``(R, G, B, √(RG), √(GB), √(RB))``;
    needs N >= 6 samples.
    """
    return _weighted_lstsq(expand_terms(measured, "root-polynomial-2"), reference, weights)


def fit_diagonal(measured, reference, *, weights=None) -> np.ndarray:
    """Per-channel gains by least squares, as a diagonal 3×3 matrix (common practice)."""
    p = np.asarray(measured, dtype=np.float64)
    c = np.asarray(reference, dtype=np.float64)
    w = np.ones(p.shape[0]) if weights is None else np.asarray(weights, dtype=float)
    num = np.sum(w[:, None] * p * c, axis=0)
    den = np.sum(w[:, None] * p * p, axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.diag(num / den)


@dataclass(frozen=True)
class CorrectionMethod:
    """A registered correction: its fit function, terms, fewest samples and citation."""

    fit: Callable[..., np.ndarray]
    terms: str
    min_samples: int
    label: str


CORRECTION_METHODS: dict[str, CorrectionMethod] = {
    "cheung2004": CorrectionMethod(
        fit_cheung2004, "linear", 4, "3x3 least squares (Cheung et al. 2004)"
    ),
    "finlayson2015": CorrectionMethod(
        fit_finlayson2015,
        "root-polynomial-2",
        8,
        "root-polynomial degree 2 (Finlayson, Mackiewicz & Hurlbert 2015)",
    ),
    "diagonal": CorrectionMethod(fit_diagonal, "linear", 1, "per-channel gains"),
}


def check_method(method: str, *, where: str = "--method") -> CorrectionMethod:
    """The registered method called ``method``; OptionError naming the choices otherwise."""
    if method not in CORRECTION_METHODS:
        raise OptionError(
            f"expected a method among {', '.join(CORRECTION_METHODS)}, got {method!r}",
            where=where,
        )
    return CORRECTION_METHODS[method]


def fit_correction(measured, reference, *, method: str, weights=None) -> tuple[np.ndarray, str]:
    """Fit the correction ``method`` mapping ``measured`` (N, 3) onto ``reference`` (N, 3).

    Returns
    -------
    matrix : ndarray of shape (3, T)
    terms : str
        The term set of ``matrix`` (see :func:`expand_terms`).
    """
    spec = check_method(method, where="method")
    measured = np.asarray(measured, dtype=np.float64)
    if measured.ndim != 2 or measured.shape[1] != 3 or measured.shape[0] < spec.min_samples:
        raise OptionError(
            f"{method} needs at least {spec.min_samples} colours of shape (N, 3), "
            f"got {measured.shape}",
            where="measured",
        )
    return spec.fit(measured, reference, weights=weights), spec.terms


def _smallest_eigenvector(q: np.ndarray) -> np.ndarray:
    vals, vecs = np.linalg.eigh(0.5 * (q + q.T))
    v = vecs[:, 0]
    return v if v.sum() >= 0 else -v


def gains_up_to_scale(photo_rgb, model_rgb, *, weights=None) -> np.ndarray:
    """Per-channel gains ``g`` (3,) with ``g ⊙ p_i ∝ c_i``, each sample's scale free.

    Minimises Σ w_i |(I − ĉ_i ĉ_iᵀ) diag(p_i) g|² / |p_i|² over |g| = 1 (the
    part of the corrected colour off the direction of the model colour ĉ_i);
    the solution is the eigenvector of the smallest eigenvalue. Returned
    normalised to mean 1 (the pipeline estimates the overall gain itself).
    With one sample it is ``g ∝ c / p`` exactly (independent computation).

    Parameters
    ----------
    photo_rgb, model_rgb : ndarray of shape (N, 3)
        Linear photo colours and the model's colours they should match.
    weights : ndarray of shape (N,), optional
    """
    p = np.asarray(photo_rgb, dtype=np.float64)
    c = np.asarray(model_rgb, dtype=np.float64)
    w = np.ones(p.shape[0]) if weights is None else np.asarray(weights, dtype=np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        ch = c / np.linalg.norm(c, axis=1, keepdims=True)
        w = w / np.sum(p * p, axis=1)
    ok = np.isfinite(w) & np.all(np.isfinite(ch), axis=1) & np.all(np.isfinite(p), axis=1)
    p, ch, w = p[ok], ch[ok], w[ok]
    # diag(p)(I − ĉĉᵀ)diag(p) summed with weights
    q = np.einsum("n,ni,ij,nj->ij", w, p, np.eye(3), p) - np.einsum(
        "n,ni,ni,nj,nj->ij", w, p, ch, ch, p
    )
    g = _smallest_eigenvector(q)
    return g / g.mean()


def matrix_up_to_scale(photo_rgb, model_rgb, *, weights=None) -> np.ndarray:
    """A 3×3 ``M`` with ``M p_i ∝ c_i`` (each sample's scale free), like :func:`gains_up_to_scale`.

    Minimises Σ w_i |(I − ĉ_i ĉ_iᵀ) M p_i|² / |p_i|² over |M|_F = 1; scaled
    so that its row sums average 1.
    """
    p = np.asarray(photo_rgb, dtype=np.float64)
    c = np.asarray(model_rgb, dtype=np.float64)
    w = np.ones(p.shape[0]) if weights is None else np.asarray(weights, dtype=np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        ch = c / np.linalg.norm(c, axis=1, keepdims=True)
        w = w / np.sum(p * p, axis=1)
    ok = np.isfinite(w) & np.all(np.isfinite(ch), axis=1) & np.all(np.isfinite(p), axis=1)
    p, ch, w = p[ok], ch[ok], w[ok]
    # vec(M) row-major: M p = (I ⊗ pᵀ) vec(M); residual (I − ĉĉᵀ)(I ⊗ pᵀ) vec(M)
    proj = np.eye(3)[None] - ch[:, :, None] * ch[:, None, :]  # (N, 3, 3)
    pp = w[:, None, None] * p[:, :, None] * p[:, None, :]  # (N, 3, 3)
    q = np.einsum("nij,nkl->ikjl", proj, pp).reshape(9, 9)
    m = _smallest_eigenvector(q).reshape(3, 3)
    return m / m.sum(axis=1).mean()
