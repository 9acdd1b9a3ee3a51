"""``fringemap simulate``: realistic demo photos with known thickness."""

from __future__ import annotations

from ..errors import OptionError


def cmd_simulate(args) -> int:
    from ..io.write import check_output_dir
    from ..simulate import SCENARIOS, write_demo_images

    out = check_output_dir(args.out)
    names = None
    if args.scenario != "all":
        if args.scenario not in SCENARIOS:
            raise OptionError(
                f"unknown scenario {args.scenario!r} (choose {', '.join(SCENARIOS)} or all)",
                where="scenario",
            )
        names = [args.scenario]
    written = write_demo_images(out, names=names)
    if not args.quiet:
        for p in written:
            print(f"wrote {p}")
    return 0


def register(sub, common) -> None:
    p = sub.add_parser(
        "simulate",
        parents=[common],
        help="write simulated demo photos",
        description="Render realistic photos of invented scenarios with known thickness "
        "(the project's own test bench): photo, true thickness TIFF (nm), recipe, note.",
    )
    p.add_argument("scenario", nargs="?", default="all", help="scenario name, or all")
    p.add_argument("--out", metavar="DIR", default="demo_images", help="output folder")
    p.set_defaults(func=cmd_simulate)
