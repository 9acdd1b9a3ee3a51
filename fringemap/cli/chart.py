"""``fringemap chart`` and ``fringemap materials``."""

from __future__ import annotations

import contextlib
import json
import re

from .common import add_stack_options, recipe_from_args


def cmd_materials(args) -> int:
    from ..optics.materials import describe_builtins

    rows = describe_builtins()
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    width = max(len(r["name"]) for r in rows)
    for r in rows:
        alias = f" (also: {r['aliases']})" if r["aliases"] else ""
        print(f"{r['name']:<{width}}  {r['description']}{alias}")
        print(f"{'':<{width}}  source: {r['source']}")
    print(
        "\nAlso accepted anywhere a material is asked for: a number (1.46, 3.9+0.02j), "
        "cauchy:A,B[,C], sellmeier:B1,C1,..., db:SHELF/BOOK/PAGE (any refractiveindex.info "
        "page) and a CSV file wavelength_nm,n[,k]."
    )
    return 0


def _check_name(name: str) -> str:
    """``--name``: a plain file name stem, so the chart stays inside ``--out``."""
    from ..errors import OptionError

    text = name.strip()
    if not text or text in (".", "..") or any(c in text for c in "/\\\0") or text != name:
        raise OptionError(
            f"expected a file name stem without folders (e.g. oxide-F11), got {name!r}; "
            "choose the folder with --out",
            where="--name",
        )
    return text


def cmd_chart(args) -> int:
    from ..io.write import atomic_path, check_output_dir, write_text
    from ..report.chart import chart_csv_text, draw_chart

    stem = _check_name(args.name) if args.name is not None else None
    from ..job import load_camera_for

    recipe = recipe_from_args(args)
    recipe.require_stack()
    load_camera_for(recipe)  # the chart does not use it, but a named file must be sound
    out = check_output_dir(args.out)
    table = recipe.colour_table()
    stem = stem or _chart_stem(recipe)
    png = out / f"{stem}.chart.png"
    csv_path = out / f"{stem}.chart.csv"
    # both files or neither: each is written under a temporary name, renamed at the end
    with contextlib.ExitStack() as stack:
        tmp_csv = stack.enter_context(atomic_path(csv_path))
        tmp_png = stack.enter_context(atomic_path(png))
        write_text(tmp_csv, chart_csv_text(table))
        draw_chart(table, recipe.stack(), angle_deg=recipe.get("light", "angle_deg"), path=tmp_png)
    if not args.quiet:
        print(f"wrote {png}")
        print(f"wrote {csv_path}")
    return 0


def _chart_stem(recipe) -> str:
    s = recipe.values
    raw = f"{s['stack']['film']}-on-{s['stack']['substrate']}-{s['light']['source']}"
    return re.sub(r"[^A-Za-z0-9._+-]+", "_", raw)[:80]


def register(sub, common) -> None:
    p = sub.add_parser(
        "chart",
        parents=[common],
        help="the colour chart of a film stack",
        description="Draw the interference colours of a film versus its thickness for a "
        "stack and light (PNG), and write them as CSV "
        "(thickness_nm,srgb_r,srgb_g,srgb_b,cie_l,cie_a,cie_b).",
    )
    p.add_argument("--out", metavar="DIR", default=".", help="output folder (default .)")
    p.add_argument("--name", metavar="STEM", help="file name stem (default from the stack)")
    add_stack_options(p)
    p.set_defaults(func=cmd_chart)

    p = sub.add_parser(
        "materials",
        parents=[common],
        help="list the built-in materials",
        description="List built-in material names with their model and source.",
    )
    p.add_argument("--json", action="store_true", help="print as JSON")
    p.set_defaults(func=cmd_materials)
