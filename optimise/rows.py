"""Which rows a report table shows: a covering subset of the front, grouped, and per target.

A run's front can hold dozens of recipes whose figures differ in the fourth
digit; a table in a paper needs a handful that span the trade-off. The full
front always stays in ``front.csv`` and ``recipes.json``; only the tables
(``table.md``, ``table.tex``, the terminal) use the rules here.

Rules, stated once:

- **Cover** (:func:`cover`): the two ends of the front (highest fidelity, fewest
  raw pairs per output) are always shown; the other rows are added greedily,
  each time the recipe farthest from every row already chosen (max-min
  spacing) in the plane (log10 raw pairs per output, log10 infidelity 1 - F),
  each axis scaled to the front's range so that both count alike. Ties go to
  the recipe listed first (higher fidelity).
- **Grouping** (:func:`group_identical`): recipes whose figures are identical
  as the table prints them (:func:`shown_figures`) share one row; the row shows
  the shortest canonical string (then the first in alphabetical order) and
  names the others, with the recipes the search found with exactly the same
  figures (``Front.equivalents``), in a note under the table.
- **Targets** (:func:`target_rows`): for each target fidelity, the cheapest
  front recipe reaching it within the run's limits, the cheapest textbook
  baseline reaching it, and the saving in raw pairs per output, in percent.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .labels import baseline_label, fmt_fidelity, fmt_number, fmt_time

DEFAULT_TOP = 10


def shown_figures(r) -> tuple:
    """A recipe's figures rounded as tables print them: equal keys read as equal rows."""
    return (
        fmt_fidelity(r.fidelity),
        fmt_number(r.raw_pairs_per_output),
        r.memory_per_node,
        r.rounds,
        fmt_time(r.time_per_output_s),
    )


def representative_order(text: str) -> tuple[int, str]:
    """Which of several equal recipes a row shows: the shortest string, then alphabetical."""
    return (len(text), text)


def note_mark(k: int) -> str:
    """The mark of a table's k-th note (from 0): a, b, ..., z, aa, ab, ...

    Examples
    --------
    >>> [note_mark(k) for k in (0, 25, 26, 27, 701, 702)]
    ['a', 'z', 'aa', 'ab', 'zz', 'aaa']
    """
    mark = ""
    k += 1
    while k:
        k, digit = divmod(k - 1, 26)
        mark = chr(ord("a") + digit) + mark
    return mark


@dataclass(frozen=True)
class Row:
    """One table row: a recipe, the others with identical figures, and how it was written.

    Attributes
    ----------
    result : models.evaluate.RecipeResult
        The representative (its ``notation`` is canonical).
    also : tuple of str
        The other recipes (front rows) or baselines (baseline rows) in the row.
    label : str
        A baseline's name and depth ("DEJMPS, depth 2"); empty for front rows.
    written : str or None
        The recipe as built or written, when it differs from the canonical string.
    """

    result: object
    also: tuple[str, ...] = ()
    label: str = ""
    written: str | None = None


def group_identical(rows: list[Row], *, key_text=lambda row: row.result.notation) -> list[Row]:
    """Merge rows whose :func:`shown_figures` agree; order of first appearance is kept.

    ``key_text`` gives the text a row is known by (its recipe for front rows, its
    baseline label for baseline rows); the representative is the row whose
    recipe comes first under :func:`representative_order`, and the other rows'
    texts go to ``also``.
    """
    groups: dict[tuple, list[Row]] = {}
    for row in rows:
        groups.setdefault(shown_figures(row.result), []).append(row)
    merged = []
    for members in groups.values():
        members = sorted(
            members, key=lambda m: (representative_order(m.result.notation), key_text(m))
        )
        first = members[0]
        others = [text for m in members[1:] for text in (key_text(m), *m.also)]
        also = tuple(dict.fromkeys(o for o in first.also + tuple(others) if o != key_text(first)))
        merged.append(Row(first.result, also, first.label, first.written))
    return merged


def _plane(results) -> list[tuple[float, float]]:
    points = []
    for r in results:
        cost = r.raw_pairs_per_output
        infidelity = max(1.0 - r.fidelity, 1e-16)
        points.append(
            (math.log10(cost) if math.isfinite(cost) else math.inf, math.log10(infidelity))
        )
    return points


