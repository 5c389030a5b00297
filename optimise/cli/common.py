"""What the commands share: option parsers, the console, tables of recipes, JSON output.

Nothing here imports numpy, optuna or rich at module level: ``stillroom --help``
builds every parser without them.
"""

from __future__ import annotations

import argparse
import json
import math
import re
import sys

DEFAULT_RUNS_DIR = "runs"


class UsageError(Exception):
    """A command line argparse could not read: one line, exit code 2 (see :class:`Parser`)."""


class Parser(argparse.ArgumentParser):
    """argparse, with one line for an error and negative-looking values read as values.

    An error raises :class:`UsageError` (``stillroom search: argument --trials: ...``)
    instead of printing the usage block and exiting, so that :func:`optimise.cli.main`
    prints one line. A value such as ``-5s`` after an option is read as that
    option's value (and then refused by its type with the reason), not taken for an
    unknown option: no stillroom option starts with a digit.
    """

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self._negative_number_matcher = re.compile(r"^-\d")

    def error(self, message):
        raise UsageError(f"{self.prog}: {clip(' '.join(message.split()))}")


def clip(text: str, most: int = 300) -> str:
    """``text`` cut in the middle to at most about ``most`` characters (a value pasted huge)."""
    if len(text) <= most:
        return text
    return f"{text[: most // 2]}...[{len(text) - most} characters]...{text[-most // 2 :]}"


class Formatter(argparse.RawDescriptionHelpFormatter):
    """Keeps the epilogs' examples as written (descriptions are wrapped by :func:`wrap`)."""

    def __init__(self, prog):
        super().__init__(prog, max_help_position=30)


def wrap(text: str) -> str:
    import textwrap

    return "\n\n".join(textwrap.fill(p, 78) for p in text.split("\n"))


def json_flag() -> argparse.ArgumentParser:
    """The ``--json`` and ``--verbose`` options every command takes (a parent parser)."""
    parent = argparse.ArgumentParser(add_help=False)
    parent.add_argument(
        "--json",
        action="store_true",
        help="print machine-readable JSON on stdout (see schema.json)",
    )
    parent.add_argument(
        "--verbose",
        action="store_true",
        help="on an error in a recipe string, also show where it is (a caret under it)",
    )
    return parent


# ----------------------------------------------------------------------------- option types


def parse_duration(text: str) -> float:
    """Wall time from ``90s``, ``10m``, ``2h``, ``1h30m`` or plain seconds.

    Examples
    --------
    >>> parse_duration("1h30m"), parse_duration("90s"), parse_duration("45")
    (5400.0, 90.0, 45.0)
    """
    text = text.strip().lower()
    try:
        seconds = float(text)
    except ValueError:
        match = re.fullmatch(
            r"(?:(\d+(?:\.\d*)?)h)?\s*(?:(\d+(?:\.\d*)?)m)?\s*(?:(\d+(?:\.\d*)?)s)?", text
        )
        if text.startswith("-"):
            raise argparse.ArgumentTypeError(f"{clip(text, 60)!r}: a time must be positive")
        if not text or not match or not any(match.groups()):
            raise argparse.ArgumentTypeError(
                f"{clip(text, 60)!r} is not a duration; write e.g. 90s, 10m, 2h or 1h30m"
            ) from None
        h, m, s = (float(g) if g else 0.0 for g in match.groups())
        seconds = 3600 * h + 60 * m + s
    if not seconds > 0 or math.isinf(seconds):
        raise argparse.ArgumentTypeError(
            f"{clip(text, 60)!r}: a time budget must be positive and finite"
        )
    return seconds


