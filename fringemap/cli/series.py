"""``fringemap series``: film thickness against time, from photos or a video."""

from __future__ import annotations

import argparse
import math
import sys

from .common import add_stack_options, recipe_from_args

_EPILOG = """\
frame times (photos), tried in this order unless --time-from says which:
  exif      EXIF DateTimeOriginal of every frame (1 s resolution), from the earliest
  name      a time in every file name: 20250301-101500 (or _ / T between, optional
            .fff fraction), 2025-03-01_10-15-00, counted from the earliest; or an
            elapsed time such as film_t12.5s.jpg, run-t1500ms.png, t2min.tif
  interval  --interval S seconds between frames, in natural file-name order
  A video's frame n is at n / fps seconds (or n * --interval).

outputs (in --out):
  series.csv      time_s, frame, source, mean/median/std/min/max (nm), coverage
                  over the region of interest, one row per measured frame
  series.json     rate of the region's mean thickness (nm/s, < 0 thinning) from a
                  least-squares line, its standard error, R², time basis, failures
  series.png      the mean against time with the fitted line
  kymograph.tif   float32 nm: thickness along the --profile line (columns, 1 px
                  apart) for each frame (rows, in time order)
  kymograph.png   the same as a picture: distance (px) across, time (s) down

exit status: 0, or 6 when some frames could not be measured (one line each)."""


def _parse_profile(text: str | None):
    from ..roi import parse_segment

    return None if text is None else parse_segment(text, "--profile")


def cmd_series(args) -> int:
    from ..errors import BatchFailures
    from ..series import run_series

    recipe = recipe_from_args(args)
    recipe.require_stack()
    result = run_series(
        args.inputs,
        recipe,
        args.out,
        profile_line=_parse_profile(args.kymograph_line),
        interval=args.interval,
        video_step=args.video_step,
        time_from=args.time_from,
        progress=not args.quiet,
    )
    for _, reason in result.failed:
        print(f"fringemap: failed: {reason}", file=sys.stderr)
    if not args.quiet:
        f = result.fit
        if math.isfinite(f.rate_nm_per_s):
            se = (
                f" ± {f.rate_std_error_nm_per_s:.3g}"
                if math.isfinite(f.rate_std_error_nm_per_s)
                else ""
            )
            r2 = f", R² {f.r_squared:.4f}" if math.isfinite(f.r_squared) else ""
            rate = f"rate {f.rate_nm_per_s:.4g}{se} nm/s{r2}"
        else:
            rate = "rate not known (fewer than two measured frames)"
        print(
            f"{len(result.time_s)} frames ({result.time_basis} times, "
            f"{result.time_s[0]:g}-{result.time_s[-1]:g} s): {rate}; "
            f"outputs in {result.written['csv'].parent}"
        )
    if result.failed:
        n = len(result.failed)
        raise BatchFailures(
            f"{n} of {n + len(result.time_s)} frames could not be measured (listed above)",
            where=str(result.written["json"]),
        )
    return 0


def _positive_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected seconds > 0, got {text!r}") from None
    if not math.isfinite(value) or value <= 0:
        raise argparse.ArgumentTypeError(f"expected seconds > 0, got {text!r}")
    return value


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}")
    return value


def register(sub, common) -> None:
    p = sub.add_parser(
        "series",
        parents=[common],
        help="thickness against time from a sequence of photos or a video",
        description="Measure every frame of a time series (photos, or one video) over the\n"
        "region of interest; write the mean thickness against time, its thinning or\n"
        "growth rate (nm/s) with its uncertainty, and a kymograph along a line.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument(
        "inputs",
        nargs="+",
        metavar="INPUT",
        help="photos, a folder of photos or a quoted glob pattern; or one video file",
    )
    p.add_argument("--out", metavar="DIR", required=True, help="output folder (created if needed)")
    p.add_argument(
        "--roi",
        metavar="ROI",
        help="region the statistics and the rate use: all, rect:X0,Y0,X1,Y1, "
        "circle:CX,CY,R (pixels) or mask:IMAGE",
    )
    p.add_argument(
        "--profile",
        metavar="X1,Y1:X2,Y2",
        dest="kymograph_line",
        help="line of the kymograph, pixels (default: the recipe's first profile, else the "
        "middle row)",
    )
    p.add_argument(
        "--interval",
        metavar="S",
        type=_positive_float,
        help="seconds between frames, when the photos carry no times (for a video: instead "
        "of its frame rate)",
    )
    p.add_argument(
        "--video-step",
        metavar="N",
        type=_positive_int,
        default=1,
        help="measure every N-th frame of a video (default 1: all)",
    )
    p.add_argument(
        "--time-from",
        choices=("auto", "exif", "name", "interval"),
        default="auto",
        help="where photo times come from (default auto: exif, then name, then interval)",
    )
    add_stack_options(p)
    p.set_defaults(func=cmd_series)
