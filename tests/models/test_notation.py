"""Recipe strings: grammar, errors, JSON form and the canonical form.

The grammar (models/notation.py) and the canonical rules (models/canonical_form.py)
are our own. The
physics claims behind the canonical rules are checked here against the
evaluator on random noise profiles: every merge must leave the figures
unchanged for all noise, every candidate left unmerged must differ for some
noise, and recipes with identical figures must share one canonical string.
The published recipes quoted as examples are DEJMPS (Deutsch et al., Phys. Rev.
Lett. 77, 2818 (1996)) and BBPSSW (Bennett et al., Phys. Rev. Lett. 76, 722
(1996)).
"""

from __future__ import annotations

import collections
import itertools
import math
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

import models.canonical_form as canonical_module
from models import (
    NodeNoise,
    Profile,
    Recipe,
    RecipeSyntaxError,
    Round,
    canonical,
    evaluate,
    evaluate_linear,
    format_recipe,
    parse_recipe,
    recipe_from_codes,
    recipe_from_json,
    recipe_to_json,
    round_code,
    werner,
)

sys.path.insert(0, str(Path(__file__).resolve().parent))
from recipe_support import figures, random_profile, random_recipe  # noqa: E402

Z, z, Y, y, X, x = range(6)

# ------------------------------------------------------------------ grammar
GRAMMAR = [
    # (string, rounds as (selection, sacrificed, rotations, twirl)); our grammar
    ("sY^3", [("single", "same", (Y, Y), False)] * 3),
    ("sZ~^2", [("single", "same", (Z, Z), True)] * 2),
    ("pZY", [("single", "raw", (Z, Y), False)]),
    ("p", [("single", "raw", (Z, Z), False)]),
    ("dsYZx", [("double", "same", (Y, Z, x), False)]),
    ("dpX~.pz", [("double", "raw", (X, X, X), True), ("single", "raw", (z, z), False)]),
]


@pytest.mark.parametrize("text, expected", GRAMMAR)
def test_parse_follows_the_grammar(text, expected):
    recipe = parse_recipe(text)
    got = [(r.selection, r.sacrificed, r.rotations, r.twirl) for r in recipe.rounds]
    assert got == expected
    assert not recipe.raw_twirl
    twirled = parse_recipe("~" + text)
    assert twirled.raw_twirl and twirled.rounds == recipe.rounds


def test_a_leading_tilde_twirls_the_raw_pairs_of_its_own_recipe():
    recipe = parse_recipe("~sZ.pY(sY).pX(~sY)")
    assert recipe.raw_twirl
    assert not recipe.rounds[1].source.raw_twirl
    assert recipe.rounds[2].source.raw_twirl
    assert parse_recipe("~raw") == Recipe((), raw_twirl=True)
    assert format_recipe(recipe) == "~sZ.pY(sY).pX(~sY)"
    assert not recipe.is_linear and not parse_recipe("~sY").is_linear


def test_a_source_is_a_nested_recipe():
    recipe = parse_recipe("sY^2.pY(sY)")
    assert recipe.rounds[2].sacrificed == "sub"
    assert recipe.rounds[2].source == parse_recipe("sY")
    assert parse_recipe("raw") == Recipe(())
    assert parse_recipe("  sY ") == parse_recipe("sY")


ERRORS = [
    # (text, caret position, words the message must contain)
    ("sY.pQ", 4, "rotation letter"),
    ("dq", 1, "'p' or 's' after 'd'"),
    ("pYZX", 3, "at most 2 rotation letters"),
    ("dpYZ.p", 4, "1 letter (all inputs) or 3"),
    ("sY(pY)", 2, "follows only p or dp"),
    ("pY(sY", 5, "')' to close the source opened at column 3"),
    ("sY^1", 3, "repeat count >= 2"),
    ("sY^", 3, "repeat count"),
    ("raw.sY", 3, "'raw' stands alone"),
    ("pY)", 2, "the end of the recipe"),
    ("", 0, "a recipe such as"),
    ("sY~~", 3, "'^', '.' or the end"),
    ("sY..pY", 3, "a round"),
    ("xY", 0, "a round"),
    ("sY^2^3", 4, "'.' or the end"),
    ("sY.p(sY)Y", 8, "rotation letters come before the source"),
    ("~~sY", 1, "one leading '~' twirls the raw pairs"),
    ("sY.~pY", 3, "stands only at the start of a recipe or source"),
    ("~", 1, "a round"),
    ("~raw.sY", 4, "'raw' stands alone"),
    ("pY(~)", 4, "a round"),
]


