"""Start-up work done in the background while a command reads its first photo.

A fresh ``fringemap map`` process spends about a second before its first result
on two things that do not depend on the photo: loading numba's machinery for
the cached compiled kernels, and importing matplotlib (and loading its fonts)
for the map figure.
:func:`start` does both in a daemon thread; the main thread meanwhile parses
the recipe, builds the colour table and decodes the photo (mostly C code that
releases the GIL), and the heavy kernels release the GIL too. Nothing here
changes a result: if the background work fails or is not finished, the main
thread simply imports and loads what it needs itself.
"""

from __future__ import annotations

import threading

__all__ = ["start"]


def _work() -> None:
    try:
        import numpy as np

        from .matching.fullres import dark_mask

        # loads numba's machinery for compiled code (and this kernel, for 8-bit photos)
        lut = np.zeros(256, dtype=np.float32)
        lut.flags.writeable = False  # as a photo's code table
        dark_mask(np.zeros((1, 1, 3), dtype=np.uint8), lut, 0.0)
        from .report.figures import warm_up

        warm_up()  # matplotlib imported, its fonts loaded, a tiny figure drawn
    except Exception:  # pragma: no cover - the main thread will meet the same error
        pass


def start() -> threading.Thread:
    """Start the background start-up work; returns its (daemon) thread."""
    thread = threading.Thread(target=_work, name="fringemap-prefetch", daemon=True)
    thread.start()
    return thread
