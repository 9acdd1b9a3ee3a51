"""The slowly varying gain field: exposure × lamp power × vignetting × lamp gradient.

The photo records ``p(x, y) = g(x, y) · c(t(x, y))``: the model colour of the
film times an unknown gain. Once a first thickness estimate exists, every
measured pixel gives a gain sample ``p·c / c·c``; a smooth surface fitted
through them separates the illumination from the film. The surface is a
polynomial in normalised image coordinates fitted to ``log g`` by iteratively
reweighted least squares (Tukey biweight on the residuals), so wrong-order
pixels and defects do not bend it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["GainField", "fit_gain_field"]

_LN2 = float(np.log(2.0))


def _design(x: np.ndarray, y: np.ndarray, degree: int) -> np.ndarray:
    """The monomials ``x^(d-i) y^i`` (d = 0..degree, i = 0..d) at points (P,): (P, C)."""
    x = np.asarray(x, dtype=np.float64)
    y = np.asarray(y, dtype=np.float64)
    xp, yp = [np.ones_like(x)], [np.ones_like(y)]
    for _ in range(degree):
        xp.append(xp[-1] * x)
        yp.append(yp[-1] * y)
    out = np.empty(((degree + 1) * (degree + 2) // 2, x.size))
    c = 0
    for total in range(degree + 1):
        for i in range(total + 1):
            np.multiply(xp[total - i], yp[i], out=out[c])
            c += 1
    return out.T  # a column-major (P, C) view: each monomial contiguous


@dataclass(frozen=True)
class GainField:
    """A fitted gain surface ``g(x, y) = exp(poly(x, y))``.

    Attributes
    ----------
    coefficients : ndarray
        Polynomial coefficients of ``log g`` in normalised coordinates.
    degree : int
        Total polynomial degree.
    shape : (int, int)
        (H, W) of the image the coordinates are normalised to.
    residual_rms : float
        RMS of the robust residuals of ``log g`` (a fraction: 0.01 = 1 %).
    log_limits : (float, float)
        ``log g`` is held within these bounds: the range of the fitted samples
        widened by a factor 2 each way, so that a polynomial fitted to a few
        clustered samples (a damaged photo) cannot run off to absurd gains.
    """

    coefficients: np.ndarray
    degree: int
    shape: tuple[int, int]
    residual_rms: float
    log_limits: tuple[float, float] = (-np.inf, np.inf)

    def evaluate(self, shape: tuple[int, int]) -> np.ndarray:
        """The gain on a grid of ``shape`` (H, W) covering the same image, float32."""
        h, w = shape
        ys = (np.arange(h) + 0.5) / h * 2 - 1
        xs = (np.arange(w) + 0.5) / w * 2 - 1
        # separable evaluation: sum_c coef_c x^a y^b
        out = np.zeros((h, w), dtype=np.float64)
        c = 0
        for total in range(self.degree + 1):
            for i in range(total + 1):
                out += self.coefficients[c] * np.outer(ys**i, xs ** (total - i))
                c += 1
        return np.exp(np.clip(out, *self.log_limits)).astype(np.float32)

    def evaluate_at(self, ys: np.ndarray, xs: np.ndarray, shape: tuple[int, int]) -> np.ndarray:
        """The gain at pixels (ys, xs) of an image of ``shape`` (H, W), float64 (P,)."""
        h, w = shape
        y = (np.asarray(ys) + 0.5) / h * 2 - 1
        x = (np.asarray(xs) + 0.5) / w * 2 - 1
        return np.exp(np.clip(_design(x, y, self.degree) @ self.coefficients, *self.log_limits))


def fit_gain_field(
    samples: np.ndarray,
    weights: np.ndarray,
    *,
    degree: int = 4,
    iterations: int = 6,
) -> GainField:
    """Fit a smooth gain surface to per-pixel gain samples.

    Parameters
    ----------
    samples : ndarray (H, W)
        Gain samples (> 0), NaN where none.
    weights : ndarray (H, W)
        Prior weight of each sample (>= 0).
    degree : int
        Polynomial degree of ``log g`` (4 captures vignetting and a lamp gradient).
    iterations : int
        Reweighting passes.
    """
    h, w = samples.shape
    yy, xx = np.mgrid[0:h, 0:w]
    x = (xx + 0.5) / w * 2 - 1
    y = (yy + 0.5) / h * 2 - 1
    ok = np.isfinite(samples) & (samples > 0) & (weights > 0)
    if ok.sum() < 50:
        # too little to fit a surface: a constant gain
        value = float(np.nanmedian(samples[ok])) if ok.any() else 1.0
        coef = np.zeros((degree + 1) * (degree + 2) // 2)
        coef[0] = np.log(value)
        return GainField(coef, degree, (h, w), float("nan"), (coef[0] - _LN2, coef[0] + _LN2))
    # fewer pixels than needed for a high degree: lower it
    while degree > 0 and ok.sum() < 30 * (degree + 1) * (degree + 2) // 2:
        degree -= 1
    a = _design(x[ok], y[ok], degree)
    b = np.log(samples[ok])
    limits = (float(b.min()) - _LN2, float(b.max()) + _LN2)
    w0 = weights[ok].astype(np.float64)
    wt = w0.copy()
    coef = np.zeros(a.shape[1])
    scale = 0.05
    for _ in range(iterations):
        # weighted normal equations: (A^T W A) c = A^T W b, a small (P x P) system
        aw = a * wt[:, None]
        lhs = aw.T @ a + 1e-9 * np.eye(a.shape[1])
        coef = np.linalg.solve(lhs, aw.T @ b)
        res = b - a @ coef
        mad = np.median(np.abs(res[wt > 0])) if np.any(wt > 0) else 0.05
        scale = max(1.4826 * mad, 0.003)
        u = res / (4.685 * scale)
        wt = w0 * np.where(np.abs(u) < 1, (1 - u**2) ** 2, 0.0)
    return GainField(coef, degree, (h, w), float(scale), limits)
