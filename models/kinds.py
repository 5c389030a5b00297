"""The step kinds a round can use: the one registry every layer reads.

A step kind is a compiled purification circuit (:class:`models.steps.StepCircuit`)
together with what the rest of stillroom needs to know about it: how many
inputs it takes (kept pair first), and the notation tokens of its pumping form
(sacrificed pairs fresh raw pairs, or made by a sub-recipe) and of its symmetric
form (sacrificed pairs copies of the pair made so far). The recipe dataclasses,
the notation, the single-recipe evaluator, the batched chain and the search
space all read :data:`STEP_KINDS`; nothing else dispatches on a kind's name.

General check rounds over two to five pairs (:mod:`models.circuits`) are kinds
too, registered on demand: their ``selection`` is their canonical compact form
(``"01,02,03/ZZZ/000"``), so a recipe naming one carries everything needed to
rebuild it, and :func:`step_kind` (and so :class:`models.recipes.Round`)
registers it the first time it is named; :data:`STEP_KINDS` finds it by name,
but iterating it gives the built-in kinds only. Their tokens are ``c{form}``
(sacrificed pairs fresh or from a source) and ``cs{form}`` (copies of the pair
so far). :data:`BUILT_IN` lists the kinds present at import.

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


class _Registry(dict):
    """The built-in kinds as its items; general rounds found by name as well.

    Iterating (``items()``, ``values()``, ``len``) gives the kinds present at
    import, which is what tables built over every kind (the round codes of
    :mod:`models.chain`) expect; looking a name up (``[]``, ``in``, ``get``)
    also finds a general round, registered on demand from its compact form.
    """

    def __init__(self, builtin):
        super().__init__(builtin)
        self.general: dict = {}

    def __missing__(self, key):
        if key in self.general:
            return self.general[key]
        try:
            return step_kind(key)
        except ValueError:
            raise KeyError(key) from None

    def __contains__(self, key):
        return dict.__contains__(self, key) or key in self.general

    def get(self, key, default=None):
        try:
            return self[key]
        except KeyError:
            return default


class _InputCounts(dict):
    """Inputs per kind: the built-in kinds as items, any general round on lookup."""

    def __missing__(self, key):
        return STEP_KINDS[key].n_inputs

    def get(self, key, default=None):
        try:
            return self[key]
        except KeyError:
            return default


# insertion order is the order of the codes of models.chain.LINEAR_ROUNDS
STEP_KINDS: dict[str, StepKind] = _Registry(
    (kind.selection, kind)
    for kind in (
        StepKind("single", TWO_TO_ONE, "p", "s", "2->1 parity check"),
        StepKind("double", DOUBLE_SELECTION, "dp", "ds", "double selection (3->1)"),
    )
)
SELECTIONS: tuple[str, ...] = tuple(STEP_KINDS)
# the kinds present at import; general rounds registered later are not among them
BUILT_IN: tuple[str, ...] = SELECTIONS
# inputs per step, kept pair included
N_INPUTS: dict[str, int] = _InputCounts((name, k.n_inputs) for name, k in STEP_KINDS.items())
# general rounds by id, for the short form c{#id}
BY_ID: dict[str, str] = {}


def register_circuit(circuit) -> StepKind:
    """Register a general round (a :class:`models.circuits.GeneralCircuit`) as a kind.

    Registering the same circuit again returns the kind already registered.
    """
    known = STEP_KINDS.general.get(circuit.text)
    if known is not None:
        return known
    kind = StepKind(
        circuit.text,
        circuit.step,
        "c{" + circuit.text + "}",
        "cs{" + circuit.text + "}",
        f"{circuit.n_pairs}->1 check round {circuit.circuit_id}",
    )
    STEP_KINDS.general[kind.selection] = kind
    BY_ID[circuit.circuit_id] = kind.selection
    return kind


def step_kind(selection: str) -> StepKind:
    """The registered kind named ``selection``; ValueError naming the allowed names.

    A canonical compact form of a general round (:mod:`models.circuits`) is
    registered on demand; a form that is not canonical is refused with its
    canonical spelling (the rotations of a round follow the relabelling, so
    only the recipe parser may rewrite one).

    Examples
    --------
    >>> step_kind("double").n_inputs
    3
    >>> step_kind("01,02,03/ZZX/000").n_inputs
    4
    """
    if isinstance(selection, str) and selection in STEP_KINDS:
        return STEP_KINDS[selection]
    if isinstance(selection, str) and "/" in selection:
        from .circuits import parse_circuit

        circuit, _ = parse_circuit(selection)
        if circuit.text != selection:
            raise ValueError(
                f"selection = {selection!r} is a general round not in canonical form; "
                f"write {circuit.text!r} (pairs renamed: reorder the rotations to match)"
            )
        return register_circuit(circuit)
    raise ValueError(
        f"selection = {selection!r} is not a step kind; use one of {', '.join(SELECTIONS)} "
        "or the compact form of a general round such as '01,02,03/ZZX/000'"
    )
