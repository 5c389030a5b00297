"""The first hour: the README's first session as written, the messages, the trace, compare.

The README's commands run in order in an empty folder, each through a
``stillroom`` script on PATH (``python -m optimise.cli``), so what the README
shows is what a newcomer types.
"""

from __future__ import annotations

import io
import json
import os
import re
import stat
import subprocess
import sys

import numpy as np
import pytest
from cli_support import REPO, validate

from optimise.cli import main

FIRST_SESSION = re.compile(r"## A first session\n.*?```sh\n(.*?)```", re.S)


def readme_commands() -> list[str]:
    block = FIRST_SESSION.search((REPO / "README.md").read_text(encoding="utf-8")).group(1)
    return [line for line in block.splitlines() if line.strip()]


@pytest.mark.slow
def test_the_first_session_runs_as_written(tmp_path):
    bin_dir = tmp_path / "bin"
    bin_dir.mkdir()
    script = bin_dir / "stillroom"
    script.write_text(f'#!/bin/sh\nexec "{sys.executable}" -m optimise.cli "$@"\n')
    script.chmod(script.stat().st_mode | stat.S_IEXEC)
    folder = tmp_path / "fresh"
    folder.mkdir()
    env = dict(os.environ)
    env["PATH"] = f"{bin_dir}{os.pathsep}{env['PATH']}"
    env["PYTHONPATH"] = os.pathsep.join([str(REPO), env.get("PYTHONPATH", "")]).rstrip(os.pathsep)
    outputs = []
    for command in readme_commands():
        done = subprocess.run(
            ["bash", "-c", command],
            cwd=folder,
            env=env,
            capture_output=True,
            text=True,
            timeout=300,
            stdin=subprocess.DEVNULL,
        )
        assert done.returncode == 0, f"{command}\n{done.stdout}\n{done.stderr}"
        outputs.append((command, done.stdout + done.stderr))
    searches = [text for command, text in outputs if " search " in command]
    assert "new search: recipes of 1 to 5 rounds" in searches[0]
    # the three layers it will run (README "Outputs of a search")
    assert "a deep layer of made pairs over 10 levels" in " ".join(searches[0].split())
    assert "budget 200 trials; writes runs/demo-metro" in " ".join(searches[0].split())
    assert "resuming runs/demo-metro: 200 of 300 trials done" in searches[1]
    assert "at most 3 qubits per node" in " ".join(searches[2].split())
    assert r"\begin{table}" in outputs[-1][1] and r"\toprule" in outputs[-1][1]
    assert (folder / "runs" / "demo-metro" / "front.png").exists()


def test_the_progress_bar_fits_80_columns():
    from rich.console import Console

    from optimise.progress import SearchProgress

    console = Console(file=io.StringIO(), width=80, record=True, color_system=None)
    bar = SearchProgress(2_000_000, 1_000, timeout_s=300 * 3600, console=console)
    with bar:
        bar.update(1_999_999, best_fidelity=0.991722, front_size=12_345)
        console.print(bar._progress.get_renderable())
    lines = [line for line in console.export_text().splitlines() if line.strip()]
    assert lines and all(len(line) <= 80 for line in lines)
    assert all(line.startswith("search") for line in lines)  # one line each, never wrapped
    assert "F 0.991722" in lines[-1] and "front 12345" in lines[-1]


@pytest.fixture
def werner_profile(tmp_path):
    # perfect operations, instant pairs, no memory: the published DEJMPS setting
    path = tmp_path / "werner.toml"
    path.write_text('name = "werner-0.7"\n[raw_pair]\nwerner_fidelity = 0.7\n')
    return path


def test_evaluate_explains_each_dejmps_round(werner_profile, capsys):
    assert main(["evaluate", "sY^2", str(werner_profile), "--json"]) == 0
    document = json.loads(capsys.readouterr().out)
    validate(document, "evaluate")
    first, second = document["steps"]
    # DEJMPS (Deutsch et al., PRL 77, 2818 (1996)) from Werner F = 0.7, in their order
    # (A, B, C, D) = (Phi+, Psi-, Psi+, Phi-): A' = (A^2 + B^2)/N, B' = 2CD/N,
    # C' = (C^2 + D^2)/N, D' = 2AB/N, N = 0.68; Pauli order (I, X, Y, Z) = (A, C, B, D)
    a, b, c, d = 0.7, 0.1, 0.1, 0.1
    n = (a + b) ** 2 + (c + d) ** 2
    out = np.array([a * a + b * b, c * c + d * d, 2 * c * d, 2 * a * b]) / n
    np.testing.assert_allclose(first["bell"], out, atol=1e-12)
    assert first["success_probability"] == pytest.approx(0.68, abs=1e-12)
    assert second["fidelity"] == pytest.approx(0.845946, abs=1e-6)
    # the Y rotation exchanges Y and Z of the input (0.1 each), so the removed weights
    # are the input's minus the output's; the plain check copies in Phi- (Z)
    removed = first["removed"]
    np.testing.assert_allclose(
        [removed["X"], removed["Y"], removed["Z"]], 0.1 - out[1:], atol=1e-12
    )
    assert removed["Z"] < 0
    assert first["gate_noise"] == pytest.approx(0, abs=1e-12)
    assert first["memory_noise"] == pytest.approx(0, abs=1e-12)


