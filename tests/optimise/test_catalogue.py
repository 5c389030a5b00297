"""The catalogue of general rounds: enumeration, reductions, front, cache.

Every figure is checked against the compiled circuits of models.steps, which
tests/models/test_circuits.py checks against the qutip density-matrix reference.
"""

from __future__ import annotations

from itertools import product

import numpy as np
import pytest
from numpy.testing import assert_allclose

from models.circuits import canonical_circuit, read_circuit
from models.steps import DOUBLE_SELECTION, run_step
from optimise.catalogue import (
    build_catalogue,
    enumerate_circuits,
    load_or_build,
    relabelling_class,
)

PAIR = np.array([0.88, 0.03, 0.02, 0.07])
NOISE = {"two_qubit": 0.97, "measurement": 0.99}


def _run(circuit, n):
    return run_step(circuit.step, [PAIR] * n, [0] * n, single_qubit=1.0, **NOISE)


def test_enumeration_is_complete_and_each_class_kept_once():
    # brute force over every 3-pair circuit of up to 3 CNOTs using every pair:
    # each one's canonical form is enumerated, and the enumeration has no two
    # members of one class
    circuits, before = enumerate_circuits(3, 3)
    gates = [(c, t) for c in range(3) for t in range(3) if c != t]
    assert before == (1 + 6 + 36 + 216) * 4
    enumerated = {relabelling_class(3, seq, b) for seq, b in circuits}
    assert len(enumerated) == len(circuits)
    assert enumerated == {(tuple(seq), b) for seq, b in circuits}  # each its own representative
    seen = set()
    for k in range(1, 4):
        for seq in product(gates, repeat=k):
            if len({p for g in seq for p in g}) < 3:
                continue
            for bases in ("ZZ", "ZX", "XZ", "XX"):
                seen.add(relabelling_class(3, seq, bases))
    assert seen == enumerated


def test_reductions_leave_the_round_unchanged():
    # a written circuit and its canonical representative: same success and output
    # on alike inputs, for every accepted set tried
    rng = np.random.default_rng(3)
    gates = [(c, t) for c in range(4) for t in range(4) if c != t]
    for _ in range(5):
        seq = tuple(("cnot",) + gates[i] for i in rng.integers(len(gates), size=4))
        bases = "".join(rng.choice(["Z", "X"], size=3))
        accepted = tuple(int(a) for a in rng.choice(8, size=3, replace=False))
        from models.steps import StepCircuit

        written = StepCircuit(
            "w",
            4,
            tuple(g[1:] for g in seq),
            tuple((i + 1, b) for i, b in enumerate(bases)),
            accepted=accepted,
        )
        canon = canonical_circuit(4, seq, bases, accepted)[0]
        a = run_step(written, [PAIR] * 4, [0] * 4, single_qubit=1.0, **NOISE)
        b = _run(canon, 4)
        assert_allclose(a[0], b[0], atol=1e-12)
        assert_allclose(a[1], b[1], atol=1e-12)
        # the catalogue's relabelling class: the same on identical inputs that do not
        # wait (accepting only "all agree", a pattern every relabelling keeps)
        rep_seq, rep_bases = relabelling_class(4, tuple(g[1:] for g in seq), bases)
        plain = canonical_circuit(4, seq, bases, (0,))[0]
        rep = canonical_circuit(4, tuple(("cnot",) + g for g in rep_seq), rep_bases, (0,))[0]
        a, b = _run(plain, 4), _run(rep, 4)
        assert_allclose(a[0], b[0], atol=1e-12)
        assert_allclose(a[1], b[1], atol=1e-12)


@pytest.fixture(scope="module")
def catalogue3():
    return build_catalogue(3, 3, pair=PAIR, **NOISE)


