"""``stillroom evaluate``: the exact figures of one recipe, round by round."""

from __future__ import annotations

from ..labels import fmt_fidelity, fmt_number, fmt_time
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
Limits (models.notation.LIMITS_SENTENCE): a recipe has at most 64 rounds in all
(sources included), a repeat count of at most 64, sources nested at most 8 deep
and at most 1000 characters.
"""


def add_parser(sub, parents) -> None:
    p = sub.add_parser(
        NAME,
        parents=parents,
        formatter_class=common.Formatter,
        help="exact figures of one recipe, round by round",
        description=common.wrap(
            "Evaluate one recipe exactly on PROFILE (default: the built-in demo) and "
            "print every step in the order it happens (the steps of a sub-recipe before the "
            "round that uses it): the Bell weights, fidelity and success probability, with "
            "the error weights the check removed and the infidelity that gates, measurements "
            "and memory added; then the cost, memory and time of the main chain round by round."
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

    if text.lower().endswith(".toml"):
        from ..errors import InputError

        raise InputError(
            f"{text!r} is a profile, not a recipe: the recipe comes first "
            "(stillroom evaluate RECIPE [PROFILE])"
        )
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

    from ..errors import user_input
    from ..explain import explain

    with user_input():
        result = evaluate(recipe, profile)
        stories = explain(recipe, profile)
    trace = [_round_dict(i, r) for i, r in enumerate(result.trace, 1)]
    written = spelling(args.recipe, recipe)
    if args.json:
        common.print_json(
            {
                "kind": "evaluate",
                "profile_source": label,
                "profile": profile.to_dict(),
                "written": written,
                "result": result.to_dict(),
                "trace": trace,
                "steps": [_step_dict(story) for story in stories],
            }
        )
        return 0
    out = common.console()
    out.print(common.bold(result.notation, f"  id {result.recipe_id}  on {label}"))
    if written != result.notation or ":" in args.recipe:
        from ..rows import why_canonical

        built = f", built as {written}" if ":" in args.recipe else ""
        same = written == result.notation
        out.print(
            f"as written: {args.recipe}{built}"
            + (
                ""
                if same
                else f"; canonical form {result.notation}: "
                + why_canonical(written, result.notation)
            )
        )
    print_trace(out, recipe, profile, stories, result)
    out.print(
        f"output: F = {result.fidelity:.6f}, yield {result.pair_yield:.6g} output pairs per "
        f"raw pair, {result.memory_per_node} memory qubits per node, "
        f"{fmt_time(result.time_per_output_s)} per output pair"
    )
    _print_general_rounds(out, recipe)
    common.print_assumptions(out)
    return 0


def spelling(text: str, recipe) -> str:
    """The recipe as the user wrote it: their string, or a baseline's recipe as built."""
    from models.formatting import format_recipe

    return format_recipe(recipe) if ":" in text else text


def print_trace(out, recipe, profile, stories, result) -> None:
    """The raw pair, then every step in the order it happens, with why it helps or hurts."""
    from rich.table import Table

    from models.evaluate import evaluate
    from models.notation import canonical
    from models.recipes import Recipe
    from models.states import BELL_NAMES

    written = canonical(recipe)
    # the raw pair as the recipe uses it (twirled where it says so)
    raw = evaluate(Recipe((), raw_twirl=written.raw_twirl), profile)
    name = "raw pair" + (", twirled (~)" if written.raw_twirl else "")
    out.print(
        f"{name}: F = {fmt_fidelity(raw.fidelity)}   {'/'.join(BELL_NAMES)} = {_weights(raw.bell)}"
    )
    for story in stories:
        indent = "  " * story.depth
        out.print(
            f"{indent}{story.label}  {story.step}: F = {fmt_fidelity(story.fidelity)} "
            f"({story.fidelity - story.fidelity_in:+.4f}), success P = "
            f"{story.success_probability:.6f}, state {_weights(story.bell)}"
        )
        out.print(f"{indent}    {story.sentence()}", style="dim")
    costs = Table(
        box=None,
        header_style="bold",
        pad_edge=False,
        title="main chain, round by round (cumulative)",
        title_justify="left",
    )
    for column in ("round", "fidelity F", "raw pairs / out", "mem / node", "time / out"):
        costs.add_column(column, justify="right")
    costs.add_row(
        "0",
        fmt_fidelity(raw.fidelity),
        fmt_number(raw.raw_pairs_per_output, 6),
        str(raw.memory_per_node),
        fmt_time(raw.time_per_output_s),
    )
    for i, figures in enumerate(result.trace, 1):
        costs.add_row(
            str(i),
            fmt_fidelity(figures.fidelity),
            fmt_number(figures.raw_pairs_per_output, 6),
            str(figures.memory_per_node),
            fmt_time(figures.time_per_output_s),
        )
    out.print()
    out.print(costs)


def _step_dict(story) -> dict:
    return {
        "step": story.label,
        "round": story.step,
        "bell": [float(w) for w in story.bell],
        "fidelity": float(story.fidelity),
        "success_probability": float(story.success_probability),
        "removed": {k: float(w) for k, w in zip("XYZ", story.removed, strict=True)},
        "gate_noise": float(story.gate_noise),
        "memory_noise": float(story.memory_noise),
    }


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
