"""Bundled spectral and optical-constant data, resampled once from their sources.

Importing colour-science and parsing the refractiveindex.info catalogue take
seconds; the command line should start in well under one. ``bundle.npz`` holds
the same numbers, resampled onto fringemap's grids by :mod:`fringemap.data.build`
from colour-science (CIE illuminants, observers, camera sensitivities) and the
refractiveindex.info database (the built-in materials). ``tests/test_data.py``
checks the bundle against the live sources, so it cannot drift.
"""

from __future__ import annotations

from functools import lru_cache
from pathlib import Path

import numpy as np

__all__ = ["bundle", "BUNDLE_PATH"]

BUNDLE_PATH = Path(__file__).with_name("bundle.npz")


@lru_cache(maxsize=1)
def bundle() -> dict[str, np.ndarray]:
    """The bundled arrays by key (empty if the bundle is missing)."""
    if not BUNDLE_PATH.is_file():
        return {}
    with np.load(BUNDLE_PATH, allow_pickle=False) as data:
        return {k: data[k] for k in data.files}
