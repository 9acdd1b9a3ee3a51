"""Photos per minute and peak memory of ``fringemap batch`` on simulated 12 MP photos.

Renders N different simulated photos of thermal oxide on silicon (a wedge with
a gentle wave, rendered at 1 MP and enlarged, each with its own sensor noise),
then times ``fringemap batch`` on them end to end (start-up, colour table,
worker start, decode, measure, write) with 2 local worker processes.

Peak memory is sampled (every 0.1 s) as the summed resident memory of the
batch process and all its workers when psutil is installed; the largest single
process's peak (``getrusage`` of the children) is printed as well. Run it on an
idle machine::

    python benchmarks/batch_bench.py [--photos 6] [--size 3000x4000] [--workers 2]
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np


def make_photos(folder: Path, n: int, h: int, w: int) -> list[Path]:
    import cv2

    from fringemap.bench import base_render, resized_noisy

    base = base_render()
    paths = []
    for i in range(n):
        img = resized_noisy(base, (h, w), seed=10 + i)
        path = folder / f"lot-{i:03d}.jpg"
        cv2.imwrite(str(path), img[..., ::-1], [cv2.IMWRITE_JPEG_QUALITY, 90])
        paths.append(path)
    return paths


def _sample_tree_rss(pid: int, stop: threading.Event, peak: list) -> None:
    try:
        import psutil
    except ImportError:
        return
    try:
        root = psutil.Process(pid)
    except psutil.Error:
        return
    while not stop.is_set():
        total = 0
        try:
            procs = [root, *root.children(recursive=True)]
        except psutil.Error:
            break
        for p in procs:
            try:
                total += p.memory_info().rss
            except psutil.Error:
                pass
        peak[0] = max(peak[0], total)
        stop.wait(0.1)


def main() -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--photos", type=int, default=6, help="number of photos (default 6)")
    p.add_argument("--size", default="3000x4000", help="HxW in px (default 3000x4000, 12 MP)")
    p.add_argument("--workers", type=int, default=2, help="worker processes (default 2)")
    args = p.parse_args()
    h, w = (int(v) for v in args.size.lower().split("x"))
    exe = Path(sys.executable).parent / "fringemap"
    with tempfile.TemporaryDirectory(prefix="fringemap-batch-bench-") as tmp:
        folder, out = Path(tmp, "photos"), Path(tmp, "out")
        folder.mkdir()
        start = time.perf_counter()
        make_photos(folder, args.photos, h, w)
        print(f"rendered {args.photos} photos of {h}x{w} px in {time.perf_counter() - start:.1f} s")
        cmd = [
            str(exe),
            "batch",
            str(folder),
            "--out",
            str(out),
            "--workers",
            str(args.workers),
            "--film",
            "sio2",
            "--substrate",
            "si",
            "--light",
            "F11",
            "--range",
            "0:1100",
            "-q",
        ]
        peak = [0]
        stop = threading.Event()
        start = time.perf_counter()
        proc = subprocess.Popen(cmd)
        sampler = threading.Thread(target=_sample_tree_rss, args=(proc.pid, stop, peak))
        sampler.start()
        code = proc.wait()
        wall = time.perf_counter() - start
        stop.set()
        sampler.join()
        children_peak_mb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
        summary = json.loads((out / "batch-summary.json").read_text(encoding="utf-8"))
    seconds = [r["seconds"] for r in summary["rows"] if r["status"] == "ok"]
    print(f"exit status {code}; {summary['counts']}")
    print(f"photos: {args.photos} x {h * w / 1e6:.0f} MP, workers: {args.workers}")
    print(f"wall time: {wall:.1f} s -> {60 * args.photos / wall:.2f} photos per minute")
    if seconds:
        print(f"per photo in a worker: median {np.median(seconds):.1f} s")
    if peak[0]:
        print(f"peak memory, batch process + workers together: {peak[0] / 2**20:.0f} MB")
    print(f"peak memory, largest single process: {children_peak_mb:.0f} MB")
    return code


if __name__ == "__main__":
    sys.exit(main())
