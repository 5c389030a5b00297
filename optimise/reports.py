"""Report files of a run folder, written from its ``front.json``.

:func:`write_reports` turns ``runs/<name>/front.json`` into

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
import math
from datetime import UTC, datetime
from pathlib import Path

from .errors import RunError
from .files import write_atomic, write_json_atomic
from .runfolder import load_run

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
TABLE_FORMATS = {"md": "table.md", "tex": "table.tex", "csv": "front.csv"}


PLOT_MISSING = "matplotlib is not installed, so no plots were drawn (pip install 'stillroom[plot]')"


def load_front(run_dir) -> dict:
    """The parsed ``front.json`` of a run folder, or :class:`RunError` saying why not."""
    data = load_run(run_dir)
    for key in ("profile", "front", "baselines"):
        if key not in data:
            raise RunError(
                f"{run_dir}/front.json has no {key!r} key; it was not written by stillroom search"
            )
    return data


def raw_hashing_yield(profile: dict) -> float:
    """Hashing yield 1 - S(p) of the profile's raw pair (Bennett et al., PRA 54, 3824 (1996))."""
    from models import hashing_yield

    return float(hashing_yield(profile["raw_pair"]))


# short names for the tables; the baseline's full title and source are in models.baselines
SHORT_NAMES = {
    "bbpssw": "BBPSSW",
    "dejmps": "DEJMPS",
    "alternating-pumping": "alternating pumping",
    "double-selection-pumping": "double-selection pumping",
}


def baseline_label(entry: dict) -> str:
    name = entry.get("baseline", "")
    title = SHORT_NAMES.get(name, name)
    depth = entry.get("depth")
    return f"{title}, depth {depth}" if depth is not None else title


# ----------------------------------------------------------------------------- numbers


def fmt_fidelity(f: float) -> str:
    return f"{f:.6f}"


def fmt_number(x: float | None, digits: int = 4) -> str:
    """``digits`` significant digits; None (how JSON stores an infinite cost) is ``inf``."""
    if x is None or math.isinf(x):
        return "inf"
    return f"{x:.{digits}g}"


def fmt_time(t: float | None) -> str:
    """Seconds with a unit people read at a glance: ``1.25 ms``, ``3.4 s``."""
    if t is None or math.isinf(t):  # None: how JSON stores an infinite time
        return "inf"
    if t == 0:
        return "0 s"
    for scale, unit in ((1.0, "s"), (1e-3, "ms"), (1e-6, "us"), (1e-9, "ns")):
        if abs(t) >= scale:
            return f"{t / scale:.3g} {unit}"
    return f"{t:.3g} s"


# ----------------------------------------------------------------------------- csv


def _exact(x) -> str:
    """A float written so that it reads back exactly; empty for None (infinite)."""
    return "" if x is None else repr(float(x))


def csv_rows(data: dict) -> list[dict]:
    """Rows of ``front.csv``: front recipes, then baselines; keys :data:`CSV_COLUMNS`."""
    rows = []
    for role, entries in (("front", data["front"]), ("baseline", data["baselines"])):
        for entry in entries:
            bell = entry["bell"]
            rows.append(
                {
                    "role": role,
                    "baseline": entry.get("baseline", "") if role == "baseline" else "",
                    "depth": entry.get("depth", entry["rounds"]) if role == "baseline" else "",
                    "recipe": entry["recipe"],
                    "id": entry["id"],
                    "fidelity": _exact(entry["fidelity"]),
                    "yield": _exact(entry["yield"]),
                    "raw_pairs_per_output": _exact(entry["raw_pairs_per_output"]),
                    "memory_per_node": entry["memory_per_node"],
                    "rounds": entry["rounds"],
                    "time_per_output_s": _exact(entry["time_per_output_s"]),
                    "bell_I": _exact(bell[0]),
                    "bell_X": _exact(bell[1]),
                    "bell_Y": _exact(bell[2]),
                    "bell_Z": _exact(bell[3]),
                    "success_probabilities": ";".join(
                        _exact(p) for p in entry["success_probabilities"]
                    ),
                }
            )
    return rows


def front_csv(data: dict) -> str:
    out = io.StringIO()
    writer = csv.DictWriter(out, fieldnames=CSV_COLUMNS, lineterminator="\n")
    writer.writeheader()
    writer.writerows(csv_rows(data))
    return out.getvalue()


# ----------------------------------------------------------------------------- json


