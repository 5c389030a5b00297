"""General check rounds (catalogued n-pair circuits) as steps of the deep layer and the search.

External references:
- ``models.evaluate.evaluate``, the single-recipe evaluator, which is checked
  against an independent full density-matrix simulation (qutip) for random
  general rounds of three and four pairs with every noise on in
  ``tests/models/test_circuits.py``; here the batched evaluation
  of general rounds on made pairs (``models.chain.advance_rounds``) and the deep
  layer's front must agree with it;
- the 2->1 check (Bennett et al., Phys. Rev. Lett. 76, 722 (1996)) written as a
  general round, ``01/Z/0``, is the built-in 2->1 step: offering it to the deep
  layer must change no front point;
- the rule "bad input is one line naming the field and the allowed range, exit
  code 2, nothing written" is common practice, no source.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

from models.chain import advance_rounds, start_chains
from models.evaluate import evaluate
from models.recipes import Recipe, Round
from optimise.cli import main
from optimise.deep import deep_front, general_round_variants
from optimise.errors import InputError, RunError
from optimise.profiles import demo_profile
from optimise.search import run_search
from optimise.seeding import check_round_selections
from optimise.settings import SearchSettings, parse_check_rounds

sys.path.insert(0, str(Path(__file__).parent))

from test_exhaustive import PROFILES, front_points  # noqa: E402

# a 3-, a 4- and a 5-pair round, with X and Z bases and more than one accepted pattern
FORMS = ("01,21/ZX/00", "01,20,32,21/ZXX/000", "01,02,03,04/ZZXX/0000,0001")


@pytest.mark.parametrize("name", ["memory", "memory-noisy-rotations", "noisy-rotations"])
def test_general_rounds_on_made_pairs_evaluate_as_the_single_recipe_evaluator(name):
    # decaying memories: every input waits while the later ones are made, and a
    # 5-pair round needs four levels of waiting data more than its output
    profile = PROFILES[name]
    first = Round("single", "same", "Y")
    rounds = [
        Round(FORMS[0], "raw", (2, 2, 2)),
        Round(FORMS[1], "same", (1, 1, 1, 1), twirl=True),
        Round(FORMS[2], "raw", (3, 0, 0, 0, 0)),
        Round(FORMS[2], "same", (0,) * 5),
    ]
    chains = start_chains(profile, 1, rounds_ahead=2, widest=5)
    made, _ = advance_rounds(chains, [first], [0], profile)
    for depth, start in ((1, chains), (2, made)):
        out, success = advance_rounds(
            start, rounds, np.arange(len(rounds)), profile, parent=np.zeros(len(rounds), int)
        )
        for i, r in enumerate(rounds):
            recipe = Recipe(((first,) if depth == 2 else ()) + (r,))
            want = evaluate(recipe, profile)
            assert_allclose(out.bell[i], want.bell, rtol=0, atol=1e-13, err_msg=recipe.notation)
            assert_allclose(success[i], want.success_probabilities[-1], rtol=1e-12)
            assert_allclose(out.raw_pairs[i], want.raw_pairs_per_output, rtol=1e-12)
            assert_allclose(out.time_s[i], want.time_per_output_s, rtol=1e-12)
            assert int(out.memory[i]) == want.memory_per_node
            assert int(out.rounds[i]) == want.rounds


def test_advance_rounds_refuses_what_it_cannot_evaluate():
    profile = PROFILES["noisy-rotations"]
    chains = start_chains(profile, 1, rounds_ahead=1)
    sub = Round("single", "sub", "ZZ", source=Recipe((Round("single", "raw", "ZZ"),)))
    with pytest.raises(ValueError, match="without a source"):
        advance_rounds(chains, [sub], [0], profile)
    with pytest.raises(ValueError, match="outside"):
        advance_rounds(chains, [Round("single", "raw", "ZZ")], [1], profile)


def test_the_two_to_one_check_as_a_general_round_changes_no_front_point():
    profile = PROFILES["memory"]
    # every rotation of the built-in 2->1 step is in the space, so the general
    # round's rounds are all there already
    space = dict(max_depth=3, include_double=False, layers=2, width=6)
    plain = deep_front(profile, **space)
    offered = deep_front(profile, **space, general=["01/Z/0"])
    assert front_points(offered) == front_points(plain)
    assert offered.general == ("01/Z/0",) and plain.general == ()
    assert "1 general check round" in offered.space


@pytest.mark.parametrize("name", ["perfect-rotations", "memory"])
def test_the_deep_layer_uses_general_rounds_and_its_front_evaluates_the_same(name):
    profile = PROFILES[name]
    deep = deep_front(profile, max_depth=4, layers=2, width=6, general=FORMS[:2])
    used = [r for r in deep.results if "c{" in r.notation]
    assert used, "no front recipe uses a general round"
    for r in used:
        again = evaluate(r.notation, profile)
        assert math.isclose(again.fidelity, r.fidelity, rel_tol=0, abs_tol=1e-12)
        assert math.isclose(again.raw_pairs_per_output, r.raw_pairs_per_output, rel_tol=1e-12)
    # deterministic: the same settings give the same front, names included
    twice = deep_front(profile, max_depth=4, layers=2, width=6, general=FORMS[:2])
    assert [r.to_dict() for r in twice.results] == [r.to_dict() for r in deep.results]


@pytest.mark.parametrize(
    ("general", "message"),
    [
        (["single"], "built-in kind"),
        (["00/Z/0"], "must act on distinct pairs"),
        (["01/Q/0"], "not a general check round"),
        (["23,01/ZZZ/000"], "write '01,23/ZZZ/000'"),
        ([3], "compact form"),
    ],
)
def test_general_rounds_refuse_what_is_not_one(general, message):
    with pytest.raises(ValueError, match=message):
        general_round_variants(general)


def test_general_rounds_list_every_rotation_choice_once():
    rounds = general_round_variants(["c{01,21/ZX/00}", "01,21/ZX/00"])  # one round, named twice
    # raw pairs: six rotations of every input and five of the kept pair alone; copies: six
    assert len(rounds) == (11 + 6) * 2
    assert len(set(rounds)) == len(rounds)
    assert all(not a.twirl and b.twirl for a, b in zip(rounds[::2], rounds[1::2], strict=True))


@pytest.mark.parametrize(
    ("spec", "message"),
    [
        ("", "PAIRS:CNOTS"),
        ("4", "must be PAIRS:CNOTS"),
        ("1:1", r"pairs 1 is outside \[2, 5\]"),
        ("6:2", r"pairs 6 is outside \[2, 5\]"),
        ("4:0", r"CNOTs 0 is outside \[1, 5\]"),
        ("3:3,4:x", "must be PAIRS:CNOTS"),
    ],
)
def test_bad_catalogue_lists_are_one_line_naming_the_field(spec, message):
    with pytest.raises(InputError, match=message) as caught:
        SearchSettings(check_rounds=spec)
    assert "\n" not in str(caught.value) and str(caught.value).startswith("check_rounds = ")


def test_catalogue_lists_are_run_settings_read_back_and_defaulted():
    settings = SearchSettings(check_rounds=" 4:4, 3:3,4:4", check_rounds_top=5)
    assert settings.check_rounds == "3:3,4:4"  # one spelling per set of catalogues
    assert parse_check_rounds(settings.check_rounds) == ((3, 3), (4, 4))
    data = json.loads(json.dumps(settings.to_json()))
    assert SearchSettings.from_json(data) == settings
    assert {"check_rounds", "check_rounds_top"} <= set(SearchSettings.fields_of("run"))
    for key in ("check_rounds", "check_rounds_top"):
        del data[key]
    assert SearchSettings.from_json(data).check_rounds is None
    with pytest.raises(InputError, match=r"check_rounds_top = 0 is outside \[1, 512\]"):
        SearchSettings(check_rounds_top=0)
    with pytest.raises(InputError, match="check_rounds_top = 5 needs check_rounds"):
        SearchSettings(check_rounds_top=5)
    # choices of the study's space: part of its identity when asked for, absent otherwise
    assert settings.study_identity({})["check_rounds"] == "3:3,4:4"
    assert "check_rounds" not in SearchSettings().study_identity({})


def test_the_rounds_offered_are_spread_along_the_catalogue_s_front(tmp_path):
    profile = PROFILES["perfect-rotations"]
    every = check_round_selections(
        profile, SearchSettings(check_rounds="3:3", check_rounds_top=512), tmp_path
    )
    three = check_round_selections(
        profile, SearchSettings(check_rounds="3:3", check_rounds_top=3), tmp_path
    )
    assert len(every) > 3 and len(three) == 3
    assert three[0] == every[0] and three[-1] == every[-1] and set(three) <= set(every)
    assert all(evaluate(f"c{{{f}}}", profile).fidelity > profile.raw[0] for f in every)


def test_a_search_with_check_rounds_reports_them_and_a_resume_must_repeat_them(
    tmp_path, monkeypatch, capsys
):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    args = ["search", "--runs-dir", str(tmp_path), "--name", "checks", "--no-progress"]
    args += ["--depth", "3", "--trials", "4", "--exhaustive-depth", "1", "--deep-levels", "3"]
    assert main([*args, "--check-rounds", "3:2,4:3", "--check-rounds-top", "4"]) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert "again with the check rounds of 3:2,4:3" in out
    folder = tmp_path / "checks"
    settings = json.loads((folder / "settings.json").read_text())
    assert (settings["check_rounds"], settings["check_rounds_top"]) == ("3:2,4:3", 4)
    front = json.loads((folder / "front.json").read_text())
    assert "general check rounds" in front["searched_space"]
    assert list((tmp_path / "cache" / "stillroom" / "catalogue").glob("rounds-n4-g3-*.json"))
    profile = demo_profile()
    for entry in front["front"]:
        again = evaluate(entry["recipe"], profile)
        assert math.isclose(again.fidelity, entry["fidelity"], rel_tol=0, abs_tol=1e-12)
    # the second pass joins the first: no point of the search without the rounds is lost
    assert main([*args[:4], "plain", *args[5:]]) == 0
    capsys.readouterr()
    plain = json.loads((tmp_path / "plain" / "front.json").read_text())["front"]
    found = np.array([[e["fidelity"], e["raw_pairs_per_output"]] for e in front["front"]])
    for e in plain:
        assert np.any(
            (found[:, 0] >= e["fidelity"] * (1 - 1e-12))
            & (found[:, 1] <= e["raw_pairs_per_output"] * (1 + 1e-12))
        ), e["recipe"]
    # a resume must repeat them: the second pass is computed again and changes the front
    with pytest.raises(RunError, match="check_rounds"):
        run_search(
            profile,
            run_dir=folder,
            max_depth=3,
            n_trials=4,
            exhaustive_depth=1,
            deep_levels=3,
            progress=False,
        )


def test_bad_catalogue_lists_on_the_command_line_write_nothing(tmp_path, capsys):
    args = ["search", "--runs-dir", str(tmp_path), "--name", "bad", "--no-progress"]
    assert main([*args, "--check-rounds", "4:9"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "--check-rounds = '4:9': CNOTs 9 is outside [1, 5]" in err
    assert main([*args, "--check-rounds-top", "0"]) == 2
    assert "--check-rounds-top" in capsys.readouterr().err
    assert not (tmp_path / "bad").exists()


def test_the_study_samples_and_explores_the_rounds_it_is_offered():
    import optuna

    from optimise.explore import neighbours
    from optimise.limits import Limits
    from optimise.objective import Objective
    from optimise.seeding import enqueue_known
    from optimise.space import SELECTION_CHOICES

    profile = PROFILES["perfect-rotations"]
    selections = SELECTION_CHOICES + FORMS[:2]
    objective = Objective(
        profile,
        max_depth=2,
        objectives=("fidelity", "yield"),
        limits=Limits(),
        selections=selections,
    )
    optuna.logging.set_verbosity(optuna.logging.WARNING)
    study = optuna.create_study(
        directions=["maximize", "maximize"], sampler=optuna.samplers.RandomSampler(seed=3)
    )
    known = ["c{01,21/ZX/00}Y.sY", "sY.cs{01,20,32,21/ZXX/000}Z"]
    assert enqueue_known(study, known, 2, selections=selections) == 2
    # without the rounds in the space, such recipes are not the study's
    assert enqueue_known(study, ["c{01,21/ZX/00}Y"], 2) == 0
    study.optimize(objective, n_trials=40)
    results = [t.user_attrs["result"] for t in study.trials if "result" in t.user_attrs]
    drawn = [r["recipe"] for r in results]
    assert drawn[:2] == known
    assert any("{" in n for n in drawn[2:])  # the sampler draws general rounds too
    for r in results:
        again = evaluate(r["recipe"], profile)
        assert math.isclose(again.fidelity, r["fidelity"], rel_tol=0, abs_tol=1e-12)
    # the front's neighbours of a recipe with a general round: its own extension first
    around = neighbours(known[1], 3, selections)
    assert around and around[0]["r2.selection"] == FORMS[1]
    assert neighbours(known[1], 3) == []  # outside a space without it


def test_a_resume_and_a_shared_study_read_the_rounds_fixed_when_the_study_began(
    tmp_path, monkeypatch
):
    import optimise.seeding as seeding

    monkeypatch.setenv("XDG_CACHE_HOME", "/proc/no-such-cache")  # cannot be written: built anyway
    profile = PROFILES["perfect-rotations"]
    shared = tmp_path / "shared.journal"
    small = dict(max_depth=2, exhaustive_depth=1, deep_levels=2, progress=False)
    with_rounds = dict(run_dir=tmp_path / "a", storage=str(shared), check_rounds="3:2", **small)
    first = run_search(profile, n_trials=20, **with_rounds)
    assert first.n_trials_total == 20

    def no_catalogue(*args, **kwargs):
        raise AssertionError("the catalogue was read again")

    monkeypatch.setattr(seeding, "check_round_selections", no_catalogue)
    again = run_search(profile, n_trials=30, **with_rounds)
    assert again.n_trials_this_run == 10
    # another run folder of the same name on the same storage shares the study: it
    # must offer the same rounds
    other = tmp_path / "elsewhere" / "a"
    with pytest.raises(RunError, match="other settings"):
        run_search(profile, run_dir=other, storage=str(shared), n_trials=30, **small)


def test_every_recipe_a_table_shows_is_looked_at_for_general_rounds():
    from types import SimpleNamespace as Row

    from optimise.rows import check_round_notes, shown_notations

    rows = [Row(result=Row(notation="sY"), also=("c{01,21/ZX/00}Y",))]
    targets = [Row(recipe=Row(notation="sY.cs{01,20,32,21/ZXX/000}Z")), Row(recipe=None)]
    notes = check_round_notes(shown_notations(rows, targets))
    assert [form for form, _ in notes] == ["01,21/ZX/00", "01,20,32,21/ZXX/000"]
    assert notes[1][1].startswith("at each node CNOT 0>1, CNOT 2>0, CNOT 3>2, CNOT 2>1")
