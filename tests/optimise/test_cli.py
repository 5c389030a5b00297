"""The `stillroom` command line, end to end (subprocesses) and through main() for speed."""

from __future__ import annotations

import csv
import io
import json
import re
import signal
import subprocess
import sys
import time

import pytest
from cli_support import REPO, files_under, png_size, run_cli, svg_size, validate

from optimise.cli import main, parse_duration
from optimise.plots import PNG_PIXELS, SVG_POINTS
from optimise.reports import ASSUMPTIONS, CSV_COLUMNS, REPORT_FILES

SMALL = ("--depth", "3", "--trials", "20", "--no-progress")
RUN_FILES = ("settings.json", "profile.json", "front.json", "study.journal")


def test_help_imports_nothing_heavy():
    """--help loads no module beyond those the package itself loads (subcommands import theirs).

    The modules listed are the ones the subcommands need: rich for tables, matplotlib
    for plots, the evaluation and the search layers.
    """
    code = (
        "import sys, contextlib, io\n"
        "import optimise\n"
        "before = set(sys.modules)\n"
        "from optimise.cli import main\n"
        "with contextlib.redirect_stdout(io.StringIO()) as out:\n"
        "    code = main(['--help'])\n"
        "new = sorted(m.split('.')[0] for m in set(sys.modules) - before)\n"
        "heavy = [m for m in ('numpy', 'optuna', 'matplotlib', 'rich', 'models') if m in new]\n"
        "print(code, heavy, 'stillroom search' in out.getvalue())\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", code], cwd=REPO, capture_output=True, text=True, timeout=60
    )
    assert done.stdout.strip() == "0 [] True", done.stdout + done.stderr


@pytest.mark.parametrize("command", ["profile", "search", "evaluate", "sweep", "table"])
def test_every_command_has_examples_in_its_help(command, capsys):
    assert main([command, "--help"]) == 0
    out = capsys.readouterr().out
    assert "examples:" in out and f"stillroom {command}" in out.split("examples:")[1]
    assert "--json" in out


def test_durations():
    assert parse_duration("10m") == 600.0
    assert parse_duration("2h") == 7200.0
    assert parse_duration("1h30m") == 5400.0
    assert parse_duration("90s") == 90.0
    assert parse_duration("2.5") == 2.5


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (["search", "--time", "soon"], "not a duration"),
        (["search", "--target", "1.2"], "outside (0.5, 1)"),
        (["search", "--objectives", "fidelity,cost"], "unknown objective 'cost'"),
        (["search", "--objectives", "fidelity,memory"], "must include 'fidelity' and 'yield'"),
        (["search", "--sampler", "grid"], "invalid choice"),
        (["evaluate"], "required: RECIPE"),
    ],
)
def test_bad_options_exit_2_and_write_nothing(tmp_path, monkeypatch, capsys, args, fragment):
    monkeypatch.chdir(tmp_path)
    assert main(args) == 2
    assert fragment in capsys.readouterr().err
    assert files_under(tmp_path) == []


