"""The ``stillroom`` command line: a thin layer over the Python API.

One :func:`main` that tests call directly; each subcommand imports what it needs
only when it runs, so ``stillroom --help`` starts instantly. A user error (a bad
profile, recipe or option) prints one line on stderr and returns exit code 2.
"""

from __future__ import annotations

import argparse
import json
import math
import re
import sys
from pathlib import Path

DEFAULT_DEPTH = 5
DEFAULT_TRIALS = 1000
DEFAULT_RUNS_DIR = "runs"
OBJECTIVES = ("fidelity", "yield", "memory", "time")
INTERRUPTED = "interrupted; run the same command to resume"

MAIN_HELP = """\
Search entanglement-purification recipes for noisy Bell pairs.

A noise profile (a TOML file) says what raw pairs the link delivers and how
good the nodes' gates, measurements and memories are. stillroom evaluates
recipes of recurrence, pumping and double-selection rounds exactly in a
Bell-diagonal model and reports the Pareto-optimal ones: output fidelity
against yield, with memory qubits and time per output pair.
"""

MAIN_EPILOG = """\
start here:
  stillroom profile > mine.toml         write the (invented) demo profile to edit
  stillroom profile mine.toml           check it and see what it means
  stillroom search mine.toml            search; writes runs/<name>/ (rerun to resume)
  stillroom evaluate sY^3 mine.toml     one recipe, round by round
  stillroom sweep two_qubit 0.97 1 mine.toml --targets 0.99,0.995
  stillroom table runs/<name> --format tex

Every command takes --json for machine-readable output (keys documented in
optimise/schema.json). Exit codes: 0 success, 2 bad input, 130 interrupted.
"""

RECIPE_HELP = """\
recipe strings: rounds joined by '.', applied left to right to a raw pair.
  s        symmetric round: check against a copy of the pair made so far
  p        pumping round: check against a fresh raw pair, or with p(RECIPE)
           against a pair made by RECIPE
  ds, dp   the same with double selection (two sacrificed pairs)
  then the rotation before the check, one letter for every input or one per
  input (kept first), named by the error the check then misses:
           Z no gate, Y the Y<->Z exchange, X the phase-flip check,
           z, y, x the same followed by an X<->Y exchange
  ~        re-twirl the round's output to Werner form
  ^n       repeat the round n times
  raw      the raw pair itself
  e.g. sY^3, sZ~^2, pY^4, pZ.pX.pZ.pX, 'sY^2.pY(sY)' (quote parentheses)
A textbook baseline may be given as NAME:DEPTH, e.g. dejmps:3 (names: bbpssw,
dejmps, pumping, alternating-pumping, double-selection-pumping).
"""


# ----------------------------------------------------------------------------- helpers


class _Formatter(argparse.RawDescriptionHelpFormatter):
    """Keeps the epilogs' examples as written (descriptions are wrapped by :func:`_wrap`)."""

    def __init__(self, prog):
        super().__init__(prog, max_help_position=30)


def _wrap(text: str) -> str:
    import textwrap

    return "\n\n".join(textwrap.fill(p, 78) for p in text.split("\n"))


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
        if not text or not match or not any(match.groups()):
            raise argparse.ArgumentTypeError(
                f"{text!r} is not a duration; write e.g. 90s, 10m, 2h or 1h30m"
            ) from None
        h, m, s = (float(g) if g else 0.0 for g in match.groups())
        seconds = 3600 * h + 60 * m + s
    if not seconds > 0 or math.isinf(seconds):
        raise argparse.ArgumentTypeError(f"{text!r}: a time budget must be positive and finite")
    return seconds


