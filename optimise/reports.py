"""Report files of a run folder, written from its :class:`optimise.front.Front`.

:func:`write_reports` turns the front of ``runs/<name>/`` (its ``front.json``) into

``front.csv``
    one row per recipe, front first, then baselines; columns :data:`CSV_COLUMNS`
    (``role`` is ``front`` or ``baseline``; ``success_probabilities`` is the
    per-step list joined by ``;``; ``bell_I`` ... ``bell_Z`` are the output
    pair's weights in the Pauli-frame order).
``recipes.json``
    provenance (stillroom version, profile, settings, seed, dates, searched
    space, completeness) with the front and the baselines; its keys are
    documented in ``optimise/schema.json`` (``"kind": "recipes"``).
``table.tex``
    a booktabs ``table`` ready for ``\\input`` (needs ``\\usepackage{booktabs}``).
``table.md``
    the same table in Markdown.
``front.png``, ``front.svg``
    the Pareto front with the textbook baselines marked (:mod:`optimise.plots`).

Every table ends with :data:`ASSUMPTIONS`, the one paragraph of the model's
assumptions and cautions that every output of stillroom reuses.
"""

from __future__ import annotations

import csv
import io
from datetime import UTC, datetime
from pathlib import Path

from .labels import baseline_label, fmt_fidelity, fmt_number, fmt_time

ASSUMPTIONS = (
    "Model assumptions: every pair is Bell-diagonal; gate noise is depolarising (Pauli) "
    "after each CNOT and each non-identity rotation, and each measurement outcome is "
    "misreported independently; memory decay (amplitude damping and dephasing) is "
    "projected onto the Bell diagonal, which assumes a twirl after each wait; raw pairs "
    "are independent and arrive as a Poisson process; {waiting} "
    "A fidelity figure is not a security certificate, and hardware decisions should rest "
    "on measured characterisation, not on this model alone."
)
WAITING_RULE = (
    "the inputs of a step are made one after another in the documented order and each "
    "waits in memory until the last is made, the kept pair waits the one-way classical "
    "delay during each exchange, and a failed step restarts from scratch; decay is "
    "averaged exactly over the random waits, on raw and purified pairs alike, with "
    "time-weighted states (a step's success depends on how long its inputs waited)."
)
ASSUMPTIONS = ASSUMPTIONS.format(waiting=WAITING_RULE)

RECIPE_KEYS = (
    "recipe",
    "id",
    "fidelity",
    "bell",
    "success_probabilities",
    "raw_pairs_per_output",
    "yield",
    "memory_per_node",
    "rounds",
    "time_per_output_s",
)
CSV_COLUMNS = (
    "role",
    "baseline",
    "depth",
    "recipe",
    "id",
    "fidelity",
    "yield",
    "raw_pairs_per_output",
    "memory_per_node",
    "rounds",
    "time_per_output_s",
    "bell_I",
    "bell_X",
    "bell_Y",
    "bell_Z",
    "success_probabilities",
)
REPORT_FILES = ("front.csv", "recipes.json", "table.tex", "table.md", "front.png", "front.svg")

PLOT_MISSING = "matplotlib is not installed, so no plots were drawn (pip install 'stillroom[plot]')"
# what each table format is called on the command line, and its file
TABLE_FORMATS = {"md": "table.md", "tex": "table.tex", "csv": "front.csv"}


def raw_hashing_yield(profile: dict) -> float:
    """Hashing yield 1 - S(p) of the profile's raw pair (Bennett et al., PRA 54, 3824 (1996))."""
    from models import hashing_yield

    return float(hashing_yield(profile["raw_pair"]))


# ----------------------------------------------------------------------------- csv


def _exact(x) -> str:
    """A float written so that it reads back exactly; empty for an infinite cost or time."""
    return "" if x is None or x == float("inf") else repr(float(x))


def _csv_row(role: str, r, name: str = "", depth="") -> dict:
    bell = r.bell
    return {
        "role": role,
        "baseline": name,
        "depth": depth,
        "recipe": r.notation,
        "id": r.recipe_id,
        "fidelity": _exact(r.fidelity),
        "yield": _exact(r.pair_yield),
        "raw_pairs_per_output": _exact(r.raw_pairs_per_output),
        "memory_per_node": r.memory_per_node,
        "rounds": r.rounds,
        "time_per_output_s": _exact(r.time_per_output_s),
        "bell_I": _exact(bell[0]),
        "bell_X": _exact(bell[1]),
        "bell_Y": _exact(bell[2]),
        "bell_Z": _exact(bell[3]),
        "success_probabilities": ";".join(_exact(p) for p in r.success_probabilities),
    }


