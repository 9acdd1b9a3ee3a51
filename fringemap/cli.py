"""The command line: parses options, calls the Python API, prints. Nothing else.

Run ``fringemap --help`` or ``fringemap COMMAND --help``. Exit codes are
listed in :mod:`fringemap.errors` and ``docs/errors.md``.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from . import __version__
from .errors import EXIT_INTERNAL, EXIT_INTERRUPTED, FringemapError, OptionError

__all__ = ["main", "build_parser"]


# ---- shared option groups -------------------------------------------------------------


def _add_stack_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("film stack, light and camera (override the recipe)")
    g.add_argument("--recipe", metavar="FILE", help="TOML recipe file; options below override it")
    g.add_argument("--film", metavar="MAT", help="film material: name, number, cauchy:A,B, "
                   "sellmeier:B1,C1,..., db:SHELF/BOOK/PAGE or CSV wavelength_nm,n[,k]")
    g.add_argument("--substrate", metavar="MAT", help="substrate material (air for a free film)")
    g.add_argument("--ambient", metavar="MAT", help="medium the light comes from (default air)")
    g.add_argument("--layer", metavar="MAT:NM", action="append",
                   help="a fixed layer under the film, top first (repeatable)")
    g.add_argument("--light", metavar="NAME", help="D65, F11, A, LED-B3, blackbody:3200, "
                   "589, 546/10 or a CSV spectrum (default D65)")
    g.add_argument("--angle", metavar="DEG", type=float,
                   help="angle of incidence, degrees from the normal (default 0)")
    g.add_argument("--aperture", metavar="NA", type=float,
                   help="numerical aperture of the lens (default 0: one angle)")
    g.add_argument("--sensor", metavar="NAME",
                   help="cie1931 (default), cie1964, camera-a, camera-b or a CSV of "
                   "wavelength_nm,r,g,b sensitivities")
    g.add_argument("--range", metavar="MIN:MAX", dest="range_nm",
                   help="thickness search range in nm (default 0:1500)")
    g.add_argument("--step", metavar="NM", type=float,
                   help="thickness step of the colour table in nm (default 1)")


def _recipe_from_args(args):
    from .recipe import load_recipe

    recipe = load_recipe(args.recipe)
    return recipe.with_overrides(
        {
            "stack.film": args.film,
            "stack.substrate": args.substrate,
            "stack.ambient": args.ambient,
            "stack.layers": args.layer,
            "light.source": args.light,
            "light.angle_deg": args.angle,
            "light.aperture": args.aperture,
            "camera.sensor": args.sensor,
            "search.range_nm": args.range_nm,
            "search.step_nm": args.step,
            **({"measure.roi": args.roi} if getattr(args, "roi", None) else {}),
            **({"measure.anchors": args.anchor} if getattr(args, "anchor", None) else {}),
        }
    )


def _progress_bar(total: int, desc: str, quiet: bool):
    from tqdm import tqdm

    return tqdm(total=total, desc=desc, unit="photo", disable=quiet or total <= 1,
                file=sys.stderr, dynamic_ncols=True)


# ---- commands ---------------------------------------------------------------------------


def cmd_materials(args) -> int:
    from .optics.materials import describe_builtins

    rows = describe_builtins()
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    width = max(len(r["name"]) for r in rows)
    for r in rows:
        alias = f" (also: {r['aliases']})" if r["aliases"] else ""
        print(f"{r['name']:<{width}}  {r['description']}{alias}")
        print(f"{'':<{width}}  source: {r['source']}")
    print("\nAlso accepted anywhere a material is asked for: a number (1.46, 3.9+0.02j), "
          "cauchy:A,B[,C], sellmeier:B1,C1,..., db:SHELF/BOOK/PAGE (any refractiveindex.info "
          "page) and a CSV file wavelength_nm,n[,k].")
    return 0


def cmd_chart(args) -> int:
    from .io.write import check_output_dir, write_text
    from .report.chart import chart_csv_text, draw_chart

    recipe = _recipe_from_args(args)
    recipe.require_stack()
    out = check_output_dir(args.out)
    table = recipe.colour_table()
    stem = args.name or _chart_stem(recipe)
    png = out / f"{stem}.chart.png"
    csv_path = out / f"{stem}.chart.csv"
    write_text(csv_path, chart_csv_text(table))
    draw_chart(table, recipe.stack(), angle_deg=recipe.get("light", "angle_deg"), path=png)
    if not args.quiet:
        print(f"wrote {png}")
        print(f"wrote {csv_path}")
    return 0


def _chart_stem(recipe) -> str:
    import re

    s = recipe.values
    raw = f"{s['stack']['film']}-on-{s['stack']['substrate']}-{s['light']['source']}"
    return re.sub(r"[^A-Za-z0-9._+-]+", "_", raw)[:80]


def cmd_map(args) -> int:
    from .io import read_photo
    from .io.write import check_no_clash, check_output_dir
    from .measure import measure
    from .report.outputs import output_paths, write_map_outputs

    recipe = _recipe_from_args(args)
    recipe.require_stack()
    photos = [Path(p) for p in args.photos]
    out = check_output_dir(args.out, inputs=photos)
    stems = _unique_stems(photos)
    planned = [p for stem in stems for p in output_paths(out, stem).values()]
    check_no_clash(planned, photos)
    table = recipe.colour_table()
    failures = 0
    bar = _progress_bar(len(photos), "mapping", args.quiet)
    for path, stem in zip(photos, stems, strict=True):
        try:
            photo = read_photo(path)
            result = measure(photo, recipe, table=table)
            written = write_map_outputs(result, out, stem)
        except FringemapError as exc:
            if args.debug:
                raise
            failures += 1
            print(f"fringemap: error: {exc}", file=sys.stderr)
            last_error = exc
            bar.update(1)
            continue
        bar.update(1)
        if not args.quiet:
            s = result.stats
            line = (f"{path.name}: mean {s.mean_nm:.1f} nm, median {s.median_nm:.1f} nm, "
                    f"std {s.std_nm:.2f} nm, range {s.min_nm:.1f}-{s.max_nm:.1f} nm, "
                    f"coverage {100 * s.coverage:.1f} %") if s.count_px else (
                    f"{path.name}: nothing measured (coverage 0 %)")
            bar.write(line)
            for w in result.warnings:
                bar.write(f"{path.name}: warning: {w}")
            bar.write(f"  -> {written['map']}")
    bar.close()
    if failures:
        return last_error.exit_code if len(photos) == 1 else 6
    return 0


def _unique_stems(paths: list[Path]) -> list[str]:
    stems: list[str] = []
    seen: dict[str, int] = {}
    for p in paths:
        stem = p.stem
        if stem in seen:
            seen[stem] += 1
            stem = f"{stem}-{seen[stem]}"
        else:
            seen[stem] = 0
        stems.append(stem)
    return stems


def cmd_simulate(args) -> int:
    from .io.write import check_output_dir
    from .simulate import SCENARIOS, write_demo_images

    out = check_output_dir(args.out)
    if args.scenario == "all":
        written = write_demo_images(out)
    else:
        if args.scenario not in SCENARIOS:
            raise OptionError(f"unknown scenario {args.scenario!r} (choose "
                              f"{', '.join(SCENARIOS)} or all)", where="scenario")
        written = write_demo_images(out, names=[args.scenario])
    if not args.quiet:
        for p in written:
            print(f"wrote {p}")
    return 0


# ---- parser -----------------------------------------------------------------------------


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (also used to generate the option reference)."""
    parser = argparse.ArgumentParser(
        prog="fringemap",
        description="Film-thickness maps from photographs of thin-film interference colours. "
        "Thickness and wavelength in nm, angles in degrees.",
    )
    parser.add_argument("--version", action="version", version=f"fringemap {__version__}")
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--debug", action="store_true", help="show full tracebacks on errors")
    common.add_argument("--quiet", "-q", action="store_true", help="print only errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    p = sub.add_parser("map", parents=[common], help="thickness map from one or more photos",
                       description="Measure film thickness over each photo and write a "
                       "thickness TIFF (nm), confidence and reason maps, a heat map PNG and "
                       "statistics JSON per photo.")
    p.add_argument("photos", nargs="+", metavar="PHOTO", help="PNG, JPEG, TIFF or camera raw")
    p.add_argument("--out", metavar="DIR", default="fringemap-out",
                   help="output folder (default ./fringemap-out)")
    p.add_argument("--roi", metavar="ROI", help="where to measure: all, rect:X0,Y0,X1,Y1, "
                   "circle:CX,CY,R (pixels) or mask:IMAGE")
    p.add_argument("--anchor", metavar="X,Y=NM", action="append",
                   help="a point of known thickness (pixels; nm), e.g. bare substrate = 0 "
                   "(repeatable)")
    _add_stack_options(p)
    p.set_defaults(func=cmd_map)

    p = sub.add_parser("chart", parents=[common], help="the colour chart of a film stack",
                       description="Draw the interference colours of a film versus its "
                       "thickness for a stack and light, and write them as CSV.")
    p.add_argument("--out", metavar="DIR", default=".", help="output folder (default .)")
    p.add_argument("--name", metavar="STEM", help="file name stem (default from the stack)")
    _add_stack_options(p)
    p.set_defaults(func=cmd_chart)

    p = sub.add_parser("materials", parents=[common], help="list the built-in materials",
                       description="List built-in material names with their model and source.")
    p.add_argument("--json", action="store_true", help="print as JSON")
    p.set_defaults(func=cmd_materials)

    p = sub.add_parser("simulate", parents=[common], help="write simulated demo photos",
                       description="Render realistic photos of invented scenarios with known "
                       "thickness (the project's test bench).")
    p.add_argument("scenario", nargs="?", default="all", help="scenario name or all")
    p.add_argument("--out", metavar="DIR", default="demo_images", help="output folder")
    p.set_defaults(func=cmd_simulate)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``fringemap`` command; returns the exit code."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return 2
    debug = getattr(args, "debug", False)
    try:
        return int(args.func(args) or 0)
    except FringemapError as exc:
        if debug:
            raise
        print(f"fringemap: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except BrokenPipeError:  # output piped into head, less...: not an error
        sys.stderr.close()
        return 0
    except KeyboardInterrupt:
        print("fringemap: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except Exception as exc:  # a bug: say so on one line
        if debug:
            raise
        print(f"fringemap: internal error: {exc.__class__.__name__}: {exc} "
              "(run again with --debug for details)", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