@pytest.mark.parametrize("text, position, words", ERRORS)
def test_syntax_errors_point_at_the_bad_character(text, position, words):
    with pytest.raises(RecipeSyntaxError) as info:
        parse_recipe(text)
    err = info.value
    assert isinstance(err, ValueError)
    assert err.position == position
    assert len(str(err).splitlines()) == 1  # one line; the caret diagram apart
    lines = err.diagram.splitlines()
    assert lines[0] == "  " + text
    assert lines[1] == "  " + " " * position + "^"
    assert words in str(err)


# ------------------------------------------------------------------ random recipes
rotation = st.integers(0, 5)


@st.composite
def rounds_strategy(draw, depth_left: int, prefix=(), raw_twirl=False):
    selection = draw(st.sampled_from(["single", "double"]))
    n = 2 if selection == "single" else 3
    kinds = ["raw", "same", "sub"] if depth_left > 0 else ["raw", "same"]
    kind = draw(st.sampled_from(kinds))
    rots = draw(st.one_of(st.tuples(rotation).map(lambda t: t * n), st.tuples(*[rotation] * n)))
    source = None
    if kind == "sub":
        source = draw(
            st.one_of(
                st.just(Recipe(prefix, raw_twirl=raw_twirl)), recipes_strategy(depth_left - 1)
            )
        )
    return Round(selection, kind, rots, source=source, twirl=draw(st.booleans()))


@st.composite
def recipes_strategy(draw, depth_left: int = 1):
    rounds = ()
    raw_twirl = draw(st.booleans())
    for _ in range(draw(st.integers(0, 4))):
        rounds = rounds + (draw(rounds_strategy(depth_left, rounds, raw_twirl)),)
    return Recipe(rounds, raw_twirl=raw_twirl)


@settings(max_examples=150, deadline=None)
@given(recipes_strategy())
def test_format_then_parse_gives_the_recipe_back(recipe):
    assert parse_recipe(format_recipe(recipe)) == recipe


@settings(max_examples=150, deadline=None)
@given(recipes_strategy())
def test_canonical_strings_round_trip_and_are_fixed_points(recipe):
    c = canonical(recipe)
    text = format_recipe(c)
    assert parse_recipe(text) == c
    assert format_recipe(parse_recipe(text)) == text
    assert canonical(c) == c
    assert recipe.notation == text
    assert canonical(text) == c


@settings(max_examples=100, deadline=None)
@given(recipes_strategy())
def test_json_round_trip(recipe):
    data = recipe_to_json(recipe)
    assert recipe_from_json(data) == recipe


@pytest.mark.parametrize(
    "data, words",
    [
        ({"rounds": [{"selection": "single", "sacrificed": "raw"}]}, "lacks key(s) ['rotations']"),
        ({"steps": []}, "one key 'rounds'"),
    ({"rounds": [], "raw_twirl": "yes"}, "raw_twirl = 'yes'"),
        (
            {"rounds": [{"selection": "single", "sacrificed": "raw", "rotations": ["Y"], "x": 1}]},
            "unknown key(s) ['x']",
        ),
        ({"rounds": [{"selection": "triple", "sacrificed": "raw", "rotations": ["Y"]}]}, "triple"),
        ({"rounds": [{"selection": "single", "sacrificed": "raw", "rotations": ["Q"]}]}, "'Q'"),
    ],
)
def test_bad_json_names_the_problem(data, words):
    with pytest.raises(ValueError) as info:
        recipe_from_json(data)
    assert words in str(info.value)


