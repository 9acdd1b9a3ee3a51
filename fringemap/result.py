"""The thickness map: thickness, confidence and per-pixel reasons, with provenance.

Reason codes (``ThicknessMap.reasons``, uint8; also in ``docs/outputs.md``):

====  ================  ==========================================================
code  name              meaning
====  ================  ==========================================================
0     measured          thickness given
1     outside-roi       outside the region of interest
2     no-film           part of a large dark area (background, hole in the film)
3     saturated         a colour channel is clipped: colour unknown
4     too-dark          too little light for a colour
5     off-model         the colour is not one the film stack can show
6     ambiguous-order   the fringe order could not be decided
7     beyond-range      colours have faded (film too thick for white light) or
                        the thickness lies beyond the search range
====  ================  ==========================================================
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

__all__ = ["ThicknessMap", "REASONS", "REASON_CODES", "REASON_COLOURS"]

REASONS: dict[int, str] = {
    0: "measured",
    1: "outside-roi",
    2: "no-film",
    3: "saturated",
    4: "too-dark",
    5: "off-model",
    6: "ambiguous-order",
    7: "beyond-range",
}
REASON_CODES: dict[str, int] = {v: k for k, v in REASONS.items()}

#: display colours (RGB 0-1) for reason maps
REASON_COLOURS: dict[int, tuple[float, float, float]] = {
    0: (0.20, 0.62, 0.35),
    1: (0.85, 0.85, 0.85),
    2: (0.35, 0.35, 0.35),
    3: (0.95, 0.85, 0.10),
    4: (0.10, 0.10, 0.30),
    5: (0.85, 0.30, 0.20),
    6: (0.75, 0.35, 0.80),
    7: (0.30, 0.65, 0.95),
}


@dataclass(frozen=True)
class ThicknessMap:
    """The result of measuring one photo.

    Attributes
    ----------
    thickness_nm : ndarray of float32, shape (H, W)
        Film thickness (nm), NaN where there is no trustworthy estimate.
    confidence : ndarray of float32, shape (H, W)
        0 (no trust) to 1; 0 wherever thickness is NaN.
    reasons : ndarray of uint8, shape (H, W)
        Reason code per pixel (see :data:`REASONS`).
    stats : Any
        :class:`fringemap.stats.UniformityStats` of the measured area.
    recipe : Any
        The :class:`fringemap.recipe.Recipe` used.
    source : str or None
        The photo's path, if it came from a file.
    provenance : dict
        Software version, colour-table key, gain field, noise level, order
        decisions: how the numbers were made.
    warnings : tuple of str
        Soft problems found while measuring.
    """

    thickness_nm: np.ndarray
    confidence: np.ndarray
    reasons: np.ndarray
    stats: Any
    recipe: Any
    source: str | None = None
    provenance: dict = field(default_factory=dict)
    warnings: tuple[str, ...] = ()

    @property
    def shape(self) -> tuple[int, int]:
        """(H, W) in pixels."""
        return self.thickness_nm.shape

    @property
    def coverage(self) -> float:
        """Fraction of the region of interest that was measured (0-1)."""
        return float(self.stats.coverage) if self.stats is not None else 0.0

    def reason_counts(self) -> dict[str, int]:
        """Number of pixels per reason name."""
        return {name: int(np.count_nonzero(self.reasons == code)) for code, name in REASONS.items()}
