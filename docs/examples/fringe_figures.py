"""Figures of the thick-film guide: the 589 nm fringe photo of the dome and its map.

Renders the dome of ``fringe_photos.py``, measures it through the Python API
(:func:`fringemap.fringes.measure_fringes`, one anchor on the rim, the film's circle as ROI) and draws the
photo and the thickness map.

    python docs/examples/fringe_figures.py [OUT_DIR]

writes OUT_DIR/dome-photo.png and OUT_DIR/dome-map.png and prints the error
against the true thickness.
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

import numpy as np
from _shrink import shrink
from fringe_photos import dome
from PIL import Image

from fringemap.colour.transfer import srgb_encode
from fringemap.fringes import measure_fringes, render_fringe_photo
from fringemap.optics.stack import Stack
from fringemap.report.figures import draw_thickness_map
from fringemap.roi import parse_roi, roi_mask


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("out", nargs="?", help="output folder (default: a new temporary folder)")
    args = p.parse_args(argv)
    out = Path(args.out) if args.out else Path(tempfile.mkdtemp(prefix="fringemap-dome-"))
    out.mkdir(parents=True, exist_ok=True)

    soap = Stack.from_names(film="soap", substrate="air")
    truth = dome()
    photo = render_fringe_photo(truth, stack=soap, light="589", noise=0.02, seed=1)
    preview = np.round(255 * srgb_encode(photo.linear)).astype(np.uint8)
    Image.fromarray(preview).save(out / "dome-photo.png")
    print(f"wrote {shrink(out / 'dome-photo.png', max_width=300)}")

    # as the guide's command: --roi circle:249.5,249.5,240 --anchor 20,250=757
    result = measure_fringes(
        photo.linear,
        stack=soap,
        light="589",
        anchors=["20,250=757"],
        roi_mask=roi_mask(parse_roi("circle:249.5,249.5,240"), truth.shape),
    )
    err = result.map.thickness_nm.astype(np.float64) - truth
    print(f"median |error| {np.nanmedian(np.abs(err)):.2f} nm ({result.method} method)")
    path = draw_thickness_map(
        result.map.thickness_nm, out / "dome-map.png", title="Soap dome from 589 nm fringes"
    )
    print(f"wrote {shrink(path, max_width=560)}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