def _fidelity(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not 0.5 < value < 1.0:
        raise argparse.ArgumentTypeError(
            f"{text} is outside (0.5, 1); a target is an output fidelity below 1"
        )
    return value


def _fidelities(text: str) -> list[float]:
    return [_fidelity(part) for part in text.split(",") if part.strip()]


def _whole_number_at_least(low: int):
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
        if value < low:
            raise argparse.ArgumentTypeError(f"{value} must be at least {low}")
        return value

    return parse


_positive_int = _whole_number_at_least(1)
_non_negative_int = _whole_number_at_least(0)


def _seconds(text: str) -> float:
    try:
        return parse_duration(text)
    except argparse.ArgumentTypeError:
        raise argparse.ArgumentTypeError(
            f"{text!r} is not a time; write seconds, e.g. 0.02 or 1.5"
        ) from None


def _objectives(text: str) -> tuple[str, ...]:
    names = tuple(part.strip() for part in text.split(",") if part.strip())
    unknown = [n for n in names if n not in OBJECTIVES]
    if unknown:
        raise argparse.ArgumentTypeError(
            f"unknown objective {unknown[0]!r}; choose from {', '.join(OBJECTIVES)}"
        )
    if names[:2] != ("fidelity", "yield") or len(set(names)) != len(names):
        raise argparse.ArgumentTypeError(
            "objectives start with fidelity,yield and may add memory and/or time, "
            "e.g. fidelity,yield,memory"
        )
    return names


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" if n == 1 else f"{n} {noun}s"


def _slug(name: str) -> str:
    slug = re.sub(r"[^A-Za-z0-9._-]+", "-", name).strip("-.")
    return slug or "profile"


def _console(stderr: bool = False):
    from rich.console import Console

    stream = sys.stderr if stderr else sys.stdout
    # no markup: profile names, paths and messages are printed as written
    return Console(
        file=stream, width=None if stream.isatty() else 120, highlight=False, markup=False
    )


def _bold(head: str, rest: str = ""):
    from rich.text import Text

    return Text.assemble((head, "bold"), rest)


def _print_json(document: dict) -> None:
    sys.stdout.write(json.dumps(document, indent=2, allow_nan=False) + "\n")


def _profile_or_demo(path):
    from .profiles import resolve_profile

    return resolve_profile(path)


def _limits(args):
    if args.max_memory is None and args.max_time_per_output is None:
        return None
    from .limits import Limits

    return Limits(
        max_memory_per_node=args.max_memory, max_time_per_output_s=args.max_time_per_output
    )


def _recipe_table(entries, title: str, *, baselines: bool = False):
    from rich.table import Table

    from .reports import baseline_label, fmt_fidelity, fmt_number, fmt_time

    table = Table(title=title, title_justify="left", header_style="bold", box=None, pad_edge=False)
    table.add_column("baseline" if baselines else "#", justify="left" if baselines else "right")
    table.add_column("recipe")
    for name in ("fidelity F", "yield", "raw / out", "mem / node", "rounds", "time / out"):
        table.add_column(name, justify="right")
    for i, e in enumerate(entries, 1):
        table.add_row(
            baseline_label(e) if baselines else str(i),
            e["recipe"],
            fmt_fidelity(e["fidelity"]),
            fmt_number(e["yield"]),
            fmt_number(e["raw_pairs_per_output"]),
            str(e["memory_per_node"]),
            str(e["rounds"]),
            fmt_time(e["time_per_output_s"]),
        )
    return table


def _print_written(console, written, folder, *, plots_wanted: bool = True) -> None:
    from .plots import available
    from .reports import PLOT_MISSING

    console.print("wrote " + ", ".join(p.name for p in written) + f" in {folder}")
    if plots_wanted and not available():
        console.print(PLOT_MISSING)


def _print_assumptions(console) -> None:
    from .reports import ASSUMPTIONS

    console.print()
    console.print(ASSUMPTIONS, style="dim", soft_wrap=False)


# ----------------------------------------------------------------------------- profile


def cmd_profile(args) -> int:
    from .profiles import demo_toml, describe, load_profile, profile_note

    if args.file is None:
        if args.json:
            from .profiles import demo_profile

            _print_json(_profile_document(demo_profile(), "built-in demo", profile_note()))
        else:
            sys.stdout.write(demo_toml())
        return 0
    profile = load_profile(args.file)
    note = profile_note(args.file)
    if args.json:
        _print_json(_profile_document(profile, str(args.file), note))
        return 0
    from rich.table import Table

    console = _console()
    console.print(_bold(profile.name, f"  ({args.file}): a valid noise profile"))
    if note:
        console.print(f"note: {note}")
    table = Table(box=None, show_header=False, pad_edge=False)
    table.add_column(style="bold")
    table.add_column(justify="right")
    table.add_column(style="dim")
    for quantity, value, meaning in describe(profile):
        table.add_row(quantity, value, meaning)
    console.print(table)
    return 0


def _profile_document(profile, source: str, note) -> dict:
    from models import hashing_yield

    return {
        "kind": "profile",
        "source": source,
        "note": note,
        "profile": profile.to_dict(),
        "raw_fidelity": profile.raw_pair[0],
        "raw_hashing_yield": float(hashing_yield(profile.raw)),
        "classical_delay_s": profile.classical_delay_s,
    }


# ----------------------------------------------------------------------------- search


def cmd_search(args) -> int:
    profile, label = _profile_or_demo(args.profile)
    limits = _limits(args)
    from .reports import write_reports
    from .search import run_search

    run_dir = Path(args.runs_dir) / (args.name or _slug(profile.name))
    console = _console(stderr=args.json)
    if not args.json:
        console.print(f"profile: {label}; run folder: {run_dir}")
    watch = _InterruptWatch()
    try:
        with watch:
            outcome = run_search(
                profile,
                run_dir=run_dir,
                max_depth=args.depth,
                n_trials=args.trials,
                timeout_s=args.time,
                seed=args.seed,
                sampler=args.sampler,
                storage=args.storage,
                workers=args.workers,
                objectives=args.objectives,
                limits=limits,
                exhaustive_depth=args.exhaustive_depth,
                target_fidelity=args.target,
                progress=not args.no_progress,
            )
    except KeyboardInterrupt:
        print(INTERRUPTED, file=sys.stderr)
        return 130
    except Exception:
        # a Ctrl-C that lands inside optuna's own bookkeeping can surface as another
        # error; the study is left resumable all the same (stale trials are failed then)
        if watch.seen:
            print(INTERRUPTED, file=sys.stderr)
            return 130
        raise
    written = write_reports(run_dir)
    front = [r.to_dict() for r in outcome.front]
    baselines = _baseline_dicts(run_dir, outcome)
    if args.json:
        from .reports import raw_hashing_yield

        _print_json(
            {
                "kind": "search",
                "run_dir": str(run_dir),
                "profile": profile.to_dict(),
                "raw_hashing_yield": raw_hashing_yield(profile.to_dict()),
                "n_trials_total": outcome.n_trials_total,
                "n_trials_this_run": outcome.n_trials_this_run,
                "complete_depth": outcome.complete_depth,
                "front": front,
                "baselines": baselines,
                "target": None if outcome.target is None else outcome.target.to_dict(),
                "files": [str(p) for p in written],
            }
        )
        return 0
    from .reports import hashing_sentence

    console.print(
        f"{_count(outcome.n_trials_this_run, 'trial')} this run, "
        f"{outcome.n_trials_total} in the study"
        + (
            f"; every linear recipe to depth {outcome.complete_depth} evaluated"
            if outcome.complete_depth
            else ""
        )
    )
    console.print(_recipe_table(front, f"Pareto front ({len(front)} recipes, fidelity first)"))
    if baselines:
        console.print()
        console.print(_recipe_table(baselines, "Textbook baselines", baselines=True))
    if outcome.target is not None:
        console.print()
        console.print(
            _bold(f"target F >= {outcome.target.target_fidelity:g}:", f" {outcome.target.message}")
        )
    console.print()
    console.print(hashing_sentence({"profile": profile.to_dict()}))
    _print_written(console, written, run_dir)
    _print_assumptions(console)
    return 0


class _InterruptWatch:
    """Notes a Ctrl-C during a search and hushes optuna's log lines about it.

    A KeyboardInterrupt is raised as usual; afterwards ``seen`` is True, and the
    optuna warnings that report the interrupted trial (with a traceback) are
    dropped, because the command line prints its own one-line message.
    """

    def __init__(self):
        self.seen = False
        self._previous = None
        self._handlers = []

    def _on_sigint(self, signum, frame):
        self.seen = True
        raise KeyboardInterrupt

    def filter(self, record) -> bool:
        return not self.seen

    def __enter__(self):
        import logging
        import signal
        import threading

        if threading.current_thread() is threading.main_thread():
            self._previous = signal.signal(signal.SIGINT, self._on_sigint)
        self._handlers = list(logging.getLogger("optuna").handlers)
        for handler in self._handlers:
            handler.addFilter(self)
        return self

    def __exit__(self, *exc) -> None:
        import signal

        if self._previous is not None:
            signal.signal(signal.SIGINT, self._previous)
        for handler in self._handlers:
            handler.removeFilter(self)


def _baseline_dicts(run_dir, outcome) -> list[dict]:
    """Baselines with their names and depths, as front.json stores them."""
    from .reports import load_front

    stored = load_front(run_dir)["baselines"]
    if len(stored) == len(outcome.baselines):
        return stored
    return [r.to_dict() for r in outcome.baselines]


# ----------------------------------------------------------------------------- evaluate


def resolve_recipe(text: str):
    """A recipe string, or a textbook baseline written ``NAME:DEPTH`` (e.g. ``dejmps:3``)."""
    from .errors import InputError

    if ":" in text:
        from models.baselines import BASELINES, baseline

        name, _, depth_text = text.partition(":")
        if name not in BASELINES:
            import difflib

            close = difflib.get_close_matches(name, list(BASELINES), n=1)
            hint = f"; did you mean {close[0]}?" if close else ""
            raise InputError(f"unknown baseline {name!r}{hint} (one of {', '.join(BASELINES)})")
        try:
            depth = int(depth_text)
        except ValueError:
            raise InputError(f"{text!r}: the depth after ':' must be a whole number") from None
        if depth < 1:
            raise InputError(f"{text!r}: a baseline needs depth >= 1")
        return baseline(name, depth)
    from models.notation import parse_recipe

    try:
        return parse_recipe(text)
    except ValueError as error:
        raise InputError(str(error)) from None


def cmd_evaluate(args) -> int:
    profile, label = _profile_or_demo(args.profile)
    recipe = resolve_recipe(args.recipe)
    from models.evaluate import evaluate

    try:
        result = evaluate(recipe, profile)
    except ValueError as error:
        from .errors import InputError

        raise InputError(str(error)) from None
    trace = [_round_dict(i, r) for i, r in enumerate(result.trace, 1)]
    if args.json:
        _print_json(
            {
                "kind": "evaluate",
                "profile_source": label,
                "profile": profile.to_dict(),
                "result": result.to_dict(),
                "trace": trace,
            }
        )
        return 0
    from rich.table import Table

    from models.states import BELL_NAMES

    from .reports import fmt_fidelity, fmt_number, fmt_time

    console = _console()
    console.print(_bold(result.notation, f"  id {result.recipe_id}  on {label}"))
    table = Table(box=None, header_style="bold", pad_edge=False)
    for name, justify in (
        ("round", "right"),
        ("step", "left"),
        ("state " + "/".join(BELL_NAMES), "left"),
        ("fidelity F", "right"),
        ("success", "right"),
        ("raw pairs / out", "right"),
        ("mem / node", "right"),
        ("time / out", "right"),
    ):
        table.add_column(name, justify=justify)
    raw = profile.raw
    wait = 0.0 if math.isinf(profile.pair_rate_hz) else 1.0 / profile.pair_rate_hz
    table.add_row(
        "0", "raw pair", _weights(raw), fmt_fidelity(raw[0]), "", "1", "1", fmt_time(wait)
    )
    for row, step in zip(trace, _round_labels(result.notation), strict=True):
        table.add_row(
            str(row["round"]),
            step,
            _weights(row["bell"]),
            fmt_fidelity(row["fidelity"]),
            f"{row['success_probability']:.6f}",
            fmt_number(row["raw_pairs_per_output"], 6),
            str(row["memory_per_node"]),
            fmt_time(row["time_per_output_s"]),
        )
    console.print(table)
    console.print(
        f"output: F = {result.fidelity:.6f}, yield {result.pair_yield:.6g} output pairs per "
        f"raw pair, {result.memory_per_node} memory qubits per node, "
        f"{fmt_time(result.time_per_output_s)} per output pair"
    )
    if len(result.success_probabilities) != len(result.trace):
        console.print(
            "success probability of every step, in the order they happen: "
            + ", ".join(f"{p:.6f}" for p in result.success_probabilities)
        )
    _print_assumptions(console)
    return 0


def _round_dict(i: int, figures) -> dict:
    return {
        "round": i,
        "bell": [float(w) for w in figures.bell],
        "fidelity": float(figures.fidelity),
        "success_probability": float(figures.success_probability),
        "raw_pairs_per_output": _finite(figures.raw_pairs_per_output),
        "memory_per_node": int(figures.memory_per_node),
        "time_per_output_s": _finite(figures.time_per_output_s),
    }


def _round_labels(notation: str) -> list[str]:
    """The notation of each round of a recipe's main chain (``pY(sY)``, ``sZ~``, ...)."""
    from models.notation import format_recipe, parse_recipe
    from models.recipes import Recipe

    return [format_recipe(Recipe((r,))) for r in parse_recipe(notation).rounds]


def _finite(x) -> float | None:
    """JSON has no infinity: an infinite cost or time is written as null."""
    return float(x) if math.isfinite(x) else None


def _weights(bell) -> str:
    return " ".join(f"{float(w):.4f}" for w in bell)


# ----------------------------------------------------------------------------- sweep


def cmd_sweep(args) -> int:
    profile, label = _profile_or_demo(args.profile)
    from . import sweep as sweeping

    values = sweeping.sweep_values(args.start, args.stop, args.steps, log=args.log)
    profiles = sweeping.sweep_profiles(profile, args.parameter, values)
    out_dir = (
        Path(args.out)
        if args.out
        else (Path(args.runs_dir) / f"sweep-{_slug(profile.name)}-{args.parameter}")
    )
    console = _console(stderr=True)
    try:
        document = sweeping.run_sweep(
            profiles,
            parameter=args.parameter,
            values=values,
            targets=args.targets,
            depth=args.depth,
            limits=_limits(args),
            n_jobs=args.workers,
            log_scale=args.log,
            progress=None if (args.json or args.no_progress) else console,
        )
    except KeyboardInterrupt:
        print("interrupted; nothing written", file=sys.stderr)
        return 130
    document["profile_source"] = label
    written = sweeping.write_sweep(document, out_dir)
    document["files"] = [str(p) for p in written]
    if args.json:
        _print_json(document)
        return 0
    console = _console()
    console.print(sweeping.rich_table(document))
    _print_written(console, written, out_dir)
    _print_assumptions(console)
    return 0


# ----------------------------------------------------------------------------- table


def _run_folder(text: str, runs_dir: str) -> Path:
    path = Path(text)
    if not (path / "front.json").exists() and (Path(runs_dir) / text / "front.json").exists():
        return Path(runs_dir) / text
    return path


def cmd_table(args) -> int:
    from .reports import TABLE_FORMATS, load_front, recipes_document, write_reports

    run_dir = _run_folder(args.run, args.runs_dir)
    written = write_reports(run_dir, plots=not args.no_plots)
    if args.json:
        _print_json(recipes_document(load_front(run_dir)))
        return 0
    if args.format:
        sys.stdout.write((run_dir / TABLE_FORMATS[args.format]).read_text(encoding="utf-8"))
        return 0
    data = load_front(run_dir)
    console = _console()
    state = "complete for its searched space" if data.get("complete") else "sampled"
    console.print(f"run {run_dir}: {data.get('n_trials')} trials, front {state}")
    console.print(_recipe_table(data["front"], f"Pareto front ({len(data['front'])} recipes)"))
    if data["baselines"]:
        console.print()
        console.print(_recipe_table(data["baselines"], "Textbook baselines", baselines=True))
    _print_written(console, written, run_dir, plots_wanted=not args.no_plots)
    _print_assumptions(console)
    return 0


# ----------------------------------------------------------------------------- parser


def _add_limit_options(p) -> None:
    """The limits that search and sweep share."""
    p.add_argument(
        "--max-memory",
        type=_positive_int,
        metavar="Q",
        help="only recipes needing at most Q memory qubits per node",
    )
    p.add_argument(
        "--max-time-per-output",
        type=_seconds,
        metavar="S",
        help="only recipes taking at most S seconds per output pair",
    )


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="stillroom", description=MAIN_HELP, epilog=MAIN_EPILOG, formatter_class=_Formatter
    )
    parser.add_argument("--version", action="version", version=f"stillroom {_version()}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", title="commands")
    json_flag = argparse.ArgumentParser(add_help=False)
    json_flag.add_argument(
        "--json",
        action="store_true",
        help="print machine-readable JSON on stdout (see schema.json)",
    )

    p = sub.add_parser(
        "profile",
        parents=[json_flag],
        formatter_class=_Formatter,
        help="print the demo profile, or check one and say what it means",
        description=_wrap(
            "Without FILE: print the built-in demo profile (invented figures) as a "
            "commented TOML file to start from.\nWith FILE: check it and print what it means, "
            "including the raw pair's hashing yield."
        ),
        epilog="examples:\n  stillroom profile > mine.toml\n  stillroom profile mine.toml\n\n"
        "keys (units in the names; all but [raw_pair] optional, default perfect):\n"
        "  name, note\n"
        "  [raw_pair]    werner_fidelity = F  or  bell = [Phi+, Psi+, Psi-, Phi-]\n"
        "  [operations]  two_qubit, single_qubit (in [0, 1]), measurement (in [0.5, 1])\n"
        "  [memory]      t1_s, t2_s (seconds; inf or absent: no decay)\n"
        "  [link]        length_km, pair_rate_hz (absent: pairs arrive instantly)",
    )
    p.add_argument("file", nargs="?", metavar="FILE", help="profile to check (TOML)")
    p.set_defaults(handler=cmd_profile)

    p = sub.add_parser(
        "search",
        parents=[json_flag],
        formatter_class=_Formatter,
        help="search recipes and report the Pareto front (resumable)",
        description=_wrap(
            "Search purification recipes for PROFILE (default: the built-in demo) and "
            "report the Pareto front of fidelity against yield, beside the textbook baselines.\n"
            "The run folder keeps the study: run the same command again to resume it, or with a "
            "larger --trials to extend it. Writes front.csv, recipes.json, table.tex, table.md, "
            "front.png and front.svg."
        ),
        epilog="examples:\n"
        "  stillroom search                               the demo, about a minute\n"
        "  stillroom search mine.toml --target 0.99       cheapest recipe reaching F >= 0.99\n"
        "  stillroom search mine.toml --time 2h --trials 100000   overnight\n"
        "  stillroom search mine.toml --objectives fidelity,yield,memory --max-memory 3\n"
        "  stillroom search mine.toml --storage postgresql://host/db --workers 2\n"
        "      (run the same command on several machines to share one study)",
    )
    p.add_argument(
        "profile",
        nargs="?",
        metavar="PROFILE",
        help="noise profile (TOML); default the built-in demo",
    )
    p.add_argument("--name", help="run folder name (default: from the profile's name)")
    p.add_argument(
        "--runs-dir",
        default=DEFAULT_RUNS_DIR,
        metavar="DIR",
        help="folder holding run folders (default: %(default)s)",
    )
    p.add_argument(
        "--depth",
        type=_positive_int,
        default=DEFAULT_DEPTH,
        metavar="D",
        help="largest number of rounds in a recipe (default: %(default)s)",
    )
    p.add_argument(
        "--trials",
        type=_non_negative_int,
        default=DEFAULT_TRIALS,
        metavar="N",
        help="total trials the study should reach (default: %(default)s)",
    )
    p.add_argument(
        "--time",
        type=parse_duration,
        metavar="T",
        help="wall-time budget for this run, e.g. 90s, 10m, 2h",
    )
    p.add_argument(
        "--target",
        type=_fidelity,
        metavar="F",
        help="also report the cheapest recipe reaching output fidelity F",
    )
    p.add_argument(
        "--objectives",
        type=_objectives,
        default=("fidelity", "yield"),
        metavar="LIST",
        help="fidelity,yield[,memory][,time] (default: fidelity,yield)",
    )
    _add_limit_options(p)
    p.add_argument(
        "--exhaustive-depth",
        type=_non_negative_int,
        metavar="D",
        help="first evaluate every linear recipe to depth D exactly "
        "(default: the search layer's choice)",
    )
    p.add_argument(
        "--storage",
        metavar="URL",
        help="study storage: a file path, sqlite:///..., postgresql://... "
        "(default: study.db in the run folder)",
    )
    p.add_argument(
        "--workers",
        type=_positive_int,
        default=1,
        metavar="N",
        help="worker processes on this machine (default: %(default)s)",
    )
    p.add_argument("--seed", type=int, default=0, help="sampler seed (default: %(default)s)")
    p.add_argument(
        "--sampler",
        choices=("nsga2", "tpe", "random"),
        default="nsga2",
        help="optuna sampler (default: %(default)s)",
    )
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.set_defaults(handler=cmd_search)

    p = sub.add_parser(
        "evaluate",
        parents=[json_flag],
        formatter_class=_Formatter,
        help="exact figures of one recipe, round by round",
        description=_wrap(
            "Evaluate one recipe exactly on PROFILE (default: the built-in demo) and "
            "print, after each round of its main chain: the Bell weights, fidelity, success "
            "probability, raw pairs per output so far, memory qubits per node and time per "
            "output pair."
        ),
        epilog=RECIPE_HELP + "\nexamples:\n  stillroom evaluate sY^3\n"
        "  stillroom evaluate pX.pY.pX mine.toml\n  stillroom evaluate dejmps:4 mine.toml --json",
    )
    p.add_argument("recipe", metavar="RECIPE", help="recipe string, or NAME:DEPTH of a baseline")
    p.add_argument(
        "profile",
        nargs="?",
        metavar="PROFILE",
        help="noise profile (TOML); default the built-in demo",
    )
    p.set_defaults(handler=cmd_evaluate)

    from_help = "first value of the parameter"
    p = sub.add_parser(
        "sweep",
        parents=[json_flag],
        formatter_class=_Formatter,
        help="how the best fidelity and the cheapest recipes change with one noise parameter",
        description=_wrap(
            "For STEPS values of one noise parameter from FROM to TO, evaluate every "
            "linear recipe up to --depth exactly and report the highest output fidelity reachable "
            "and the cheapest recipe reaching each --targets fidelity, as a table and a plot "
            "(sweep.csv, sweep.md, sweep.json, sweep.png, sweep.svg)."
        ),
        epilog="parameters: werner_fidelity (replaces the raw pair by a Werner pair),\n"
        "  two_qubit, single_qubit, measurement, t1_s, t2_s, length_km, pair_rate_hz\n\n"
        "examples:\n  stillroom sweep two_qubit 0.97 1 --targets 0.99,0.995\n"
        "  stillroom sweep t2_s 0.01 10 mine.toml --log --steps 9",
    )
    p.add_argument("parameter", metavar="PARAM", help="profile key to vary")
    p.add_argument("start", type=float, metavar="FROM", help=from_help)
    p.add_argument("stop", type=float, metavar="TO", help="last value of the parameter")
    p.add_argument(
        "profile",
        nargs="?",
        metavar="PROFILE",
        help="noise profile (TOML); default the built-in demo",
    )
    p.add_argument(
        "--steps",
        type=_positive_int,
        default=6,
        metavar="N",
        help="number of values (default: %(default)s)",
    )
    p.add_argument("--log", action="store_true", help="space the values geometrically")
    p.add_argument(
        "--targets",
        type=_fidelities,
        default=[0.99],
        metavar="F1,F2",
        help="target fidelities (default: 0.99)",
    )
    p.add_argument(
        "--depth",
        type=_positive_int,
        default=2,
        metavar="D",
        help="largest recipe depth, searched exhaustively (default: %(default)s; "
        "depth 3 takes minutes per value)",
    )
    _add_limit_options(p)
    p.add_argument(
        "--workers",
        type=_positive_int,
        default=1,
        metavar="N",
        help="parallel jobs for the exhaustive evaluation (default: %(default)s)",
    )
    p.add_argument(
        "--out", metavar="DIR", help="output folder (default: <runs-dir>/sweep-<profile>-<PARAM>)"
    )
    p.add_argument(
        "--runs-dir",
        default=DEFAULT_RUNS_DIR,
        metavar="DIR",
        help="folder for the default output folder (default: %(default)s)",
    )
    p.add_argument("--no-progress", action="store_true", help="no progress lines")
    p.set_defaults(handler=cmd_sweep)

    p = sub.add_parser(
        "table",
        parents=[json_flag],
        formatter_class=_Formatter,
        help="export a finished or running search (rewrites its report files)",
        description=_wrap(
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
    p.add_argument(
        "--runs-dir",
        default=DEFAULT_RUNS_DIR,
        metavar="DIR",
        help="where to look for a run given by name (default: %(default)s)",
    )
    p.add_argument("--format", choices=("md", "tex", "csv"), help="print this table on stdout")
    p.add_argument("--no-plots", action="store_true", help="skip front.png and front.svg")
    p.set_defaults(handler=cmd_table)
    return parser


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("stillroom")
    except Exception:  # running from a source tree
        return "(not installed)"


def main(argv=None) -> int:
    """Run the ``stillroom`` command line; returns the exit code."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as done:  # --help, --version, or a usage error (code 2)
        return int(done.code or 0)
    if getattr(args, "handler", None) is None:
        parser.print_help()
        return 0
    from .errors import StillroomError

    try:
        return args.handler(args)
    except StillroomError as error:
        print(f"stillroom: {error}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(INTERRUPTED if args.command == "search" else "interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
