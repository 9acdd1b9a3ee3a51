"""``fringemap fringes``: thickness maps of thick films from narrowband fringe photos."""

from __future__ import annotations

import warnings
from pathlib import Path

from .common import add_stack_options, recipe_from_args


def _limit_line(line: dict) -> str:
    lim = line["visibility_limit_nm"]
    frac = 100 * line["visibility_threshold_fraction"]
    text = "never within the scanned range" if lim is None else f"beyond {lim / 1000:.2f} µm"
    return (
        f"{line['light']}: fringe period {line['fringe_period_nm']:.1f} nm; visibility falls "
        f"below {frac:g} % of its thin-film value {text} (coherence estimate "
        f"λ²/(2nΔλ) = {line['coherence_estimate_nm'] / 1000:.2f} µm)"
    )


def cmd_fringes(args) -> int:
    from ..errors import FringemapWarning, OptionError
    from ..fringes import measure_fringes, narrow_source, parse_lines
    from ..io import read_photo
    from ..io.write import check_no_clash, check_output_dir
    from ..report.outputs import output_paths, write_map_outputs
    from ..roi import parse_roi, roi_mask

    if not 0 < args.visibility_threshold < 1:
        raise OptionError(
            f"expected a fraction in (0, 1), got {args.visibility_threshold:g}",
            where="--visibility-threshold",
        )
    recipe = recipe_from_args(args)
    overrides = {"measure.thicker_at": args.thicker_at}
    if args.lines:
        overrides["light.source"] = args.lines
    recipe = recipe.with_overrides(overrides)
    recipe.require_stack()
    light_text = recipe.get("light", "source")
    if "," in light_text:
        light = parse_lines(light_text, where="--lines")
    else:
        light = narrow_source(light_text, where="--light")
    if recipe.get("light", "aperture") > 0 and not args.quiet:
        print("fringemap: warning: --aperture is not modelled for fringes; ignored")
    photo_path = Path(args.photo)
    inputs = [photo_path] + ([Path(args.colour_photo)] if args.colour_photo else [])
    out = check_output_dir(args.out, inputs=inputs)
    stem = photo_path.stem
    check_no_clash(list(output_paths(out, stem).values()), inputs)
    stack = recipe.stack()
    photo = read_photo(photo_path)
    roi = roi_mask(parse_roi(recipe.get("measure", "roi")), photo.shape)
    colour_map = None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", FringemapWarning)
        if args.colour_photo:
            from ..job import load_camera_for
            from ..measure import measure

            white = recipe.with_overrides({"light.source": args.colour_light})
            colour_photo = read_photo(args.colour_photo)
            camera = load_camera_for(white)
            if camera is not None:  # a camera file, or "self" to self-calibrate
                from ..calibration import camera_for_photo

                camera = camera_for_photo(camera, colour_photo, white).model
            colour_map = measure(colour_photo, white, camera=camera)
        result = measure_fringes(
            photo,
            stack=stack,
            light=light,
            angle_deg=recipe.get("light", "angle_deg"),
            anchors=recipe.get("measure", "anchors"),
            thicker_at=recipe.get("measure", "thicker_at"),
            channel=args.channel,
            colour_map=colour_map,
            method=args.method,
            roi_mask=roi,
            visibility_fraction=args.visibility_threshold,
            recipe=recipe,
        )
    notes = [str(w.message) for w in caught if issubclass(w.category, FringemapWarning)]
    prov = result.map.provenance
    extra = {
        "fringes": {
            k: prov[k]
            for k in ("method", "lines", "unambiguous_range_nm", "regions", "unwrap_factor")
        }
    }
    written = write_map_outputs(
        result.map,
        out,
        stem,
        extra_stats=extra,
        scale_px_per_mm=recipe.get("report", "scale_px_per_mm"),
    )
    if not args.quiet:
        for line in prov["lines"]:
            print(_limit_line(line))
        if result.unambiguous_range_nm is not None:
            print(f"lines combined: unambiguous over {result.unambiguous_range_nm:.0f} nm")
        s = result.map.stats
        if s.count_px:
            print(
                f"{photo_path.name}: mean {s.mean_nm:.1f} nm, median {s.median_nm:.1f} nm, "
                f"std {s.std_nm:.2f} nm, range {s.min_nm:.1f}-{s.max_nm:.1f} nm, "
                f"coverage {100 * s.coverage:.1f} % ({result.method} method)"
            )
        for n in notes:
            print(f"{photo_path.name}: warning: {n}")
        print(f"  -> {written['map']}")
    return 0


def register(sub, common) -> None:
    p = sub.add_parser(
        "fringes",
        parents=[common],
        help="thickness map of a thick film from a narrowband fringe photo",
        description="Measure film thickness from the interference fringes of a narrow light "
        "(a line such as 589, a band such as 546/10, a CSV spectrum, or 2-3 lines in the "
        "camera's channels). Writes the same files as `map` and prints where the light's "
        "fringes fade. The absolute thickness needs an --anchor, a --colour-photo or a "
        "second line; closed fringes (domes, dimples) need two anchors, --thicker-at or the "
        "colour photo to tell up from down.",
    )
    p.add_argument("photo", metavar="PHOTO", help="the fringe photo (PNG, JPEG, TIFF or raw)")
    p.add_argument(
        "--out",
        metavar="DIR",
        default="fringemap-out",
        help="output folder (default ./fringemap-out)",
    )
    p.add_argument(
        "--lines",
        metavar="L1,L2[,L3]",
        help="several narrow lines, one per camera channel, e.g. 450/20,530/30,630/20 "
        "(or b=450/20,g=530/30); overrides --light",
    )
    p.add_argument(
        "--anchor",
        metavar="X,Y=NM",
        action="append",
        help="a point of known thickness (pixels; nm) (repeatable)",
    )
    p.add_argument(
        "--thicker-at",
        metavar="X,Y",
        action="append",
        help="a point where the film is thicker than its median (repeatable)",
    )
    p.add_argument(
        "--colour-photo",
        metavar="FILE",
        help="a white-light colour photo of the same scene from the same place",
    )
    p.add_argument(
        "--colour-light",
        metavar="NAME",
        default="D65",
        help="light of the colour photo (default D65)",
    )
    p.add_argument(
        "--channel",
        choices=("auto", "r", "g", "b", "lum"),
        default="auto",
        help="channel read for one light (default: the brightest)",
    )
    p.add_argument(
        "--method",
        choices=("auto", "fourier", "spiral"),
        default="auto",
        help="wrapped-phase method (default: fourier when the fringes have a carrier)",
    )
    p.add_argument(
        "--roi",
        metavar="ROI",
        help="where to measure: all, rect:X0,Y0,X1,Y1, circle:CX,CY,R or mask:IMAGE",
    )
    p.add_argument(
        "--visibility-threshold",
        metavar="FRACTION",
        type=float,
        default=0.05,
        help="fade-out limit: visibility below this fraction of its thin-film value (default 0.05)",
    )
    add_stack_options(p)
    p.set_defaults(func=cmd_fringes)
