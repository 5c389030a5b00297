"""Cheapest recipes with today's round types against the same search with general rounds.

Run from anywhere (pytest ignores this folder)::

    python tests/benchmarks/bench_rounds.py [--depth 6] [--keep 150] [--per-n 10]
        [--catalogue-dir DIR]

For each of five invented profiles (perfect memories, so that only the round
types differ; every figure is made up) and each target F*, it prints the
cheapest linear recipe (raw pairs per output at output fidelity >= F*) found by
one search run twice: once with the 2->1 check and double selection only, once
with the catalogued general rounds of 3, 4 and 5 pairs added. The search is a
breadth-first search over linear recipes (each round pumps fresh raw pairs or
sacrifices copies of the pair so far) that keeps, after each depth, the
recipes on the front of (cost, fidelity), thinned to ``--keep``. Rotations: all
36 (kept, sacrificed) pairs for the 2->1 check, all 216 for double selection,
and (kept, every sacrificed pair alike) for general rounds. The winners are
evaluated again with :func:`models.evaluate.evaluate` and the largest relative
difference in cost is printed.

It also prints, per n, the catalogue's size before and after the symmetry
reduction, its front and its build time (or "cached"), the cost of a first
2->1 round followed by one catalogued round made for its output (a catalogue
whose kept input is that pair), and per target the cost
n / P of the likeliest catalogued n->1 round that reaches F* in one round from
raw pairs (columns "one n->1"): what a general round offers on its own, beside
what two or three cheap 2->1 rounds cost.
"""

from __future__ import annotations

import argparse
import sys
import time
from itertools import product
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))  # the repository root

import numpy as np  # noqa: E402

from models.evaluate import evaluate  # noqa: E402
from models.formatting import format_recipe  # noqa: E402
from models.kinds import STEP_KINDS  # noqa: E402
from models.noise import NodeNoise  # noqa: E402
from models.profile import Profile  # noqa: E402
from models.recipes import Recipe, Round  # noqa: E402
from models.states import werner  # noqa: E402
from models.steps import run_step  # noqa: E402
from optimise.catalogue import load_or_build  # noqa: E402

TARGETS = (0.90, 0.95, 0.97, 0.98, 0.99, 0.995)
CATALOGUE_SIZES = ((3, 3), (4, 4), (5, 5))


def profiles() -> list[Profile]:
    """Five invented profiles (made-up figures, perfect memories)."""

    def make(name, raw, p, p1, eta):
        noise = NodeNoise(two_qubit=p, single_qubit=p1, measurement=eta)
        return Profile(tuple(float(w) for w in raw), noise=noise, name=name)

    return [
        make("werner-0.90", werner(0.90), 0.99, 0.999, 0.995),
        make("dephased-0.91", (0.91, 0.02, 0.02, 0.05), 0.99, 0.999, 0.995),
        make("werner-0.80", werner(0.80), 0.995, 0.999, 0.998),
        make("bitflip-0.88", (0.88, 0.08, 0.02, 0.02), 0.99, 0.999, 0.995),
        make("werner-0.95-noisy", werner(0.95), 0.98, 0.995, 0.99),
    ]


def round_options(selections):
    """(selection, rotation patterns) per kind, as the docstring says."""
    out = []
    for selection in selections:
        n = STEP_KINDS[selection].n_inputs
        if selection in ("single", "double"):
            patterns = list(product(range(6), repeat=n))
        else:
            patterns = [(a,) + (b,) * (n - 1) for a in range(6) for b in range(6)]
        out.append((selection, np.array(patterns, dtype=np.intp)))
    return out


