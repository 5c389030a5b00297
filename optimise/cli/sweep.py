"""``stillroom sweep``: how the best fidelity and the cheapest recipes change with one parameter."""

from __future__ import annotations

import sys
from pathlib import Path

from . import common

NAME = "sweep"


def add_parser(sub, parents) -> None:
    p = sub.add_parser(
        NAME,
        parents=parents,
        formatter_class=common.Formatter,
        help="how the best fidelity and the cheapest recipes change with one noise parameter",
        description=common.wrap(
            "For STEPS values of one noise parameter from FROM to TO, evaluate every "
            "linear recipe up to --depth exactly and report the highest output fidelity reachable "
            "and the cheapest recipe reaching each --targets fidelity, as a table and a plot "
            "(sweep.csv, sweep.md, sweep.json, sweep.png, sweep.svg)."
        ),
        epilog="parameters: werner_fidelity (replaces the raw pair by a Werner pair),\n"
        "  two_qubit, single_qubit, measurement, t1_s, t2_s, length_km, pair_rate_hz\n\n"
        "examples:\n  stillroom sweep two_qubit 0.97 1 --targets 0.99,0.995\n"
        "  stillroom sweep measurement 0.98 1 --recipe dejmps:2 --recipe 'dpZ.dpX'\n"
        "  stillroom sweep t2_s 0.01 10 mine.toml --log --steps 9",
    )
    p.add_argument("parameter", metavar="PARAM", help="profile key to vary")
    p.add_argument("start", type=float, metavar="FROM", help="first value of the parameter")
    p.add_argument("stop", type=float, metavar="TO", help="last value of the parameter")
    common.add_profile_argument(p)
    p.add_argument(
        "--steps",
        type=common.positive_int,
        default=6,
        metavar="N",
        help="number of values (default: %(default)s)",
    )
    p.add_argument("--log", action="store_true", help="space the values geometrically")
    p.add_argument(
        "--targets",
        type=common.fidelities,
        default=[0.99],
        metavar="F1,F2",
        help="target fidelities (default: 0.99)",
    )
    p.add_argument(
        "--depth",
        type=common.positive_int,
        default=2,
        metavar="D",
        help="largest recipe depth, searched exhaustively (default: %(default)s; "
        "depth 3 takes minutes per value)",
    )
    common.add_limit_options(p)
    p.add_argument(
        "--recipe",
        action="append",
        default=[],
        metavar="RECIPE",
        help="also follow this recipe, or a baseline as NAME:DEPTH, across the sweep "
        "(a sensitivity curve); repeat for several",
    )
    p.add_argument(
        "--workers",
        type=common.positive_int,
        default=1,
        metavar="N",
        help="parallel jobs for the exhaustive evaluation (default: %(default)s)",
    )
    p.add_argument(
        "--out", metavar="DIR", help="output folder (default: <runs-dir>/sweep-<profile>-<PARAM>)"
    )
    common.add_runs_dir(p, "folder for the default output folder (default: %(default)s)")
    p.add_argument("--no-progress", action="store_true", help="no progress lines")
    p.set_defaults(handler=run)


def run(args) -> int:
    profile, label = common.profile_or_demo(args.profile)
    from .. import sweep as sweeping
    from .evaluate import resolve_recipe

    followed = [(text, resolve_recipe(text)) for text in args.recipe]
    values = sweeping.sweep_values(args.start, args.stop, args.steps, log=args.log)
    profiles = sweeping.sweep_profiles(profile, args.parameter, values)
    out_dir = (
        Path(args.out)
        if args.out
        else (Path(args.runs_dir) / f"sweep-{common.slug(profile.name)}-{args.parameter}")
    )
    progress = common.console(stderr=True)
    try:
        document = sweeping.run_sweep(
            profiles,
            parameter=args.parameter,
            values=values,
            targets=args.targets,
            depth=args.depth,
            limits=common.limits(args),
            n_jobs=args.workers,
            log_scale=args.log,
            recipes=followed,
            progress=None if (args.json or args.no_progress) else progress,
        )
    except KeyboardInterrupt:
        print("interrupted; nothing written", file=sys.stderr)
        return 130
    document["profile_source"] = label
    written = sweeping.write_sweep(document, out_dir)
    document["files"] = [str(p) for p in written]
    if args.json:
        common.print_json(document)
        return 0
    out = common.console()
    out.print(sweeping.rich_table(document))
    common.print_written(out, written, out_dir)
    common.print_assumptions(out)
    return 0