def test_gate_noise_is_the_depolarised_share(tmp_path, capsys):
    # Duer-Briegel noise at both nodes acts on the two pairs' joint labels as
    # p^2 (ideal) + (1 - p^2) (uniform over 16 labels) (Duer, Briegel, Cirac and
    # Zoller, PRA 59, 169 (1999)); a uniform joint input passes the check with
    # probability 1/2 and leaves the kept pair uniform (F = 1/4)
    path = tmp_path / "gates.toml"
    path.write_text(
        'name = "gates"\n[raw_pair]\nwerner_fidelity = 0.7\n[operations]\ntwo_qubit = 0.9\n'
    )
    assert main(["evaluate", "sY", str(path), "--json"]) == 0
    step = json.loads(capsys.readouterr().out)["steps"][0]
    s = 0.81
    ideal_f, ideal_n = 0.5 / 0.68, 0.68
    noisy_f = (s * ideal_n * ideal_f + (1 - s) * 0.5 * 0.25) / (s * ideal_n + (1 - s) * 0.5)
    assert step["gate_noise"] == pytest.approx(ideal_f - noisy_f, abs=1e-12)
    assert step["fidelity"] == pytest.approx(noisy_f, abs=1e-12)


def test_evaluate_expands_sub_recipes_and_keeps_the_spelling(capsys):
    assert main(["evaluate", "pX.pY(sY)"]) == 0
    text = capsys.readouterr().out
    assert "round 2 > source round 1" in text
    assert main(["evaluate", "sy^2"]) == 0
    assert "as written: sy^2; canonical form sYy.sX" in " ".join(capsys.readouterr().out.split())
    assert main(["evaluate", "pumping:1"]) == 0
    text = " ".join(capsys.readouterr().out.split())
    assert "as written: pumping:1, built as pY; canonical form sY" in text
    assert "fresh raw pair is a copy" in text


def test_evaluate_steps_follow_the_success_probabilities(capsys):
    from models.evaluate import evaluate
    from optimise.profiles import demo_profile

    recipe = "dpXXx~.dpZzX.dpY(dsXXx~)"
    assert main(["evaluate", recipe, "--json"]) == 0
    steps = json.loads(capsys.readouterr().out)["steps"]
    exact = evaluate(recipe, demo_profile())
    assert [s["success_probability"] for s in steps] == list(exact.success_probabilities)
    assert steps[-1]["fidelity"] == exact.fidelity


def test_compare_puts_recipes_and_profiles_side_by_side(werner_profile, tmp_path, capsys):
    assert main(["compare", "dejmps:1", "sY^2", str(werner_profile), "--json"]) == 0
    document = json.loads(capsys.readouterr().out)
    validate(document, "compare")
    assert document["compares"] == "recipes"
    # DEJMPS from Werner F = 0.7: 0.735294 then 0.845946 (Deutsch et al., PRL 77, 2818 (1996))
    f = [e["result"]["fidelity"] for e in document["entries"]]
    assert f == pytest.approx([0.735294, 0.845946], abs=1e-6)
    assert document["differences"][0]["fidelity"] == pytest.approx(f[1] - f[0], abs=1e-15)
    other = tmp_path / "other.toml"
    other.write_text('name = "werner-0.8"\n[raw_pair]\nwerner_fidelity = 0.8\n')
    assert main(["compare", "bbpssw:1", str(werner_profile), str(other), "--json"]) == 0
    document = json.loads(capsys.readouterr().out)
    assert document["compares"] == "profiles"
    # BBPSSW, output re-twirled (Bennett et al., PRL 76, 722 (1996)): 0.735294 and 0.838150
    f = [e["result"]["fidelity"] for e in document["entries"]]
    assert f == pytest.approx([0.735294, 0.838150], abs=1e-6)
    assert main(["compare", "sY", "pY", str(werner_profile), str(other)]) == 2