def search(profile, selections, *, depth, keep):
    """Best cost per target; and the recipe that reaches it."""
    noise = profile.noise
    step_noise = {
        "two_qubit": noise.two_qubit,
        "single_qubit": noise.single_qubit,
        "measurement": noise.measurement,
    }
    raw = profile.raw
    # a node: kept state (4,), cost, rounds
    nodes = [(raw, 1.0, ())]
    best = {t: (np.inf, None) for t in TARGETS}
    options = round_options(selections)
    for _ in range(depth):
        children_state, children_cost, children_rounds = [], [], []
        states = np.array([nd[0] for nd in nodes])
        costs = np.array([nd[1] for nd in nodes])
        for selection, patterns in options:
            n = STEP_KINDS[selection].n_inputs
            for same in (False, True):
                rows = np.repeat(np.arange(len(nodes)), len(patterns))
                rot = np.tile(patterns, (len(nodes), 1))
                kept = states[rows]
                sac = kept if same else raw
                success, out = run_step(
                    STEP_KINDS[selection].circuit,
                    [kept] + [sac] * (n - 1),
                    tuple(rot[:, j] for j in range(n)),
                    **step_noise,
                )
                sac_cost = costs[rows] if same else 1.0
                with np.errstate(divide="ignore"):
                    cost = (costs[rows] + (n - 1) * sac_cost) / success
                children_state.append(out)
                children_cost.append(cost)
                for r_index, row in enumerate(rows):
                    children_rounds.append(
                        (row, selection, "same" if same else "raw", tuple(rot[r_index]))
                    )
        state = np.concatenate(children_state)
        cost = np.concatenate(children_cost)
        fidelity = state[:, 0]
        for t in TARGETS:
            ok = np.flatnonzero((fidelity >= t) & np.isfinite(cost))
            if ok.size:
                i = ok[np.argmin(cost[ok])]
                if cost[i] < best[t][0]:
                    best[t] = (cost[i], _rounds(nodes, children_rounds[i]))
        front = _front(cost, fidelity, keep)
        nodes = [(state[i], cost[i], _rounds(nodes, children_rounds[i])) for i in front]
    return best


def _rounds(nodes, child):
    row, selection, sacrificed, rotations = child
    return nodes[row][2] + (Round(selection, sacrificed, rotations),)


def _front(cost, fidelity, keep):
    """Indices on the front of (cost low, fidelity high), thinned to ``keep`` along fidelity."""
    finite = np.flatnonzero(np.isfinite(cost))
    order = finite[np.lexsort((-fidelity[finite], cost[finite]))]
    out, top = [], -np.inf
    for i in order:
        if fidelity[i] > top + 1e-12:
            out.append(i)
            top = fidelity[i]
    if len(out) > keep:
        out = [out[int(k)] for k in np.linspace(0, len(out) - 1, keep)]
    return out


def pick(entries, n_pick, floor):
    """Up to ``n_pick`` front entries: the likeliest to succeed above each of ``n_pick``
    fidelity levels spread from ``floor`` to the best the front reaches."""
    useful = [e for e in entries if e["fidelity"] > floor]
    if not useful:
        return []
    top = max(e["fidelity"] for e in useful)
    chosen = []
    for level in np.linspace(floor, top, n_pick + 1)[1:]:
        # entries run success-descending, fidelity-ascending: the first one above the level
        entry = next(e for e in useful if e["fidelity"] >= level - 1e-15)
        if entry not in chosen:
            chosen.append(entry)
    return chosen


def single_round_costs(catalogues, targets):
    """Per n and target: n / P of the likeliest catalogued round reaching F* in one round."""
    out = {}
    for n, catalogue in catalogues.items():
        for t in targets:
            ok = [e["success"] for e in catalogue.entries if e["fidelity"] >= t]
            out[n, t] = n / max(ok) if ok else np.inf
    return out


