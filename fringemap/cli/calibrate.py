"""``fringemap calibrate``: a camera file from a chart photo or from areas of known thickness."""

from __future__ import annotations

import contextlib
import sys
import warnings
from pathlib import Path

from .common import add_stack_options, recipe_from_args


def _print_patches(model, out) -> None:
    width = max([len(n) for n, _ in model.per_patch] + [5])
    print(f"  {'#':>2}  {'patch':<{width}}  dE2000", file=out)
    for i, (name, de) in enumerate(model.per_patch, start=1):
        print(f"  {i:>2}  {name:<{width}}  {de:6.2f}", file=out)


def cmd_calibrate(args) -> int:
    from ..calibration import calibrate_from_chart, calibrate_from_reference, save_camera_model
    from ..calibration.methods import CORRECTION_METHODS
    from ..errors import FringemapWarning, OptionError
    from ..io import read_photo

    if getattr(args, "camera", None):
        raise OptionError("calibrate makes a camera file; it does not take one", where="--camera")
    if bool(args.corners) == bool(args.reference):
        raise OptionError(
            "give either --corners (a chart photo) or --reference X,Y,R=NM (a known area)",
            where="--corners" if args.corners else "--reference",
        )
    recipe = recipe_from_args(args)
    out = _check_out(args)
    photo = read_photo(args.photo)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FringemapWarning)
        if args.corners:
            cal = calibrate_from_chart(
                photo,
                corners=args.corners,
                light=recipe.light(),
                sensor=recipe.detector(),
                method=args.method,
            )
            model = cal.model
        else:
            recipe.require_stack()
            model = calibrate_from_reference(photo, recipe, references=args.reference)
    if args.corners:
        from ..calibration.diagnostic import write_chart_diagnostic
        from ..io.write import atomic_path

        # the camera file and its picture, or neither
        written = [out, out.with_suffix(".patches.png")]
        with contextlib.ExitStack() as stack:
            tmp = [stack.enter_context(atomic_path(p)) for p in written]
            save_camera_model(model, tmp[0])
            write_chart_diagnostic(cal, tmp[1])
    else:
        written = [save_camera_model(model, out)]
    for w in caught:
        if issubclass(w.category, FringemapWarning):
            print(f"fringemap: warning: {w.message}", file=sys.stderr)
    if not args.quiet:
        _print_patches(model, sys.stdout)
        if model.method in CORRECTION_METHODS:
            label = CORRECTION_METHODS[model.method].label
        else:
            label = f"per-channel gains {', '.join(f'{g:.4f}' for g in model.gains)}"
        print(f"method: {model.method} ({label})")
        print(
            f"mean dE2000 {model.mean_delta_e:.2f}, max {model.max_delta_e:.2f} "
            f"(light {model.light}, sensor {model.sensor})"
        )
        if model.leave_one_out:
            loo = ", ".join(f"{k} {v:.2f}" for k, v in model.leave_one_out.items())
            print(f"leave-one-out mean dE2000: {loo}")
        for p in written:
            print(f"wrote {p}")
    return 0


def _check_out(args) -> Path:
    """``--out``: a ``.toml`` file in an existing folder, overwriting no input."""
    from ..errors import OptionError
    from ..io.write import check_no_clash, check_output_dir

    out = Path(args.out)
    if out.suffix.lower() != ".toml":
        raise OptionError(
            f"expected a camera file name ending in .toml, got {args.out!r}", where="--out"
        )
    if out.is_dir():
        raise OptionError(
            f"{args.out!r} is a folder; give the camera file's name, e.g. {args.out}/camera.toml",
            where="--out",
        )
    planned = [out] + ([out.with_suffix(".patches.png")] if args.corners else [])
    inputs = [p for p in (args.photo, args.recipe) if p]
    check_no_clash(planned, inputs)
    folder = out.parent
    if not folder.is_dir():
        from ..errors import OutputError

        raise OutputError(
            f"cannot be written: its folder {str(folder)!r} does not exist; create it first",
            where=str(out),
        )
    check_output_dir(folder, inputs=inputs)  # writable? (creates nothing: the folder exists)
    return out


def register(sub, common) -> None:
    p = sub.add_parser(
        "calibrate",
        parents=[common],
        help="make a camera file (colour correction) from a chart photo or a known area",
        description="Fit a colour correction for the camera and write it as a TOML camera "
        "file for `map --camera`. Chart mode (--corners): a photo of the standard 24-patch "
        "chart under the light you measure with; prints each patch's CIEDE2000 error and writes "
        "<out>.patches.png (corrected | reference per patch). Reference mode (--reference): "
        "per-channel gains from areas whose film thickness is known (needs the film stack). "
        "The correction maps into the colours of --sensor under --light: use the same values "
        "for map.",
    )
    p.add_argument(
        "photo", metavar="PHOTO", help="chart photo or film photo (PNG, JPEG, TIFF, raw)"
    )
    p.add_argument(
        "--corners",
        metavar="X1,Y1,...,X4,Y4",
        help="outer corners of the chart's patch grid in pixels, clockwise from the top-left "
        "(the dark skin patch): top-left, top-right, bottom-right, bottom-left",
    )
    p.add_argument(
        "--reference",
        metavar="X,Y,R=NM",
        action="append",
        help="a disc of radius R px around X,Y whose film is NM thick (repeatable)",
    )
    p.add_argument(
        "--method",
        choices=["auto", "cheung2004", "finlayson2015"],
        default="auto",
        help="chart fit: 3x3 least squares (cheung2004), root-polynomial degree 2 "
        "(finlayson2015), or auto (default): compare their leave-one-out dE2000 and keep the "
        "3x3 unless the root-polynomial is better by more than one standard error",
    )
    p.add_argument("--out", metavar="CAMERA.toml", required=True, help="camera file to write")
    add_stack_options(p)
    p.set_defaults(func=cmd_calibrate)
