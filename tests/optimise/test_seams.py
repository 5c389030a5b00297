"""The search layer's named values: settings, run folder files, front, objectives, errors.

External references: the layout of optimise/schema.json (the documented --json keys);
a process that has exited no longer exists (common practice, no source); JSON that
does not parse is corrupt (RFC 8259). Everything else here checks a contract of the
API against another part of the project that must agree with it.
"""

import ast
import json
import subprocess
import sys
from pathlib import Path

import pytest

from models.evaluate import RecipeResult, evaluate
from optimise.cli import main
from optimise.errors import InputError, RunError, user_input
from optimise.front import BaselineResult, Front, result_from_dict
from optimise.limits import Limits
from optimise.objectives import OBJECTIVES, check_objectives, directions
from optimise.processes import is_running, worker_identity
from optimise.profiles import demo_profile
from optimise.run import Run
from optimise.settings import SAMPLERS, SearchSettings

REPO = Path(__file__).resolve().parents[2]


# ----------------------------------------------------------------------------- settings


@pytest.mark.parametrize(
    ("changes", "fragment"),
    [
        ({"max_depth": 0}, r"max_depth = 0 is outside \[1, 12\]"),
        ({"max_depth": 13}, r"max_depth = 13 is outside \[1, 12\]"),
        ({"seed": -1}, r"seed = -1 is outside \[0, 4294967295\]"),
        ({"workers": 0}, r"workers = 0 is outside \[1, 256\]"),
        ({"exhaustive_depth": 7}, r"exhaustive_depth = 7 is outside \[0, 6\]"),
        ({"timeout_s": 0.0}, "timeout_s = 0.0 must be a wall time"),
        ({"sampler": "grid"}, "sampler = 'grid' is not one of nsga2, tpe, random"),
        ({"target_fidelity": 1.5}, r"target_fidelity = 1.5 is outside \(0, 1\]"),
        ({"objectives": ("fidelity", "memory")}, "must include 'fidelity' and 'yield'"),
        ({"limits": {"max_memory_per_node": 0}}, "max_memory_per_node = 0"),
    ],
)
def test_settings_name_the_field_and_its_range(changes, fragment):
    with pytest.raises(InputError, match=fragment):
        SearchSettings(**changes)


def test_settings_json_round_trip_and_the_study_identity():
    settings = SearchSettings(
        max_depth=4,
        objectives="yield,fidelity,memory",
        limits={"max_memory_per_node": 3},
        seed=7,
        sampler="tpe",
        n_trials=50,
    )
    assert settings.objectives == ("yield", "fidelity", "memory")
    assert settings.limits == Limits(max_memory_per_node=3)
    data = json.loads(json.dumps(settings.to_json()))
    assert SearchSettings.from_json(data) == settings
    assert data["sampler"]["name"] == "tpe" and data["sampler"]["seed"] == 7
    # the identity is derived from the fields' roles: budget fields never enter it
    study_fields = SearchSettings.fields_of("study")
    assert set(study_fields) == {"max_depth", "objectives", "limits", "seed", "sampler"}
    identity = settings.study_identity({"name": "p"})
    assert set(identity) == set(study_fields) | {"profile"}
    more = settings.replace(n_trials=500, timeout_s=60.0, workers=2, target_fidelity=0.99)
    assert more.study_identity({"name": "p"}) == identity
    assert more.fixed_json() == settings.fixed_json()
    assert settings.replace(seed=8).study_identity({"name": "p"}) != identity
    assert settings.replace(exhaustive_depth=2).fixed_json() != settings.fixed_json()
    roles = SearchSettings.fields_of("study", "run", "budget")
    assert set(roles) == set(SearchSettings.__dataclass_fields__)


def test_settings_from_foreign_json_say_what_is_wrong():
    with pytest.raises(ValueError, match="no 'max_depth'"):
        SearchSettings.from_json({"version": 2})
    data = SearchSettings().to_json()
    with pytest.raises(ValueError, match="sampler"):
        SearchSettings.from_json({**data, "sampler": "nsga2"})


# ----------------------------------------------------------------------------- run folder


def test_run_folder_files_missing_corrupt_or_foreign_are_one_error(tmp_path):
    run = Run(tmp_path / "r")
    with pytest.raises(RunError, match="no run folder"):
        run.read_front()
    run.folder.mkdir()
    with pytest.raises(RunError, match="no front.json yet"):
        run.read_front()
    run.write_text("front.json", "{not json")
    with pytest.raises(RunError, match="front.json is not valid JSON"):
        run.read_front()
    run.write_json("front.json", {"front": []})
    with pytest.raises(RunError, match="not written by stillroom search .*'profile'"):
        run.read_front()
    run.write_json("settings.json", {"format": "another program's"})
    with pytest.raises(RunError, match="settings.json was not written by this version"):
        run.recorded_settings()
    run.write_text("exhaustive.json", "[1, 2")
    with pytest.raises(RunError, match="exhaustive.json is not valid JSON"):
        run.read_exhaustive(demo_profile())
    run.write_json("exhaustive.json", {"front": ["sY"]})
    with pytest.raises(RunError, match="exhaustive.json was not written by this version"):
        run.read_exhaustive(demo_profile())