def test_bad_recipe_points_at_the_error(capsys):
    assert main(["evaluate", "sY.q"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("stillroom: ") and "column 4" in err and err.count("\n") == 1
    assert main(["evaluate", "sY.q", "--verbose"]) == 2  # the caret diagram on request
    err = capsys.readouterr().err
    assert err.splitlines()[1:] == ["  sY.q", "     ^"] and "Traceback" not in err


def test_unknown_baseline_suggests_a_name(capsys):
    assert main(["evaluate", "dejmp:2"]) == 2
    assert "did you mean 'dejmps'?" in capsys.readouterr().err


# ----------------------------------------------------------------------------- evaluate


def _baseline_cases():
    from models.baselines import BASELINES

    return [(name, depth) for name in BASELINES for depth in (1, 3)]


@pytest.mark.parametrize(("name", "depth"), _baseline_cases())
def test_evaluate_reproduces_the_python_api_on_each_baseline(name, depth, capsys):
    from models.baselines import baseline
    from models.evaluate import evaluate
    from optimise.profiles import demo_profile

    expected = evaluate(baseline(name, depth), demo_profile())
    assert main(["evaluate", f"{name}:{depth}", "--json"]) == 0
    document = json.loads(capsys.readouterr().out)
    validate(document, "evaluate")
    assert document["result"] == expected.to_dict()  # JSON floats round-trip exactly
    assert len(document["trace"]) == len(expected.trace)
    for row, figures in zip(document["trace"], expected.trace, strict=True):
        assert row["bell"] == list(figures.bell)
        assert row["fidelity"] == figures.fidelity
        assert row["success_probability"] == figures.success_probability
        assert row["raw_pairs_per_output"] == figures.raw_pairs_per_output
        assert row["memory_per_node"] == figures.memory_per_node
        assert row["time_per_output_s"] == figures.time_per_output_s
    # the human-readable table shows the same figures, round by round
    assert main(["evaluate", expected.notation]) == 0
    out = capsys.readouterr().out
    assert expected.recipe_id in out
    for figures in expected.trace:
        assert f"{figures.fidelity:.6f}" in out and f"{figures.success_probability:.6f}" in out
    assert " ".join(ASSUMPTIONS.split()[:6]) in " ".join(out.split())


@pytest.mark.slow
@pytest.mark.parametrize("name", sorted({n for n, _ in _baseline_cases()}))
def test_evaluate_subprocess_on_each_baseline_string(name, tmp_path):
    """End to end: the baseline's recipe string, through `stillroom evaluate --json`."""
    from models.baselines import baseline
    from models.evaluate import evaluate
    from optimise.profiles import demo_profile

    recipe = baseline(name, 2)
    done = run_cli("evaluate", recipe.notation, "--json", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    document = json.loads(done.stdout)
    validate(document, "evaluate")
    assert document["result"] == evaluate(recipe, demo_profile()).to_dict()


def test_evaluate_subprocess_matches_published_dejmps_values(tmp_path):
    """DEJMPS from a Werner pair of F = 0.7 with perfect operations, rounds 1 to 5.

    Expected values: Deutsch et al., PRL 77, 2818 (1996), formula iterated (worked
    values in shared/conventions.md).
    """
    from models.baselines import baseline

    (tmp_path / "w07.toml").write_text("[raw_pair]\nwerner_fidelity = 0.7\n")
    recipe = baseline("dejmps", 5).notation
    done = run_cli("evaluate", recipe, "w07.toml", "--json", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    document = json.loads(done.stdout)
    validate(document, "evaluate")
    fidelities = [row["fidelity"] for row in document["trace"]]
    successes = [row["success_probability"] for row in document["trace"]]
    assert fidelities == pytest.approx([0.735294, 0.845946, 0.934395, 0.972004, 0.996964], abs=1e-6)
    assert successes == pytest.approx([0.68, 0.640138, 0.766253, 0.898387, 0.947670], abs=1e-6)
    # symmetric recurrence doubles the pairs each round: 2^5 / product of successes
    product = 1.0
    for p in successes:
        product *= p
    assert document["result"]["raw_pairs_per_output"] == pytest.approx(32 / product, rel=1e-12)
    assert files_under(tmp_path) == ["w07.toml"]


# ----------------------------------------------------------------------------- search


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    """The demo search at a small budget, run once through a subprocess."""
    cwd = tmp_path_factory.mktemp("demo-search")
    done = run_cli("search", *SMALL, "--target", "0.99", "--json", cwd=cwd)
    assert done.returncode == 0, done.stderr
    document = json.loads(done.stdout)
    return cwd, cwd / document["run_dir"], document


@pytest.mark.slow
def test_demo_search_writes_every_file(demo_run):
    cwd, run_dir, document = demo_run
    validate(document, "search")
    assert run_dir == cwd / "runs" / "demo-metro"
    for name in REPORT_FILES + RUN_FILES:
        assert (run_dir / name).stat().st_size > 0, name
    stored = json.loads((run_dir / "front.json").read_text())
    assert document["front"] == stored["front"]
    assert document["front"], "the demo front is empty"
    fidelities = [e["fidelity"] for e in document["front"]]
    assert fidelities == sorted(fidelities, reverse=True)
    assert document["baselines"] and document["target"]["target_fidelity"] == 0.99


@pytest.mark.slow
def test_demo_search_reports(demo_run):
    _, run_dir, document = demo_run
    rows = list(csv.DictReader(io.StringIO((run_dir / "front.csv").read_text())))
    assert tuple(rows[0]) == CSV_COLUMNS
    assert [r["id"] for r in rows if r["role"] == "front"] == [e["id"] for e in document["front"]]
    recipes = json.loads((run_dir / "recipes.json").read_text())
    validate(recipes, "recipes")
    assert recipes["seed"] == 0 and recipes["profile"] == document["profile"]
    assert recipes["stillroom_version"] and recipes["searched_space"] is not None
    tex = (run_dir / "table.tex").read_text()
    stack = []
    for kind, name in re.findall(r"\\(begin|end)\{(\w+)\}", tex):
        if kind == "begin":
            stack.append(name)
        else:
            assert stack.pop() == name
    assert not stack
    body = tex.split(r"\midrule")[1]
    rows_tex = [line for line in body.splitlines() if line.rstrip().endswith(r"\\")]
    # the table shows --top rows covering the front (default 10), its two ends included
    assert len(rows_tex) == min(len(document["front"]), 10)
    fidelities = [f"{entry['fidelity']:.6f}" for entry in document["front"]]
    assert fidelities[0] in rows_tex[0] and fidelities[-1] in rows_tex[-1]
    for line in rows_tex:
        assert any(f in line for f in fidelities), line
    assert png_size(run_dir / "front.png") == PNG_PIXELS
    assert svg_size(run_dir / "front.svg") == pytest.approx(SVG_POINTS)


@pytest.mark.slow
def test_same_command_resumes_without_extra_work(demo_run):
    cwd, run_dir, first = demo_run
    done = run_cli("search", *SMALL, "--target", "0.99", cwd=cwd)
    assert done.returncode == 0, done.stderr
    assert re.search(r"\b0 trials this run, 20 in the study", done.stdout), done.stdout
    assert "Pareto front" in done.stdout and "Textbook baselines" in done.stdout
    assert first["front"][0]["recipe"] in done.stdout
    assert "target F >= 0.99" in done.stdout
    assert "not a security certificate" in done.stdout


@pytest.mark.slow
def test_ctrl_c_says_how_to_resume(tmp_path):
    env_cmd = [
        sys.executable,
        "-m",
        "optimise.cli",
        "search",
        "--depth",
        "6",
        "--trials",
        "100000",
        "--no-progress",
        "--runs-dir",
        "runs",
    ]
    import os

    env = dict(os.environ, PYTHONPATH=str(REPO))
    process = subprocess.Popen(
        env_cmd, cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
    )
    front = tmp_path / "runs" / "demo-metro" / "front.json"
    deadline = time.monotonic() + 180  # a loaded machine writes front.json later
    while not front.exists() and time.monotonic() < deadline and process.poll() is None:
        time.sleep(0.2)
    time.sleep(1.0)
    process.send_signal(signal.SIGINT)
    out, err = process.communicate(timeout=60)
    assert process.returncode == 130, err
    assert "interrupted; run the same command to resume" in err
    assert "Traceback" not in err


def test_baseline_names_in_the_help_are_the_real_ones():
    from models.baselines import BASELINES
    from optimise.cli import RECIPE_HELP

    listed = " ".join(RECIPE_HELP.split()).split("(names: ")[1].split(")")[0]
    assert [n.strip() for n in listed.split(",")] == list(BASELINES)
