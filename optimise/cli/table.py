"""``stillroom table``: rewrite a run's report files from its front and print them."""

from __future__ import annotations

import sys
from pathlib import Path

from ..reports import TABLE_FORMATS
from . import common

NAME = "table"


def add_parser(sub, parents) -> None:
    p = sub.add_parser(
        NAME,
        parents=parents,
        formatter_class=common.Formatter,
        help="export a finished or running search (rewrites its report files)",
        description=common.wrap(
            "Rewrite the report files of RUN from its front.json (safe while the "
            "search is still running) and print the front, or one table with --format."
        ),
        epilog="front.csv columns: role, baseline, depth, recipe, id, fidelity, yield,\n"
        "  raw_pairs_per_output, memory_per_node, rounds, time_per_output_s,\n"
        "  bell_I, bell_X, bell_Y, bell_Z, success_probabilities (';'-separated)\n\n"
        "examples:\n  stillroom table runs/demo-metro\n"
        "  stillroom table demo-metro --format tex > front-table.tex",
    )
    p.add_argument("run", metavar="RUN", help="run folder, or its name under --runs-dir")
    common.add_runs_dir(p, "where to look for a run given by name (default: %(default)s)")
    p.add_argument("--format", choices=tuple(TABLE_FORMATS), help="print this table on stdout")
    p.add_argument("--no-plots", action="store_true", help="skip front.png and front.svg")
    p.add_argument(
        "--verify",
        nargs="?",
        const=500,
        type=common.whole_number_at_least(2),
        metavar="N",
        help="add a verified column: each front recipe re-simulated with full density "
        "matrices (N outputs sampled where waits are random; default 500)",
    )
    p.set_defaults(handler=run)


def find_run(text: str, runs_dir: str):
    """The :class:`optimise.run.Run` named: a folder, or a name under ``runs_dir``."""
    from ..run import Run

    given = Run(Path(text))
    named = Run(Path(runs_dir) / text)
    return named if not given.has_front() and named.has_front() else given


def run(args) -> int:
    from ..reports import recipes_document, write_reports

    found = find_run(args.run, args.runs_dir)
    written = write_reports(found.folder, plots=not args.no_plots)
    front = found.read_front()
    verified = _verified(front, args.verify) if args.verify else None
    if args.json:
        document = recipes_document(front)
        if verified is not None:
            document["verified"] = verified
        common.print_json(document)
        return 0
    if args.format:
        sys.stdout.write(found.read_text(TABLE_FORMATS[args.format]))
        return 0
    out = common.console()
    state = "complete for its searched space" if front.complete else "sampled"
    out.print(f"run {found.folder}: {front.n_trials} trials, front {state}")
    title = f"Pareto front ({len(front.results)} recipes)"
    common.print_front(out, front.results, front.baselines, title)
    if verified is not None:
        from .verify import verified_table

        out.print()
        out.print(verified_table(verified))
    common.print_written(out, written, found.folder, plots_wanted=not args.no_plots)
    common.print_assumptions(out)
    return 0


def _verified(front, samples: int) -> list[dict]:
    from models.profile import Profile

    from ..verify import verified_rows

    return verified_rows(front.results, Profile.from_dict(front.profile), samples=samples)
