"""Report files from a run folder's front.json, without running a search.

The run folder is made here from exactly evaluated recipes (models.evaluate) on
the demo profile, filtered to their Pareto front, in the front.json layout the
search writes; the reports must carry those figures through unchanged.
"""

from __future__ import annotations

import csv
import io
import json
import re
import sys
from pathlib import Path

import numpy as np
import pytest
from cli_support import REPO, png_size, svg_size, validate

from optimise.cli import build_parser, main
from optimise.errors import RunError
from optimise.files import write_json_atomic
from optimise.latex import latex_escape
from optimise.plots import PNG_PIXELS, SVG_POINTS
from optimise.profiles import demo_profile
from optimise.reports import (
    ASSUMPTIONS,
    CSV_COLUMNS,
    REPORT_FILES,
    raw_hashing_yield,
    write_reports,
)

CANDIDATES = ("sY", "sY^2", "sY^3", "pY", "pY.pX", "pY.pX.pY", "sX", "sY.sX", "pZ^2")


def make_run(folder: Path, complete: bool = False) -> dict:
    from models.baselines import baseline
    from models.evaluate import evaluate
    from optimise.pareto import pareto_mask

    profile = demo_profile()
    # spellings with one canonical form (pY and sY) are one recipe, listed once as on a real front
    results = list({r.recipe_id: r for r in (evaluate(t, profile) for t in CANDIDATES)}.values())
    mask = pareto_mask([[r.fidelity, r.pair_yield] for r in results], (True, True))
    front = sorted(
        (r for r, keep in zip(results, mask, strict=True) if keep), key=lambda r: -r.fidelity
    )
    baselines = []
    for name in ("dejmps", "pumping"):
        for depth in (1, 2):
            r = evaluate(baseline(name, depth), profile)
            baselines.append({**r.to_dict(), "baseline": name, "depth": depth})
    data = {
        "stillroom_version": "0.1.0",
        "created": "2024-01-01T00:00:00+00:00",
        "updated": "2024-01-01T00:01:00+00:00",
        "profile": profile.to_dict(),
        "settings": {"seed": 7, "max_depth": 3, "n_trials": 20},
        "searched_space": {"note": "made by the report test"},
        "complete_depth": 2,
        "complete": complete,
        "n_trials": 20,
        "front": [r.to_dict() for r in front],
        "baselines": baselines,
        "target": None,
    }
    write_json_atomic(folder / "front.json", data)
    return data


@pytest.fixture
def run(tmp_path):
    folder = tmp_path / "runs" / "made"
    data = make_run(folder)
    write_reports(folder)
    return folder, data


def test_every_report_file_is_written(run):
    folder, _ = run
    for name in REPORT_FILES:
        assert (folder / name).stat().st_size > 0, name


def test_csv_has_the_documented_columns_and_figures(run):
    folder, data = run
    rows = list(csv.DictReader(io.StringIO((folder / "front.csv").read_text())))
    assert tuple(rows[0].keys()) == CSV_COLUMNS
    front = [r for r in rows if r["role"] == "front"]
    refs = [r for r in rows if r["role"] == "baseline"]
    assert len(front) == len(data["front"]) and len(refs) == len(data["baselines"])
    for row, entry in zip(front, data["front"], strict=True):
        assert row["recipe"] == entry["recipe"] and row["id"] == entry["id"]
        assert float(row["fidelity"]) == entry["fidelity"]  # repr round-trips exactly
        assert float(row["yield"]) == entry["yield"]
        assert [float(row[f"bell_{k}"]) for k in "IXYZ"] == entry["bell"]
        probabilities = [float(p) for p in row["success_probabilities"].split(";")]
        assert probabilities == entry["success_probabilities"]
    assert [r["baseline"] for r in refs] == [e["baseline"] for e in data["baselines"]]


def test_csv_columns_are_documented_in_the_help():
    table = build_parser()._subparsers._group_actions[0].choices["table"]
    epilog = " ".join(table.epilog.split())
    documented = re.search(r"front\.csv columns: (.*?)\(", epilog).group(1)
    assert tuple(c.strip() for c in documented.split(",")) == CSV_COLUMNS


def test_recipes_json_validates_and_keeps_provenance(run):
    folder, data = run
    document = json.loads((folder / "recipes.json").read_text())
    validate(document, "recipes")
    assert document["profile"] == data["profile"]
    assert document["seed"] == 7 and document["settings"] == data["settings"]
    assert document["complete"] is False and document["complete_depth"] == 2
    # a front.json written before equivalents were listed: none listed
    assert document["front"] == [{**e, "equivalents": []} for e in data["front"]]
    assert document["stillroom_version"] == "0.1.0"
    # hashing yield 1 - S(p) of the raw pair (Bennett et al., PRA 54, 3824 (1996))
    p = np.array(data["profile"]["raw_pair"])
    assert document["raw_hashing_yield"] == pytest.approx(1 + np.sum(p * np.log2(p)), abs=1e-12)