def fidelity(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{clip(text, 60)!r} is not a number") from None
    if not 0.5 < value < 1.0:
        raise argparse.ArgumentTypeError(
            f"{text} is outside (0.5, 1); a target is an output fidelity below 1"
        )
    return value


def fidelities(text: str) -> list[float]:
    return [fidelity(part) for part in text.split(",") if part.strip()]


def whole_number_at_least(low: int, high: int | None = None):
    def parse(text: str) -> int:
        try:
            value = int(text) if len(text) <= 30 else None
        except ValueError:
            value = None
        if value is None:
            raise argparse.ArgumentTypeError(f"{clip(repr(text), 60)} is not a whole number")
        if value < low or (high is not None and value > high):
            span = f"at least {low}" if high is None else f"in [{low}, {high}]"
            raise argparse.ArgumentTypeError(f"{value} must be {span}")
        return value

    return parse


positive_int = whole_number_at_least(1)
# outputs a re-simulation samples: enough for a 1e-5 standard error on a fidelity,
# and a bound, so that a mistyped count cannot run for days
MAX_SAMPLES = 10_000_000
sample_count = whole_number_at_least(2, MAX_SAMPLES)
non_negative_int = whole_number_at_least(0)


def seconds(text: str) -> float:
    try:
        return parse_duration(text)
    except argparse.ArgumentTypeError:
        raise argparse.ArgumentTypeError(
            f"{clip(text, 60)!r} is not a time; write seconds, e.g. 0.02 or 1.5"
        ) from None


def objectives(text: str) -> tuple[str, ...]:
    """``fidelity,yield,memory``, checked by :func:`optimise.objectives.check_objectives`."""
    from ..objectives import check_objectives

    try:
        return check_objectives(text)
    except ValueError as error:
        raise argparse.ArgumentTypeError(str(error)) from None


def add_limit_options(p) -> None:
    """The limits that search and sweep share."""
    p.add_argument(
        "--max-memory",
        type=positive_int,
        metavar="Q",
        help="only recipes needing at most Q memory qubits per node",
    )
    p.add_argument(
        "--max-time-per-output",
        type=seconds,
        metavar="S",
        help="only recipes taking at most S seconds per output pair",
    )


def limits(args):
    from ..limits import Limits

    return Limits(
        max_memory_per_node=args.max_memory, max_time_per_output_s=args.max_time_per_output
    )


def add_profile_argument(p) -> None:
    p.add_argument(
        "profile",
        nargs="?",
        metavar="PROFILE",
        help="noise profile (TOML); default the built-in demo",
    )


def folder(text: str) -> str:
    """A folder path that is not empty."""
    if not text.strip():
        raise argparse.ArgumentTypeError("an empty path; name a folder (default: runs)")
    return text


def run_name(text: str) -> str:
    """A run name: one safe folder name (:func:`optimise.run.check_run_name`)."""
    from ..errors import InputError
    from ..run import check_run_name

    try:
        return check_run_name(text)
    except InputError as error:
        raise argparse.ArgumentTypeError(str(error)) from None


def add_runs_dir(p, help: str) -> None:
    p.add_argument("--runs-dir", type=folder, default=DEFAULT_RUNS_DIR, metavar="DIR", help=help)


# ----------------------------------------------------------------------------- output


def count(n: int, noun: str) -> str:
    return f"{n} {noun}" if n == 1 else f"{n} {noun}s"


def slug(name: str) -> str:
    """A run name from a profile's name (always a valid one).

    Examples
    --------
    >>> slug("../My lab: 30 km"), slug("..."), len(slug("x" * 300))
    ('My-lab-30-km', 'profile', 100)
    """
    from ..run import MAX_NAME_LENGTH

    text = re.sub(r"[^A-Za-z0-9._-]+", "-", name).strip("-._")[:MAX_NAME_LENGTH].rstrip("-.")
    return text or "profile"


def console(stderr: bool = False):
    from rich.console import Console

    stream = sys.stderr if stderr else sys.stdout
    # no markup: profile names, paths and messages are printed as written
    return Console(
        file=stream, width=None if stream.isatty() else 120, highlight=False, markup=False
    )


def bold(head: str, rest: str = ""):
    from rich.text import Text

    return Text.assemble((head, "bold"), rest)


def print_json(document: dict) -> None:
    sys.stdout.write(json.dumps(document, indent=2, allow_nan=False) + "\n")


def profile_or_demo(path):
    from ..profiles import resolve_profile

    return resolve_profile(path)


def recipe_table(results, title: str):
    """A rich table of recipes (RecipeResult), numbered."""
    return _table([(str(i), r) for i, r in enumerate(results, 1)], title, "#", "right")


def baseline_table(baselines, title: str):
    """A rich table of :class:`optimise.front.BaselineResult`, labelled by name and depth."""
    from ..labels import baseline_label

    rows = [(baseline_label(b.name, b.depth), b.result) for b in baselines]
    return _table(rows, title, "baseline", "left")


def _table(rows, title: str, first: str, justify: str):
    from rich.table import Table

    from ..reports import recipe_cells

    table = Table(title=title, title_justify="left", header_style="bold", box=None, pad_edge=False)
    table.add_column(first, justify=justify)
    table.add_column("recipe")
    for name in ("fidelity F", "yield", "raw / out", "mem / node", "rounds", "time / out"):
        table.add_column(name, justify="right")
    for label, r in rows:
        table.add_row(label, *recipe_cells(r))  # the cells the report tables show
    return table


def print_front(out, front_results, baselines, title: str) -> None:
    """The front and, below it, the textbook baselines."""
    out.print(recipe_table(front_results, title))
    if baselines:
        out.print()
        out.print(baseline_table(baselines, "Textbook baselines"))


def print_written(out, written, folder, *, plots_wanted: bool = True) -> None:
    from ..plots import available
    from ..reports import PLOT_MISSING

    out.print("wrote " + ", ".join(p.name for p in written) + f" in {folder}")
    if plots_wanted and not available():
        out.print(PLOT_MISSING)


def print_assumptions(out) -> None:
    from ..reports import ASSUMPTIONS

    out.print()
    out.print(ASSUMPTIONS, style="dim", soft_wrap=False)
