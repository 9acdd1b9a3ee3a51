"""Shared pieces of the command line: stack options, recipe merging, progress bars."""

from __future__ import annotations

import argparse
import sys

# ---- shared option groups -------------------------------------------------------------


def add_stack_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("film stack, light and camera (override the recipe)")
    g.add_argument("--recipe", metavar="FILE", help="TOML recipe file; options below override it")
    g.add_argument(
        "--film",
        metavar="MAT",
        help="film material: name, number, cauchy:A,B, "
        "sellmeier:B1,C1,..., db:SHELF/BOOK/PAGE or CSV wavelength_nm,n[,k]",
    )
    g.add_argument("--substrate", metavar="MAT", help="substrate material (air for a free film)")
    g.add_argument("--ambient", metavar="MAT", help="medium the light comes from (default air)")
    g.add_argument(
        "--layer",
        metavar="MAT:NM",
        action="append",
        help="a fixed layer under the film, top first (repeatable)",
    )
    g.add_argument(
        "--light",
        metavar="NAME",
        help="D65, F11, A, LED-B3, blackbody:3200, 589, 546/10 or a CSV spectrum (default D65)",
    )
    g.add_argument(
        "--angle",
        metavar="DEG",
        type=float,
        help="angle of incidence, degrees from the normal (default 0)",
    )
    g.add_argument(
        "--aperture",
        metavar="NA",
        type=float,
        help="numerical aperture of the lens (default 0: one angle)",
    )
    g.add_argument(
        "--sensor",
        metavar="NAME",
        help="cie1931 (default), cie1964, camera-a, camera-b or a CSV of "
        "wavelength_nm,r,g,b sensitivities",
    )
    g.add_argument(
        "--camera",
        metavar="FILE|self",
        help="camera colour correction: a camera file from `fringemap calibrate`, or self to "
        "calibrate from each photo itself (default: none)",
    )
    g.add_argument(
        "--range",
        metavar="MIN:MAX",
        dest="range_nm",
        help="thickness search range in nm (default 0:1500)",
    )
    g.add_argument(
        "--step",
        metavar="NM",
        type=float,
        help="thickness step of the colour table in nm (default 1)",
    )


#: the option that sets each recipe key (errors in an option's value name the option)
OPTION_OF_KEY = {
    "stack.film": "--film",
    "stack.substrate": "--substrate",
    "stack.ambient": "--ambient",
    "stack.layers": "--layer",
    "light.source": "--light",
    "light.angle_deg": "--angle",
    "light.aperture": "--aperture",
    "camera.sensor": "--sensor",
    "camera.calibration": "--camera",
    "search.range_nm": "--range",
    "search.step_nm": "--step",
    "measure.roi": "--roi",
    "measure.anchors": "--anchor",
}


def recipe_from_args(args):
    from ..errors import OptionError
    from ..recipe import load_recipe

    recipe = load_recipe(args.recipe)
    try:
        return _with_options(recipe, args)
    except OptionError as exc:
        where = exc.where or ""
        for dotted, option in OPTION_OF_KEY.items():
            if where == dotted or where.startswith((dotted + "[", dotted + ".")):
                exc.where = option
                break
        raise


def _with_options(recipe, args):
    from .report_options import report_overrides

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
            "camera.calibration": getattr(args, "camera", None),
            "search.range_nm": args.range_nm,
            "search.step_nm": args.step,
            **({"measure.roi": args.roi} if getattr(args, "roi", None) else {}),
            **({"measure.anchors": args.anchor} if getattr(args, "anchor", None) else {}),
            **report_overrides(args),
        }
    )


class _NoBar:
    """What :func:`progress_bar` returns when no bar is shown: lines still print."""

    def update(self, n: int = 1) -> None:
        pass

    def write(self, line: str) -> None:
        print(line)

    def close(self) -> None:
        pass


def progress_bar(total: int, desc: str, quiet: bool):
    """A tqdm bar on stderr for ``total`` photos; none (tqdm not even loaded) when quiet
    or for a single photo. ``write`` prints a line on stdout either way."""
    if quiet or total <= 1:
        return _NoBar()
    from tqdm import tqdm

    return tqdm(
        total=total,
        desc=desc,
        unit="photo",
        file=sys.stderr,
        dynamic_ncols=True,
    )


def unique_stems(paths) -> list[str]:
    """File stems made unique by numbering repeats (a.png, x/a.png -> a, a-1).

    A number is never one another photo already has as its own stem
    (a.png, x/a.png, a-1.png -> a, a-2, a-1), so no two photos share outputs.
    """
    paths = list(paths)
    taken = {p.stem for p in paths}
    used: set[str] = set()
    stems: list[str] = []
    for p in paths:
        stem = p.stem
        if stem in used:
            n = 1
            while f"{p.stem}-{n}" in used or f"{p.stem}-{n}" in taken:
                n += 1
            stem = f"{p.stem}-{n}"
        used.add(stem)
        stems.append(stem)
    return stems
