"""Make a simulated photo of the 24-patch colour chart for the coating guide.

The chart is photographed under the same D50 lamp as the coated slide, with the
same slight white-balance error (red 4 % high, blue 3 % low), so the camera file
that `fringemap calibrate` fits from it is the correction the slide photo needs.

    python docs/examples/chart_photo.py OUT_DIR

writes OUT_DIR/chart-d50.png and prints the corners of the patch grid in the
form `fringemap calibrate --corners` takes.
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import cv2

from fringemap.calibration import render_chart_photo


def main(argv: list[str]) -> int:
    out = Path(argv[0]) if argv else Path(tempfile.mkdtemp(prefix="fringemap-chart-"))
    out.mkdir(parents=True, exist_ok=True)
    chart = render_chart_photo(
        light="D50",
        sensor="cie1931",
        white_balance_error=(1.04, 1.0, 0.97),
        shape=(480, 640),
        noise=0.01,
        seed=1,
    )
    path = out / "chart-d50.png"
    cv2.imwrite(str(path), cv2.cvtColor(chart.image, cv2.COLOR_RGB2BGR))
    corners = ",".join(f"{v:g}" for v in chart.corners.ravel())
    print(f"wrote {path}")
    print(f"corners: {corners}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
