"""``stillroom table``: rewrite a run's report files from its front and print them."""

from __future__ import annotations

import sys
import textwrap
from pathlib import Path

from ..reports import CSV_COLUMNS, TABLE_FORMATS
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
            "search is still running) and print the tables, or one table with --format. "
            "The tables show --top recipes that cover the front (its two ends always); "
            "front.csv and recipes.json keep every recipe."
        ),
        epilog=textwrap.fill(
            "front.csv columns: " + ", ".join(CSV_COLUMNS) + " (the last two ';'-separated; "
            "equivalents: other recipes found with every figure of a front recipe)",
            78,
            subsequent_indent="  ",
        )
        + "\n\nexamples:\n  stillroom table runs/demo-metro\n"
        "  stillroom table demo-metro --top 6 --targets 0.95,0.98,0.99\n"
        "  stillroom table demo-metro --format tex > front-table.tex",
    )
    p.add_argument("run", metavar="RUN", help="run folder, or its name under --runs-dir")
    common.add_runs_dir(p, "where to look for a run given by name (default: %(default)s)")
    p.add_argument("--format", choices=tuple(TABLE_FORMATS), help="print this table on stdout")
    add_row_options(p)
    p.add_argument("--no-plots", action="store_true", help="skip front.png and front.svg")
    p.add_argument(
        "--verify",
        nargs="?",
        const=500,
        type=common.sample_count,
        metavar="N",
        help="add a verified column: each front recipe re-simulated with full density "
        "matrices (N outputs sampled where waits are random; default 500)",
    )
    p.set_defaults(handler=run)


def add_row_options(p) -> None:
    """``--top`` and ``--targets``: which rows the tables show (search and table share them)."""
    from ..rows import DEFAULT_TOP

    p.add_argument(
        "--top",
        type=common.non_negative_int,
        default=DEFAULT_TOP,
        metavar="N",
        help="front rows in the tables: the two ends and the recipes that best cover the "
        "front between them; 0 for every recipe and baseline (default: %(default)s)",
    )
    p.add_argument(
        "--targets",
        type=common.fidelities,
        default=[],
        metavar="F1,F2",
        help="one table row per target fidelity: the cheapest recipe reaching it, the best "
        "baseline beside it and the saving, e.g. 0.95,0.98,0.99",
    )


def find_run(text: str, runs_dir: str):
    """The :class:`optimise.run.Run` named: a folder, or a name under ``runs_dir``."""
    from ..run import Run

    given = Run(Path(text))
    named = Run(Path(runs_dir) / text)
    return named if not given.has_front() and named.has_front() else given


def run(args) -> int:
    from ..reports import recipes_document, write_reports

    found = find_run(args.run, args.runs_dir)
    written = write_reports(
        found.folder, plots=not args.no_plots, top=args.top, targets=args.targets
    )
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
    print_tables(out, front, top=args.top, targets=args.targets)
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


def print_tables(out, front, *, top: int, targets) -> None:
    """The rows the report tables show, on the terminal: front, baselines, targets."""
    from rich.table import Table

    from ..labels import fmt_number
    from ..reports import has_pair_rate, rate_cell, recipe_cells, report_rows

    rows, baselines, target_table = report_rows(front, top, targets)
    rate = has_pair_rate(front.profile)
    names = ["recipe", "fidelity F", "yield", "raw / out", "mem / node", "rounds", "time / out"]
    if rate:
        names.append("pairs/s")

    def table(title, first, entries):
        t = Table(title=title, title_justify="left", header_style="bold", box=None, pad_edge=False)
        t.add_column(first, justify="right" if first == "#" else "left")
        for i, name in enumerate(names):
            t.add_column(name, justify="left" if i == 0 else "right")
        for label, row in entries:
            cells = recipe_cells(row.result) + ([rate_cell(row.result)] if rate else [])
            if row.written:
                cells[0] += f" (built as {row.written})"
            if row.also and not row.label:
                cells[0] += " (also: " + ", ".join(row.also) + ")"
            t.add_row(label, *cells)
        return t

    shown = f"{len(rows)} of {len(front.results)}" if len(rows) < len(front.results) else "all"
    out.print(
        table(
            f"Pareto front ({shown} recipes, fidelity first; every recipe in front.csv)",
            "#",
            [(str(i), row) for i, row in enumerate(rows, 1)],
        )
    )
    from ..rows import CHECK_ROUNDS_HEADING, check_round_notes, shown_notations

    checks = check_round_notes(shown_notations(rows, target_table))
    if checks:
        out.print()
        out.print(CHECK_ROUNDS_HEADING)
        for form, text in checks:
            out.print(f"  {{{form}}}: {text}", markup=False, highlight=False)
    if baselines:
        out.print()
        entries = [
            (row.label + (f" (also: {', '.join(row.also)})" if row.also else ""), row)
            for row in baselines
        ]
        out.print(table("Textbook baselines" + (" (all)" if top <= 0 else ""), "baseline", entries))
    if target_table:
        out.print()
        t = Table(
            title="Cheapest recipe per target",
            title_justify="left",
            header_style="bold",
            box=None,
            pad_edge=False,
        )
        for name in (
            "target F",
            "recipe",
            "fidelity F",
            "raw / out",
            "best baseline",
            "raw / out",
            "saving",
        ):
            t.add_column(name, justify="left" if name in ("recipe", "best baseline") else "right")
        for row in target_table:
            mine = row.recipe
            t.add_row(
                f"{row.target:g}",
                mine.notation if mine else "not reached",
                f"{mine.fidelity:.6f}" if mine else "",
                fmt_number(mine.raw_pairs_per_output) if mine else "",
                row.baseline.label if row.baseline else "none reaches it",
                fmt_number(row.baseline.result.raw_pairs_per_output) if row.baseline else "",
                "" if row.saving_percent is None else f"{row.saving_percent:.1f}%",
            )
        out.print(t)
