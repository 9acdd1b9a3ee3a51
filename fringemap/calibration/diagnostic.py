"""The chart calibration's diagnostic picture: every patch as corrected | reference, with its ΔE.

Each of the 24 patches is drawn as a square split down the middle: on the
left the colour the camera recorded after the correction, on the right the
colour the chart should have in the matching space (both shown as sRGB),
labelled with the patch number and its CIEDE2000 difference. Patches left out
of the fit (clipped) are crossed out.
"""

from __future__ import annotations

from pathlib import Path

import cv2
import numpy as np

from .chart import COLUMNS, ROWS, ChartCalibration

__all__ = ["chart_diagnostic_image", "write_chart_diagnostic"]

_CELL, _GAP, _MARGIN, _HEADER = 112, 8, 12, 44


def chart_diagnostic_image(cal: ChartCalibration) -> np.ndarray:
    """The diagnostic picture as uint8 RGB (H, W, 3)."""
    h = _HEADER + ROWS * _CELL + (ROWS - 1) * _GAP + 2 * _MARGIN
    w = COLUMNS * _CELL + (COLUMNS - 1) * _GAP + 2 * _MARGIN
    img = np.full((h, w, 3), 40, dtype=np.uint8)
    left = np.round(255 * cal.space.display(cal.corrected)).astype(np.uint8)
    right = np.round(255 * cal.space.display(cal.reference)).astype(np.uint8)
    ref_l = cal.space.lab(cal.reference)[:, 0]
    font = cv2.FONT_HERSHEY_SIMPLEX
    m = cal.model
    loo = ", ".join(f"{k} {v:.2f}" for k, v in m.leave_one_out.items())
    cv2.putText(
        img,
        f"{m.method}: mean dE2000 {m.mean_delta_e:.2f}, max {m.max_delta_e:.2f}",
        (_MARGIN, 18),
        font,
        0.5,
        (235, 235, 235),
        1,
        cv2.LINE_AA,
    )
    cv2.putText(
        img,
        f"leave-one-out mean dE2000: {loo}   (left: corrected, right: reference)",
        (_MARGIN, 36),
        font,
        0.4,
        (200, 200, 200),
        1,
        cv2.LINE_AA,
    )
    for i in range(ROWS * COLUMNS):
        r, c = divmod(i, COLUMNS)
        y0 = _HEADER + _MARGIN + r * (_CELL + _GAP)
        x0 = _MARGIN + c * (_CELL + _GAP)
        half = _CELL // 2
        img[y0 : y0 + _CELL, x0 : x0 + half] = left[i]
        img[y0 : y0 + _CELL, x0 + half : x0 + _CELL] = right[i]
        ink = (0, 0, 0) if ref_l[i] > 55 else (255, 255, 255)
        label = f"{i + 1}  dE {cal.delta_e[i]:.1f}" if cal.used[i] else f"{i + 1}  clipped"
        cv2.putText(img, label, (x0 + 4, y0 + _CELL - 8), font, 0.42, ink, 1, cv2.LINE_AA)
        if not cal.used[i]:
            cv2.line(img, (x0, y0), (x0 + _CELL - 1, y0 + _CELL - 1), ink, 1, cv2.LINE_AA)
            cv2.line(img, (x0 + _CELL - 1, y0), (x0, y0 + _CELL - 1), ink, 1, cv2.LINE_AA)
    return img


def write_chart_diagnostic(cal: ChartCalibration, path: str | Path) -> Path:
    """Write the diagnostic picture as a PNG (atomically); returns the path."""
    from ..io.write import write_png

    return write_png(path, chart_diagnostic_image(cal))
