"""The front of a run as it grows: exhaustive results and finished trials merged.

Recipes found at one front point (identical values of the run's objectives) are
one point: the representative is the shortest, then alphabetically first,
canonical notation (:func:`optimise.rows.representative_order`) among all the
recipes found there, by whichever layer or trial and in whatever order; those of
them with the representative's every figure (fidelity, yield, memory, rounds,
time) are listed as its *equivalents*. So a table's recipe names depend on what
was found, never on the order it was found in.
"""

from __future__ import annotations

import math

from models.evaluate import evaluate
from models.notation import parse_recipe
from models.recipes import Recipe

from .front import Front, result_from_dict
from .objectives import OBJECTIVES, maximised, values_from_dict
from .pareto import quantise
from .rows import representative_order
from .run import now_iso, stillroom_version
from .samplers import counts_towards_budget


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


def _figures(entry: dict) -> tuple:
    """Every figure a table shows, quantised as front points are: equal means the same figures."""
    values = quantise(values_from_dict(entry, tuple(OBJECTIVES))).tolist()
    return (*values, entry["rounds"])


class FrontTracker:
    """The current front of a run, updated trial by trial, written as a :class:`Front`.

    The front is over the run's objectives, among the recipes that respect its
    limits, with one recipe per point and its equivalents (see the module doc).
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
        self._found: dict[str, dict] = {}  # recipe id -> {notation: figures} found at its point
        self._known = {r.recipe_id: r for r in exhaustive.results}
        if exhaustive.complete_depth:
            where = f"{exhaustive.space} (searched exhaustively: front complete there)"
        else:
            where = "no exhaustive layer"
        self.space_sentence = f"{where}; and {settings.space}, sampled by optuna" + (
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

    def add_layer(self, sentence: str, results, equivalents=None) -> None:
        """Offer the front of another search layer, named in the space.

        Parameters
        ----------
        sentence : str
            What the layer searched.
        results : list of RecipeResult
        equivalents : dict, optional
            Notation of a result -> other notations the layer found with identical
            figures; each is evaluated and offered too.
        """
        head, sep, tail = self.space_sentence.partition("; and ")
        self.space_sentence = f"{head}; {sentence}{sep}{tail}"
        others = [n for r in results for n in (equivalents or {}).get(r.notation, ())]
        for r in list(results) + [evaluate(n, self.profile) for n in others]:
            self._known.setdefault(r.recipe_id, r)
            self.offer(r.to_dict(), len(r.trace))

    def offer(self, entry: dict, depth: int) -> bool:
        """Consider one recipe (``RecipeResult.to_dict()`` form); True if the front changed.

        A recipe at a point already on the front joins the recipes found there;
        it becomes the point's representative if it comes first under
        :func:`optimise.rows.representative_order`.
        """
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
        same = None
        for other_id, (other, _, _) in self._front.items():
            if _dominates(other, values, self.maximise):
                return False
            if _same_point(other, values):
                same = other_id
        found = {entry["recipe"]: _figures(entry)}
        if same is not None:
            here = self._found[same]
            if entry["recipe"] in here:
                return False
            before = self.equivalents(same)
            here.update(found)
            representative = self._front[same][1]["recipe"]
            if representative_order(representative) <= representative_order(entry["recipe"]):
                return self.equivalents(same) != before
            found = self._found.pop(same)
            del self._front[same]
        for other_id, (other, _, _) in list(self._front.items()):
            if _dominates(values, other, self.maximise):
                del self._front[other_id]
                del self._found[other_id]
        self._front[entry["id"]] = (values, entry, depth)
        self._found[entry["id"]] = found
        return True

    def equivalents(self, recipe_id: str) -> tuple[str, ...]:
        """The other recipes found with every figure of the front recipe ``recipe_id``."""
        representative = self._front[recipe_id][1]["recipe"]
        found = self._found[recipe_id]
        return tuple(
            sorted(
                (n for n, f in found.items() if n != representative and f == found[representative]),
                key=representative_order,
            )
        )

    def add_trial(self, trial) -> bool:
        """Take a finished trial into account; True if the front changed."""
        if counts_towards_budget(trial):
            self.finished.add(trial.number)
        entry = trial.user_attrs.get("result")
        if trial.state.name != "COMPLETE" or entry is None:
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
                self._front.values(),
                key=lambda t: (
                    -t[1]["fidelity"],
                    -t[1]["yield"],
                    representative_order(t[1]["recipe"]),
                ),
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
            equivalents={
                e["recipe"]: self.equivalents(e["id"])
                for e in self.entries()
                if self.equivalents(e["id"])
            },
            baselines=tuple(self.baselines),
            target=self.target,
        )

    def write(self, n_trials: int | None):
        """Write ``front.json`` (atomically, through the :class:`Run`)."""
        return self.run.write_front(self.front(n_trials))
