"""``stillroom profile``: print the demo profile, or check one and say what it means."""

from __future__ import annotations

import sys

from . import common

NAME = "profile"


def add_parser(sub, parents) -> None:
    p = sub.add_parser(
        NAME,
        parents=parents,
        formatter_class=common.Formatter,
        help="print the demo profile, or check one and say what it means",
        description=common.wrap(
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
    p.set_defaults(handler=run)


def run(args) -> int:
    from ..profiles import demo_profile, demo_toml, describe, load_profile, profile_note

    if args.file is None:
        if args.json:
            common.print_json(document(demo_profile(), "built-in demo", profile_note()))
        else:
            sys.stdout.write(demo_toml())
        return 0
    profile = load_profile(args.file)
    note = profile_note(args.file)
    if args.json:
        common.print_json(document(profile, str(args.file), note))
        return 0
    from rich.table import Table

    out = common.console()
    out.print(common.bold(profile.name, f"  ({args.file}): a valid noise profile"))
    if note:
        out.print(f"note: {note}")
    table = Table(box=None, show_header=False, pad_edge=False)
    table.add_column(style="bold")
    table.add_column(justify="right")
    table.add_column(style="dim")
    for quantity, value, meaning in describe(profile):
        table.add_row(quantity, value, meaning)
    out.print(table)
    return 0


def document(profile, source: str, note) -> dict:
    """The ``--json`` document (schema kind ``profile``)."""
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
