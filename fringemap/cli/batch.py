"""``fringemap batch``: many photos with one recipe, on this machine or on a Dask cluster."""

from __future__ import annotations

import argparse
import math
import sys

from .common import add_stack_options, recipe_from_args
from .report_options import add_report_options

_EPILOG = """\
outputs (in --out):
  per photo the files of `fringemap map` (<stem>.thickness.tif, .confidence.tif,
  .reasons.tif, .map.png, .stats.json), and batch-summary.csv / batch-summary.json:
  one row per photo with status ok, failed or skipped, the reason of a failure,
  mean/std/min/max (nm), non-uniformity (%), coverage, pass/fail and seconds.

resuming:
  --resume skips photos whose outputs all exist and were made with the same
  recipe (the recipe hash recorded in <stem>.stats.json); failed photos are
  tried again. An interrupted batch resumed this way ends with the same summary
  numbers as one that ran straight through.

running on a lab cluster (Dask):
  1. on one machine start a scheduler:      dask scheduler --port 8786
  2. on each machine start workers:         dask worker tcp://SCHEDULER:8786 --nthreads 1
     (one single-threaded worker per core works well), each with the SAME
     fringemap version installed: pip install "fringemap[cluster]==VERSION"
  3. put the photos and the output folder on storage every worker sees under
     the same path (NFS, SMB or similar), then run from any machine:
       fringemap batch /shared/photos --out /shared/maps --scheduler tcp://SCHEDULER:8786
  The colour table is built once and sent to every worker; a scheduler that does
  not answer is reported within seconds. See docs/batch.md.

exit status: 0 when every photo is ok or skipped, 6 when some failed (one line per
failure is printed), 2 for a bad option or an unreachable scheduler."""


def cmd_batch(args) -> int:
    from ..batch import collect_inputs, default_workers, run_batch
    from ..errors import BatchFailures, OptionError
    from ..io.write import check_output_dir
    from ..job import MapJob
    from ..report.settings import check_report_settings

    if args.workers is not None and args.scheduler:
        raise OptionError(
            "cannot be combined with --scheduler: a cluster's workers are started with "
            "`dask worker`",
            where="--workers",
        )
    if args.workers is not None and args.workers < 1:
        raise OptionError(f"expected a whole number >= 1, got {args.workers}", where="--workers")
    if args.scheduler:
        from ..cluster import parse_address

        parse_address(args.scheduler)
    recipe = recipe_from_args(args)
    recipe.require_stack()
    settings = check_report_settings(recipe)
    photos = collect_inputs(args.inputs, recursive=args.recursive)
    out = check_output_dir(args.out, inputs=[*args.inputs, *photos])
    job = MapJob(recipe=recipe, out_dir=out, report=settings.write_report)
    workers = args.workers or default_workers()
    summary = run_batch(
        photos,
        job,
        workers=workers,
        resume=args.resume,
        scheduler=args.scheduler,
        progress=not args.quiet,
    )
    failures = summary.failures
    for row in failures:
        print(f"fringemap: failed: {row['reason']}", file=sys.stderr)
    if not args.quiet:
        ok, skipped = summary.count("ok"), summary.count("skipped")
        where = f"on {summary.scheduler}" if summary.scheduler else f"with {workers} workers"
        rate = summary.photos_per_minute
        speed = f", {rate:.1f} photos/min" if math.isfinite(rate) and rate > 0 else ""
        print(
            f"{len(summary.rows)} photos: {ok} ok, {skipped} skipped, {len(failures)} failed "
            f"in {summary.seconds:.1f} s {where}{speed}; summary: {summary.csv_path}"
        )
    if failures:
        raise BatchFailures(
            f"{len(failures)} of {len(summary.rows)} photos failed (listed above)",
            where=str(summary.csv_path),
        )
    return 0


def register(sub, common) -> None:
    p = sub.add_parser(
        "batch",
        parents=[common],
        help="thickness maps of many photos (local processes or a Dask cluster)",
        description="Measure every photo given (files, folders, glob patterns) with one\n"
        "recipe, in parallel worker processes or on a Dask cluster, and write each\n"
        "photo's outputs plus a batch summary. A photo that cannot be read or measured\n"
        "is recorded and the batch goes on.",
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument(
        "inputs",
        nargs="+",
        metavar="INPUT",
        help="photo file, folder of photos or quoted glob pattern (PNG, JPEG, TIFF, camera raw)",
    )
    p.add_argument("--out", metavar="DIR", required=True, help="output folder (created if needed)")
    p.add_argument(
        "--workers",
        metavar="N",
        type=int,
        help="worker processes on this machine (default: one per CPU)",
    )
    p.add_argument("--recursive", action="store_true", help="also take photos from sub-folders")
    p.add_argument(
        "--resume",
        action="store_true",
        help="skip photos already measured with this recipe; retry the ones that failed",
    )
    p.add_argument(
        "--scheduler",
        metavar="tcp://HOST:PORT",
        help="run on the Dask cluster of this scheduler instead of local processes",
    )
    p.add_argument(
        "--roi",
        metavar="ROI",
        help="where to measure: all, rect:X0,Y0,X1,Y1, circle:CX,CY,R (pixels) or mask:IMAGE",
    )
    add_stack_options(p)
    add_report_options(p)
    p.set_defaults(func=cmd_batch)
