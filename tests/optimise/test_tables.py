"""The report tables: covering rows (--top), rows per target, merged rows, provenance, LaTeX.

The fronts are made from exactly evaluated recipes (models.evaluate and the
exhaustive layer) on the demo profile; what the tables must show is computed
here from those figures directly, not through optimise.rows.
"""

from __future__ import annotations

import dataclasses
import re

import pytest
from test_reports import make_run

from optimise.cli import main
from optimise.files import write_json_atomic
from optimise.front import Front
from optimise.latex import TEX_RECIPE_CHARS, table_tex
from optimise.reports import ASSUMPTIONS, table_md, write_reports
from optimise.rows import Row, cover, group_identical


@pytest.fixture(scope="module")
def wide_front(tmp_path_factory):
    """A front of dozens of recipes: every linear recipe to depth 2 on the demo profile."""
    from optimise.exhaustive import exhaustive_front
    from optimise.front import baseline_results
    from optimise.profiles import demo_profile

    profile = demo_profile()
    found = exhaustive_front(profile, max_depth=2)
    results = sorted(found.results, key=lambda r: -r.fidelity)
    front = Front(
        profile=profile.to_dict(),
        settings={"seed": 3, "max_depth": 2, "n_trials": 0, "sampler": {"name": "nsga2"}},
        searched_space="every linear recipe of 1 to 2 rounds",
        complete_depth=2,
        complete=True,
        n_trials=0,
        results=tuple(results),
        baselines=tuple(baseline_results(profile, 3)),
        stillroom_version="9.9.9",
        created="2030-01-02T03:04:05+00:00",
        updated="2030-01-02T03:05:00+00:00",
    )
    folder = tmp_path_factory.mktemp("tables") / "wide"
    write_json_atomic(folder / "front.json", front.to_json())
    return folder, front


def md_front_rows(md: str) -> list[list[str]]:
    rows = [line for line in md.splitlines() if re.match(r"\| \d+ \|", line)]
    return [[c.strip() for c in line.strip("|").split("|")] for line in rows]


def typewriter(tex: str) -> list[str]:
    """The arguments of every \\texttt{...}, braces balanced."""
    found, start = [], 0
    while (start := tex.find(r"\texttt{", start)) >= 0:
        depth, i = 1, start + len(r"\texttt{")
        while depth:
            depth += {"{": 1, "}": -1}.get(tex[i], 0) if tex[i - 1] != "\\" else 0
            i += 1
        found.append(tex[start + len(r"\texttt{") : i - 1])
        start = i
    return found


def recipe_of(cell: str) -> str:
    return re.match(r"`([^`]+)`", cell).group(1)


def test_top_shows_n_rows_with_both_ends(wide_front):
    _, front = wide_front
    assert len(front.results) > 20  # the case the option exists for
    for top in (2, 5, 10):
        rows = md_front_rows(table_md(front, top=top))
        assert len(rows) == top
        shown = [recipe_of(r[1]) for r in rows]
        best = max(front.results, key=lambda r: r.fidelity)
        cheapest = min(front.results, key=lambda r: r.raw_pairs_per_output)
        assert best.notation in shown and cheapest.notation in shown
        fidelities = [float(r[2]) for r in rows]
        assert fidelities == sorted(fidelities, reverse=True)


def test_top_zero_shows_everything(wide_front):
    _, front = wide_front
    md = table_md(front, top=0)
    assert len(md_front_rows(md)) == len(front.results)
    # every baseline at every depth is named (merged rows name the others after "also")
    from optimise.labels import baseline_label

    for b in front.baselines:
        assert baseline_label(b.name, b.depth) in md


def test_cover_adds_the_point_farthest_from_the_ends():
    # the rule as documented: max-min spacing in (log10 cost, log10 infidelity),
    # each axis scaled to its range; here the ranges are 3 decades and 3 decades
    from types import SimpleNamespace as R

    front = [
        R(fidelity=0.999, raw_pairs_per_output=1000.0),
        R(fidelity=0.998, raw_pairs_per_output=900.0),
        R(fidelity=0.99, raw_pairs_per_output=30.0),
        R(fidelity=0.9, raw_pairs_per_output=2.0),
        R(fidelity=0.5, raw_pairs_per_output=1.0),
    ]
    # 0.99 at 30 sits mid-way in both logs; its neighbours hug an end
    assert cover(front, 3) == [0, 2, 4]
    assert cover(front, 2) == [0, 4]
    assert cover(front, 0) == cover(front, 9) == [0, 1, 2, 3, 4]


def test_identical_figures_share_a_row_shown_by_the_shortest_string(wide_front):
    _, front = wide_front
    r = front.results[3]
    twins = [dataclasses.replace(r, notation=n) for n in ("pZ.pX.pZ", "sY.sX", "sX.sY")]
    rows = group_identical([Row(t) for t in twins])
    assert len(rows) == 1
    assert rows[0].result.notation == "sX.sY"  # shortest, then alphabetical
    assert rows[0].also == ("sY.sX", "pZ.pX.pZ")
    md = table_md(dataclasses.replace(front, results=tuple(twins)), top=0)
    assert "| `sX.sY`<sup>a</sup> |" in md
    assert "Other recipes with the same figures: <sup>a</sup> `sY.sX`, `pZ.pX.pZ`." in md


