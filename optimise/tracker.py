"""The front of a run as it grows: exhaustive results and finished trials merged."""

from __future__ import annotations

import math

from models.evaluate import evaluate
from models.notation import parse_recipe
from models.recipes import Recipe

from .front import Front, result_from_dict
from .objectives import maximised, values_from_dict
from .pareto import quantise
from .run import now_iso, stillroom_version
from .samplers import ERROR_ATTR
from .space import describe_space


def _dominates(a, b, maximise) -> bool:
    better = False
    for x, y, up in zip(a, b, maximise, strict=True):
        if (x < y) if up else (x > y):
            return False
        if x != y:
            better = True
    return better


def _same_point(a, b) -> bool:
    return tuple(a) == tuple(b)  # values are quantised (optimise.pareto.quantise)


class FrontTracker:
    """The current front of a run, updated trial by trial, written as a :class:`Front`.

    The front is over the run's objectives, among the recipes that respect its
    limits, with one recipe per point (the one of fewest rounds, then the first in
    alphabetical order of notation).
    """

    def __init__(
        self,
        run,
        *,
        profile,
        settings,
        recorded,
        baselines,
        exhaustive,
        complete,
    ):
        """
        Parameters
        ----------
        run : optimise.run.Run
        profile : models.Profile
        settings : optimise.settings.SearchSettings
        recorded : dict
            The settings as the run folder recorded them (with dates), for ``front.json``.
        baselines : list of BaselineResult
        exhaustive : optimise.exhaustive.ExhaustiveFront
        complete : bool
            Whether the exhaustive layer covers the whole searched space.
        """
        self.run = run
        self.profile = profile
        self.recorded = recorded
        self.objectives = settings.objectives
        self.maximise = maximised(self.objectives)
        self.limits = settings.limits
        max_depth = settings.depth_cap
        self.baselines = baselines
        self.exhaustive = exhaustive
        self.complete = complete
        self.target = None
        self.finished: set[int] = set()
        self._front: dict[str, tuple] = {}  # recipe id -> (values, entry, depth)
        self._known = {r.recipe_id: r for r in exhaustive.results}
        if exhaustive.complete_depth:
            where = f"{exhaustive.space} (searched exhaustively: front complete there)"
        else:
            where = "no exhaustive layer"
        self.space_sentence = f"{where}; and {describe_space(max_depth)}, sampled by optuna" + (
            "" if complete else " (not proven complete)"
        )
        # the raw pair is a recipe too, so nothing worse than doing nothing is listed
        self.offer(evaluate(Recipe(()), profile).to_dict(), 0)
        for r in exhaustive.results:
            self.offer(r.to_dict(), len(r.trace))
        for b in baselines:  # the study starts from them; listed even before it runs
            if b.depth <= max_depth:
                self._known.setdefault(b.result.recipe_id, b.result)
                self.offer(b.result.to_dict(), b.depth)

    def add_layer(self, sentence: str, results) -> None:
        """Offer the front of another search layer (RecipeResult objects), named in the space."""
        head, sep, tail = self.space_sentence.partition("; and ")
        self.space_sentence = f"{head}; {sentence}{sep}{tail}"
        for r in results:
            self._known.setdefault(r.recipe_id, r)
            self.offer(r.to_dict(), len(r.trace))

    def offer(self, entry: dict, depth: int) -> bool:
        """Consider one recipe (``RecipeResult.to_dict()`` form); True if the front changed."""
        violations = self.limits.violations(
            memory_per_node=entry["memory_per_node"],
            time_per_output_s=(
                math.inf if entry["time_per_output_s"] is None else entry["time_per_output_s"]
            ),
            depth=depth,
        )
        if any(v > 0 for v in violations.values()) or entry["id"] in self._front:
            return False
        values = tuple(quantise(values_from_dict(entry, self.objectives)).tolist())
        rank = (depth, len(entry["recipe"]), entry["recipe"])
        for other_id, (other, other_entry, other_depth) in list(self._front.items()):
            if _dominates(other, values, self.maximise):
                return False
            if _same_point(other, values):
                other_rank = (other_depth, len(other_entry["recipe"]), other_entry["recipe"])
                if other_rank <= rank:
                    return False
                del self._front[other_id]
        for other_id, (other, _, _) in list(self._front.items()):
            if _dominates(values, other, self.maximise):
                del self._front[other_id]
        self._front[entry["id"]] = (values, entry, depth)
        return True

    def add_trial(self, trial) -> bool:
        """Take a finished trial into account; True if the front changed."""
        state = trial.state.name
        if state in ("COMPLETE", "PRUNED") or (state == "FAIL" and ERROR_ATTR in trial.user_attrs):
            self.finished.add(trial.number)
        entry = trial.user_attrs.get("result")
        if state != "COMPLETE" or entry is None:
            return False
        # studies written before the depth attribute was dropped still carry it
        depth = (
            trial.user_attrs.get("depth")
            or entry.get("rounds")
            or parse_recipe(entry["recipe"]).depth
        )
        return self.offer(entry, depth)

    def add_trials(self, trials) -> bool:
        changed = False
        for trial in trials:
            if trial.number not in self.finished:
                changed = self.add_trial(trial) or changed
        return changed

    def entries(self) -> list[dict]:
        """Front entries, fidelity descending."""
        return [
            e
            for _, e, _ in sorted(
                self._front.values(), key=lambda t: (-t[1]["fidelity"], -t[1]["yield"])
            )
        ]

    def size(self) -> int:
        return len(self._front)

    def best_fidelity(self):
        return max((e["fidelity"] for _, e, _ in self._front.values()), default=None)

    def results(self) -> list:
        """The front as RecipeResult objects, fidelity descending."""
        out = []
        for entry in self.entries():
            known = self._known.get(entry["id"])
            out.append(known if known is not None else evaluate(entry["recipe"], self.profile))
        return out

    def front(self, n_trials: int | None) -> Front:
        """The front as it stands (recipes as stored: without their round-by-round trace)."""
        return Front(
            stillroom_version=stillroom_version(),
            created=self.recorded.get("created"),
            updated=now_iso(),
            profile=self.profile.to_dict(),
            settings=self.recorded,
            searched_space=self.space_sentence,
            complete_depth=self.exhaustive.complete_depth,
            complete=bool(self.complete),
            n_trials=len(self.finished) if n_trials is None else int(n_trials),
            results=tuple(result_from_dict(e) for e in self.entries()),
            baselines=tuple(self.baselines),
            target=self.target,
        )

    def write(self, n_trials: int | None):
        """Write ``front.json`` (atomically, through the :class:`Run`)."""
        return self.run.write_front(self.front(n_trials))
