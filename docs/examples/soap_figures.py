"""Figures of the soap-film guide: three frames of the draining film and its kymograph.

Renders the frames of ``soap_drain_frames.py`` into a temporary folder, measures
them as a series through the Python API (:func:`fringemap.series.run_series`)
and keeps the figures the series draws.

    python docs/examples/soap_figures.py [OUT_DIR]

writes OUT_DIR/soap-frames.png (first, middle and last frame side by side),
OUT_DIR/soap-series.png and OUT_DIR/soap-kymograph.png, and prints the rate.
"""

from __future__ import annotations

import argparse
import shutil
import tempfile
from pathlib import Path

from _shrink import shrink
from PIL import Image
from soap_drain_frames import write_frames

from fringemap.recipe import load_recipe
from fringemap.series import run_series


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("out", nargs="?", help="output folder (default: a new temporary folder)")
    args = p.parse_args(argv)
    out = Path(args.out) if args.out else Path(tempfile.mkdtemp(prefix="fringemap-soap-"))
    out.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        frames = write_frames(Path(tmp) / "frames", frames=6)
        strip = [Image.open(frames[i]) for i in (0, 3, 5)]
        w, h = strip[0].size
        canvas = Image.new("RGB", (3 * w + 20, h), "white")
        for i, img in enumerate(strip):
            canvas.paste(img, (i * (w + 10), 0))
        canvas.save(out / "soap-frames.png")
        print(f"wrote {shrink(out / 'soap-frames.png', max_width=640)}")

        recipe = load_recipe(Path(tmp) / "frames" / "drain.recipe.toml")
        result = run_series([str(p) for p in frames], recipe, Path(tmp) / "series", progress=False)
        print(
            f"rate {result.fit.rate_nm_per_s:.3f} ± {result.fit.rate_std_error_nm_per_s:.3f} nm/s"
        )
        for kind, name in (("plot", "series"), ("kymograph_plot", "kymograph")):
            target = out / f"soap-{name}.png"
            shutil.copyfile(result.written[kind], target)
            print(f"wrote {shrink(target)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