# ------------------------------------------------------------------ canonical rules
CANONICAL = [
    # (as written, canonical, rule of models/canonical_form.py)
    ("sY^3", "sY^3", "DEJMPS, already canonical"),
    ("sZ~^2", "sZ~^2", "BBPSSW, already canonical"),
    ("pY^4", "pY^4", "pumping, already canonical"),
    ("pZ.pX.pZ.pX", "pZ.pX.pZ.pX", "alternating pumping, already canonical"),
    ("pY.sY.sY", "sY^3", "first-round-copy: first round s = p"),
    ("sY.pY.pY", "pY^3", "first-round-copy"),
    ("pYY", "sY", "first-round-copy, and one letter for all inputs"),
    ("sY.pY(sY)", "sY^2", "source-is-prefix"),
    ("pY(raw).pX", "pY.pX", "raw-source"),
    ("dpY(sY)", "dpY(sY)", "source-is-prefix does not apply: the prefix is the raw pair"),
    ("sy", "sYy", "kept-exchange: kept X <-> Y only relabels; the sacrificed one is a real change"),
    ("pY.py", "pY.pYy", "kept-exchange at the end"),
    ("px.py", "pXx.pXy", "kept-exchange pushed through a round"),
    ("sz", "sz", "relabel-input: z is a gate, Z is not"),
    ("sZ~.sX", "sZ~.sY", "kept-exchange and werner-input after a re-twirl"),
    ("sZ~.sYx", "sZ~.sY", "werner-input: the last-made copy of a re-twirled pair is Werner"),
    ("pZy.pZY", "pZY.pZy", "pumping-exchange"),
    ("pXy.dpzZX.pZY", "pXY.dpzZX.pZy", "pumping-exchange across a pumping-block round"),
    ("~sZ~^2", "~sZ~^2", "BBPSSW with twirled raw pairs, already canonical"),
    ("~pZX.pYX", "~pZY.pY", "werner-input: a twirled fresh pair made last is Werner"),
    ("~sYx", "~sY", "werner-input: so is the last-made copy of a twirled raw pair"),
    ("~sZ.pY(~raw)", "~pZ.pY", "raw-source: a twirled raw source in a twirled recipe"),
    ("~sY.pY(~sY)", "~sY^2", "source-is-prefix with twirled raw pairs"),
    ("~sY.pY(sY)", "~pY.pY(sY)", "a source without the twirl is another procedure"),
    ("sZ.pY(~raw)", "pZ.pY(~raw)", "a twirled raw source in a recipe without the twirl"),
]


@pytest.mark.parametrize("written, expected, rule", CANONICAL)
def test_canonical_examples(written, expected, rule):
    assert parse_recipe(written).notation == expected, rule


@pytest.fixture(scope="module")
def profiles():
    rng = np.random.default_rng(20240601)
    return [random_profile(rng) for _ in range(3)] + [random_profile(rng, instant=True)]


def assert_same_figures(a, b, profiles):
    for profile in profiles:
        fa = figures(evaluate(a, profile, canonicalise=False))
        fb = figures(evaluate(b, profile, canonicalise=False))
        assert_allclose(fa, fb, rtol=1e-11, atol=1e-13, err_msg=f"{a} vs {b}")


@pytest.mark.parametrize("written, expected, rule", CANONICAL)
def test_each_canonical_example_is_the_same_procedure(written, expected, rule, profiles):
    assert_same_figures(written, expected, profiles)


def test_canonical_form_is_the_same_procedure_on_random_recipes(profiles):
    rng = np.random.default_rng(7)
    changed = 0
    for _ in range(120):
        recipe = random_recipe(rng, int(rng.integers(1, 5)))
        c = canonical(recipe)
        changed += c != recipe
        assert_same_figures(recipe, c, profiles[:2])
    assert changed > 60  # the rules were exercised, not just the identity


