"""Sweeps of one noise parameter: how far purification gets, and at what cost.

For each value of the parameter, every linear recipe up to a small depth is
evaluated exactly (:func:`optimise.exhaustive.exhaustive_front`); the sweep
records the highest output fidelity reachable and, for each target fidelity,
the cheapest recipe reaching it (:func:`optimise.targets.cheapest_reaching`).

Output files (:func:`write_sweep`): ``sweep.json`` (the document, schema kind
``sweep``), ``sweep.csv`` (columns :data:`CSV_COLUMNS`, one row per value and
target), ``sweep.md`` and ``sweep.png`` / ``sweep.svg``.
"""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path

from .errors import InputError, user_input
from .files import write_atomic, write_json_atomic
from .labels import baseline_label, fmt_fidelity, fmt_number
from .profiles import PARAMETERS, with_parameter
from .reports import ASSUMPTIONS, _now, _version, profile_sentence

CSV_COLUMNS = (
    "value",
    "raw_fidelity",
    "best_fidelity",
    "best_recipe",
    "best_yield",
    "target_fidelity",
    "reached",
    "recipe",
    "id",
    "fidelity",
    "yield",
    "raw_pairs_per_output",
    "memory_per_node",
    "time_per_output_s",
)


def sweep_values(start: float, stop: float, steps: int, *, log: bool = False) -> list[float]:
    """``steps`` values from ``start`` to ``stop`` inclusive, evenly or geometrically spaced.

    Examples
    --------
    >>> sweep_values(0.96, 1.0, 3)
    [0.96, 0.98, 1.0]
    >>> sweep_values(0.1, 10, 3, log=True)
    [0.1, 1.0, 10.0]
    """
    if not (math.isfinite(start) and math.isfinite(stop)):
        raise InputError(f"sweep range {start:g} to {stop:g} must be finite numbers")
    if steps < 1:
        raise InputError(f"--steps {steps} must be at least 1")
    if steps == 1:
        return [float(start)]
    if log:
        if start <= 0 or stop <= 0:
            raise InputError(f"--log needs a range of positive values, got {start:g} to {stop:g}")
        ratio = math.log(stop / start) / (steps - 1)
        values = [start * math.exp(ratio * k) for k in range(steps)]
    else:
        values = [start + (stop - start) * k / (steps - 1) for k in range(steps)]
    values[-1] = float(stop)
    return [float(round(v, 12)) for v in values]


def sweep_profiles(profile, parameter: str, values) -> list:
    """One profile per value; every value is checked before any work starts.

    The ends of the range are checked first, so a message names the value the
    user typed rather than one between.
    """
    for end in (values[0], values[-1]):
        with_parameter(profile, parameter, end)
    return [with_parameter(profile, parameter, v) for v in values]


