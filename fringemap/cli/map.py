"""``fringemap map``: thickness maps from photos."""

from __future__ import annotations

import sys
from pathlib import Path

from .common import add_stack_options, progress_bar, recipe_from_args, unique_stems
from .report_options import add_report_options


def cmd_map(args) -> int:
    from .. import _prefetch

    _prefetch.start()
    from ..io.write import check_no_clash, check_output_dir
    from ..job import MapJob, load_camera_for, run_job
    from ..report.analysis import optional_output_paths
    from ..report.outputs import output_paths
    from ..report.settings import check_report_settings

    recipe = recipe_from_args(args)
    recipe.require_stack()
    settings = check_report_settings(recipe)
    photos = [Path(p) for p in args.photos]
    out = check_output_dir(args.out, inputs=photos)
    stems = unique_stems(photos)
    planned = [p for stem in stems for p in output_paths(out, stem).values()]
    planned += [p for stem in stems for p in optional_output_paths(settings, out, stem).values()]
    check_no_clash(planned, photos)
    table = recipe.colour_table()
    camera = load_camera_for(recipe)
    job = MapJob(recipe=recipe, out_dir=out, report=settings.write_report)
    failed = []
    bar = progress_bar(len(photos), "mapping", args.quiet)
    for path, stem in zip(photos, stems, strict=True):
        outcome = run_job(path, stem, job, table=table, camera=camera)
        bar.update(1)
        if outcome.status != "ok":
            failed.append(outcome)
            if getattr(args, "debug", False) and outcome.detail:
                print(outcome.detail, end="", file=sys.stderr)
            print(f"fringemap: error: {outcome.reason}", file=sys.stderr)
            continue
        if not args.quiet:
            s = outcome.summary
            if s["count_px"]:
                line = (
                    f"{path.name}: mean {s['mean_nm']:.1f} nm, median {s['median_nm']:.1f} nm, "
                    f"std {s['std_nm']:.2f} nm, range {s['min_nm']:.1f}-{s['max_nm']:.1f} nm, "
                    f"coverage {100 * s['coverage']:.1f} %"
                )
            else:
                line = f"{path.name}: nothing measured (coverage 0 %)"
            bar.write(line)
            from . import SHOWN_WARNINGS

            for w in outcome.warnings:
                if w not in SHOWN_WARNINGS:
                    bar.write(f"{path.name}: warning: {w}")
            bar.write(f"  -> {outcome.written['map']}")
    bar.close()
    if failed:
        return failed[0].exit_code if len(photos) == 1 else 6
    return 0


def register(sub, common) -> None:
    p = sub.add_parser(
        "map",
        parents=[common],
        help="thickness map from one or more photos",
        description="Measure film thickness over each photo and write, per photo, "
        "<stem>.thickness.tif (float32, nm, NaN = not measured), <stem>.confidence.tif "
        "(0-1), <stem>.reasons.tif (uint8 codes), <stem>.map.png and <stem>.stats.json; "
        "with --sites also <stem>.sites.csv, with --profile <stem>.profiles.csv and .png, "
        "with --report <stem>.report.html and <stem>.report.pdf.",
    )
    p.add_argument("photos", nargs="+", metavar="PHOTO", help="PNG, JPEG, TIFF or camera raw")
    p.add_argument(
        "--out",
        metavar="DIR",
        default="fringemap-out",
        help="output folder (default ./fringemap-out)",
    )
    p.add_argument(
        "--roi",
        metavar="ROI",
        help="where to measure: all, rect:X0,Y0,X1,Y1, circle:CX,CY,R (pixels) or mask:IMAGE",
    )
    p.add_argument(
        "--anchor",
        metavar="X,Y=NM",
        action="append",
        help="a point of known thickness (pixels; nm), e.g. bare substrate = 0 (repeatable)",
    )
    add_stack_options(p)
    add_report_options(p)
    p.set_defaults(func=cmd_map)
