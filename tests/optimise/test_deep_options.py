"""The deep layer's width, Pareto layers and levels as search settings and options.

External references: the rule "bad input is one line naming the field and the
allowed range, exit code 2" is common practice, no source (the corpus of
tests/optimise/test_bad_input.py holds the command-line cases); the deep layer's
front itself is checked against models.evaluate in tests/optimise/test_deep.py.
"""

from __future__ import annotations

import json

import pytest

from models.noise import NodeNoise
from models.profile import Profile
from models.states import werner
from optimise.cli import main
from optimise.cli.search import OPTION_OF_FIELD
from optimise.errors import InputError, RunError
from optimise.search import run_search
from optimise.seeding import deep_levels
from optimise.settings import SearchSettings

PROFILE = Profile(
    tuple(werner(0.8)),
    NodeNoise(two_qubit=0.98, single_qubit=0.99, measurement=0.98),
    name="test-deep-options",
)
SMALL = dict(max_depth=2, n_trials=4, exhaustive_depth=1, progress=False)


@pytest.mark.parametrize(
    ("changes", "message"),
    [
        ({"deep_width": -1}, r"deep_width = -1 is outside \[0, 256\]"),
        ({"deep_width": 257}, r"deep_width = 257 is outside \[0, 256\]"),
        ({"deep_width": 2.5}, r"deep_width = 2.5 is outside \[0, 256\]"),
        ({"deep_width": True}, r"deep_width = True is outside"),
        ({"deep_layers": -2}, r"deep_layers = -2 is outside \[0, 256\]"),
        ({"deep_layers": "2"}, r"deep_layers = '2' is outside"),
        ({"deep_levels": 13}, r"deep_levels = 13 is outside \[0, 12\]"),
        ({"deep_levels": -1}, r"deep_levels = -1 is outside \[0, 12\]"),
        ({"deep_width": 0, "deep_layers": 0}, r"deep_width = 0 and deep_layers = 0"),
    ],
)
def test_out_of_range_is_one_line_naming_the_field(changes, message):
    with pytest.raises(InputError, match=message) as caught:
        SearchSettings(**changes)
    assert "\n" not in str(caught.value)


def test_levels_default_to_twice_the_depth_cap_at_most_twelve():
    assert deep_levels(SearchSettings(max_depth=5)) == 10
    assert deep_levels(SearchSettings(max_depth=7)) == 12
    assert deep_levels(SearchSettings(max_depth=7, limits={"max_depth": 3})) == 6
    assert deep_levels(SearchSettings(max_depth=5, deep_levels=3)) == 3
    assert deep_levels(SearchSettings(max_depth=5, deep_levels=0)) == 0


def test_they_are_run_settings_read_back_and_defaulted_for_older_folders():
    settings = SearchSettings(deep_width=16, deep_layers=3, deep_levels=4)
    data = json.loads(json.dumps(settings.to_json()))
    assert (data["deep_width"], data["deep_layers"], data["deep_levels"]) == (16, 3, 4)
    assert SearchSettings.from_json(data) == settings
    # not the study's identity (its trials do not change), but fixed for the run folder
    assert set(SearchSettings.fields_of("run")) >= {"deep_width", "deep_layers", "deep_levels"}
    assert settings.study_identity({}) == SearchSettings().study_identity({})
    assert settings.fixed_json() != SearchSettings().fixed_json()
    for key in ("deep_width", "deep_layers", "deep_levels"):
        del data[key]
    old = SearchSettings.from_json(data)
    assert (old.deep_width, old.deep_layers, old.deep_levels) == (8, 2, None)


def test_every_setting_with_an_option_is_mapped_to_it(capsys):
    assert main(["search", "--help"]) == 0
    text = capsys.readouterr().out
    for field, option in OPTION_OF_FIELD.items():
        assert option in text, (field, option)
    for field in ("deep_width", "deep_layers", "deep_levels"):
        assert OPTION_OF_FIELD[field] == "--" + field.replace("_", "-")
    # the help says what the deep layer costs and what the defaults are for
    words = " ".join(text.split())
    assert "width squared times the levels" in words and "overnight" in words


def test_the_searched_space_names_the_deep_layer_s_settings(tmp_path):
    deep = dict(deep_width=3, deep_layers=1, deep_levels=2)
    run_search(PROFILE, run_dir=tmp_path / "r", **deep, **SMALL)
    front = json.loads((tmp_path / "r" / "front.json").read_text())
    assert "trees of up to 2 levels" in front["searched_space"]
    assert "keeping the pairs on the Pareto front, at most 3 per level" in front["searched_space"]
    settings = json.loads((tmp_path / "r" / "settings.json").read_text())
    assert (settings["deep_width"], settings["deep_layers"], settings["deep_levels"]) == (3, 1, 2)
    # a resume must repeat them: the deep layer is computed again and changes the front
    with pytest.raises(RunError, match=r"deep_width = 3.*deep_width = 4.*--name"):
        run_search(PROFILE, run_dir=tmp_path / "r", **{**deep, "deep_width": 4}, **SMALL)
    again = run_search(PROFILE, run_dir=tmp_path / "r", **deep, **{**SMALL, "n_trials": 6})
    assert again.n_trials_total == 6


def test_no_deep_layer_and_a_folder_from_before_the_settings(tmp_path, capsys):
    folder = tmp_path / "old"
    run_search(PROFILE, run_dir=folder, deep_levels=0, **SMALL)
    space = json.loads((folder / "front.json").read_text())["searched_space"]
    assert "no deep layer" in space and "trees of" not in space
    # a run folder written before the deep settings existed resumes with the defaults
    run_search(PROFILE, run_dir=tmp_path / "before", **SMALL)
    path = tmp_path / "before" / "settings.json"
    data = json.loads(path.read_text())
    path.write_text(json.dumps({k: v for k, v in data.items() if not k.startswith("deep_")}))
    more = run_search(PROFILE, run_dir=tmp_path / "before", **{**SMALL, "n_trials": 6})
    assert more.n_trials_this_run == 2
    assert json.loads(path.read_text())["deep_width"] == 8
    with pytest.raises(RunError, match="deep_levels = null"):
        run_search(PROFILE, run_dir=tmp_path / "before", deep_levels=1, **SMALL)


def test_the_command_line_passes_them_and_says_so(tmp_path, capsys):
    args = ["search", "--runs-dir", str(tmp_path), "--name", "cli", "--no-progress"]
    args += ["--depth", "2", "--trials", "3", "--exhaustive-depth", "1"]
    args += ["--deep-width", "5", "--deep-layers", "1", "--deep-levels", "3"]
    assert main(args) == 0
    out = " ".join(capsys.readouterr().out.split())
    assert "a deep layer of made pairs over 3 levels (width 5, 1 Pareto layer)" in out
    settings = json.loads((tmp_path / "cli" / "settings.json").read_text())
    assert (settings["deep_width"], settings["deep_layers"], settings["deep_levels"]) == (5, 1, 3)
    table = " ".join((tmp_path / "cli" / "table.md").read_text().split())
    assert "trees of up to 3 levels" in table and "at most 5 per level" in table
    # both caps off at once is refused, naming the options typed
    assert main([*args[:-6], "--name", "both", "--deep-width", "0", "--deep-layers", "0"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "--deep-width = 0 and --deep-layers = 0" in err
    assert not (tmp_path / "both").exists()
