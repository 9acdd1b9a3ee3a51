"""Render a short time-lapse of a soap film draining in a wire frame.

Each frame is a photo of the same vertical film a few seconds later: the black
film at the top grows downwards and the coloured film below it thins. The frames
are rendered with :mod:`fringemap.simulate` from pure-water optical data (the
tool's recipe uses its own soap index), under a warm-white LED, as 8-bit JPEGs.

    python docs/examples/soap_drain_frames.py OUT_DIR [--frames N]

writes OUT_DIR/drain_t0s.jpg, drain_t10s.jpg, ... (the elapsed time is in the
name, which `fringemap series` reads) and the true thickness of each frame in
OUT_DIR/truth/ (float32 TIFF, nm), plus OUT_DIR/drain.recipe.toml.
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

import numpy as np
import tifffile

from fringemap import simulate as sim
from fringemap.optics.stack import Stack

SHAPE = (400, 360)  # H, W px: small frames keep the guide quick
MARGIN = 20  # px of wire frame around the film
STEP_S = 10.0  # seconds between frames

RECIPE = """\
# a soap film in air, under a warm-white LED, seen square on
[stack]
film = "soap"
substrate = "air"

[light]
source = "LED-B1"

[search]
range_nm = [0.0, 1300.0]

[measure]
roi = "rect:24,24,336,376"
anchors = ["180,30=25"]        # the black film at the top is ~25 nm thick

[report]
profiles = ["180,24:180,376"]  # down the middle: the kymograph line
"""


def thickness_at(t_s: float) -> np.ndarray:
    """The film at time t_s: thinner, with more black film, as time goes on (nm)."""
    u = t_s / 60.0
    return sim.draining_film(
        SHAPE,
        top_nm=90.0,
        bottom_nm=1100.0 - 300.0 * u,  # the bottom thins by ~5 nm/s
        black_fraction=0.12 + 0.10 * u,
    )


def render_frame(t_s: float, seed: int):
    stack = Stack.from_names(film="db:main/H2O/Hale", substrate="air")
    return sim.render_photo(
        thickness_at(t_s),
        stack=stack,
        light="LED-B1",
        film_mask=sim.frame_mask(SHAPE, margin_px=MARGIN),
        vignetting=0.25,
        lamp_gradient=0.12,
        noise=0.01,
        blur_px=1.0,
        jpeg_quality=90,
        seed=seed,
    )


def write_frames(out: Path, frames: int = 6) -> list[Path]:
    out.mkdir(parents=True, exist_ok=True)
    (out / "truth").mkdir(exist_ok=True)
    paths = []
    for i in range(frames):
        t_s = i * STEP_S
        photo = render_frame(t_s, seed=i)
        path = out / f"drain_t{t_s:g}s.jpg"
        path.write_bytes(photo.jpeg_bytes)
        tifffile.imwrite(
            out / "truth" / f"drain_t{t_s:g}s.truth.tif",
            photo.thickness_nm.astype(np.float32),
        )
        paths.append(path)
    (out / "drain.recipe.toml").write_text(RECIPE, encoding="utf-8")
    return paths


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("out", nargs="?", help="output folder (default: a new temporary folder)")
    p.add_argument("--frames", type=int, default=6, help="number of frames (default 6)")
    args = p.parse_args(argv)
    out = Path(args.out) if args.out else Path(tempfile.mkdtemp(prefix="fringemap-drain-"))
    for path in write_frames(out, args.frames):
        print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
