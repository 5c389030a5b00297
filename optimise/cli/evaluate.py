"""``stillroom evaluate``: the exact figures of one recipe, round by round."""

from __future__ import annotations

from . import common

NAME = "evaluate"

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


def add_parser(sub, parents) -> None:
    p = sub.add_parser(
        NAME,
        parents=parents,
        formatter_class=common.Formatter,
        help="exact figures of one recipe, round by round",
        description=common.wrap(
            "Evaluate one recipe exactly on PROFILE (default: the built-in demo) and "
            "print, after each round of its main chain: the Bell weights, fidelity, success "
            "probability, raw pairs per output so far, memory qubits per node and time per "
            "output pair."
        ),
        epilog=RECIPE_HELP + "\nexamples:\n  stillroom evaluate sY^3\n"
        "  stillroom evaluate pX.pY.pX mine.toml\n  stillroom evaluate dejmps:4 mine.toml --json",
    )
    p.add_argument("recipe", metavar="RECIPE", help="recipe string, or NAME:DEPTH of a baseline")
    common.add_profile_argument(p)
    p.set_defaults(handler=run)


def resolve_recipe(text: str):
    """A recipe string, or a textbook baseline written ``NAME:DEPTH`` (e.g. ``dejmps:3``)."""
    from models.baselines import baseline
    from models.notation import parse_recipe

    from ..errors import user_input

    with user_input():
        if ":" in text:
            name, _, depth = text.partition(":")
            # models.baselines checks the name, then the depth (a whole number >= 1)
            return baseline(name, int(depth) if depth.strip().lstrip("-").isdigit() else depth)
        return parse_recipe(text)


def run(args) -> int:
    profile, label = common.profile_or_demo(args.profile)
    recipe = resolve_recipe(args.recipe)
    from models.evaluate import evaluate
    from models.notation import canonical, format_recipe
    from models.recipes import Recipe

    from ..errors import user_input

    with user_input():
        result = evaluate(recipe, profile)
    trace = [_round_dict(i, r) for i, r in enumerate(result.trace, 1)]
    if args.json:
        common.print_json(
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

    from ..labels import fmt_fidelity, fmt_number, fmt_time

    out = common.console()
    out.print(common.bold(result.notation, f"  id {result.recipe_id}  on {label}"))
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
    written = canonical(recipe)
    # the raw pair as the recipe uses it (twirled where it says so): figures and wait from the model
    raw = evaluate(Recipe((), raw_twirl=written.raw_twirl), profile)
    table.add_row(
        "0",
        "raw pair, twirled (~)" if written.raw_twirl else "raw pair",
        _weights(raw.bell),
        fmt_fidelity(raw.fidelity),
        "",
        fmt_number(raw.raw_pairs_per_output, 6),
        str(raw.memory_per_node),
        fmt_time(raw.time_per_output_s),
    )
    steps = [format_recipe(Recipe((r,))) for r in written.rounds]
    for row, step in zip(trace, steps, strict=True):
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
    out.print(table)
    out.print(
        f"output: F = {result.fidelity:.6f}, yield {result.pair_yield:.6g} output pairs per "
        f"raw pair, {result.memory_per_node} memory qubits per node, "
        f"{fmt_time(result.time_per_output_s)} per output pair"
    )
    if len(result.success_probabilities) != len(result.trace):
        out.print(
            "success probability of every step, in the order they happen: "
            + ", ".join(f"{p:.6f}" for p in result.success_probabilities)
        )
    _print_general_rounds(out, written)
    common.print_assumptions(out)
    return 0


def _print_general_rounds(out, recipe) -> None:
    """The circuit of each general check round, as each node runs it."""
    from models.circuits import describe, general_rounds, read_circuit

    for path, r in general_rounds(recipe):
        circuit = read_circuit(r.selection)
        out.print(f"round {path}: {circuit.n_pairs}->1 check round, id {circuit.circuit_id}")
        for line in describe(circuit, r.rotations):
            out.print("  " + line)


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


def _finite(x) -> float | None:
    """JSON has no infinity: an infinite cost or time is written as null."""
    import math

    return float(x) if math.isfinite(x) else None


def _weights(bell) -> str:
    return " ".join(f"{float(w):.4f}" for w in bell)
