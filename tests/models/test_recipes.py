"""Recipe values: validation, structure, memory counts and identities.

Memory counts are facts of the trade checked by hand (common practice, no
source): pumping needs 2 qubits per node, symmetric recurrence of depth d needs
d + 1, double-selection pumping needs 3.
"""

from __future__ import annotations

import hashlib

import pytest

from models import Recipe, Round, parse_recipe
from models.recipes import making_order, memory_needed


@pytest.mark.parametrize(
    "kwargs, words",
    [
        (dict(selection="triple", sacrificed="raw"), "selection = 'triple'"),
        (dict(selection="single", sacrificed="fresh"), "sacrificed = 'fresh'"),
        (dict(selection="single", sacrificed="raw", rotations=(0, 1, 2)), "has 3 entries"),
        (dict(selection="double", sacrificed="raw", rotations=(0, 1)), "has 2 entries"),
        (dict(selection="single", sacrificed="raw", rotations=(0, 6)), "entry 6"),
        (dict(selection="single", sacrificed="raw", rotations="YQ"), "entry 'Q'"),
        (dict(selection="single", sacrificed="sub"), "must be a Recipe"),
        (dict(selection="single", sacrificed="raw", source=Recipe(())), "needs sacrificed = 'sub'"),
        (dict(selection="single", sacrificed="raw", twirl=1), "twirl = 1"),
    ],
)
def test_round_validation_names_field_and_value(kwargs, words):
    with pytest.raises(ValueError) as info:
        Round(**kwargs)
    assert words in str(info.value)


def test_round_normalises_rotations():
    assert Round("double", "raw", "Y").rotations == (2, 2, 2)
    assert Round("single", "raw", "ZY").rotations == (0, 2)
    assert Round("single", "raw", 4).rotations == (4, 4)
    assert Round("single", "raw", ["x", 1]).rotations == (5, 1)


def test_recipe_validation():
    with pytest.raises(ValueError, match=r"rounds\[1\]"):
        Recipe((Round("single", "raw"), "sY"))
    assert Recipe([Round("single", "raw")]).rounds == (Round("single", "raw"),)


def test_structure_properties():
    r = parse_recipe("sY^2.pY(sY)")
    assert (r.depth, r.is_linear) == (3, False)
    assert parse_recipe("raw").depth == 0
    assert parse_recipe("pZ.dsX~").is_linear


def test_recipe_id_is_the_hash_of_the_canonical_string():
    r = parse_recipe("pY.sY")  # canonical sY^2
    assert r.notation == "sY^2"
    assert r.recipe_id == hashlib.sha256(b"sY^2").hexdigest()[:12]
    assert r.recipe_id == parse_recipe("sY^2").recipe_id
    assert r.recipe_id != parse_recipe("sY^3").recipe_id


@pytest.mark.parametrize(
    "text, memory",
    [
        ("raw", 1),
        ("pY", 2),
        ("pY^7", 2),  # pumping: 2 (common practice, no source)
        ("sY", 2),
        ("sY^2", 3),
        ("sY^5", 6),  # symmetric depth d: d + 1 (common practice, no source)
        ("dpZ.dpX.dpZ", 3),  # double-selection pumping: 3 (common practice, no source)
        ("dsY", 3),
        ("dsY^2", 5),  # each double selection on copies stores two more pairs
        ("sY^2.pY(sY)", 3),  # kept pair (3) first, then the source (2) beside it
        ("sY.pY(sY^3)", 4),  # the source needs 4: made first, then the kept pair (2)
        ("pY.dpY(sY^2)", 4),  # two sources of 3: 3, then 3 + 1, then the kept 2 + 2
    ],
)
def test_memory_per_node(text, memory):
    assert parse_recipe(text).memory_per_node == memory


def test_making_order_minimises_memory_by_brute_force():
    import itertools

    for memories in itertools.product(range(1, 5), repeat=3):
        best = min(
            max(memories[i] + j for j, i in enumerate(order))
            for order in itertools.permutations(range(3))
        )
        assert memory_needed(memories) == best
        order = making_order(memories)
        assert sorted(order) == [0, 1, 2]
        assert max(memories[i] + j for j, i in enumerate(order)) == best
