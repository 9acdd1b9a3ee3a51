"""Figures of the wafer guide: the oxide map and its histogram against the spec.

Measures the bundled demo photo ``demo_images/oxide-wafer.jpg`` with its recipe
through the Python API and draws the figures with :mod:`fringemap.report.figures`.

    python docs/examples/wafer_figures.py [OUT_DIR] [--demo DIR]

writes OUT_DIR/wafer-map.png and OUT_DIR/wafer-histogram.png and prints the
statistics of the measurement.
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

from _shrink import shrink

from fringemap.measure import measure
from fringemap.recipe import load_recipe
from fringemap.report.figures import draw_histogram, draw_thickness_map

HERE = Path(__file__).resolve().parent
SPEC = (510.0, 35.0)  # target, tolerance (nm), as in the guide's --spec 510±35


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("out", nargs="?", help="output folder (default: a new temporary folder)")
    p.add_argument("--demo", default=str(HERE.parents[1] / "demo_images"), help="demo folder")
    args = p.parse_args(argv)
    out = Path(args.out) if args.out else Path(tempfile.mkdtemp(prefix="fringemap-wafer-"))
    out.mkdir(parents=True, exist_ok=True)
    demo = Path(args.demo)

    recipe = load_recipe(demo / "oxide-wafer.recipe.toml")
    result = measure(demo / "oxide-wafer.jpg", recipe)
    s = result.stats
    print(
        f"mean {s.mean_nm:.1f} nm, std {s.std_nm:.2f} nm, "
        f"P1-P99 {s.p1_nm:.1f}-{s.p99_nm:.1f} nm, coverage {100 * s.coverage:.1f} %"
    )
    scale = recipe.get("report", "scale_px_per_mm")
    for path in (
        draw_thickness_map(
            result.thickness_nm,
            out / "wafer-map.png",
            title="Oxide on the demo wafer",
            scale_px_per_mm=scale,
        ),
        draw_histogram(
            result.thickness_nm, out / "wafer-histogram.png", title="Oxide thickness", spec=SPEC
        ),
    ):
        print(f"wrote {shrink(path, max_width=600)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