def run_sweep(
    profiles,
    *,
    parameter: str,
    values,
    targets=(),
    depth: int = 2,
    limits=None,
    n_jobs: int = 1,
    log_scale: bool = False,
    recipes=(),
    progress=None,
) -> dict:
    """Evaluate the sweep; returns the document that :func:`write_sweep` writes.

    Parameters
    ----------
    profiles : list of models.Profile
        One per value (see :func:`sweep_profiles`).
    parameter : str
        Name of the swept key (one of :data:`optimise.profiles.PARAMETERS`).
    values : list of float
    targets : sequence of float
        Target output fidelities.
    depth : int
        Every linear recipe with up to ``depth`` rounds is evaluated.
    limits : optimise.search.Limits or None
    recipes : sequence of (str, models.Recipe)
        Recipes (or baselines) to follow across the sweep, each with the label
        the user gave it; their figures at each value go to ``point["recipes"]``.
    progress : rich Console or None
        Prints one line per value when given.
    """
    from models import hashing_yield
    from models.evaluate import evaluate

    from .exhaustive import exhaustive_front
    from .targets import cheapest_reaching

    points = []
    space = None
    complete = True
    for k, (profile, value) in enumerate(zip(profiles, values, strict=True), 1):
        found = exhaustive_front(profile, max_depth=depth, limits=limits, n_jobs=n_jobs)
        space = found.space
        complete &= bool(found.complete)
        results = list(found.results)
        if not results:
            raise InputError(
                f"{parameter} = {value:g}: no recipe up to depth {depth} meets the limits"
            )
        best = max(results, key=lambda r: r.fidelity)
        with user_input(f"{parameter} = {value:g}"):
            answers = [cheapest_reaching(results, t, limits) for t in targets]
        points.append(
            {
                "value": value,
                "raw_fidelity": profile.raw_pair[0],
                "raw_hashing_yield": float(hashing_yield(profile.raw)),
                "front_size": len(results),
                "best": best.to_dict(),
                "targets": [a.to_dict() for a in answers],
                "baselines": baseline_figures(profile, depth, targets, limits),
                "recipes": [evaluate(recipe, profile).to_dict() for _, recipe in recipes],
            }
        )
        if progress is not None:
            progress.print(
                f"[{k}/{len(values)}] {parameter} = {value:g}: highest F "
                f"{best.fidelity:.6f} ({best.notation})"
            )
    spec = PARAMETERS[parameter]
    base = profiles[0].to_dict()
    return {
        "kind": "sweep",
        "parameter": parameter,
        "parameter_label": f"{parameter}: {spec.meaning}",
        "values": list(values),
        "targets": list(targets),
        "depth": depth,
        "log_scale": bool(log_scale),
        "profile": base,
        "searched_space": space,
        "complete": complete,
        "points": points,
        "recipes": [{"label": label, "recipe": recipe.notation} for label, recipe in recipes],
        "stillroom_version": _version(),
        "created": _now(),
        "assumptions": ASSUMPTIONS,
    }


def baseline_figures(profile, depth: int, targets, limits) -> dict:
    """The textbook baselines at one sweep value, at the sweep's depths (1 to ``depth``).

    ``best``: per baseline, its depth of highest fidelity; ``targets``: per target,
    the cheapest baseline reaching it within the limits (None when none does).
    """
    from .front import baseline_results
    from .targets import cheapest_reaching

    every = baseline_results(profile, depth)
    best = {}
    for b in every:
        if b.name not in best or b.result.fidelity > best[b.name].result.fidelity:
            best[b.name] = b
    by_result = {id(b.result): b for b in every}
    cheapest = []
    for t in targets:
        try:
            answer = cheapest_reaching([b.result for b in every], t, limits)
        except ValueError:  # no baseline within the limits
            answer = None
        pick = None if answer is None or answer.recipe is None else by_result[id(answer.recipe)]
        cheapest.append(None if pick is None else _baseline_entry(pick))
    return {"best": [_baseline_entry(b) for b in best.values()], "targets": cheapest}


def _baseline_entry(b) -> dict:
    return {**b.result.to_dict(), "baseline": b.name, "depth": b.depth}


def sweep_csv(document: dict) -> str:
    out = io.StringIO()
    writer = csv.DictWriter(out, fieldnames=CSV_COLUMNS, lineterminator="\n")
    writer.writeheader()
    for point in document["points"]:
        common = {
            "value": repr(point["value"]),
            "raw_fidelity": repr(point["raw_fidelity"]),
            "best_fidelity": repr(point["best"]["fidelity"]),
            "best_recipe": point["best"]["recipe"],
            "best_yield": repr(point["best"]["yield"]),
        }
        if not point["targets"]:
            writer.writerow(common)
        for answer in point["targets"]:
            row = dict(
                common,
                target_fidelity=repr(answer["target_fidelity"]),
                reached=str(answer["reached"]).lower(),
            )
            recipe = answer["recipe"]
            if recipe is not None:
                row.update(
                    recipe=recipe["recipe"],
                    id=recipe["id"],
                    fidelity=repr(recipe["fidelity"]),
                    **{"yield": repr(recipe["yield"])},
                    raw_pairs_per_output=repr(recipe["raw_pairs_per_output"]),
                    memory_per_node=recipe["memory_per_node"],
                    time_per_output_s=repr(recipe["time_per_output_s"]),
                )
            writer.writerow(row)
    return out.getvalue()


def _target_cell(answer: dict) -> str:
    if not answer["reached"] or answer["recipe"] is None:
        return "not reached"
    r = answer["recipe"]
    return f"{r['recipe']} (yield {fmt_number(r['yield'])})"


