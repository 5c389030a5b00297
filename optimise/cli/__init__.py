"""The ``stillroom`` command line: a thin layer over the Python API.

:func:`main` is what the ``stillroom`` script runs and what tests call. Each
command is one module of this package, its parser beside its handler
(``add_parser(sub, parents)`` and ``run(args) -> int``); a new command is a new
module listed in :data:`COMMANDS`. Commands import what they need only when they
run, so ``stillroom --help`` starts instantly. A user's error (a
:class:`optimise.errors.StillroomError`, or a file that cannot be read or
written) prints one line on stderr and returns exit code 2; so does a command
line that cannot be read (:class:`optimise.cli.common.Parser`), before anything
is written or printed. A fault of the machine (a full disk, an I/O error) is one
line and exit code 1.
"""

from __future__ import annotations

import sys

from . import catalogue, compare, evaluate, profile, search, sweep, table, verify
from .common import Formatter, Parser, UsageError, parse_duration
from .evaluate import RECIPE_HELP, resolve_recipe

__all__ = ["main", "build_parser", "parse_duration", "resolve_recipe", "RECIPE_HELP"]

COMMANDS = (profile, search, evaluate, compare, sweep, table, verify, catalogue)

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
optimise/schema.json). Exit codes: 0 success, 1 a fault of the machine (disk
full, I/O error), 2 bad input (one line on stderr), 130 interrupted.
"""

MACHINE_FAULTS = ("ENOSPC", "EDQUOT", "EIO", "ENOMEM", "EFBIG")


def build_parser() -> Parser:
    parser = Parser(
        prog="stillroom", description=MAIN_HELP, epilog=MAIN_EPILOG, formatter_class=Formatter
    )
    parser.add_argument("--version", action="version", version=f"stillroom {_version()}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", title="commands")
    from .common import json_flag

    parents = [json_flag()]
    for command in COMMANDS:
        command.add_parser(sub, parents)
    return parser


def _version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("stillroom")
    except PackageNotFoundError:  # running from a source tree
        return "(not installed)"


def main(argv=None) -> int:
    """Run the ``stillroom`` command line; returns the exit code."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as done:  # --help, --version
        return int(done.code or 0)
    except UsageError as error:
        print(error, file=sys.stderr)
        return 2
    if getattr(args, "handler", None) is None:
        parser.print_help(sys.stderr)
        return 2
    import errno

    from ..errors import StillroomError, user_message

    try:
        return args.handler(args)
    except (StillroomError, OSError) as error:
        print(user_message(error), file=sys.stderr)
        diagram = getattr(error.__cause__, "diagram", None)
        if getattr(args, "verbose", False) and diagram:
            print(diagram, file=sys.stderr)
        code = errno.errorcode.get(getattr(error, "errno", None) or 0)
        return 1 if code in MACHINE_FAULTS else 2
    except KeyboardInterrupt:
        print(search.INTERRUPTED if args.command == search.NAME else "interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
