"""Time and peak memory of ``measure_fringes`` on simulated 1 MP and 12 MP dome photos.

Each size runs in its own process so the peak resident memory is that run's
own. Run on an idle machine::

    python benchmarks/fringes_bench.py [--sizes 1000x1000,3000x4000]

Prints, per size: seconds for ``measure_fringes`` (median of ``--repeat``
runs), the coarse unwrapping factor, peak resident memory (MB), the median
|error| (nm) and the share of pixels off by more than a quarter wavelength
in the film.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys

_CHILD = r"""
import json, resource, sys, time
import numpy as np
from fringemap import simulate as sim
from fringemap.fringes import measure_fringes, render_fringe_photo
from fringemap.optics.stack import Stack

h, w, repeat = (int(v) for v in sys.argv[1:4])
stack = Stack.from_names(film="soap", substrate="air")
t = sim.bowl((h, w), centre_nm=500 + 5000 * max(h, w) / 600, edge_nm=500,
             radius_px=0.5 * float(np.hypot(h, w)) + 5)
lin = render_fringe_photo(t, stack=stack, light="589", noise=0.02).linear
times = []
for _ in range(repeat):
    start = time.perf_counter()
    res = measure_fringes(lin, stack=stack, light="589", anchors=[f"10,10={t[10, 10]:.3f}"])
    times.append(time.perf_counter() - start)
err = res.map.thickness_nm - t
n = float(stack.film.index(np.array([589.0]))[0].real)
print(json.dumps({
    "size": f"{h}x{w}",
    "seconds": float(np.median(times)),
    "unwrap_factor": res.map.provenance["unwrap_factor"],
    "peak_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
    "median_abs_error_nm": float(np.nanmedian(np.abs(err))),
    "count_errors": float(np.nanmean(np.abs(err) > 589 / (4 * n))),
}))
"""


def main() -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--sizes", default="1000x1000,3000x4000", help="HxW list")
    p.add_argument("--repeat", type=int, default=1, help="runs per size")
    args = p.parse_args()
    for size in args.sizes.split(","):
        h, w = size.lower().split("x")
        out = subprocess.run(
            [sys.executable, "-c", _CHILD, h, w, str(args.repeat)],
            capture_output=True,
            text=True,
            check=True,
        )
        row = json.loads(out.stdout.strip().splitlines()[-1])
        print(
            f"{row['size']:>10}: {row['seconds']:6.1f} s, unwrap factor {row['unwrap_factor']}, "
            f"peak {row['peak_rss_mb']:6.0f} MB, median |error| "
            f"{row['median_abs_error_nm']:.2f} nm, count errors {100 * row['count_errors']:.3f} %"
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
