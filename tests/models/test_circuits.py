"""General check rounds (models.circuits, models.steps) against the qutip reference.

The reference (tests/reference/density_matrix.py) runs every circuit on the full
density matrix with explicit unitaries, Kraus maps and projectors; nothing of the
label model is shared with it.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.testing import assert_allclose

from models.circuits import CircuitSyntaxError, canonical_circuit, parse_circuit, read_circuit
from models.rotations import PERMUTATIONS
from models.steps import DOUBLE_SELECTION, TWO_TO_ONE, run_step
from tests.reference import density_matrix as ref

NOISE = {"two_qubit": 0.93, "single_qubit": 0.96, "measurement": 0.97}


def _random_circuit(rng, n):
    gates = []
    for _ in range(int(rng.integers(2, 5))):
        if rng.random() < 0.3:
            gates.append(("rot", int(rng.integers(n)), int(rng.integers(1, 6))))
        else:
            control, target = rng.choice(n, size=2, replace=False)
            gates.append(("cnot", int(control), int(target)))
    bases = "".join(rng.choice(["Z", "X"], size=n - 1))
    n_patterns = 2 ** (n - 1)
    accepted = tuple(
        int(a) for a in rng.choice(n_patterns, size=int(rng.integers(1, n_patterns)), replace=False)
    )
    return canonical_circuit(n, tuple(gates), bases, accepted)[0]


def _random_pair(rng):
    w = rng.dirichlet([1.0, 1.0, 1.0, 1.0]) * 0.4
    w[int(rng.integers(4))] += 0.6
    return w


def _reference(circuit, pairs, input_rotations):
    operations = [("rot", i, tuple(PERMUTATIONS[r])) for i, r in enumerate(input_rotations)]
    operations += [
        ("rot", g[1], tuple(PERMUTATIONS[g[2]])) if g[0] == "rot" else g for g in circuit.gates
    ]
    checks = [(i + 1, b) for i, b in enumerate(circuit.bases)]
    return ref.run_general_circuit(pairs, operations, checks, circuit.accepted, **NOISE)


@pytest.mark.parametrize("n, seed", [(3, 1), (3, 2), (3, 3), (4, 4), (4, 5)])
def test_random_circuits_match_density_matrix_reference(n, seed):
    # every noise on, random inputs, input rotations, in-circuit rotations, bases
    # and accepted sets: the label model is exact (independent qutip reference)
    rng = np.random.default_rng(seed)
    circuit = _random_circuit(rng, n)
    pairs = [_random_pair(rng) for _ in range(n)]
    input_rotations = [int(r) for r in rng.integers(6, size=n)]
    expected = _reference(circuit, pairs, input_rotations)
    success, kept = run_step(circuit.step, pairs, input_rotations, **NOISE)
    assert_allclose(success[0], expected.success, atol=1e-10)
    assert_allclose(kept[0], expected.bell, atol=1e-10)
    assert expected.off_diagonal < 1e-10  # the output stays Bell-diagonal


def test_known_rounds_are_members_of_the_family():
    # the compact forms of the 2->1 check and double selection compile to the same maps
    rng = np.random.default_rng(7)
    for text, known in (("01/Z/0", TWO_TO_ONE), ("01,21/ZX/00", DOUBLE_SELECTION)):
        general = read_circuit(text).step
        assert_allclose(general.terms, known.terms, atol=1e-12)
        pairs = [rng.dirichlet([4, 1, 1, 1], size=20) for _ in range(known.n_pairs)]
        rotations = [rng.integers(6, size=20) for _ in range(known.n_pairs)]
        noise = {"two_qubit": 0.95, "single_qubit": 0.97, "measurement": 0.98}
        a = run_step(general, pairs, rotations, **noise)
        b = run_step(known, pairs, rotations, **noise)
        assert_allclose(a[0], b[0], atol=1e-12)
        assert_allclose(a[1], b[1], atol=1e-12)


def test_relabelling_sacrificed_pairs_leaves_the_round_unchanged():
    # canonical_circuit renames pairs: with alike sacrificed inputs (rotations
    # following the renaming) success and output are the same
    gates = (("cnot", 0, 3), ("cnot", 2, 1), ("cnot", 3, 1), ("rot", 2, 2), ("cnot", 0, 2))
    written = canonical_circuit(4, gates, "XZZ", (0, 3))
    # the circuit as written, relabelled by nothing but the gate order
    from models.steps import StepCircuit

    cnots = tuple((g[1], g[2]) for g in gates if g[0] == "cnot")
    as_written = StepCircuit(
        "w", 4, cnots, ((1, "X"), (2, "Z"), (3, "Z")), rotations=((3, 2, 2),), accepted=(0, 3)
    )
    circuit, perm = written
    kept, sac = np.array([0.8, 0.05, 0.1, 0.05]), np.array([0.85, 0.1, 0.02, 0.03])
    rotations = (2, 0, 4, 1)
    a = run_step(as_written, [kept, sac, sac, sac], rotations, **NOISE)
    b = run_step(circuit.step, [kept, sac, sac, sac], [rotations[p] for p in perm], **NOISE)
    assert_allclose(a[0], b[0], atol=1e-12)
    assert_allclose(a[1], b[1], atol=1e-12)


def test_gates_on_disjoint_pairs_commute_in_the_compiled_map():
    a = read_circuit("01,23,02/ZZX/000")
    b = read_circuit("23,01,02/ZZX/000")
    assert a == b
    from models.steps import StepCircuit

    raw = StepCircuit("x", 4, ((2, 3), (0, 1), (0, 2)), ((1, "Z"), (2, "Z"), (3, "X")))
    assert_allclose(raw.terms, a.step.terms, atol=0)


def test_canonical_text_and_id():
    c = read_circuit("02,12/XZ/00")
    # sacrificed pairs keep their labels: they are made one after another and wait
    # differently (see test_relabelled_rounds_differ_only_when_memories_decay)
    assert c.text == "02,12/XZ/00"
    assert len(c.circuit_id) == 10
    assert read_circuit(c.text).circuit_id == c.circuit_id
    assert read_circuit("0Z,02,12/XZ/00") == c  # the identity rotation is no gate
    # gates on disjoint pairs commute, noise included: one order
    assert read_circuit("23,01/ZZZ/000") == read_circuit("01,23/ZZZ/000")


def test_relabelled_rounds_differ_only_when_memories_decay():
    # exchanging the labels of sacrificed pairs 1 and 2 is a symmetry of n identical
    # inputs that do not wait (a relabelling of the label model's summation), but the
    # inputs are made in label order, so with memory decay pair 1 waits while pair 2
    # is made (the waiting rule of the conventions, checked by tests/models/test_waiting.py)
    from models import NodeNoise, Profile
    from models.evaluate import evaluate

    raw = (0.9, 0.03, 0.03, 0.04)
    perfect = Profile(raw, NodeNoise(two_qubit=0.99, measurement=0.99), pair_rate_hz=100.0)
    decaying = Profile(
        raw,
        NodeNoise(two_qubit=0.99, measurement=0.99, t1_s=1.0, t2_s=0.02),
        pair_rate_hz=100.0,
    )
    a, b = "c{02,12/XZ/00}", "c{01,21/ZX/00}"
    assert read_circuit(a[2:-1]) != read_circuit(b[2:-1])
    fa, fb = (evaluate(t, perfect, canonicalise=False).fidelity for t in (a, b))
    assert_allclose(fa, fb, rtol=1e-12)
    fa, fb = (evaluate(t, decaying, canonicalise=False).fidelity for t in (a, b))
    assert abs(fa - fb) > 1e-4


@pytest.mark.parametrize(
    "text",
    ["01/ZX", "01,2/ZX/00", "01,21/ZY/00", "01,21/ZX/0", "01/ZZZZZ/00000", "00/ZX/00"],
)
def test_malformed_forms_are_refused(text):
    with pytest.raises(CircuitSyntaxError):
        parse_circuit(text)


# ------------------------------------------------------------ in recipe strings
def test_recipe_strings_carry_general_rounds():
    from models.notation import parse_recipe, recipe_from_json, recipe_to_json

    r = parse_recipe("c{01,21/ZX/00}ZYX.sY")
    assert r.notation == "c{01,21/ZX/00}ZYX.sY"
    # a round with its sacrificed pairs relabelled is another round (they wait differently)
    assert parse_recipe("c{02,12/XZ/00}ZXY.sY").notation == "c{02,12/XZ/00}ZXY.sY"
    assert parse_recipe(r.notation) == r
    assert recipe_from_json(recipe_to_json(r)) == r
    circuit = read_circuit("01,21/ZX/00")
    assert parse_recipe("c{#" + circuit.circuit_id + "}ZYX.sY") == r
    assert parse_recipe("cs{01,02,03/ZZX/000}Y").rounds[0].sacrificed == "same"


def test_general_form_of_double_selection_evaluates_as_double_selection():
    # the registry, the waiting module and the evaluator treat both spellings alike,
    # memory waits included
    from models.evaluate import evaluate
    from optimise.profiles import demo_profile

    a = evaluate("dpZYX.sY", demo_profile())
    b = evaluate("c{01,21/ZX/00}ZYX.sY", demo_profile())
    assert_allclose(b.fidelity, a.fidelity, rtol=1e-12)
    assert_allclose(b.raw_pairs_per_output, a.raw_pairs_per_output, rtol=1e-12)


def test_unknown_id_and_unclosed_round_are_refused():
    from models.notation import RecipeSyntaxError, parse_recipe

    with pytest.raises(RecipeSyntaxError, match="id of a general round"):
        parse_recipe("c{#0000000000}")
    with pytest.raises(RecipeSyntaxError, match="to close the general round"):
        parse_recipe("c{01,21/ZX/00")


def test_density_engine_runs_general_rounds_of_four_pairs():
    # the engine behind `stillroom verify` (no label algebra) against the qutip reference
    from models import density

    rng = np.random.default_rng(11)
    circuit = _random_circuit(rng, 4)
    pairs = [_random_pair(rng) for _ in range(4)]
    rotations = [int(r) for r in rng.integers(6, size=4)]
    effects = density.step_effects(circuit.step, rotations, **NOISE)
    success, kept = density.run_on_pairs(effects, [density.pair_density(p) for p in pairs])
    expected = _reference(circuit, pairs, rotations)
    assert_allclose(success, expected.success, atol=1e-10)
    assert_allclose(density.bell_weights(kept), expected.bell, atol=1e-10)
