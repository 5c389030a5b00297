"""The optuna search space: a trial's parameters <-> a validated recipe.

Parameters (all categorical but the depth, and conditional on it, which suits TPE):

- ``depth``: rounds in the main chain, 1 .. max_depth;
- for each round ``i < depth``: ``r{i}.selection`` (``single`` 2->1 or ``double``
  selection); ``r{i}.sacrificed`` for ``i >= 1``: ``raw``, ``same`` (copies of the
  pair made so far) or ``prefix{k}`` for ``1 <= k < i`` (pairs made by the first k
  rounds of the same recipe: nested pumping, a tree written as a sub-recipe
  source); the first round always sacrifices raw pairs; ``r{i}.rot0``,
  ``r{i}.rot1`` and, for double selection, ``r{i}.rot2`` (a rotation name per
  input, kept input first); ``r{i}.twirl`` (re-twirl the output to Werner form).

A search with general check rounds (``--check-rounds``) adds their canonical
forms to the choices of ``r{i}.selection`` (``selections``, fixed for the run
folder); a general round of n pairs has ``r{i}.rot0`` to ``r{i}.rot{n-1}``.
"""

from __future__ import annotations

from models.kinds import N_INPUTS, SELECTIONS
from models.recipes import Recipe, Round
from models.rotations import ROTATION_NAMES

SELECTION_CHOICES = SELECTIONS
TWIRL_CHOICES = (False, True)


def sacrificed_choices(i: int, nested: bool = True) -> tuple[str, ...]:
    """Choices of ``r{i}.sacrificed`` (round ``i`` counted from 0, ``i >= 1``).

    ``nested=False`` leaves out the prefixes: the space of linear recipes only.
    """
    return ("raw", "same") + (tuple(f"prefix{k}" for k in range(1, i)) if nested else ())


def describe_space(max_depth: int, check_rounds: str | None = None) -> str:
    """One sentence naming the recipes the optuna layer samples (``check_rounds``: the
    catalogues of general check rounds it may choose from besides the built-in kinds)."""
    nested = (
        ", or pairs made by the first rounds of the same recipe (nested pumping)"
        if max_depth >= 3
        else ""
    )
    return (
        f"recipes of 1 to {max_depth} rounds, each round a 2->1 step"
        + (", double selection" if check_rounds else " or double selection")
        + (f" or a general check round of the catalogues {check_rounds}" if check_rounds else "")
        + " "
        "with any bilateral rotation on each input and an optional re-twirl, whose sacrificed "
        f"pairs are fresh raw pairs, copies of the pair made so far{nested}"
    )


def is_linear_space(max_depth: int) -> bool:
    """Whether every recipe of the space is linear (nesting needs depth 3 or more)."""
    return max_depth <= 2


def recipe_from_params(params: dict, max_depth: int, selections=SELECTION_CHOICES) -> Recipe:
    """Build the recipe a complete parameter set describes.

    Raises
    ------
    KeyError
        When a parameter the recipe needs is missing (a trial cut short).
    ValueError
        When a value is outside its choices.
    """
    depth = int(params["depth"])
    if not 1 <= depth <= max_depth:
        raise ValueError(f"depth = {depth} is outside [1, {max_depth}]")
    rounds: list[Round] = []
    for i in range(depth):
        selection = params[f"r{i}.selection"]
        if selection not in selections:
            raise ValueError(f"r{i}.selection = {selection!r} is not one of this space's")
        kind = "raw" if i == 0 else params[f"r{i}.sacrificed"]
        rotations = tuple(
            ROTATION_NAMES.index(params[f"r{i}.rot{j}"]) for j in range(N_INPUTS[selection])
        )
        twirl = bool(params[f"r{i}.twirl"])
        if kind.startswith("prefix"):
            k = int(kind[len("prefix") :])
            if not 1 <= k < i:
                raise ValueError(
                    f"r{i}.sacrificed = {kind!r}: a prefix of round {i} has 1..{i - 1} rounds"
                )
            rounds.append(
                Round(selection, "sub", rotations, source=Recipe(tuple(rounds[:k])), twirl=twirl)
            )
        else:
            rounds.append(Round(selection, kind, rotations, twirl=twirl))
    return Recipe(tuple(rounds))