def cover(results, n: int) -> list[int]:
    """Indices of at most ``n`` recipes that best cover a front (rule in the module docstring).

    Parameters
    ----------
    results : sequence of RecipeResult
        A front, fidelity descending.
    n : int
        Rows wanted; 0 (or at least ``len(results)``) keeps every recipe.

    Returns
    -------
    list of int
        Indices into ``results``, ascending (so fidelity descending).

    Examples
    --------
    >>> from types import SimpleNamespace as R
    >>> front = [R(fidelity=1 - 10**-k, raw_pairs_per_output=2.0**k) for k in (4, 3, 2.9, 2, 1)]
    >>> cover(front, 3)
    [0, 2, 4]
    """
    count = len(results)
    if n <= 0 or n >= count:
        return list(range(count))
    points = _plane(results)
    finite = [i for i, (x, _) in enumerate(points) if math.isfinite(x)]
    if not finite:
        return list(range(min(n, count)))
    xs = [points[i][0] for i in finite]
    ys = [points[i][1] for i in finite]
    span_x = (max(xs) - min(xs)) or 1.0
    span_y = (max(ys) - min(ys)) or 1.0
    scaled = {i: (points[i][0] / span_x, points[i][1] / span_y) for i in finite}
    best_fidelity = max(finite, key=lambda i: (results[i].fidelity, -i))
    cheapest = min(finite, key=lambda i: (results[i].raw_pairs_per_output, i))
    chosen = list(dict.fromkeys([best_fidelity, cheapest]))[:n]
    nearest = {i: min(math.dist(scaled[i], scaled[c]) for c in chosen) for i in finite}
    while len(chosen) < min(n, len(finite)):
        pick = max((i for i in finite if i not in chosen), key=lambda i: (nearest[i], -i))
        chosen.append(pick)
        for i in finite:
            nearest[i] = min(nearest[i], math.dist(scaled[i], scaled[pick]))
    return sorted(chosen)


def front_rows(results, top: int, equivalents=None) -> list[Row]:
    """The front rows of a table: grouped first, then :func:`cover` of the groups.

    ``equivalents`` (notation -> other notations, as ``Front.equivalents``) start
    each recipe's ``also``.
    """
    equivalents = equivalents or {}
    grouped = group_identical([Row(r, tuple(equivalents.get(r.notation, ()))) for r in results])
    return [grouped[i] for i in cover([row.result for row in grouped], top)]


def built_recipe(name: str, depth: int) -> str | None:
    """A baseline's recipe string as built (before the canonical form), or None if unknown."""
    from models.baselines import BASELINES, baseline
    from models.formatting import format_recipe

    if name not in BASELINES or not isinstance(depth, int) or depth < 1:
        return None
    return format_recipe(baseline(name, depth))


def why_canonical(written: str, canonical: str) -> str:
    """One clause saying why a recipe's canonical string differs from how it was written."""
    head_written, head_canonical = written.split(".")[0], canonical.split(".")[0]
    if head_written.lstrip("~").startswith(("p", "dp")) and head_canonical.lstrip("~").startswith(
        ("s", "ds")
    ):
        return (
            "the first round's fresh raw pair is a copy of the raw pair it purifies, "
            "so pumping and a symmetric round are one procedure there"
        )
    return (
        "the same procedure with the same figures, written in canonical form "
        "(the rules are in models/canonical_form.py)"
    )


def baseline_rows(baselines, *, every: bool = False) -> list[Row]:
    """Baseline rows: identical ones merged; unless ``every``, only those no baseline beats.

    A baseline is left out of the default table when another baseline has at
    least its fidelity for at most its raw pairs per output (and is better in
    one); all of them stay in ``front.csv``.
    """
    rows = []
    for b in baselines:
        built = built_recipe(b.name, b.depth)
        written = built if built and built != b.result.notation else None
        rows.append(Row(b.result, (), baseline_label(b.name, b.depth), written))
    grouped = group_identical(
        rows,
        key_text=lambda row: row.label + (f" (built as {row.written})" if row.written else ""),
    )
    # the representative's own text is its label; its spelling stays in ``written``
    grouped = [
        Row(g.result, tuple(a for a in g.also if not a.startswith(g.label)), g.label, g.written)
        for g in grouped
    ]
    if every:
        return grouped

    def beaten(row) -> bool:
        a = row.result
        return any(
            o.result.fidelity >= a.fidelity
            and o.result.raw_pairs_per_output <= a.raw_pairs_per_output
            and (
                o.result.fidelity > a.fidelity
                or o.result.raw_pairs_per_output < a.raw_pairs_per_output
            )
            for o in grouped
        )

    return [row for row in grouped if not beaten(row)]