def after_one_round(profile, directory) -> str:
    """Cost of one 2->1 round, then one catalogued n->1 round pumping raw pairs into it.

    The catalogue is built for that kept pair (``kept_pair``); cost
    ``(cost(prefix) + n - 1) / P`` of the likeliest round reaching each target.
    """
    noise = profile.noise
    rows = []
    for prefix in ("pZ", "sY"):
        first = evaluate(prefix, profile)
        for n, gates in ((3, 3), (4, 4)):
            catalogue, _ = load_or_build(
                n,
                gates,
                pair=profile.raw,
                kept_pair=first.bell,
                two_qubit=noise.two_qubit,
                measurement=noise.measurement,
                directory=directory,
            )
            costs = []
            for t in TARGETS[1:4]:
                ok = [e["success"] for e in catalogue.entries if e["fidelity"] >= t]
                costs.append(f"{(first.raw_pairs_per_output + n - 1) / max(ok):.3f}" if ok else "-")
            rows.append(f"{prefix} then one {n}->1: " + " ".join(costs))
    head = "after one round, F* = " + "/".join(str(t) for t in TARGETS[1:4]) + ": "
    return head + "; ".join(rows)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--depth", type=int, default=6)
    parser.add_argument("--keep", type=int, default=150)
    parser.add_argument("--per-n", type=int, default=12)
    parser.add_argument("--catalogue-dir", default=None)
    args = parser.parse_args(argv)
    print(f"search: breadth first, depth <= {args.depth}, front thinned to {args.keep}")
    print(f"general rounds per n used by the search: {args.per_n} (spread along the front)")
    lines = []
    for profile in profiles():
        noise = profile.noise
        print(
            f"\n== {profile.name}: raw {np.round(profile.raw, 4).tolist()}, "
            f"p = {noise.two_qubit}, p1 = {noise.single_qubit}, eta = {noise.measurement}"
        )
        general = []
        catalogues = {}
        for n, gates in CATALOGUE_SIZES:
            started = time.perf_counter()
            catalogue, cached = load_or_build(
                n,
                gates,
                pair=profile.raw,
                two_qubit=noise.two_qubit,
                measurement=noise.measurement,
                directory=args.catalogue_dir,
            )
            took = time.perf_counter() - started
            print(
                f"catalogue n = {n}, <= {gates} CNOTs: {catalogue.before} circuits before "
                f"reduction, {catalogue.after} after, front {len(catalogue.entries)}; built in "
                f"{catalogue.build_seconds:.1f} s"
                + (f" (cached, loaded in {took:.2f} s)" if cached else "")
            )
            catalogues[n] = catalogue
            for e in pick(catalogue.entries, args.per_n, profile.raw[0]):
                general.append(Recipe((Round(e["form"], "raw", 0),)).rounds[0].selection)
        started = time.perf_counter()
        today = search(profile, ["single", "double"], depth=args.depth, keep=args.keep)
        t_today = time.perf_counter() - started
        started = time.perf_counter()
        new = search(profile, ["single", "double"] + general, depth=args.depth, keep=args.keep)
        t_new = time.perf_counter() - started
        print(f"search time: today's rounds {t_today:.1f} s, with general rounds {t_new:.1f} s")
        worst = 0.0
        one = single_round_costs(catalogues, TARGETS)
        print(
            f"{'F*':>6} {'today':>10} {'general':>10} {'saving':>8} "
            + " ".join(f"{f'one {n}->1':>9}" for n in catalogues)
            + "  recipes (today | general)"
        )
        for t in TARGETS:
            c0, r0 = today[t]
            c1, r1 = new[t]
            for c, r in ((c0, r0), (c1, r1)):
                if r is not None:
                    check = evaluate(Recipe(r), profile, canonicalise=False)
                    worst = max(worst, abs(check.raw_pairs_per_output - c) / c)
            saving = (c0 - c1) / c0 if np.isfinite(c0) and np.isfinite(c1) else np.nan
            text0 = format_recipe(Recipe(r0)) if r0 else "-"
            text1 = format_recipe(Recipe(r1)) if r1 else "-"
            singles = " ".join(f"{one[n, t]:>9.3f}" for n in catalogues)
            print(f"{t:>6} {c0:>10.3f} {c1:>10.3f} {saving:>8.1%} {singles}  {text0} | {text1}")
            lines.append((profile.name, t, c0, c1, saving))
        print(
            f"largest relative difference of the search's costs from models.evaluate: {worst:.1e}"
        )
        print(after_one_round(profile, args.catalogue_dir))
    print("\nsummary: saving at F* = 0.95 and 0.97")
    for name, t, c0, c1, saving in lines:
        if t in (0.95, 0.97):
            print(f"  {name:<20} F* = {t}: {c0:.3f} -> {c1:.3f} ({saving:.1%})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