def _headers(document: dict) -> list[str]:
    headers = [document["parameter"], "raw F", "highest F", "recipe", "best baseline"]
    for t in document["targets"]:
        headers += [f"cheapest F >= {t:g}", f"cheapest baseline F >= {t:g}"]
    return headers + [f"F of {r['label']}" for r in document.get("recipes", [])]


def _baseline_cell(entry, figure: str) -> str:
    if entry is None:
        return "none reaches it"
    label = baseline_label(entry["baseline"], entry["depth"])
    if figure == "fidelity":
        return f"{label} ({fmt_fidelity(entry['fidelity'])})"
    return f"{label} (yield {fmt_number(entry['yield'])})"


def _row(point: dict) -> list[str]:
    baselines = point.get("baselines", {"best": [], "targets": [None] * len(point["targets"])})
    best = max(baselines["best"], key=lambda b: b["fidelity"], default=None)
    cells = [
        f"{point['value']:g}",
        fmt_fidelity(point["raw_fidelity"]),
        fmt_fidelity(point["best"]["fidelity"]),
        point["best"]["recipe"],
        _baseline_cell(best, "fidelity"),
    ]
    for answer, theirs in zip(point["targets"], baselines["targets"], strict=True):
        cells += [_target_cell(answer), _baseline_cell(theirs, "yield")]
    return cells + [
        f"{fmt_fidelity(r['fidelity'])} (yield {fmt_number(r['yield'])})"
        for r in point.get("recipes", [])
    ]


def sweep_md(document: dict) -> str:
    """The sweep as a Markdown table, ending with the assumptions paragraph."""
    headers = _headers(document)
    lines = [
        f"# Sweep of {document['parameter']}: {document['profile']['name']}",
        "",
        f"Every linear recipe up to depth {document['depth']} evaluated exactly at each value.",
        "",
        "| " + " | ".join(headers) + " |",
        "|" + "|".join("---:" if i < 3 else ":---" for i in range(len(headers))) + "|",
    ]
    for point in document["points"]:
        cells = _row(point)
        cells[3] = f"`{cells[3]}`"
        lines.append("| " + " | ".join(cells) + " |")
    lines += ["", " ".join(sweep_provenance(document)), "", ASSUMPTIONS, ""]
    return "\n".join(lines)


def sweep_provenance(document: dict) -> list[str]:
    """Where a sweep's figures come from: profile, version, date, the space, completeness."""
    profile = dict(document["profile"])
    lines = [
        profile_sentence(profile).rstrip(".")
        + f", with {document['parameter']} swept over "
        + ", ".join(f"{v:g}" for v in document["values"])
        + ".",
        f"stillroom {document.get('stillroom_version', 'unknown')}; computed "
        f"{document.get('created', 'unknown')}; no seed (every recipe evaluated, nothing sampled).",
    ]
    space = document.get("searched_space")
    if isinstance(space, str):
        lines.append(f"Searched: {space}.")
    lines.append(
        "Completeness: the front is complete for that space at every value."
        if document["complete"]
        else "Completeness: not proven at every value (an evaluation cap was reached)."
    )
    lines.append(f"Baselines at depths 1 to {document['depth']}, the same depths as the search.")
    return lines


def rich_table(document: dict):
    from rich.table import Table

    table = Table(
        title=f"sweep of {document['parameter']} on {document['profile']['name']} "
        f"(every linear recipe to depth {document['depth']})",
        title_justify="left",
        header_style="bold",
        box=None,
        pad_edge=False,
    )
    for i, header in enumerate(_headers(document)):
        table.add_column(header, justify="right" if i < 3 else "left")
    for point in document["points"]:
        table.add_row(*_row(point))
    return table


def write_sweep(document: dict, out_dir) -> list[Path]:
    """Write sweep.json, sweep.csv, sweep.md, sweep.png and sweep.svg into ``out_dir``.

    The plots are left out when matplotlib is not installed.
    """
    from . import plots

    out_dir = Path(out_dir)
    written = [
        write_json_atomic(out_dir / "sweep.json", document),
        write_atomic(out_dir / "sweep.csv", sweep_csv(document)),
        write_atomic(out_dir / "sweep.md", sweep_md(document)),
    ]
    if plots.available():
        written += plots.write_sweep_plots(document, out_dir / "sweep")
    return written