def csv_rows(front) -> list[dict]:
    """Rows of ``front.csv``: front recipes, then baselines; keys :data:`CSV_COLUMNS`."""
    rows = [_csv_row("front", r) for r in front.results]
    rows += [_csv_row("baseline", b.result, b.name, b.depth) for b in front.baselines]
    return rows


def front_csv(front) -> str:
    out = io.StringIO()
    writer = csv.DictWriter(out, fieldnames=CSV_COLUMNS, lineterminator="\n")
    writer.writeheader()
    writer.writerows(csv_rows(front))
    return out.getvalue()


# ----------------------------------------------------------------------------- json


def recipes_document(front) -> dict:
    """Content of ``recipes.json`` (schema: ``optimise/schema.json``, kind ``recipes``)."""
    return {
        "kind": "recipes",
        "stillroom_version": front.stillroom_version or _version(),
        "created": front.created,
        "updated": front.updated,
        "reported": _now(),
        "profile": front.profile,
        "raw_hashing_yield": raw_hashing_yield(front.profile),
        "settings": front.settings,
        "seed": front.seed,
        "searched_space": front.searched_space,
        "complete_depth": front.complete_depth,
        "complete": bool(front.complete),
        "n_trials": front.n_trials,
        "front": [_recipe_only(r.to_dict()) for r in front.results],
        "baselines": [
            {**_recipe_only(b.result.to_dict()), "baseline": b.name, "depth": b.depth}
            for b in front.baselines
        ],
        "target": None if front.target is None else front.target.to_dict(),
        "csv_columns": list(CSV_COLUMNS),
        "assumptions": ASSUMPTIONS,
    }


def _recipe_only(entry: dict) -> dict:
    return {key: entry[key] for key in RECIPE_KEYS}


def _now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("stillroom")
    except Exception:  # not installed (running from a source tree)
        return "unknown"


# ----------------------------------------------------------------------------- tables

HEADERS = (
    ("#", r"\#"),
    ("recipe", "recipe"),
    ("fidelity F", "$F$"),
    ("yield", "yield"),
    ("raw pairs / output", "raw/out"),
    ("memory / node", "mem."),
    ("rounds", "rounds"),
    ("time / output", "time/out"),
)


def recipe_cells(r) -> list[str]:
    """A recipe's cells under :data:`HEADERS` (after ``#``), as tables write them."""
    return [
        r.notation,
        fmt_fidelity(r.fidelity),
        fmt_number(r.pair_yield),
        fmt_number(r.raw_pairs_per_output),
        str(r.memory_per_node),
        str(r.rounds),
        fmt_time(r.time_per_output_s),
    ]


def hashing_sentence(profile: dict) -> str:
    """The raw pair's fidelity and hashing yield, with the source, for every table."""
    h = raw_hashing_yield(profile)
    f = profile["raw_pair"][0]
    return (
        f"Raw pair: fidelity {f:.6f}, hashing yield 1 - S(p) = {h:.6f} (Bennett, DiVincenzo, "
        "Smolin and Wootters, PRA 54, 3824 (1996)), the rate with perfect operations as F "
        "goes to 1, not a bound on these recipes."
    )


def _completeness(front) -> str:
    depth = front.complete_depth
    n = front.n_trials
    parts = []
    if n is not None:
        parts.append(f"{n} trials")
    if depth:
        parts.append(f"every linear recipe up to depth {depth} evaluated")
    parts.append(
        "front complete for the searched space"
        if front.complete
        else "front found by sampling: not proven complete"
    )
    return "; ".join(parts) + "."


