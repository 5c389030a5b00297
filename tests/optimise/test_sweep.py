"""`stillroom sweep`: one noise parameter varied, exhaustive search at a small depth."""

from __future__ import annotations

import csv
import io
import json

import pytest
from cli_support import files_under, png_size, run_cli, svg_size, validate

from optimise.cli import main
from optimise.plots import PNG_PIXELS, SVG_POINTS
from optimise.profiles import demo_profile, with_parameter
from optimise.reports import ASSUMPTIONS
from optimise.sweep import CSV_COLUMNS, sweep_values


def test_values_are_even_or_geometric():
    assert sweep_values(0.97, 1.0, 4) == pytest.approx([0.97, 0.98, 0.99, 1.0])
    assert sweep_values(0.01, 10.0, 4, log=True) == pytest.approx([0.01, 0.1, 1.0, 10.0])
    assert sweep_values(0.5, 0.9, 1) == [0.5]


@pytest.fixture(scope="module")
def gate_sweep(tmp_path_factory):
    out = tmp_path_factory.mktemp("sweep") / "gates"
    import contextlib

    buffer = io.StringIO()
    with contextlib.redirect_stdout(buffer):
        code = main(
            [
                "sweep",
                "two_qubit",
                "0.97",
                "1",
                "--steps",
                "3",
                "--depth",
                "2",
                "--targets",
                "0.97,0.999",
                "--out",
                str(out),
                "--json",
            ]
        )
    assert code == 0
    return out, json.loads(buffer.getvalue())


def test_sweep_document_and_files(gate_sweep):
    out, document = gate_sweep
    validate(document, "sweep")
    assert files_under(out) == ["sweep.csv", "sweep.json", "sweep.md", "sweep.png", "sweep.svg"]
    assert json.loads((out / "sweep.json").read_text())["points"] == document["points"]
    assert [p["value"] for p in document["points"]] == pytest.approx([0.97, 0.985, 1.0])
    assert png_size(out / "sweep.png") == PNG_PIXELS
    assert svg_size(out / "sweep.svg") == pytest.approx(SVG_POINTS)
    rows = list(csv.DictReader(io.StringIO((out / "sweep.csv").read_text())))
    assert tuple(rows[0]) == CSV_COLUMNS and len(rows) == 3 * 2
    assert (out / "sweep.md").read_text().rstrip().endswith(ASSUMPTIONS)


def test_each_point_uses_its_own_parameter_value(gate_sweep):
    """The reported figures are those of the recipe under that point's profile."""
    from models.evaluate import evaluate

    _, document = gate_sweep
    base = demo_profile()
    for point in document["points"]:
        profile = with_parameter(base, "two_qubit", point["value"])
        best = evaluate(point["best"]["recipe"], profile)
        assert best.fidelity == pytest.approx(point["best"]["fidelity"], rel=1e-12)
        for answer in point["targets"]:
            if answer["reached"]:
                r = evaluate(answer["recipe"]["recipe"], profile)
                assert r.fidelity >= answer["target_fidelity"]
                assert r.pair_yield == pytest.approx(answer["recipe"]["yield"], rel=1e-12)


def test_better_gates_never_lower_the_best_fidelity(gate_sweep):
    # each step's output fidelity is a ratio of functions linear in two_qubit**2 whose
    # ideal part is the purer one, so the best reachable fidelity rises with two_qubit
    _, document = gate_sweep
    best = [p["best"]["fidelity"] for p in document["points"]]
    assert best == sorted(best)
    assert best[-1] > document["points"][-1]["raw_fidelity"]


def test_werner_sweep_replaces_the_raw_pair(tmp_path, capsys):
    assert (
        main(
            [
                "sweep",
                "werner_fidelity",
                "0.8",
                "0.95",
                "--steps",
                "2",
                "--depth",
                "1",
                "--targets",
                "0.9",
                "--out",
                str(tmp_path / "w"),
                "--json",
            ]
        )
        == 0
    )
    document = json.loads(capsys.readouterr().out)
    assert [p["raw_fidelity"] for p in document["points"]] == pytest.approx([0.8, 0.95])
    # hashing yield of a Werner pair, F = 0.95 -> 0.634355 (shared/conventions.md, from
    # Bennett, DiVincenzo, Smolin and Wootters, PRA 54, 3824 (1996))
    assert document["points"][1]["raw_hashing_yield"] == pytest.approx(0.634355, abs=5e-7)


@pytest.mark.parametrize(
    ("args", "fragment"),
    [
        (["two_qbit", "0.9", "1"], "did you mean two_qubit?"),
        (["two_qubit", "0.9", "1.2"], "two_qubit = 1.2 is outside [0, 1]"),
        (["t2_s", "1", str(3 * demo_profile().noise.t1_s)], "exceeds 2 * t1_s"),
        (["werner_fidelity", "0.4", "0.9"], "largest Bell weight"),
        (["t1_s", "0", "10", "--log"], "--log needs a range of positive values"),
    ],
)
def test_bad_sweeps_exit_2_and_write_nothing(tmp_path, args, fragment):
    done = run_cli("sweep", *args, "--depth", "1", cwd=tmp_path)
    assert done.returncode == 2
    assert done.stderr.count("\n") == 1 and fragment in done.stderr, done.stderr
    assert files_under(tmp_path) == []
