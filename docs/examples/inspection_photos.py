"""Render two lots of oxide-wafer inspection photos for the batch guide.

Each photo is a small (400 x 400 px) view of a 100 mm wafer on black, thermal
oxide on silicon under a tri-band fluorescent lamp, seen by camera set A; the
oxide is thinnest in the middle and thickens towards the edge, and every wafer
of a lot comes out a little different. Optical data for the rendering are
published tables (db:main/SiO2/Franta, db:main/Si/Aspnes); the recipe uses the
tool's built-in materials, as a real measurement would.

    python docs/examples/inspection_photos.py OUT_DIR [--broken | --retake]

writes OUT_DIR/lot-a/w01.jpg ... w03.jpg, OUT_DIR/lot-b/w01.jpg ... w03.jpg,
their true thickness in OUT_DIR/truth/, and OUT_DIR/wafer.recipe.toml.
``--broken`` writes lot-b/w03.jpg cut off half-way, as an interrupted copy
leaves it; ``--retake`` writes only that photo again, whole.
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

import numpy as np
import tifffile

from fringemap import simulate as sim
from fringemap.optics.stack import Stack

SHAPE = (400, 400)
RADIUS = 188.0  # px: a 100 mm wafer at 3.76 px/mm
#: (lot, name) -> (centre nm, edge nm)
WAFERS = {
    ("lot-a", "w01"): (492.0, 521.0),
    ("lot-a", "w02"): (495.0, 526.0),
    ("lot-a", "w03"): (489.0, 519.0),
    ("lot-b", "w01"): (505.0, 548.0),
    ("lot-b", "w02"): (508.0, 552.0),
    ("lot-b", "w03"): (503.0, 556.0),
}

RECIPE = """\
# thermal oxide on silicon, tri-band fluorescent lamp, camera set A
[stack]
film = "sio2"
substrate = "si"

[light]
source = "F11"

[camera]
sensor = "camera-a"

[search]
range_nm = [300.0, 800.0]
step_nm = 0.5

[measure]
roi = "circle:199.5,199.5,188"

[report]
scale_px_per_mm = 3.76
edge_exclusion_mm = 3.0
spec = "515±25"
"""


def render(lot: str, name: str, seed: int) -> sim.SimulatedPhoto:
    centre, edge = WAFERS[(lot, name)]
    t = sim.bowl(SHAPE, centre_nm=centre, edge_nm=edge, radius_px=RADIUS)
    stack = Stack.from_names(film="db:main/SiO2/Franta", substrate="db:main/Si/Aspnes")
    return sim.render_photo(
        t,
        stack=stack,
        light="F11",
        sensor="camera-a",
        film_mask=sim.disc_mask(SHAPE, radius=RADIUS),
        vignetting=0.3,
        lamp_gradient=0.08,
        noise=0.01,
        blur_px=1.0,
        jpeg_quality=90,
        seed=seed,
    )


def write_one(out: Path, lot: str, name: str, seed: int, *, broken: bool = False) -> Path:
    photo = render(lot, name, seed)
    path = out / lot / f"{name}.jpg"
    path.parent.mkdir(parents=True, exist_ok=True)
    data = photo.jpeg_bytes
    path.write_bytes(data[: len(data) // 2] if broken else data)
    (out / "truth").mkdir(exist_ok=True)
    tifffile.imwrite(
        out / "truth" / f"{lot}_{name}.truth.tif", photo.thickness_nm.astype(np.float32)
    )
    return path


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("out", nargs="?", help="output folder (default: a new temporary folder)")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--broken", action="store_true", help="cut lot-b/w03.jpg off half-way")
    g.add_argument("--retake", action="store_true", help="rewrite lot-b/w03.jpg only, whole")
    args = p.parse_args(argv)
    out = Path(args.out) if args.out else Path(tempfile.mkdtemp(prefix="fringemap-lots-"))
    out.mkdir(parents=True, exist_ok=True)
    for seed, (lot, name) in enumerate(WAFERS):
        if args.retake and (lot, name) != ("lot-b", "w03"):
            continue
        broken = args.broken and (lot, name) == ("lot-b", "w03")
        print(f"wrote {write_one(out, lot, name, seed, broken=broken)}")
    if not args.retake:
        (out / "wafer.recipe.toml").write_text(RECIPE, encoding="utf-8")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