def test_target_rows_name_the_cheapest_recipe_and_baseline(wide_front):
    _, front = wide_front
    md = table_md(front, targets=[0.95, 0.97, 0.999])
    lines = {
        line.split("|")[1].strip(): line for line in md.splitlines() if line.startswith("| 0.9")
    }
    for t in (0.95, 0.97):
        mine = min(
            (r for r in front.results if r.fidelity >= t), key=lambda r: r.raw_pairs_per_output
        )
        theirs = min(
            (b for b in front.baselines if b.result.fidelity >= t),
            key=lambda b: b.result.raw_pairs_per_output,
        )
        cells = [c.strip() for c in lines[f"{t:g}"].strip("|").split("|")]
        assert cells[1] == f"`{mine.notation}`"
        assert theirs.name.split("-")[0] in cells[4].lower()
        saving = 100 * (1 - mine.raw_pairs_per_output / theirs.result.raw_pairs_per_output)
        assert cells[6] == f"{saving:.1f}%"
    # 0.999 is beyond every recipe to depth 2 on the demo
    assert "not reached" in lines["0.999"] and "none reaches it" in lines["0.999"]


def test_every_table_carries_its_provenance(wide_front):
    _, front = wide_front
    tex = table_tex(front)
    visible_tex = "\n".join(line for line in tex.splitlines() if not line.startswith("%"))
    for text in (table_md(front), visible_tex):
        for needed in (
            "stillroom 9.9.9",
            "seed 3",
            "2030-01-02T03:04:05",
            "raw pair (Phi+, Psi+, Psi-, Phi-) = (0.91, 0.02, 0.02, 0.05)",
            "CNOT p = 0.99",
            "measurement eta = 0.995",
            "T1 = 60 s",
            "every linear recipe of 1 to 2 rounds",
            "front complete for the searched space",
        ):
            assert needed in text, needed
    assert table_md(front).rstrip().endswith(ASSUMPTIONS)


def test_latex_uses_math_mode_booktabs_and_fits_a_column(wide_front):
    _, front = wide_front
    tex = table_tex(front, targets=[0.95])
    for needed in (
        "$F$",
        "$1 - S(p)",
        r"\toprule",
        r"\midrule",
        r"\bottomrule",
        r"\caption{",
        r"\label{tab:stillroom-demo-metro}",
    ):
        assert needed in tex
    body = tex[tex.index(r"\begin{tabular}{@{}r") : tex.index(r"\bottomrule")]
    columns = re.search(r"\\begin\{tabular\}\{@\{\}(\w+)@\{\}\}", body).group(1)
    # every typewriter line of a recipe is short enough for one column
    for chunk in typewriter(body):
        plain = re.sub(r"\\text\w+\{\}|\\.", "x", chunk)
        assert len(plain) <= TEX_RECIPE_CHARS + 1, chunk
    for line in body.splitlines():
        if line.rstrip().endswith(r"\\") and r"\multicolumn" not in line and "toprule" not in line:
            outer = re.sub(r"\\begin\{tabular\}.*?\\end\{tabular\}", "R", line)
            assert outer.count("&") == len(columns) - 1, line
    # widest row of plain text: a two-column article's column holds about 60 characters
    # of footnotesize text at a 3 pt column separation (common practice, no source)
    widths = []
    for line in body.splitlines():
        cells = re.sub(r"\\begin\{tabular\}.*?\\end\{tabular\}", "x" * TEX_RECIPE_CHARS, line)
        cells = re.sub(r"\\[a-z]+\{\}|\\[a-z]+|[{}$\\]", "", cells)
        if "&" in cells:
            widths.append(sum(len(c.strip()) for c in cells.split("&")))
    assert max(widths) <= 60
    escaped = re.sub(r"\$[^$]*\$", "", tex.replace(r"\$", ""))
    escaped = "\n".join(line for line in escaped.splitlines() if not line.startswith("%"))
    for special in ("^", "~", "_"):
        assert special not in escaped.replace(r"\textasciicircum", "").replace(
            r"\textasciitilde", ""
        ).replace(r"\_", ""), special


def test_baselines_show_how_they_were_built_and_why(wide_front):
    _, front = wide_front
    md = table_md(front, top=0)
    # pumping at depth 1 is built as pY and reads sY: a first round pumping a raw pair
    # is a symmetric round on two raw pairs (common practice, no source)
    assert "pumping, depth 1 (built as pY)" in md
    assert re.search(r"`pY` reads `sY`[^:]*: the first round's fresh raw pair is a copy", md)


def test_output_rate_column_follows_the_pair_rate(wide_front):
    _, front = wide_front
    md = table_md(front, top=3)
    header = next(line for line in md.splitlines() if line.startswith("| # |"))
    assert header.rstrip(" |").endswith("output rate (pairs/s)")
    for row in md_front_rows(md):
        r = next(x for x in front.results if x.notation == recipe_of(row[1]))
        assert float(row[-1]) == pytest.approx(1 / r.time_per_output_s, rel=5e-3)
    instant = dict(front.profile, pair_rate_hz=None)
    md = table_md(dataclasses.replace(front, profile=instant), top=3)
    assert "pairs/s" not in md


def test_table_command_takes_top_and_targets(tmp_path, capsys):
    folder = tmp_path / "made"
    data = make_run(folder)
    assert main(["table", str(folder), "--top", "2", "--format", "md", "--no-plots"]) == 0
    md = capsys.readouterr().out
    assert len(md_front_rows(md)) == min(2, len(data["front"]))
    assert main(["table", str(folder), "--targets", "0.95", "--no-plots"]) == 0
    assert "Cheapest recipe per target" in capsys.readouterr().out
    write_reports(folder, plots=False, targets=[0.95])
    assert "| 0.95 |" in (folder / "table.md").read_text()
