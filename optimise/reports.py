"""Report files of a run folder, written from its :class:`optimise.front.Front`.

:func:`write_reports` turns the front of ``runs/<name>/`` (its ``front.json``) into

``front.csv``
    one row per recipe, front first, then baselines; columns :data:`CSV_COLUMNS`
    (``role`` is ``front`` or ``baseline``; ``success_probabilities`` is the
    per-step list joined by ``;``; ``bell_I`` ... ``bell_Z`` are the output
    pair's weights in the Pauli-frame order; ``equivalents``, joined by ``;``,
    are the other recipes the search found with every figure of a front recipe).
``recipes.json``
    provenance (stillroom version, profile, settings, seed, dates, searched
    space, completeness) with the front and the baselines; its keys are
    documented in ``optimise/schema.json`` (``"kind": "recipes"``).
``table.tex``
    a booktabs ``table`` ready for ``\\input`` (needs ``\\usepackage{booktabs}``),
    written by :mod:`optimise.latex`.
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

from .labels import fmt_fidelity, fmt_number, fmt_time
from .rows import Row

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
# a front recipe also lists the recipes found with every one of its figures
FRONT_RECIPE_KEYS = (*RECIPE_KEYS, "equivalents")
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
    "equivalents",
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


def _csv_row(role: str, r, name: str = "", depth="", equivalents=()) -> dict:
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
        "equivalents": ";".join(equivalents),
    }


def csv_rows(front) -> list[dict]:
    """Rows of ``front.csv``: front recipes, then baselines; keys :data:`CSV_COLUMNS`."""
    rows = [_csv_row("front", r, equivalents=front.equivalents_of(r)) for r in front.results]
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
        "front": [_recipe_only(front.entry(r), FRONT_RECIPE_KEYS) for r in front.results],
        "baselines": [
            {**_recipe_only(b.result.to_dict()), "baseline": b.name, "depth": b.depth}
            for b in front.baselines
        ],
        "target": None if front.target is None else front.target.to_dict(),
        "csv_columns": list(CSV_COLUMNS),
        "assumptions": ASSUMPTIONS,
    }


def _recipe_only(entry: dict, keys=RECIPE_KEYS) -> dict:
    return {key: entry[key] for key in keys}


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
RATE_HEADER = "output rate (pairs/s)"


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


def has_pair_rate(profile: dict) -> bool:
    """True when the profile gives a raw-pair rate, so output pairs per second mean something."""
    rate = profile.get("pair_rate_hz")
    return rate is not None and math.isfinite(rate)


def rate_cell(r) -> str:
    """Output pairs per second, ``1 / time per output`` (``0`` for a recipe that never succeeds)."""
    t = r.time_per_output_s
    if t is None or math.isinf(t):
        return "0"
    return "inf" if t == 0 else fmt_number(1.0 / t, 3)


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


def profile_sentence(profile: dict) -> str:
    """The profile's figures in one sentence (a key left at its perfect value is said so)."""
    bell = ", ".join(f"{w:.4g}" for w in profile["raw_pair"])
    parts = [
        f"Profile {profile.get('name', 'profile')}: raw pair (Phi+, Psi+, Psi-, Phi-) = ({bell})",
        f"CNOT p = {profile.get('two_qubit', 1.0):g}",
        f"rotation p1 = {profile.get('single_qubit', 1.0):g}",
        f"measurement eta = {profile.get('measurement', 1.0):g}",
    ]
    t1, t2 = profile.get("t1_s"), profile.get("t2_s")
    parts.append(
        "perfect memory"
        if t1 is None and t2 is None
        else f"memory T1 = {_seconds(t1)}, T2 = {_seconds(t2)}"
    )
    parts.append(f"link {profile.get('length_km', 0.0):g} km")
    parts.append(
        f"raw pairs at {profile['pair_rate_hz']:g} per s"
        if has_pair_rate(profile)
        else "raw pairs arrive instantly"
    )
    return "; ".join(parts) + "."


def _seconds(t) -> str:
    return "inf" if t is None else f"{t:g} s"