def _with_twirled_raw_pairs(recipe, rng):
    """The recipe with its raw pairs twirled, and each source's at random."""
    rounds = []
    for r in recipe.rounds:
        if r.source is not None:
            r = replace(r, source=_with_twirled_raw_pairs(r.source, rng))
        rounds.append(r)
    return Recipe(tuple(rounds), raw_twirl=bool(rng.integers(2)) if rounds else True)


def test_canonical_form_with_twirled_raw_pairs_is_the_same_procedure(profiles):
    rng = np.random.default_rng(76)
    changed = 0
    for _ in range(80):
        recipe = _with_twirled_raw_pairs(random_recipe(rng, int(rng.integers(1, 4))), rng)
        c = canonical(recipe)
        assert c.raw_twirl == recipe.raw_twirl
        changed += c != recipe
        assert_same_figures(recipe, c, profiles[:2])
    assert changed > 30


def test_twirled_raw_pairs_change_the_figures_unless_werner_and_perfect(profiles):
    # a twirled raw pair is another procedure (its own string), the same one only
    # for a Werner raw pair and perfect single-qubit gates (a twirl then does nothing)
    assert parse_recipe("~sY^2").notation != parse_recipe("sY^2").notation
    profile = profiles[0]
    assert abs(evaluate("~sY^2", profile).fidelity - evaluate("sY^2", profile).fidelity) > 1e-6
    perfect = Profile(tuple(werner(0.8)), NodeNoise(two_qubit=0.97, measurement=0.98))
    assert_same_figures("~sY^2", "sY^2", [perfect])


def test_a_new_step_kind_starts_with_no_canonical_rules(monkeypatch, profiles):
    # The rules read the kinds they are proven for from models.canonical_form.RULES;
    # a kind missing from every rule keeps its rounds as written.
    written = ["dsY.dpYxx", "dpY.dsY", "pY.dpYyy(sY).dsZxx", "dsZ~.dsYxx", "pY.dpy"]
    merged = [parse_recipe(text).notation for text in written]
    for name, rule in canonical_module.RULES.items():
        kinds = tuple(k for k in rule.kinds if k != "double")
        monkeypatch.setitem(canonical_module.RULES, name, replace(rule, kinds=kinds))
    canonical_module._canon.cache_clear()
    try:
        for text, before in zip(written, merged, strict=True):
            recipe = parse_recipe(text)
            c = canonical(recipe)
            doubles = [r for r in recipe.rounds if r.selection == "double"]
            assert [r for r in c.rounds if r.selection == "double"] == doubles, text
            assert_same_figures(recipe, c, profiles[:2])
        assert any(
            format_recipe(canonical(text)) != before for text, before in zip(written, merged)
        )
    finally:
        monkeypatch.undo()
        canonical_module._canon.cache_clear()


NOT_MERGED = [
    # (a, b, noise under which they coincide, why they differ otherwise)
    ("pYY", "pYy", dict(measurement=1.0), "X <-> Y on a sacrificed pair alone"),
    (
        "sYX",
        "sXY",
        dict(measurement=1.0, t1_s=math.inf, t2_s=math.inf),
        "kept and sacrificed rotations swapped (the kept copy also waits)",
    ),
    ("pZY", "pzY", dict(single_qubit=1.0), "Z (no gate) against z"),
    ("sZ~.pYZ", "sZ~.pzZ", dict(t1_s=math.inf, t2_s=math.inf), "waited re-twirled pair"),
]


