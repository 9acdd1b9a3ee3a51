"""Figures of the coating guide: the calibrated map of the coated slide and its error.

Fits the camera correction from the simulated chart photo (as ``fringemap
calibrate`` does), measures the bundled demo photo ``demo_images/coated-slide.jpg``
with and without it, and compares both with the true thickness that came with
the demo (``coated-slide.truth.tif``).

    python docs/examples/coating_figures.py [OUT_DIR] [--demo DIR]

writes OUT_DIR/coating-map.png and OUT_DIR/coating-error.png and prints the
median error before and after calibration.
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

import numpy as np
import tifffile
from _shrink import shrink
from matplotlib.figure import Figure

from fringemap.calibration import calibrate_from_chart, render_chart_photo
from fringemap.measure import measure
from fringemap.recipe import load_recipe
from fringemap.report.figures import draw_thickness_map

HERE = Path(__file__).resolve().parent


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("out", nargs="?", help="output folder (default: a new temporary folder)")
    p.add_argument("--demo", default=str(HERE.parents[1] / "demo_images"), help="demo folder")
    args = p.parse_args(argv)
    out = Path(args.out) if args.out else Path(tempfile.mkdtemp(prefix="fringemap-coating-"))
    out.mkdir(parents=True, exist_ok=True)
    demo = Path(args.demo)

    # the same chart photo as docs/examples/chart_photo.py makes
    chart = render_chart_photo(
        light="D50", sensor="cie1931", white_balance_error=(1.04, 1.0, 0.97), seed=1
    )
    camera = calibrate_from_chart(
        chart.image, corners=chart.corners, light="D50", sensor="cie1931"
    ).model

    recipe = load_recipe(demo / "coated-slide.recipe.toml")
    truth = tifffile.imread(demo / "coated-slide.truth.tif").astype(np.float64)
    plain = measure(demo / "coated-slide.jpg", recipe)
    calibrated = measure(demo / "coated-slide.jpg", recipe, camera=camera)

    fig = Figure(figsize=(6.4, 3.2), dpi=150, layout="constrained")
    ax = fig.add_subplot()
    bins = np.linspace(-12, 12, 97)
    for result, label in ((plain, "no camera file"), (calibrated, "with camera-d50.toml")):
        err = result.thickness_nm.astype(np.float64) - truth
        err = err[np.isfinite(err)]
        print(
            f"{label}: median error {np.median(err):+.2f} nm, "
            f"median |error| {np.median(np.abs(err)):.2f} nm"
        )
        ax.hist(np.clip(err, bins[0], bins[-1]), bins=bins, histtype="step", lw=1.6, label=label)
    ax.set_xlabel("measured − true thickness (nm)")
    ax.set_ylabel("pixels")
    ax.set_title("Coated slide: error against the true thickness")
    ax.legend(frameon=False)
    fig.savefig(out / "coating-error.png")
    print(f"wrote {shrink(out / 'coating-error.png')}")

    path = draw_thickness_map(
        calibrated.thickness_nm, out / "coating-map.png", title="Hard coat on the demo slide"
    )
    print(f"wrote {shrink(path)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
