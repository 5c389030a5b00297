"""``stillroom compare``: recipes on one profile, or a recipe on several profiles, side by side."""

from __future__ import annotations

import math
from pathlib import Path

from . import common

NAME = "compare"
# what each column shows: (title, RecipeResult attribute, digits or None for integers)
FIGURES = (
    ("fidelity F", "fidelity", "fidelity"),
    ("yield", "pair_yield", "number"),
    ("raw pairs / output", "raw_pairs_per_output", "number"),
    ("memory / node", "memory_per_node", "integer"),
    ("rounds", "rounds", "integer"),
    ("time / output", "time_per_output_s", "time"),
)


def add_parser(sub, parents) -> None:
    p = sub.add_parser(
        NAME,
        parents=parents,
        formatter_class=common.Formatter,
        help="recipes (on one profile) or profiles (for one recipe) side by side",
        description=common.wrap(
            "Evaluate several recipes on one profile, or one recipe on several profiles, and "
            "print their figures side by side with each one's difference from the first. "
            "An argument that names an existing .toml file is a profile; every other one is "
            "a recipe or a baseline as NAME:DEPTH."
        ),
        epilog="examples:\n"
        "  stillroom compare sY^2 dejmps:2 'pY.dpYYZ'            three recipes, the demo\n"
        "  stillroom compare sY^2 pY^2 mine.toml                two recipes on mine.toml\n"
        "  stillroom compare dejmps:3 mine.toml theirs.toml     one recipe, two profiles",
    )
    p.add_argument(
        "items",
        nargs="+",
        metavar="RECIPE|PROFILE",
        help="recipes (or NAME:DEPTH) and profile files (.toml)",
    )
    p.set_defaults(handler=run)


def split_items(items) -> tuple[list[str], list[str]]:
    """Recipes and profile paths among the arguments (a profile: an existing ``.toml`` file)."""
    recipes, profiles = [], []
    for item in items:
        path = Path(item)
        (profiles if path.suffix == ".toml" and path.is_file() else recipes).append(item)
    return recipes, profiles


def run(args) -> int:
    from models.evaluate import evaluate

    from ..errors import InputError, user_input
    from .evaluate import resolve_recipe, spelling

    recipes, paths = split_items(args.items)
    if not recipes:
        raise InputError("compare needs at least one recipe (e.g. sY^2 or dejmps:2)")
    if len(recipes) > 1 and len(paths) > 1:
        raise InputError(
            f"compare takes several recipes on one profile or one recipe on several profiles, "
            f"not {len(recipes)} recipes and {len(paths)} profiles"
        )
    profiles = [common.profile_or_demo(p) for p in paths] or [common.profile_or_demo(None)]
    compares = "profiles" if len(profiles) > 1 else "recipes"
    entries = []
    for text in recipes:
        recipe = resolve_recipe(text)
        for profile, source in profiles:
            with user_input():
                result = evaluate(recipe, profile)
            label = source if compares == "profiles" else text
            entries.append((label, spelling(text, recipe), source, profile, result))
    differences = [_differences(entries[0][4], e[4]) for e in entries[1:]]
    if args.json:
        common.print_json(
            {
                "kind": "compare",
                "compares": compares,
                "entries": [
                    {
                        "label": label,
                        "written": written,
                        "profile_source": source,
                        "profile": profile.to_dict(),
                        "result": result.to_dict(),
                    }
                    for label, written, source, profile, result in entries
                ],
                "differences": differences,
            }
        )
        return 0
    out = common.console()
    if compares == "recipes":
        out.print(f"on {profiles[0][1]}")
    else:
        out.print(f"{entries[0][4].notation} on {len(profiles)} profiles")
    out.print(side_by_side(entries, differences))
    common.print_assumptions(out)
    return 0


def _differences(first, other) -> dict:
    out = {}
    for _, attribute, _ in FIGURES:
        a, b = getattr(first, attribute), getattr(other, attribute)
        out[attribute] = None if not (math.isfinite(a) and math.isfinite(b)) else b - a
    return out


def _cell(value, kind: str) -> str:
    from ..labels import fmt_fidelity, fmt_number, fmt_time

    if kind == "fidelity":
        return fmt_fidelity(value)
    if kind == "integer":
        return str(value)
    if kind == "time":
        return fmt_time(value)
    return fmt_number(value)


def _difference_cell(first, value, kind: str) -> str:
    from ..labels import fmt_time

    if value is None:
        return "inf"
    if kind == "fidelity":
        return f"{value:+.6f}"
    if kind == "integer":
        return f"{value:+d}"
    relative = "" if first == 0 else f" ({100 * value / first:+.1f}%)"
    if kind == "time":
        return ("+" if value >= 0 else "-") + fmt_time(abs(value)) + relative
    return f"{value:+.4g}{relative}"


def side_by_side(entries, differences):
    """A rich table: one row per figure, a column per entry and per difference from the first."""
    from rich.table import Table

    table = Table(box=None, header_style="bold", pad_edge=False)
    table.add_column("figure")
    first = entries[0][4]
    table.add_column(f"{entries[0][0]}\n= {first.notation}", justify="right")
    for (label, _, _, _, result), _ in zip(entries[1:], differences, strict=True):
        table.add_column(f"{label}\n= {result.notation}", justify="right")
        table.add_column("difference\nfrom the first", justify="right")
    for title, attribute, kind in FIGURES:
        cells = [_cell(getattr(first, attribute), kind)]
        for (_, _, _, _, result), diff in zip(entries[1:], differences, strict=True):
            cells.append(_cell(getattr(result, attribute), kind))
            cells.append(_difference_cell(getattr(first, attribute), diff[attribute], kind))
        table.add_row(title, *cells)
    return table
