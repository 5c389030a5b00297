"""Recipes with identical figures: one representative per front point, the others listed.

External references: a Werner state is invariant under every bilateral rotation
U (x) U* (Werner, PRA 40, 4277 (1989); Bennett, DiVincenzo, Smolin and Wootters,
PRA 54, 3824 (1996), section III), so on a Werner input with perfect single-qubit
gates the first round checks the same error weights whatever its rotation, and a
re-twirl of a Werner output changes nothing: ``sX``, ``sY``, ``sZ``, ``sXx``,
``sY~`` and ``sZ~`` have the same figures there (checked here with
``models.evaluate``). Pareto dominance is common practice, no source.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import itertools
import json

import pytest
from cli_support import validate

from models.evaluate import evaluate
from models.noise import NodeNoise
from models.profile import Profile
from models.states import werner
from optimise.front import Front
from optimise.latex import table_tex
from optimise.reports import front_csv, recipes_document, table_md
from optimise.search import run_search
from optimise.seeding import NO_EXHAUSTIVE_LAYER
from optimise.settings import SearchSettings
from optimise.tracker import FrontTracker

# perfect rotations and measurements that do not depend on the rotation
WERNER = Profile(
    tuple(werner(0.8)), NodeNoise(two_qubit=0.99, measurement=0.99), name="werner-equal"
)
TWINS = ("sZ", "sY~", "sX", "sXx", "sZ~", "sY")  # one first round, six spellings


def tracker(settings=None) -> FrontTracker:
    settings = settings or SearchSettings(max_depth=2, n_trials=0)
    return FrontTracker(
        None,
        profile=WERNER,
        settings=settings,
        recorded={},
        baselines=[],
        exhaustive=NO_EXHAUSTIVE_LAYER,
        complete=False,
    )


def test_the_twins_have_identical_figures():
    first = evaluate(TWINS[0], WERNER)
    for name in TWINS[1:]:
        r = evaluate(name, WERNER)
        assert r.notation == name  # distinct canonical recipes
        assert r.fidelity == pytest.approx(first.fidelity, rel=1e-13)
        assert r.pair_yield == pytest.approx(first.pair_yield, rel=1e-13)
        assert (r.memory_per_node, r.rounds) == (first.memory_per_node, first.rounds)


@pytest.mark.parametrize("order", list(itertools.permutations(TWINS))[::37])
def test_the_representative_does_not_depend_on_the_order_found(order):
    t = tracker()
    for name in order:
        r = evaluate(name, WERNER)
        t.offer(r.to_dict(), len(r.trace))
    front = t.front(0)
    fidelity = evaluate("sX", WERNER).fidelity
    twin = [r for r in front.results if r.fidelity == pytest.approx(fidelity, rel=1e-12)]
    assert [r.notation for r in twin] == ["sX"]  # shortest, then alphabetically first
    assert front.equivalents["sX"] == ("sY", "sZ", "sXx", "sY~", "sZ~")


def test_same_point_with_other_figures_is_not_an_equivalent():
    # fidelity and yield alone are the objectives: a recipe at the same point but
    # needing more memory is the same front point, not a recipe with the same figures
    t = tracker()
    a = evaluate("sY", WERNER).to_dict()
    b = dict(evaluate("sXx", WERNER).to_dict(), memory_per_node=a["memory_per_node"] + 1)
    c = evaluate("sZ~", WERNER).to_dict()
    for entry in (b, a, c):
        t.offer(entry, 1)
    front = t.front(0)
    assert "sY" in [r.notation for r in front.results]
    assert front.equivalents["sY"] == ("sZ~",)


def test_a_layer_s_equivalents_are_evaluated_and_listed():
    t = tracker()
    sz = evaluate("sZ", WERNER)
    t.add_layer("a layer", [sz], {"sZ": ("sZ~", "sY~")})
    front = t.front(0)
    assert front.equivalents == {"sZ": ("sY~", "sZ~")}
    assert "a layer" in front.searched_space
    # a later, shorter recipe at the point becomes its representative; nothing is lost
    sx = evaluate("sX", WERNER)
    assert t.offer(sx.to_dict(), 1)
    assert t.front(0).equivalents == {"sX": ("sZ", "sY~", "sZ~")}
    assert not t.offer(evaluate("sZ~", WERNER).to_dict(), 1)  # known already: no change


def test_files_and_tables_list_the_equivalents():
    results = tuple(
        sorted((evaluate(n, WERNER) for n in ("sX", "sZ^2", "raw")), key=lambda r: -r.fidelity)
    )
    front = Front(
        profile=WERNER.to_dict(),
        settings={"seed": 1, "max_depth": 2, "n_trials": 0},
        searched_space="a test",
        results=results,
        equivalents={"sX": ("sY", "sZ~")},
    )
    # front.json: each front entry lists its equivalents, and reads back
    data = json.loads(json.dumps(front.to_json()))
    assert [e["equivalents"] for e in data["front"]] == [
        ["sY", "sZ~"] if e["recipe"] == "sX" else [] for e in data["front"]
    ]
    assert Front.from_json(data).equivalents == front.equivalents
    for e in data["front"]:  # a front.json written before equivalents were listed
        del e["equivalents"]
    assert Front.from_json(data).equivalents == {}
    # recipes.json (schema-valid) and front.csv
    document = recipes_document(front)
    validate(json.loads(json.dumps(document)), "recipes")
    assert {e["recipe"]: e["equivalents"] for e in document["front"]}["sX"] == ["sY", "sZ~"]
    rows = list(csv.DictReader(io.StringIO(front_csv(front))))
    assert {r["recipe"]: r["equivalents"] for r in rows} == {
        "sX": "sY;sZ~",
        "sZ^2": "",
        "raw": "",
    }
    # the tables: a mark on the row, the names in a note under it
    md = table_md(front, top=0)
    row = next(line for line in md.splitlines() if "`sX`" in line and line.startswith("|"))
    assert "`sX`<sup>a</sup>" in row and "sZ~" not in row
    assert "Other recipes with the same figures: <sup>a</sup> `sY`, `sZ~`." in md
    tex = table_tex(front, top=0)
    assert r"\texttt{sX}\textsuperscript{a}" in tex
    assert r"\textsuperscript{a}the same figures: \texttt{sY}, \texttt{sZ\textasciitilde{}}" in tex


def test_rows_with_equal_printed_figures_keep_each_other_s_equivalents():
    r = evaluate("sX", WERNER)
    twins = tuple(dataclasses.replace(r, notation=n) for n in ("sY.sX", "sX"))
    front = Front(
        profile=WERNER.to_dict(),
        results=twins,
        equivalents={"sY.sX": ("sY.sY",), "sX": ("sZ",)},
    )
    md = table_md(front, top=0)
    assert "<sup>a</sup> `sZ`, `sY.sX`, `sY.sY`." in md


def test_a_search_run_twice_writes_identical_front_files(tmp_path):
    files = []
    for name in ("one", "two"):
        outcome = run_search(
            WERNER,
            run_dir=tmp_path / name,
            max_depth=2,
            n_trials=12,
            exhaustive_depth=1,
            deep_width=4,
            deep_layers=1,
            deep_levels=3,
            seed=4,
            progress=False,
        )
        assert outcome.front
        front = Front.from_json(json.loads((tmp_path / name / "front.json").read_text()))
        files.append((front_csv(front), json.dumps(front.to_json()["front"])))
    assert files[0] == files[1]
    assert front.equivalents  # the case this test is for: the twins are found
    shown = {r.notation for r in front.results}
    for representative, others in front.equivalents.items():
        assert representative in shown and not shown & set(others)
        names = (representative, *others)
        assert min(names, key=lambda n: (len(n), n)) == representative