def test_a_corrupt_exhaustive_cache_stops_the_command_with_one_line(tmp_path, capsys):
    args = ["search", "--runs-dir", str(tmp_path), "--name", "c", "--no-progress"]
    args += ["--depth", "2", "--trials", "1", "--exhaustive-depth", "1", "--json"]
    assert main(args) == 0
    capsys.readouterr()
    (tmp_path / "c" / "exhaustive.json").write_text("{truncated", encoding="utf-8")
    assert main(args) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "exhaustive.json is not valid JSON" in err


# ----------------------------------------------------------------------------- front


def test_front_round_trips_through_its_json():
    profile = demo_profile()
    results = tuple(evaluate(r, profile) for r in ("sY^2", "pX", "sZ~"))
    for r in results:
        back = result_from_dict(json.loads(json.dumps(r.to_dict())))
        assert back.to_dict() == r.to_dict() and back.trace == ()
    front = Front(
        profile=profile.to_dict(),
        settings={"seed": 3},
        results=results,
        baselines=(BaselineResult("dejmps", 2, evaluate("sY^2", profile)),),
        n_trials=9,
    )
    data = json.loads(json.dumps(front.to_json()))
    again = Front.from_json(data)
    assert again.to_json() == data
    assert again.baselines[0].name == "dejmps" and again.baselines[0].depth == 2
    assert data["baselines"][0]["baseline"] == "dejmps" and again.seed == 3


# ----------------------------------------------------------------------------- objectives


def test_every_objective_is_a_result_figure_with_a_documented_key():
    profile = demo_profile()
    result = evaluate("sY", profile)
    schema = json.loads((REPO / "optimise" / "schema.json").read_text())
    documented = schema["$defs"]["recipe_fields"]["required"]
    for o in OBJECTIVES.values():
        assert o.name in OBJECTIVES and isinstance(getattr(result, o.attribute), (int, float))
        assert o.json_key in documented
        assert result.to_dict()[o.json_key] == getattr(result, o.attribute)
    assert set(RecipeResult.__dataclass_fields__) >= {o.attribute for o in OBJECTIVES.values()}
    # the rule, once: fidelity and yield in any order, others optional, none twice
    assert check_objectives(("yield", "fidelity")) == ("yield", "fidelity")
    assert directions(("fidelity", "yield", "time")) == ["maximize", "maximize", "minimize"]
    with pytest.raises(ValueError, match="twice"):
        check_objectives(("fidelity", "yield", "yield"))


def test_the_command_line_offers_the_api_choices(capsys):
    assert main(["search", "--help"]) == 0
    text = " ".join(capsys.readouterr().out.split())
    assert all(o in text for o in OBJECTIVES)
    assert "{" + ",".join(SAMPLERS) + "}" in text


# ----------------------------------------------------------------------------- errors


def test_user_input_is_the_one_conversion():
    with pytest.raises(InputError, match="profile x: bad"):
        with user_input("profile x"):
            raise ValueError("bad")
    with pytest.raises(InputError, match="nowhere.toml"):
        with user_input():
            Path("nowhere.toml").read_text()
    with pytest.raises(KeyError):  # anything else is a bug and keeps its traceback
        with user_input():
            raise KeyError("x")


# ----------------------------------------------------------------------------- processes


def test_a_worker_is_running_until_its_process_exits():
    me = worker_identity()
    assert is_running(me)
    done = subprocess.run(
        [sys.executable, "-c", "import os; print(os.getpid())"],
        capture_output=True,
        text=True,
        check=True,
    )
    assert not is_running({**me, "pid": int(done.stdout)})
    assert not is_running({**me, "start": (me["start"] or 0) + 1})  # pid reused by another


# ----------------------------------------------------------------------------- structure


def _imports(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.level:
            found |= {node.module or a.name for a in node.names}
            found |= {a.name for a in node.names if node.module is None}
    return found


def test_plots_and_reports_do_not_import_each_other_both_ways():
    plots = _imports(REPO / "optimise" / "plots.py")
    reports = _imports(REPO / "optimise" / "reports.py")
    assert "reports" not in plots and "plots" in reports


def test_only_the_run_folder_module_names_its_json_files():
    holders = sorted(
        p.relative_to(REPO).as_posix()
        for p in (REPO / "optimise").rglob("*.py")
        if any(
            f'"{n}"' in p.read_text(encoding="utf-8")
            for n in ("settings.json", "front.json", "exhaustive.json", "profile.json")
        )
    )
    assert holders == ["optimise/run.py"]
