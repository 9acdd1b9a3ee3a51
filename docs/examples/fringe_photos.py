"""Render narrowband fringe photos of thick films for the thick-film guide.

Two scenes, both free soap films in air with a known thickness map:

* ``dome-589.tif`` — a film that bulges to 3.5 µm in the middle and is
  0.5 µm at its rim, under a sodium-like 589 nm line (too thick for
  white-light colours over most of its area);
* ``islands-2lines.tif`` — two separate patches of film (a low dome on the left,
  a tilted film on the right) under a two-band lamp, 450 nm and 530 nm,
  recorded in the camera's blue and green channels.

The photos are float32 linear-light TIFFs, as a raw converter writes them,
rendered by :func:`fringemap.fringes.render_fringe_photo`. The true thickness
of each is written next to it as ``<name>.truth.tif`` (float32, nm; NaN off
the film).

    python docs/examples/fringe_photos.py OUT_DIR
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import numpy as np
import tifffile

from fringemap import simulate as sim
from fringemap.fringes import parse_lines, render_fringe_photo
from fringemap.optics.stack import Stack


def dome():
    """A 500 x 500 px dome: 3500 nm at the centre, 500 nm at 240 px from it."""
    t = sim.bowl((500, 500), centre_nm=3500.0, edge_nm=500.0, radius_px=240)
    return np.where(sim.disc_mask((500, 500), radius=240), t, np.nan)


def islands():
    """Two round patches of film, 300 x 500 px: a low dome and a tilted film."""
    h, w = 300, 500
    a = sim.disc_mask((h, w), centre=(125, 150), radius=105)
    b = sim.disc_mask((h, w), centre=(375, 150), radius=105)
    t = np.full((h, w), np.nan)
    t[a] = sim.bowl((h, w), centre_nm=800, edge_nm=200, radius_px=105, centre=(125, 150))[a]
    t[b] = sim.wedge((h, w), t0_nm=-100, t1_nm=1250)[b]
    return t


def write(out: Path) -> list[Path]:
    out.mkdir(parents=True, exist_ok=True)
    soap = Stack.from_names(film="soap", substrate="air")
    written = []
    scenes = [
        ("dome-589", dome(), "589", 1),
        ("islands-2lines", islands(), parse_lines("450/10,530/10"), 7),
    ]
    for name, t, light, seed in scenes:
        photo = render_fringe_photo(t, stack=soap, light=light, noise=0.02, seed=seed)
        path = out / f"{name}.tif"
        tifffile.imwrite(path, photo.linear, photometric="rgb")
        tifffile.imwrite(out / f"{name}.truth.tif", photo.thickness_nm.astype(np.float32))
        written.append(path)
    return written


def main(argv: list[str]) -> int:
    out = Path(argv[0]) if argv else Path(tempfile.mkdtemp(prefix="fringemap-fringes-"))
    for path in write(out):
        print(f"wrote {path}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