def _environments_balanced(tex: str) -> bool:
    stack = []
    for kind, name in re.findall(r"\\(begin|end)\{(\w+)\}", tex):
        if kind == "begin":
            stack.append(name)
        elif not stack or stack.pop() != name:
            return False
    return not stack


def test_latex_table_is_balanced_with_one_row_per_front_recipe(run):
    folder, data = run
    tex = (folder / "table.tex").read_text()
    assert _environments_balanced(tex)
    assert tex.count(r"\begin{tabular}") == 1
    top, mid, bottom = tex.index(r"\toprule"), tex.index(r"\midrule"), tex.index(r"\bottomrule")
    assert top < mid < bottom
    second_rule = tex.index(r"\midrule", mid + 1)  # baselines sit below their own rule
    front_rows = [line for line in tex[mid:second_rule].splitlines() if line.endswith(r"\\")]
    assert len(front_rows) == len(data["front"])
    for line, entry in zip(front_rows, data["front"], strict=True):
        assert r"\texttt{" + latex_escape(entry["recipe"]) + "}" in line
        assert f"{entry['fidelity']:.6f}" in line
        assert line.count("&") == 7
    assert "DEJMPS" in tex[second_rule:bottom] or "dejmps" in tex[second_rule:bottom]
    assert f"{raw_hashing_yield(data['profile']):.6f}" in tex
    assert latex_escape(ASSUMPTIONS) in tex
    assert "^" not in tex.replace(r"\textasciicircum", "")  # no raw TeX specials left


def test_markdown_table_ends_with_the_assumptions(run):
    folder, data = run
    md = (folder / "table.md").read_text()
    rows = [line for line in md.splitlines() if re.match(r"\| \d+ \|", line)]
    assert len(rows) == len(data["front"])
    assert md.rstrip().endswith(ASSUMPTIONS)
    assert f"{raw_hashing_yield(data['profile']):.6f}" in md


def test_plots_are_images_of_the_stated_size(run):
    folder, _ = run
    assert png_size(folder / "front.png") == PNG_PIXELS == (1500, 900)
    assert svg_size(folder / "front.svg") == pytest.approx(SVG_POINTS)
    svg = (folder / "front.svg").read_text()
    assert "output fidelity F" in svg and "yield (output pairs per raw pair)" in svg


def test_reports_are_reproducible(run):
    folder, _ = run
    before = {
        n: (folder / n).read_bytes()
        for n in ("front.csv", "table.tex", "table.md", "front.svg", "front.png")
    }
    write_reports(folder)
    for name, content in before.items():
        assert (folder / name).read_bytes() == content, name


def test_assumptions_paragraph_lives_in_one_place():
    phrase = "not a security certificate"
    holders = [
        p.relative_to(REPO).as_posix()
        for p in (REPO / "optimise").rglob("*.py")
        if phrase in p.read_text(encoding="utf-8")
    ]
    holders += [
        p.relative_to(REPO).as_posix()
        for p in (REPO / "models").rglob("*.py")
        if phrase in p.read_text(encoding="utf-8")
    ]
    assert holders == ["optimise/reports.py"]
    for needed in (
        "Bell-diagonal",
        "Pauli",
        "twirl",
        "independent",
        "wait",
        "measured characterisation",
    ):
        assert needed in ASSUMPTIONS


def test_table_command_rewrites_and_prints(run, capsys):
    folder, data = run
    (folder / "table.md").unlink()
    assert main(["table", str(folder), "--format", "md", "--no-plots"]) == 0
    assert capsys.readouterr().out == (folder / "table.md").read_text()
    assert (
        main(["table", "made", "--runs-dir", str(folder.parent), "--format", "csv", "--no-plots"])
        == 0
    )
    assert capsys.readouterr().out.splitlines()[0] == ",".join(CSV_COLUMNS)
    assert main(["table", str(folder), "--json", "--no-plots"]) == 0
    document = json.loads(capsys.readouterr().out)
    validate(document, "recipes")
    assert [e["id"] for e in document["front"]] == [e["id"] for e in data["front"]]


def test_tables_without_matplotlib(tmp_path, monkeypatch, capsys):
    """Without the plot extra the tables are still written, and the user is told why not plots."""
    from optimise.reports import PLOT_MISSING

    folder = tmp_path / "bare"
    make_run(folder)
    monkeypatch.setitem(sys.modules, "matplotlib", None)  # import matplotlib now fails
    written = write_reports(folder)
    assert sorted(p.name for p in written) == ["front.csv", "recipes.json", "table.md", "table.tex"]
    assert not (folder / "front.png").exists()
    assert main(["table", str(folder)]) == 0
    assert PLOT_MISSING in " ".join(capsys.readouterr().out.split())


def test_table_of_a_missing_run_is_a_one_line_error(tmp_path, capsys):
    assert main(["table", str(tmp_path / "nothing")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "stillroom search" in err
    (tmp_path / "empty").mkdir()
    with pytest.raises(RunError, match="no front.json yet"):
        write_reports(tmp_path / "empty")
    assert list((tmp_path / "empty").iterdir()) == []
