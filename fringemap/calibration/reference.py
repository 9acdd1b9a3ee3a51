"""Per-channel gains from areas of known film thickness (``--reference X,Y,R=NM``).

A disc of radius R px around (X, Y) whose film is known to be NM thick should
show the colour table's colour at NM. Its robust mean linear colour ``p``
and the model colour ``c`` give per-channel gains ``g ∝ c / p``; with several
discs the gains are the least-squares solution of ``g ⊙ p_i ∝ c_i``
(:func:`~fringemap.calibration.methods.gains_up_to_scale`). Only the colour
balance is fixed: the overall brightness is left to the pipeline's gain
estimate, so the gains are normalised to mean 1 (common practice: a von
Kries-type correction).
"""

from __future__ import annotations

import warnings

import numpy as np

from ..errors import FringemapWarning, OptionError
from ..matching.space import encode
from .common import MatchingSpace, as_photo, trimmed_mean
from .methods import gains_up_to_scale
from .model import CameraModel

__all__ = ["parse_reference", "calibrate_from_reference"]

#: robust spread (encoded units) above which a reference area is not one colour
MAX_REFERENCE_SPREAD = 0.06
#: fewest usable pixels in a reference disc
MIN_REFERENCE_PX = 12


def parse_reference(text: str) -> tuple[float, float, float, float]:
    """``X,Y,R=NM`` → (x_px, y_px, radius_px, thickness_nm)."""
    try:
        xyr, nm = str(text).split("=")
        x, y, r = (float(v) for v in xyr.split(","))
        t = float(nm)
    except ValueError:
        raise OptionError(
            f"expected X,Y,R=NM (centre and radius in pixels, thickness in nm), got {text!r}",
            where="--reference",
        ) from None
    if not np.all(np.isfinite([x, y, r, t])) or r <= 0 or t < 0:
        raise OptionError(
            f"expected finite values with R > 0 and NM >= 0, got {text!r}", where="--reference"
        )
    return x, y, r, t


def calibrate_from_reference(photo, recipe, *, references, table=None) -> CameraModel:
    """Gains from one or more discs of known thickness.

    Parameters
    ----------
    photo : Photo, path or ndarray
        The photo (of the film to be measured, or one taken with the same settings).
    recipe : Recipe
        Stack, light and sensor: the colour table the gains map into.
    references : sequence of str or (x_px, y_px, radius_px, thickness_nm)
        The known areas (``X,Y,R=NM`` strings or tuples).
    table : ColourTable, optional
        A prebuilt colour table for ``recipe``.

    Returns
    -------
    CameraModel
        Method ``"reference-gains"``: a diagonal correction with mean gain 1;
        its residuals are the CIEDE2000 differences left at each disc (0 for one disc).
    """
    photo = as_photo(photo)
    refs = [parse_reference(r) if isinstance(r, str) else tuple(map(float, r)) for r in references]
    if not refs:
        raise OptionError("expected at least one X,Y,R=NM area", where="--reference")
    if table is None:
        table = recipe.colour_table()
    space = MatchingSpace(recipe.light(), recipe.detector())
    h, w = photo.shape
    yy, xx = np.mgrid[0:h, 0:w]
    lo, hi = float(table.thickness_nm[0]), float(table.thickness_nm[-1])
    p_all, c_all, names = [], [], []
    for x, y, r, t in refs:
        name = f"{x:g},{y:g},{r:g}={t:g}"
        if not (0 <= x < w and 0 <= y < h):
            raise OptionError(
                f"{name}: the centre lies outside the {w}x{h} photo", where="--reference"
            )
        if not lo <= t <= hi:
            raise OptionError(
                f"{name}: {t:g} nm is outside the search range {lo:g}-{hi:g} nm",
                where="--reference",
            )
        disc = ((xx - x) ** 2 + (yy - y) ** 2 <= r * r) & ~photo.saturated
        if disc.sum() < MIN_REFERENCE_PX:
            raise OptionError(
                f"{name}: only {int(disc.sum())} unclipped pixels in the area, at least "
                f"{MIN_REFERENCE_PX} needed (larger R, lower exposure)",
                where="--reference",
            )
        values = photo.linear[disc].astype(np.float64)
        q1, q3 = np.percentile(encode(values), [25, 75], axis=0)
        spread = float(np.max((q3 - q1) / 1.349))
        if spread > MAX_REFERENCE_SPREAD:
            raise OptionError(
                f"{name}: the area is not one flat colour (spread {spread:.3f}, expected <= "
                f"{MAX_REFERENCE_SPREAD}): choose a uniform area or a smaller R",
                where="--reference",
            )
        p = trimmed_mean(values, axis=0)
        c = table.colour_at(t)
        if np.any(p <= 1e-4) or np.any(c <= 1e-4):
            raise OptionError(
                f"{name}: a colour channel is black (photo {np.round(p, 4).tolist()}, model "
                f"{np.round(c, 4).tolist()}): gains cannot be found there",
                where="--reference",
            )
        p_all.append(p)
        c_all.append(c)
        names.append(name)
    p_all, c_all = np.array(p_all), np.array(c_all)
    g = c_all[0] / p_all[0] if len(refs) == 1 else gains_up_to_scale(p_all, c_all)
    g = g / g.mean()
    corrected = p_all * g
    s = np.sum(corrected * c_all, axis=1) / np.sum(corrected * corrected, axis=1)
    de = space.delta_e(corrected * s[:, None], c_all)
    if np.any(g > 2.0) or np.any(g < 0.5):
        warnings.warn(
            f"reference gains {np.round(g, 3).tolist()} are far from 1: check the thickness and "
            "the light",
            FringemapWarning,
            stacklevel=2,
        )
    return CameraModel(
        method="reference-gains",
        matrix=np.diag(g),
        terms="linear",
        light=space.light.name,
        sensor=space.detector.name,
        source=photo.path,
        mean_delta_e=float(de.mean()),
        max_delta_e=float(de.max()),
        per_patch=tuple((n, float(d)) for n, d in zip(names, de, strict=True)),
        notes=f"gains from {len(refs)} reference area(s) of known thickness",
    )