@pytest.mark.parametrize("a, b, special, why", NOT_MERGED)
def test_candidates_exact_only_for_special_noise_are_not_merged(a, b, special, why):
    assert parse_recipe(a).notation != parse_recipe(b).notation, why
    noise = dict(two_qubit=0.95, single_qubit=0.93, measurement=0.9, t1_s=0.01, t2_s=0.008)
    profile = Profile((0.8, 0.1, 0.06, 0.04), NodeNoise(**noise), length_km=100, pair_rate_hz=500)
    fa = figures(evaluate(a, profile, canonicalise=False))
    fb = figures(evaluate(b, profile, canonicalise=False))
    assert np.max(np.abs(fa - fb)) > 1e-4, why
    # ... and they do coincide under the special noise, so the check is about noise
    noise.update(special)
    special_profile = Profile(
        (0.8, 0.1, 0.06, 0.04), NodeNoise(**noise), length_km=100, pair_rate_hz=500
    )
    fa = evaluate(a, special_profile, canonicalise=False)
    fb = evaluate(b, special_profile, canonicalise=False)
    assert_allclose(fa.fidelity, fb.fidelity, rtol=1e-11)
    assert_allclose(fa.success_probabilities, fb.success_probabilities, rtol=1e-11)


def test_double_selection_pumping_exchange_is_not_exact():
    profile = Profile((0.8, 0.1, 0.06, 0.04), NodeNoise(0.97, 0.95, 0.95))
    a, b = "dpZYY.dpZyy", "dpZyy.dpZYY"
    assert parse_recipe(a).notation != parse_recipe(b).notation
    assert abs(evaluate(a, profile).fidelity - evaluate(b, profile).fidelity) > 1e-4


def _groups_share_strings(codes, profiles):
    """Recipes with identical figures on every profile must share one canonical string."""
    signature = []
    for profile in profiles:
        out = evaluate_linear(codes, profile)
        bell = out["bell"]
        signature += [
            out["fidelity"],
            out["raw_pairs_per_output"],
            out["time_per_output_s"],
            bell[:, 3],
            bell[:, 1] + bell[:, 2],
        ]
        signature += list(out["success_probabilities"].T)
    keys = np.round(np.stack(signature, axis=1), 9)
    groups = collections.defaultdict(set)
    for key, row in zip(map(tuple, keys), codes, strict=True):
        groups[key].add(recipe_from_codes(row).notation)
    merged_apart = [sorted(g) for g in groups.values() if len(g) > 1]
    assert merged_apart == []
    return len(groups)


def test_one_round_recipes_with_equal_figures_share_a_string(profiles):
    codes = np.arange(1008)[:, None]
    n_groups = _groups_share_strings(codes, profiles[:2])
    # 1008 codes, and the first-round rule alone halves them
    assert n_groups == len({recipe_from_codes(c).notation for c in codes}) < 504


def test_two_round_recipes_with_equal_figures_share_a_string(profiles):
    # a sub-alphabet dense in equivalences: kept Z, z, Y, y; sacrificed Y, y, X
    letters = [
        round_code(Round("single", kind, (k, s), twirl=t))
        for kind in ("raw", "same")
        for k in (Z, z, Y, y)
        for s in (Y, y, X)
        for t in (False, True)
    ]
    codes = np.array(list(itertools.product(letters, repeat=2)))
    n_groups = _groups_share_strings(codes, profiles[:2])
    assert n_groups < len(codes) / 2  # many spellings were merged


def test_werner_raw_pair_shows_why_special_states_are_not_used():
    # with a Werner raw pair every rotation of a raw pair looks alike, but the
    # canonical form must not rely on the profile: these stay apart
    profile = Profile(tuple(werner(0.8)), NodeNoise(0.97, 0.95, 0.95))
    a, b = "pZY", "pZX"
    assert_allclose(evaluate(a, profile).fidelity, evaluate(b, profile).fidelity, rtol=1e-12)
    assert parse_recipe(a).notation != parse_recipe(b).notation


def test_pumping_exchange_across_a_source_is_exact_but_left_apart(profiles):
    # documented as exact but not merged (models/canonical_form.py, pumping-exchange)
    a, b = "pXY.pZX(sY).pZy", "pXy.pZX(sY).pZY"
    assert_same_figures(a, b, profiles)
    assert parse_recipe(a).notation != parse_recipe(b).notation
