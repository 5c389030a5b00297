"""The step kinds a round can use: the one registry every layer reads.

A step kind is a compiled purification circuit (:class:`models.steps.StepCircuit`)
together with what the rest of stillroom needs to know about it: how many
inputs it takes (kept pair first), and the notation tokens of its pumping form
(sacrificed pairs fresh raw pairs, or made by a sub-recipe) and of its symmetric
form (sacrificed pairs copies of the pair made so far). The recipe dataclasses,
the notation, the single-recipe evaluator, the batched chain and the search
space all read :data:`STEP_KINDS`; nothing else dispatches on a kind's name.

Adding a kind is one entry here (its circuit in :mod:`models.steps`); the
contributor guide lists what else a new kind touches (its reference circuit in
the tests). A new kind starts with no canonical-form rules, which stays exact
and merges less.

References
----------
1. C. H. Bennett et al., Phys. Rev. Lett. 76, 722 (1996) (the 2->1 check).
2. K. Fujii and K. Yamamoto, Phys. Rev. A 80, 042308 (2009) (double selection).
"""

from __future__ import annotations

from dataclasses import dataclass

from .steps import DOUBLE_SELECTION, TWO_TO_ONE, StepCircuit


@dataclass(frozen=True)
class StepKind:
    """One kind of purification step.

    Attributes
    ----------
    selection : str
        The kind's name, the value of :attr:`models.recipes.Round.selection`.
    circuit : StepCircuit
        The compiled circuit; pair 0 is kept.
    pump_token : str
        Notation of a round whose sacrificed pairs are fresh raw pairs or made by a
        source (``"p"``, ``"dp"``).
    same_token : str
        Notation of a symmetric round: the sacrificed pairs are copies of the pair
        made so far (``"s"``, ``"ds"``).
    title : str
        A few words for people.
    """

    selection: str
    circuit: StepCircuit
    pump_token: str
    same_token: str
    title: str

    @property
    def n_inputs(self) -> int:
        """Pairs the step consumes, kept pair included."""
        return self.circuit.n_pairs


# insertion order is the order of the codes of models.chain.LINEAR_ROUNDS
STEP_KINDS: dict[str, StepKind] = {
    kind.selection: kind
    for kind in (
        StepKind("single", TWO_TO_ONE, "p", "s", "2->1 parity check"),
        StepKind("double", DOUBLE_SELECTION, "dp", "ds", "double selection (3->1)"),
    )
}
SELECTIONS: tuple[str, ...] = tuple(STEP_KINDS)
# inputs per step, kept pair included
N_INPUTS: dict[str, int] = {name: kind.n_inputs for name, kind in STEP_KINDS.items()}


def step_kind(selection: str) -> StepKind:
    """The registered kind named ``selection``; ValueError naming the allowed names.

    Examples
    --------
    >>> step_kind("double").n_inputs
    3
    """
    try:
        return STEP_KINDS[selection]
    except (KeyError, TypeError):
        raise ValueError(
            f"selection = {selection!r} is not a step kind; use one of {', '.join(SELECTIONS)}"
        ) from None