def recipes_document(data: dict) -> dict:
    """Content of ``recipes.json`` (schema: ``optimise/schema.json``, kind ``recipes``)."""
    settings = data.get("settings", {})
    return {
        "kind": "recipes",
        "stillroom_version": data.get("stillroom_version", _version()),
        "created": data.get("created"),
        "updated": data.get("updated"),
        "reported": _now(),
        "profile": data["profile"],
        "raw_hashing_yield": raw_hashing_yield(data["profile"]),
        "settings": settings,
        "seed": settings.get("seed"),
        "searched_space": data.get("searched_space"),
        "complete_depth": data.get("complete_depth"),
        "complete": bool(data.get("complete", False)),
        "n_trials": data.get("n_trials"),
        "front": [_recipe_only(e) for e in data["front"]],
        "baselines": [
            {**_recipe_only(e), "baseline": e.get("baseline"), "depth": e.get("depth")}
            for e in data["baselines"]
        ],
        "target": data.get("target"),
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


def _cells(entry: dict) -> list[str]:
    return [
        entry["recipe"],
        fmt_fidelity(entry["fidelity"]),
        fmt_number(entry["yield"]),
        fmt_number(entry["raw_pairs_per_output"]),
        str(entry["memory_per_node"]),
        str(entry["rounds"]),
        fmt_time(entry["time_per_output_s"]),
    ]


def hashing_sentence(data: dict) -> str:
    h = raw_hashing_yield(data["profile"])
    f = data["profile"]["raw_pair"][0]
    return (
        f"Raw pair: fidelity {f:.6f}, hashing yield 1 - S(p) = {h:.6f} (Bennett, DiVincenzo, "
        "Smolin and Wootters, PRA 54, 3824 (1996)), the rate with perfect operations as F "
        "goes to 1, not a bound on these recipes."
    )


def _completeness(data: dict) -> str:
    depth = data.get("complete_depth")
    n = data.get("n_trials")
    parts = []
    if n is not None:
        parts.append(f"{n} trials")
    if depth:
        parts.append(f"every linear recipe up to depth {depth} evaluated")
    parts.append(
        "front complete for the searched space"
        if data.get("complete")
        else "front found by sampling: not proven complete"
    )
    return "; ".join(parts) + "."


def table_md(data: dict) -> str:
    """The front and baselines as a Markdown table, ending with :data:`ASSUMPTIONS`."""
    name = data["profile"].get("name", "profile")
    lines = [
        f"# Pareto front: {name}",
        "",
        "| " + " | ".join(h for h, _ in HEADERS) + " |",
        "|" + "|".join(["---:"] + [":---"] + ["---:"] * (len(HEADERS) - 2)) + "|",
    ]
    for i, entry in enumerate(data["front"], 1):
        cells = _cells(entry)
        cells[0] = f"`{cells[0]}`"
        lines.append("| " + " | ".join([str(i)] + cells) + " |")
    if data["baselines"]:
        lines += ["", "Textbook baselines (reference):", ""]
        lines.append("| baseline | " + " | ".join(h for h, _ in HEADERS[1:]) + " |")
        lines.append("|" + "|".join([":---", ":---"] + ["---:"] * (len(HEADERS) - 2)) + "|")
        for entry in data["baselines"]:
            cells = _cells(entry)
            cells[0] = f"`{cells[0]}`"
            lines.append("| " + " | ".join([baseline_label(entry)] + cells) + " |")
    lines += ["", hashing_sentence(data), "", _completeness(data), "", ASSUMPTIONS, ""]
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


def table_tex(data: dict) -> str:
    """A booktabs table (one row per front recipe, baselines below a rule)."""
    name = latex_escape(data["profile"].get("name", "profile"))
    label = "".join(c if c.isalnum() else "-" for c in data["profile"].get("name", "profile"))

    def row(first: str, entry: dict) -> str:
        cells = _cells(entry)
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
        + latex_escape(hashing_sentence(data))
        + "}",
        r"  \label{tab:stillroom-" + label + "}",
        r"  \begin{tabular}{rlrrrrrr}",
        r"  \toprule",
        "  " + " & ".join(t for _, t in HEADERS) + r" \\",
        r"  \midrule",
    ]
    for i, entry in enumerate(data["front"], 1):
        lines.append(row(str(i), entry))
    if data["baselines"]:
        lines.append(r"  \midrule")
        lines.append(r"  \multicolumn{8}{l}{\emph{textbook baselines (reference)}} \\")
        for entry in data["baselines"]:
            lines.append(row(latex_escape(baseline_label(entry)), entry))
    lines += [
        r"  \bottomrule",
        r"  \end{tabular}",
        r"  \par\smallskip",
        r"  \begin{minipage}{0.95\linewidth}\footnotesize",
        "  " + latex_escape(_completeness(data)) + " " + latex_escape(ASSUMPTIONS),
        r"  \end{minipage}",
        r"\end{table}",
        "",
    ]
    return "\n".join(lines)


# ----------------------------------------------------------------------------- all


def write_reports(run_dir, *, plots: bool = True) -> list[Path]:
    """(Re)write every report file of a run folder from its ``front.json``.

    Returns the paths written. Each goes through :func:`optimise.files.write_atomic`,
    so a reader (or a running search) never sees half a file. The plots are left
    out when ``plots`` is False or matplotlib is not installed.
    """
    run_dir = Path(run_dir)
    data = load_front(run_dir)
    written = [
        write_atomic(run_dir / "front.csv", front_csv(data)),
        write_json_atomic(run_dir / "recipes.json", recipes_document(data)),
        write_atomic(run_dir / "table.tex", table_tex(data)),
        write_atomic(run_dir / "table.md", table_md(data)),
    ]
    if plots:
        from . import plots as plotting

        if plotting.available():
            written += plotting.write_front_plots(data, run_dir)
    return written
