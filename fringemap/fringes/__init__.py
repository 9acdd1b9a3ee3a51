"""Film thickness from narrowband interference fringes (thick films).

White-light colours fade beyond a micrometre or two; the fringes of a narrow
source persist far further, up to the source's coherence limit. This package
turns a photo of such fringes into the same :class:`~fringemap.result.ThicknessMap`
as the colour pipeline:

* :mod:`.source` — narrow lights on a fine wavelength grid, band-averaged
  reflectance, fringe visibility versus thickness and its fade-out limit;
* :mod:`.phase` — film mask, envelope normalisation, wrapped phase
  (Fourier-transform method or spiral-phase analytic signal);
* :mod:`.unwrap` — coarse-to-fine unwrapping, refit at stationary points;
* :mod:`.reference` — what fixes each region's sign and absolute thickness
  (anchors, hints, colours, several lines and their synthetic wavelength);
* :mod:`.solve` — :func:`measure_fringes`, composing the above into the map;
* :mod:`.render` — synthetic fringe photos with a known thickness map.
"""

from .render import FringePhoto, render_fringe_photo
from .solve import FringeResult, measure_fringes, unambiguous_range_nm
from .source import (
    NarrowSource,
    VisibilityLimit,
    band_reflectance,
    coherence_limit,
    fringe_period_nm,
    narrow_source,
    parse_lines,
    visibility,
)

__all__ = [
    "NarrowSource",
    "VisibilityLimit",
    "narrow_source",
    "parse_lines",
    "band_reflectance",
    "visibility",
    "coherence_limit",
    "fringe_period_nm",
    "FringePhoto",
    "render_fringe_photo",
    "FringeResult",
    "measure_fringes",
    "unambiguous_range_nm",
]
