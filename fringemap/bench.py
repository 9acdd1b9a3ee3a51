"""Benchmark: time each stage on simulated 1, 12 and 24 megapixel photos.

Run ``python -m fringemap.bench`` (``--help`` for options). For each size it
prints the median over repeats of each stage's seconds, pixels per second,
the peak resident memory of a fresh process measuring that photo, and two
ratios measured in the same run:

* against a brute-force reference — every pixel compared with every colour
  table entry in numpy, timed on a sample of pixels and extrapolated;
* against one memory pass over the linear image (the physical floor: reading
  every pixel once).

It also times ``fringemap map`` end to end on the 12 MP JPEG (start-up,
decode and writing included). Figures depend on the machine: quote medians and
ratios, and run it on an idle machine.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

SIZES_MP = {1: (1000, 1000), 12: (3000, 4000), 24: (4000, 6000)}


def _recipe():
    from .recipe import Recipe

    return Recipe.from_dict(
        {"stack": {"film": "sio2", "substrate": "si"}, "light": {"source": "F11"}}
    )


def base_render() -> np.ndarray:
    """A 1 MP (750 × 1000) simulated oxide-on-silicon photo, uint8 RGB, without noise."""
    from . import simulate as sim
    from .optics.stack import Stack

    small = (750, 1000)
    t = 150 + 750 * sim.wedge(small, t0_nm=0, t1_nm=1, axis="x")
    t = t + 25 * np.sin(np.arange(small[0])[:, None] / 60.0)
    return sim.render_photo(
        t,
        stack=Stack.from_names(film="sio2", substrate="db:main/Si/Aspnes"),
        light="F11",
        film_mask=sim.frame_mask(small, margin_px=25),
        noise=0.0,
        blur_px=0.5,
        seed=1,
    ).image


def resized_noisy(base: np.ndarray, shape: tuple[int, int], seed: int) -> np.ndarray:
    """``base`` resized to ``shape`` (H, W) with 1 % noise (2.5 levels), uint8 RGB."""
    import cv2

    h, w = shape
    img = cv2.resize(base, (w, h), interpolation=cv2.INTER_LINEAR).astype(np.float32)
    img += np.random.default_rng(seed).normal(0, 2.5, img.shape).astype(np.float32)
    return np.clip(np.round(img), 0, 255).astype(np.uint8)


def make_photo(folder: Path, mp: int) -> Path:
    """A simulated oxide-on-silicon JPEG of ``mp`` megapixels (rendered at 1 MP, resized)."""
    import cv2

    path = folder / f"bench-{mp}mp.jpg"
    if path.exists():
        return path
    img = resized_noisy(base_render(), SIZES_MP[mp], seed=2)
    cv2.imwrite(str(path), img[..., ::-1], [cv2.IMWRITE_JPEG_QUALITY, 90])
    return path


def _stages(path: Path, repeat: int) -> dict:
    """Time each stage ``repeat`` times in this process; medians."""
    from PIL import Image

    from .io import read_photo
    from .measure import measure
    from .report.outputs import write_map_outputs

    recipe = _recipe()
    table = recipe.colour_table()
    measure(read_photo(path), recipe, table=table)  # warm: compiled kernels loaded
    rows: dict[str, list[float]] = {}

    def add(key, value):
        rows.setdefault(key, []).append(value)

    for _ in range(repeat):
        t0 = time.perf_counter()
        with Image.open(path) as im:
            im.load()
        add("decode", time.perf_counter() - t0)
        t0 = time.perf_counter()
        photo = read_photo(path)
        add("read_photo (decode + linearise)", time.perf_counter() - t0)
        marks: list[tuple[str, float]] = []
        t0 = time.perf_counter()
        result = measure(
            photo,
            recipe,
            table=table,
            progress=lambda s, m=marks: m.append((s, time.perf_counter())),
        )
        total = time.perf_counter() - t0
        marks.append(("end", time.perf_counter()))
        add("compute (measure, decode excluded)", total)
        starts = {}
        for (name, t_a), (_, t_b) in zip(marks[:-1], marks[1:], strict=True):
            key = name.split(",")[0]
            starts[key] = starts.get(key, 0.0) + (t_b - t_a)
        first = marks[0][1] - t0
        add("masks and downsampling", first)
        add("candidates + order selection (coarse passes)", starts.get("gain and orders", 0.0))
        add("full-resolution refine", starts.get("full resolution", 0.0))
        add("reasons, confidence, statistics", starts.get("reasons", 0.0))
        with tempfile.TemporaryDirectory() as tmp:
            t0 = time.perf_counter()
            write_map_outputs(result, tmp, "bench")
            add("write outputs", time.perf_counter() - t0)
        # as a batch worker does: the photo's result is released before the next photo
        del result
    # the pipeline's peak, before the floor below decodes a float copy of the photo
    peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    linear = photo.linear
    floor = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        float(linear.sum(dtype=np.float64))
        floor.append(time.perf_counter() - t0)
    med = {k: float(np.median(v)) for k, v in rows.items()}
    med["memory pass (floor)"] = float(np.median(floor))
    med["pixels"] = int(linear.shape[0] * linear.shape[1])
    med["peak_rss_mb"] = peak_mb
    return med


def brute_force_seconds(n_pixels: int, sample: int = 20000) -> float:
    """Seconds a numpy brute force (every pixel × every table entry) would take."""
    from .matching.space import INTENSITY_WEIGHT_FULL, distance, encode

    table = _recipe().colour_table()
    e = encode(table.rgb)
    q = np.random.default_rng(0).uniform(0.1, 0.9, (sample, 3))
    t0 = time.perf_counter()
    for chunk in np.array_split(q, 20):
        d = distance(chunk[:, None, :], e[None, :, :], intensity_weight=INTENSITY_WEIGHT_FULL)
        d.argmin(axis=1)
    per_px = (time.perf_counter() - t0) / sample
    return per_px * n_pixels


def colour_table_seconds(repeat: int) -> dict:
    """Median seconds for the forward model: 3000 thicknesses × 400 wavelengths, with colour.

    Reflectance of oxide on silicon by the transfer matrix over 380-780 nm at 400 samples,
    then integrated against a light and the CIE observer (a matrix product), as the colour
    table does; and the table itself as built by the pipeline (1 nm steps, its own grid).
    """
    from .colour.spectra import GRID_NM, parse_detector, parse_light
    from .optics.stack import Stack, reflectance

    stack = Stack.from_names(film="sio2", substrate="si")
    t = np.linspace(0.0, 1500.0, 3000)
    wl = np.linspace(380.0, 780.0, 400)
    light = np.interp(wl, GRID_NM, parse_light("D65").power)
    cmf = np.stack([np.interp(wl, GRID_NM, c) for c in parse_detector("cie1931").curves.T], -1)
    weights = light[:, None] * cmf
    weights /= weights[:, 1].sum()
    model, table = [], []
    for _ in range(repeat + 1):
        t0 = time.perf_counter()
        (reflectance(stack, thickness_nm=t, wavelength_nm=wl, angle_deg=0.0) @ weights).sum()
        model.append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        _recipe().colour_table()
        table.append(time.perf_counter() - t0)
    return {
        "forward model 3000 x 400 with colour": float(np.median(model[1:])),
        "colour table as built (0-1500 nm, 1 nm)": float(np.median(table[1:])),
    }


def first_touch_seconds_per_gb(mb: int = 256) -> float:
    """Seconds per GB to write memory this process has never touched (page faults).

    On some virtual machines this is far slower than writing memory again, so a
    fresh process pays for its peak memory: part of a one-photo ``map`` run.
    """
    t0 = time.perf_counter()
    buf = np.empty(mb * 2**20 // 4, dtype=np.float32)
    buf.fill(1.0)
    seconds = time.perf_counter() - t0
    del buf
    return seconds * 1024.0 / mb


def _first_touch_in_fresh_process() -> float:
    """:func:`first_touch_seconds_per_gb` measured in a new process (not this one's peak)."""
    code = "from fringemap.bench import first_touch_seconds_per_gb as f; print(f())"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return float(out.stdout.strip().splitlines()[-1])


def _child(path: str, repeat: int) -> None:
    """Run in a fresh process: stage timings and peak memory as JSON on stdout.

    The process's allocator is set up as the command's and the batch workers' are
    (:func:`fringemap._memory.keep_freed_memory`), so "warm" means what it means
    for a worker measuring photo after photo.
    """
    from ._memory import keep_freed_memory

    keep_freed_memory()
    med = _stages(Path(path), repeat)
    print(json.dumps(med))


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(
        prog="python -m fringemap.bench", description=__doc__.split("\n")[0]
    )
    p.add_argument("--sizes", default="1,12,24", help="megapixels to test (of 1, 12, 24)")
    p.add_argument("--repeat", type=int, default=3, help="repeats per size (median)")
    p.add_argument("--folder", default=None, help="where to keep the simulated photos")
    p.add_argument("--json", metavar="FILE", help="also write all figures as JSON")
    p.add_argument("--child", help=argparse.SUPPRESS)
    args = p.parse_args(argv)
    if args.child:
        _child(args.child, args.repeat)
        return 0
    folder = Path(args.folder or tempfile.mkdtemp(prefix="fringemap-bench-"))
    folder.mkdir(parents=True, exist_ok=True)
    sizes = [int(s) for s in args.sizes.split(",")]
    print(
        f"machine: {os.cpu_count()} CPUs, python {sys.version.split()[0]}, numpy {np.__version__}"
    )
    results = {}
    model = colour_table_seconds(args.repeat)
    results["forward_model"] = model
    print("\nforward model (medians):")
    for k, v in model.items():
        print(f"  {k:<48} {v:8.3f} s")
    for mp in sizes:
        path = make_photo(folder, mp)
        out = subprocess.run(
            [
                sys.executable,
                "-m",
                "fringemap.bench",
                "--child",
                str(path),
                "--repeat",
                str(args.repeat),
            ],
            capture_output=True,
            text=True,
            check=True,
        )
        med = json.loads(out.stdout.strip().splitlines()[-1])
        brute = brute_force_seconds(med["pixels"])
        med["brute_force_s"] = brute
        results[mp] = med
        compute = med["compute (measure, decode excluded)"]
        print(f"\n{mp} MP ({med['pixels']:,} px), medians of {args.repeat}:")
        for k, v in med.items():
            if k not in ("pixels", "peak_rss_mb", "brute_force_s") and "per GB" not in k:
                print(f"  {k:<48} {v:8.3f} s")
        touch = _first_touch_in_fresh_process()
        med["first touch of fresh memory (s per GB)"] = touch
        print(f"  {'first touch of fresh memory (own process)':<48} {touch:8.2f} s per GB")
        print(f"  {'pixels per second (compute)':<48} {med['pixels'] / compute:12,.0f}")
        print(f"  {'peak memory (fresh process)':<48} {med['peak_rss_mb']:8.0f} MB")
        print(
            f"  {'brute force (numpy, extrapolated)':<48} {brute:8.1f} s"
            f"  -> {brute / compute:.0f}x faster"
        )
        print(f"  {'compute / one memory pass':<48} {compute / med['memory pass (floor)']:8.0f}x")
    if 12 in results and 24 in results:
        r = (
            results[24]["compute (measure, decode excluded)"]
            / results[12]["compute (measure, decode excluded)"]
        )
        print(f"\n24 MP / 12 MP compute time: {r:.2f}")
    if 12 in sizes:
        path = make_photo(folder, 12)
        times = []
        for _ in range(args.repeat):
            with tempfile.TemporaryDirectory() as tmp:
                t0 = time.perf_counter()
                subprocess.run(
                    [
                        sys.executable,
                        "-m",
                        "fringemap",
                        "map",
                        str(path),
                        "--film",
                        "sio2",
                        "--substrate",
                        "si",
                        "--light",
                        "F11",
                        "--out",
                        tmp,
                        "-q",
                    ],
                    check=True,
                )
                times.append(time.perf_counter() - t0)
        results["map_12mp_end_to_end_s"] = float(np.median(times))
        print(
            f"\nfringemap map, 12 MP JPEG, end to end (start-up, decode, write): "
            f"{np.median(times):.2f} s (median of {args.repeat})"
        )
    if args.json:
        Path(args.json).write_text(json.dumps(results, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