@dataclass(frozen=True)
class TargetRow:
    """One row of a targets table.

    Attributes
    ----------
    target : float
        The target fidelity F*.
    recipe : RecipeResult or None
        Cheapest front recipe with F >= F* within the limits (None: out of reach).
    baseline : Row or None
        Cheapest textbook baseline with F >= F* within the limits.
    saving_percent : float or None
        ``100 (1 - cost(recipe) / cost(baseline))`` in raw pairs per output.
    """

    target: float
    recipe: object
    baseline: Row | None
    saving_percent: float | None


def target_rows(front, targets) -> list[TargetRow]:
    """For each target fidelity, the cheapest recipe and baseline reaching it, within the limits."""
    from .limits import as_limits
    from .targets import cheapest_reaching

    limits = as_limits(front.settings.get("limits"))
    labelled = {id(b.result): b for b in front.baselines}
    out = []
    for t in targets:
        mine = _cheapest(cheapest_reaching, front.results, t, limits)
        theirs = _cheapest(cheapest_reaching, [b.result for b in front.baselines], t, limits)
        row = None
        saving = None
        if theirs is not None:
            b = labelled[id(theirs)]
            row = baseline_rows([b], every=True)[0]
        if mine is not None and theirs is not None:
            saving = 100.0 * (1.0 - mine.raw_pairs_per_output / theirs.raw_pairs_per_output)
        out.append(TargetRow(float(t), mine, row, saving))
    return out


def _cheapest(find, results, target, limits):
    results = list(results)
    if not results:
        return None
    try:
        answer = find(results, target, limits)
    except ValueError:  # no recipe respects the limits
        return None
    return answer.recipe


def canonical_notes(rows: list[Row], baselines) -> list[tuple[list[tuple[str, str]], str]]:
    """Shown baselines whose recipe reads otherwise than built, grouped by the reason.

    ``rows`` are the baseline rows a table shows (merged rows included through
    their ``also``). Returns ``[([(built, canonical), ...], why), ...]``: each
    spelling once, each reason once.
    """
    shown = {row.label for row in rows}
    shown |= {text.split(" (built as ")[0] for row in rows for text in row.also}
    notes: dict[str, list[tuple[str, str]]] = {}
    for b in baselines:
        built = built_recipe(b.name, b.depth)
        if baseline_label(b.name, b.depth) in shown and built and built != b.result.notation:
            pairs = notes.setdefault(why_canonical(built, b.result.notation), [])
            if (built, b.result.notation) not in pairs:
                pairs.append((built, b.result.notation))
    return [(pairs, why) for why, pairs in notes.items()]


CHECK_ROUNDS_HEADING = (
    "General check rounds, written c{...} (sacrificed pairs fresh or made by a source) or "
    "cs{...} (copies of the pair so far); pairs numbered from 0, pair 0 kept, CNOT c>t:"
)


def shown_notations(rows, target_table=()) -> list[str]:
    """Every recipe a table shows: its rows, the recipes merged into them, its target rows."""
    out = [n for row in rows for n in (row.result.notation, *row.also)]
    return out + [t.recipe.notation for t in target_table if t.recipe is not None]


def check_round_notes(notations) -> list[tuple[str, str]]:
    """(compact form, what each node does) for every general check round these recipes use.

    In the order of first use; a table that shows ``c{...}`` tokens states each
    circuit once under it, so that a reader can rebuild the round without
    stillroom (:func:`models.circuits.describe`; both nodes apply the same gates).
    """
    from models.circuits import describe, general_rounds, read_circuit
    from models.notation import parse_recipe

    out: dict = {}
    for notation in notations:
        if "{" not in notation:  # only general rounds have braces
            continue
        for _, r in general_rounds(parse_recipe(notation)):
            if r.selection in out:
                continue
            lines = describe(read_circuit(r.selection))
            both = lines[0].split(": ", 1)[1]
            out[r.selection] = f"at each node {both}; {lines[-1]}"
    return list(out.items())