def provenance(front) -> list[str]:
    """Sentences saying where a table's figures come from; every table carries them.

    The profile's figures, stillroom's version, the seed and sampler, the dates
    of the search, its budget and limits, the searched space and what of it is
    proven complete. No date of writing the report: the same front gives the
    same table.
    """
    settings = front.settings or {}
    version = front.stillroom_version or _version()
    sampler = settings.get("sampler")
    sampler_name = sampler.get("name") if isinstance(sampler, dict) else sampler
    run = [f"stillroom {version}", f"seed {front.seed if front.seed is not None else 'unknown'}"]
    if sampler_name:
        run.append(f"sampler {sampler_name}")
    if front.created:
        run.append(f"search started {front.created}")
    if front.updated:
        run.append(f"front as of {front.updated}")
    budget = []
    if settings.get("n_trials") is not None:
        budget.append(f"{settings['n_trials']} trials")
    if settings.get("timeout_s"):
        budget.append(f"{fmt_time(settings['timeout_s'])} of wall time")
    if settings.get("max_depth") is not None:
        budget.append(f"recipes of up to {settings['max_depth']} rounds")
    if budget:
        run.append("budget " + ", ".join(budget))
    from .limits import as_limits

    try:
        limits = as_limits(settings.get("limits"))
    except (TypeError, ValueError):
        limits = None
    lines = [profile_sentence(front.profile), "; ".join(run) + "."]
    if limits is not None and limits.any:
        lines.append(f"Limits: {limits.describe()}.")
    if isinstance(front.searched_space, str):
        lines.append(f"Searched: {front.searched_space}.")
    lines.append("Completeness: " + _completeness(front))
    return lines


def _selection_sentence(shown: int, total: int, top: int) -> str:
    if shown >= total:
        return f"All {total} recipes of the front are shown."
    return (
        f"{shown} of the front's {total} recipes are shown: its two ends and, greedily, the "
        "recipe farthest from those already shown in (log raw pairs per output, log 1 - F); "
        f"rows with figures identical to the digits shown are merged. Every recipe is in "
        f"front.csv and recipes.json (stillroom table --top 0 shows all)."
    )


def report_rows(front, top: int, targets):
    from .rows import baseline_rows, front_rows, target_rows

    chosen = front_rows(front.results, top, front.equivalents)
    baselines = baseline_rows(front.baselines, every=top <= 0)
    wanted = list(targets or ())
    if front.target is not None and front.target.target_fidelity not in wanted:
        wanted.append(front.target.target_fidelity)
    return chosen, baselines, target_rows(front, sorted(wanted))


def _md_recipe(row) -> str:
    text = f"`{row.result.notation}`"
    if row.written:
        text += f" (built as `{row.written}`)"
    return text