def table_md(front) -> str:
    """The front and baselines as a Markdown table, ending with :data:`ASSUMPTIONS`."""
    name = front.profile_name
    lines = [
        f"# Pareto front: {name}",
        "",
        "| " + " | ".join(h for h, _ in HEADERS) + " |",
        "|" + "|".join(["---:"] + [":---"] + ["---:"] * (len(HEADERS) - 2)) + "|",
    ]
    for i, r in enumerate(front.results, 1):
        cells = recipe_cells(r)
        cells[0] = f"`{cells[0]}`"
        lines.append("| " + " | ".join([str(i)] + cells) + " |")
    if front.baselines:
        lines += ["", "Textbook baselines (reference):", ""]
        lines.append("| baseline | " + " | ".join(h for h, _ in HEADERS[1:]) + " |")
        lines.append("|" + "|".join([":---", ":---"] + ["---:"] * (len(HEADERS) - 2)) + "|")
        for b in front.baselines:
            cells = recipe_cells(b.result)
            cells[0] = f"`{cells[0]}`"
            lines.append("| " + " | ".join([baseline_label(b.name, b.depth)] + cells) + " |")
    lines += ["", hashing_sentence(front.profile), "", _completeness(front), "", ASSUMPTIONS, ""]
    return "\n".join(lines)


_LATEX_SPECIAL = {
    "\\": r"\textbackslash{}",
    "&": r"\&",
    "%": r"\%",
    "$": r"\$",
    "#": r"\#",
    "_": r"\_",
    "{": r"\{",
    "}": r"\}",
    "~": r"\textasciitilde{}",
    "^": r"\textasciicircum{}",
}


def latex_escape(text: str) -> str:
    r"""Escape LaTeX's special characters.

    Examples
    --------
    >>> latex_escape("sY^3 & 50%")
    'sY\\textasciicircum{}3 \\& 50\\%'
    """
    return "".join(_LATEX_SPECIAL.get(c, c) for c in text)


def table_tex(front) -> str:
    """A booktabs table (one row per front recipe, baselines below a rule)."""
    name = latex_escape(front.profile_name)
    label = "".join(c if c.isalnum() else "-" for c in front.profile_name)

    def row(first: str, r) -> str:
        cells = recipe_cells(r)
        cells[0] = r"\texttt{" + latex_escape(cells[0]) + "}"
        cells[1:] = [latex_escape(c) for c in cells[1:]]
        return "  " + " & ".join([first] + cells) + r" \\"

    lines = [
        "% stillroom report table; needs \\usepackage{booktabs}",
        r"\begin{table}[tbp]",
        r"  \centering",
        r"  \caption{Pareto-optimal purification recipes for the noise profile \texttt{"
        + name
        + r"}: output fidelity $F$, yield (output pairs per raw pair), memory qubits per "
        r"node, rounds and mean time per output pair. "
        + latex_escape(hashing_sentence(front.profile))
        + "}",
        r"  \label{tab:stillroom-" + label + "}",
        r"  \begin{tabular}{rlrrrrrr}",
        r"  \toprule",
        "  " + " & ".join(t for _, t in HEADERS) + r" \\",
        r"  \midrule",
    ]
    for i, r in enumerate(front.results, 1):
        lines.append(row(str(i), r))
    if front.baselines:
        lines.append(r"  \midrule")
        lines.append(r"  \multicolumn{8}{l}{\emph{textbook baselines (reference)}} \\")
        for b in front.baselines:
            lines.append(row(latex_escape(baseline_label(b.name, b.depth)), b.result))
    lines += [
        r"  \bottomrule",
        r"  \end{tabular}",
        r"  \par\smallskip",
        r"  \begin{minipage}{0.95\linewidth}\footnotesize",
        "  " + latex_escape(_completeness(front)) + " " + latex_escape(ASSUMPTIONS),
        r"  \end{minipage}",
        r"\end{table}",
        "",
    ]
    return "\n".join(lines)


# ----------------------------------------------------------------------------- all


def write_reports(run_dir, *, plots: bool = True) -> list[Path]:
    """(Re)write every report file of a run folder from its front.

    Returns the paths written. Each goes through :func:`optimise.files.write_atomic`
    (by way of :class:`optimise.run.Run`), so a reader (or a running search) never
    sees half a file. The plots are left out when ``plots`` is False or matplotlib
    is not installed.
    """
    from .run import Run

    run = Run(run_dir)
    front = run.read_front()
    written = [
        run.write_text("front.csv", front_csv(front)),
        run.write_json("recipes.json", recipes_document(front)),
        run.write_text("table.tex", table_tex(front)),
        run.write_text("table.md", table_md(front)),
    ]
    if plots:
        from . import plots as plotting

        if plotting.available():
            written += plotting.write_front_plots(front, run.path("front"))
    return written