def test_catalogued_figures_are_those_of_the_compiled_circuits(catalogue3):
    for entry in catalogue3.entries[:: max(1, len(catalogue3.entries) // 10)]:
        success, kept = _run(read_circuit(entry["form"]), 3)
        assert_allclose(success[0], entry["success"], rtol=1e-10)
        assert_allclose(kept[0, 0], entry["fidelity"], rtol=1e-10)


def test_front_is_not_beaten_by_double_selection(catalogue3):
    # double selection is one of the enumerated 3-pair rounds (Fujii and Yamamoto,
    # PRA 80, 042308 (2009)): some catalogued round is at least as good on both axes
    success, kept = run_step(DOUBLE_SELECTION, [PAIR] * 3, [0] * 3, single_qubit=1.0, **NOISE)
    assert any(
        e["success"] >= success[0] - 1e-12 and e["fidelity"] >= kept[0, 0] - 1e-12
        for e in catalogue3.entries
    )
    # and the front is a front: success falls as fidelity rises
    s = [e["success"] for e in catalogue3.entries]
    f = [e["fidelity"] for e in catalogue3.entries]
    assert s == sorted(s, reverse=True) and f == sorted(f)


def test_catalogue_is_cached_and_loaded(tmp_path):
    first, cached = load_or_build(3, 2, pair=PAIR, directory=tmp_path, **NOISE)
    assert not cached
    second, cached = load_or_build(3, 2, pair=PAIR, directory=tmp_path, **NOISE)
    assert cached and second.entries == first.entries
    assert len(list(tmp_path.glob("rounds-n3-g2-*.json"))) == 1
    names = second.kinds()
    from models.kinds import STEP_KINDS

    assert all(STEP_KINDS[name].n_inputs == 3 for name in names)
    # a damaged cache file is a miss: rebuilt and replaced, never an error
    (path,) = tmp_path.glob("rounds-n3-g2-*.json")
    path.write_text('{"format": 1, "entr')
    third, cached = load_or_build(3, 2, pair=PAIR, directory=tmp_path, **NOISE)
    assert not cached and third.entries == first.entries
    assert load_or_build(3, 2, pair=PAIR, directory=tmp_path, **NOISE)[1]


def test_evaluate_prints_each_general_round_per_node(capsys):
    from optimise.cli import main

    assert main(["evaluate", "c{10,02,13,21/ZXZ/000}Y.sY"]) == 0
    out = capsys.readouterr().out
    assert "4->1 check round, id " + read_circuit("10,02,13,21/ZXZ/000").circuit_id in out
    assert "node A: Y on 0, Y on 1, Y on 2, Y on 3, CNOT 1>0, CNOT 0>2" in out
    assert "node B: Y* on 0" in out
    assert "read 000 (0 agree, 1 differ)" in out


def test_a_purified_kept_input_gets_its_own_catalogue(tmp_path):
    kept = np.array([0.95, 0.01, 0.01, 0.03])
    catalogue = build_catalogue(3, 2, pair=PAIR, kept_pair=kept, **NOISE)
    entry = catalogue.entries[-1]
    success, out = run_step(
        read_circuit(entry["form"]).step, [kept, PAIR, PAIR], [0] * 3, single_qubit=1.0, **NOISE
    )
    assert_allclose(success[0], entry["success"], rtol=1e-10)
    assert_allclose(out[0, 0], entry["fidelity"], rtol=1e-10)
    load_or_build(3, 2, pair=PAIR, directory=tmp_path, **NOISE)
    load_or_build(3, 2, pair=PAIR, kept_pair=kept, directory=tmp_path, **NOISE)
    assert len(list(tmp_path.glob("rounds-n3-g2-*.json"))) == 2


def test_the_catalogue_command_builds_then_reads_the_cache(tmp_path, capsys):
    """``stillroom catalogue``: the front of rounds, cached; its JSON follows the schema."""
    import json

    from cli_support import validate

    from models.evaluate import evaluate
    from optimise.cli import main
    from optimise.profiles import demo_profile

    argv = ["catalogue", "--pairs", "3", "--cnots", "2", "--cache", str(tmp_path), "--json"]
    assert main(argv) == 0
    first = json.loads(capsys.readouterr().out)
    validate(first, "catalogue")
    assert first["cached"] is False and first["before"] >= first["after"] >= len(first["entries"])
    assert main(argv) == 0
    again = json.loads(capsys.readouterr().out)
    assert again["cached"] is True and again["entries"] == first["entries"]
    # every printed round is a recipe token evaluate accepts; with the demo's gates and
    # measurements but perfect memories (no waits) its figures are the catalogue's
    from models.noise import NodeNoise
    from models.profile import Profile

    demo = demo_profile().noise
    still = Profile(
        demo_profile().raw_pair,
        NodeNoise(two_qubit=demo.two_qubit, measurement=demo.measurement),
    )
    for entry in first["entries"]:
        result = evaluate("c{" + entry["form"] + "}", still)
        assert_allclose(result.success_probabilities[0], entry["success"], atol=1e-12)
        assert_allclose(result.fidelity, entry["fidelity"], atol=1e-12)
    assert main(argv[:-1]) == 0
    text = capsys.readouterr().out
    assert "read from the cache" in text and "c{" + first["entries"][0]["form"] + "}" in text