def table_md(front, *, top: int | None = None, targets=()) -> str:
    """The front, the baselines and the targets as Markdown, with provenance and assumptions.

    Parameters
    ----------
    front : optimise.front.Front
    top : int, optional
        Front rows shown (:func:`optimise.rows.cover`); 0 shows every recipe and
        every baseline; default :data:`optimise.rows.DEFAULT_TOP`.
    targets : sequence of float
        Target fidelities, one row each (the run's own ``--target`` is added).
    """
    from .rows import (
        CHECK_ROUNDS_HEADING,
        DEFAULT_TOP,
        canonical_notes,
        check_round_notes,
        note_mark,
        shown_notations,
    )

    top = DEFAULT_TOP if top is None else top
    rows, baselines, target_table = report_rows(front, top, targets)
    rate = has_pair_rate(front.profile)
    headers = [h for h, _ in HEADERS] + ([RATE_HEADER] if rate else [])
    notes = []
    numbers = ["---:"] * (len(headers) - 2)
    lines = [
        f"# Pareto front: {front.profile_name}",
        "",
        _selection_sentence(len(rows), len(front.results), top),
        "",
        "| " + " | ".join(headers) + " |",
        "|" + "|".join(["---:", ":---"] + numbers) + "|",
    ]
    for i, row in enumerate(rows, 1):
        cells = recipe_cells(row.result) + ([rate_cell(row.result)] if rate else [])
        cells[0] = _md_recipe(row)
        if row.also:  # a note under the table keeps the recipe column narrow
            cells[0] += f"<sup>{note_mark(len(notes))}</sup>"
            notes.append(
                f"<sup>{note_mark(len(notes))}</sup> " + ", ".join(f"`{a}`" for a in row.also)
            )
        lines.append("| " + " | ".join([str(i)] + cells) + " |")
    if notes:
        lines += ["", "Other recipes with the same figures: " + "; ".join(notes) + "."]
    checks = check_round_notes(shown_notations(rows, target_table))
    if checks:
        lines += ["", CHECK_ROUNDS_HEADING, ""]
        lines += [f"- `{{{form}}}`: {text}." for form, text in checks]
    if baselines:
        shown = "" if top <= 0 else ", those no other baseline beats in both fidelity and yield"
        lines += ["", f"Textbook baselines (reference{shown}):", ""]
        lines.append("| baseline | " + " | ".join(headers[1:]) + " |")
        lines.append("|" + "|".join([":---", ":---"] + numbers) + "|")
        for row in baselines:
            cells = recipe_cells(row.result) + ([rate_cell(row.result)] if rate else [])
            cells[0] = _md_recipe(Row(row.result, (), "", row.written))
            label = row.label + (f" (also: {', '.join(row.also)})" if row.also else "")
            lines.append("| " + " | ".join([label] + cells) + " |")
        reasons = [
            " and ".join(f"`{built}` reads `{canonical}`" for built, canonical in pairs)
            + f": {why}."
            for pairs, why in canonical_notes(baselines, front.baselines)
        ]
        if reasons:
            lines += ["", "Baselines are shown in canonical form. " + " ".join(reasons)]
    if target_table:
        lines += ["", "Cheapest recipe per target fidelity (within the run's limits):", ""]
        lines.append(
            "| target F | recipe | fidelity F | raw pairs / output | best baseline "
            "| its raw pairs / output | saving |"
        )
        lines.append("|---:|:---|---:|---:|:---|---:|---:|")
        for t in target_table:
            lines.append("| " + " | ".join(_target_cells(t, code="`")) + " |")
    lines += ["", hashing_sentence(front.profile), ""]
    lines += [" ".join(provenance(front)), "", ASSUMPTIONS, ""]
    return "\n".join(lines)


def _target_cells(t, *, code: str) -> list[str]:
    if t.recipe is None:
        mine = ["not reached", "", ""]
    else:
        mine = [
            f"{code}{t.recipe.notation}{code}",
            fmt_fidelity(t.recipe.fidelity),
            fmt_number(t.recipe.raw_pairs_per_output),
        ]
    if t.baseline is None:
        theirs = ["none reaches it", ""]
    else:
        theirs = [t.baseline.label, fmt_number(t.baseline.result.raw_pairs_per_output)]
    saving = "" if t.saving_percent is None else f"{t.saving_percent:.1f}%"
    return [f"{t.target:g}"] + mine + theirs + [saving]


# ----------------------------------------------------------------------------- all


def write_reports(run_dir, *, plots: bool = True, top: int | None = None, targets=()) -> list[Path]:
    """(Re)write every report file of a run folder from its front.

    ``top`` and ``targets`` choose the tables' rows (:func:`table_md`); the
    full front always goes to ``front.csv`` and ``recipes.json``, and the
    targets are drawn on the plots. Returns the paths written. Each goes
    through :func:`optimise.files.write_atomic` (by way of
    :class:`optimise.run.Run`), so a reader (or a running search) never sees
    half a file. The plots are left out when ``plots`` is False or matplotlib
    is not installed.
    """
    from .latex import table_tex
    from .run import Run

    run = Run(run_dir)
    front = run.read_front()
    written = [
        run.write_text("front.csv", front_csv(front)),
        run.write_json("recipes.json", recipes_document(front)),
        run.write_text("table.tex", table_tex(front, top=top, targets=targets)),
        run.write_text("table.md", table_md(front, top=top, targets=targets)),
    ]
    if plots:
        from . import plots as plotting

        if plotting.available():
            written += plotting.write_front_plots(front, run.path("front"), targets=targets)
    return written