def suggest_recipe(
    trial, max_depth: int, nested: bool = True, selections=SELECTION_CHOICES
) -> Recipe:
    """Ask an optuna trial for a recipe of this space (linear only with ``nested=False``)."""
    params = {"depth": trial.suggest_int("depth", 1, max_depth)}
    for i in range(params["depth"]):
        selection = trial.suggest_categorical(f"r{i}.selection", tuple(selections))
        params[f"r{i}.selection"] = selection
        if i >= 1:
            params[f"r{i}.sacrificed"] = trial.suggest_categorical(
                f"r{i}.sacrificed", sacrificed_choices(i, nested)
            )
        for j in range(N_INPUTS[selection]):
            params[f"r{i}.rot{j}"] = trial.suggest_categorical(f"r{i}.rot{j}", ROTATION_NAMES)
        params[f"r{i}.twirl"] = trial.suggest_categorical(f"r{i}.twirl", TWIRL_CHOICES)
    return recipe_from_params(params, max_depth, selections)


def recipe_params(recipe: Recipe, max_depth: int, selections=SELECTION_CHOICES) -> dict | None:
    """The parameters that make ``recipe`` in this space, or ``None`` if it is not in it.

    A round whose source is not a prefix of the recipe's own main chain, a general
    check round not in ``selections``, a recipe deeper than ``max_depth``, or
    one that twirls its raw pairs (the space has no parameter for that) is outside
    the space.
    """
    if not 1 <= recipe.depth <= max_depth or _twirls_raw_pairs(recipe):
        return None
    params: dict = {"depth": recipe.depth}
    for i, r in enumerate(recipe.rounds):
        if r.selection not in selections:
            return None  # a general check round this study was not offered
        params[f"r{i}.selection"] = r.selection
        if i >= 1:
            if r.sacrificed == "sub":
                prefix_k = [
                    k
                    for k in range(1, i)
                    if r.source.notation == Recipe(recipe.rounds[:k]).notation
                ]
                if r.source.depth == 0:
                    params[f"r{i}.sacrificed"] = "raw"
                elif r.source.notation == Recipe(recipe.rounds[:i]).notation:
                    params[f"r{i}.sacrificed"] = "same"
                elif prefix_k:
                    params[f"r{i}.sacrificed"] = f"prefix{prefix_k[0]}"
                else:
                    return None
            else:
                params[f"r{i}.sacrificed"] = r.sacrificed
        elif r.sacrificed == "sub" and r.source.depth != 0:
            return None  # round 0 can only sacrifice raw pairs (or copies: the same thing)
        for j, rot in enumerate(r.rotations):
            params[f"r{i}.rot{j}"] = ROTATION_NAMES[rot]
        params[f"r{i}.twirl"] = bool(r.twirl)
    return params


def _twirls_raw_pairs(recipe: Recipe) -> bool:
    return recipe.raw_twirl or any(
        r.source is not None and _twirls_raw_pairs(r.source) for r in recipe.rounds
    )


def distributions_for(
    params: dict, max_depth: int, nested: bool = True, selections=SELECTION_CHOICES
) -> dict:
    """The optuna distribution of each parameter in ``params`` (as :func:`suggest_recipe` asks)."""
    from optuna.distributions import CategoricalDistribution, IntDistribution

    out = {}
    for name in params:
        if name == "depth":
            out[name] = IntDistribution(1, max_depth)
            continue
        i = int(name[1 : name.index(".")])
        field = name[name.index(".") + 1 :]
        if field == "selection":
            out[name] = CategoricalDistribution(tuple(selections))
        elif field == "sacrificed":
            out[name] = CategoricalDistribution(sacrificed_choices(i, nested))
        elif field.startswith("rot"):
            out[name] = CategoricalDistribution(ROTATION_NAMES)
        elif field == "twirl":
            out[name] = CategoricalDistribution(TWIRL_CHOICES)
        else:
            raise ValueError(f"parameter {name!r} is not one of the search space's")
    return out
