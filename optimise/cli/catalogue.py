"""``stillroom catalogue``: the n-pair check rounds found by exact enumeration, for a profile."""

from __future__ import annotations

from ..settings import CHECK_ROUND_CNOTS, CHECK_ROUND_PAIRS
from . import common

NAME = "catalogue"
MAX_PAIRS = CHECK_ROUND_PAIRS[1]
MAX_CNOTS = CHECK_ROUND_CNOTS[1]


def add_parser(sub, parents) -> None:
    p = sub.add_parser(
        NAME,
        parents=parents,
        formatter_class=common.Formatter,
        help="n-pair check rounds found by exact enumeration of small circuits",
        description=common.wrap(
            "Enumerate every circuit of up to --cnots bilateral CNOTs between --pairs "
            "pairs (every pair takes part), with each sacrificed pair measured in the Z "
            "or X basis, reduce it by the symmetries that leave its figures unchanged, "
            "evaluate each exactly under PROFILE's gate and measurement noise on that "
            "many raw pairs, and print the rounds on the front of (success probability, "
            "output fidelity). The catalogue is cached per settings, so a second call "
            "(or a search) reads it instead of building it again.\n"
            "Each round is printed in its compact form (CNOTs as control-target pair "
            "indices, kept pair 0; the bases of the measured pairs; the accepted parity "
            "patterns) and as a recipe token that `stillroom evaluate` and `stillroom "
            "verify` accept: c{FORM} pumps raw pairs through it, cs{FORM} feeds it "
            "copies of the pair made so far.\n"
            "What the enumeration leaves out: rotations inside a circuit, Y-basis "
            "measurements, idle pairs, more CNOTs than asked; of the accepted sets, "
            "only nested sets in decreasing order of conditional fidelity (they hold "
            "every set on the upper convex hull of the front)."
        ),
        epilog="examples:\n"
        "  stillroom catalogue                         4 pairs, up to 4 CNOTs, the demo\n"
        "  stillroom catalogue mine.toml --pairs 3 --cnots 3\n"
        "  stillroom catalogue --pairs 5 --cnots 5     minutes on a laptop, then cached\n"
        "  stillroom evaluate 'c{01,01,23/ZZX/000,001,010}'   one round as a recipe",
    )
    common.add_profile_argument(p)
    p.add_argument(
        "--pairs",
        type=common.whole_number_at_least(2, MAX_PAIRS),
        default=4,
        metavar="N",
        help=f"input pairs of a round, 2 to {MAX_PAIRS} (default: %(default)s)",
    )
    p.add_argument(
        "--cnots",
        type=common.whole_number_at_least(1, MAX_CNOTS),
        default=None,
        metavar="G",
        help=f"most bilateral CNOTs per circuit, 1 to {MAX_CNOTS} (default: as many as pairs)",
    )
    p.add_argument(
        "--cache",
        type=cache_folder,
        default=None,
        metavar="DIR",
        help="folder of cached catalogues (default: stillroom/catalogue under the user's "
        "cache folder, $XDG_CACHE_HOME or ~/.cache)",
    )
    p.add_argument(
        "--top",
        type=common.whole_number_at_least(0),
        default=20,
        metavar="K",
        help="rounds printed, evenly spread along the front; 0 for all (default: %(default)s)",
    )
    p.set_defaults(handler=run)


def cache_folder(text: str) -> str:
    """A folder path that is not empty."""
    import argparse

    if not text.strip():
        raise argparse.ArgumentTypeError("an empty path; name a folder for the cached catalogues")
    return text


def spread(n: int, top: int) -> list[int]:
    """``top`` indices evenly spread over ``range(n)``, both ends kept (all with top 0).

    Examples
    --------
    >>> spread(10, 4)
    [0, 3, 6, 9]
    >>> spread(3, 0)
    [0, 1, 2]
    """
    if top == 0 or top >= n:
        return list(range(n))
    if top == 1:
        return [0]
    return sorted({round(i * (n - 1) / (top - 1)) for i in range(top)})


def run(args) -> int:
    from ..catalogue import catalogue_directory, load_or_build
    from ..errors import InputError
    from ..labels import fmt_fidelity

    profile, label = common.profile_or_demo(args.profile)
    cnots = args.cnots if args.cnots is not None else args.pairs
    if args.cnots is None and args.pairs == 2:
        cnots = 1  # two pairs: one CNOT, the 2->1 check; more only repeat it
    try:
        folder = catalogue_directory(args.cache)
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise InputError(
            f"cache folder {args.cache or 'the default'} cannot be made "
            f"({error.strerror or error}); pass --cache DIR"
        ) from error
    noise = profile.noise
    catalogue, cached = load_or_build(
        args.pairs,
        cnots,
        pair=profile.raw_pair,
        two_qubit=noise.two_qubit,
        measurement=noise.measurement,
        directory=folder,
    )
    shown = [catalogue.entries[i] for i in spread(len(catalogue.entries), args.top)]
    if args.json:
        common.print_json(
            {
                "kind": "catalogue",
                "profile": profile.to_dict(),
                **catalogue.to_json(),
                "cached": cached,
            }
        )
        return 0
    out = common.console()
    out.print(
        common.bold(
            f"{args.pairs}-pair check rounds, up to {cnots} bilateral CNOTs",
            f", on {label} (two_qubit = {noise.two_qubit:g}, measurement = "
            f"{noise.measurement:g}, every input the raw pair, no waits)",
        )
    )
    how = "read from the cache" if cached else "built and cached"
    out.print(
        f"circuits: {catalogue.before:,d} enumerated, {catalogue.after:,d} after symmetry "
        f"reduction, {len(catalogue.entries):,d} rounds on the front; "
        f"{how} in {folder} (build time {catalogue.build_seconds:.1f} s)"
    )
    from rich.table import Table

    table = Table(box=None, header_style="bold", pad_edge=False)
    for title, justify in (
        ("CNOTs", "right"),
        ("success P", "right"),
        ("fidelity F", "right"),
        ("recipe token (pumping raw pairs)", "left"),
    ):
        table.add_column(title, justify=justify)
    for entry in shown:
        table.add_row(
            str(entry["n_cnots"]),
            f"{min(1.0, entry['success']):.6f}",
            fmt_fidelity(entry["fidelity"]),
            "c{" + entry["form"] + "}",
        )
    out.print(table)
    if len(shown) < len(catalogue.entries):
        out.print(f"{len(shown)} of {len(catalogue.entries)} rounds shown; --top 0 shows all")
    out.print(
        "Figures of one round on fresh raw pairs, no memory decay and no rotation of the "
        "inputs; in a recipe a round's figures depend on its inputs, rotations and waits: "
        "evaluate the recipe. Not a security certificate.",
        style="dim",
    )
    return 0
