"""What a study starts from: the exhaustive front (cached in the run folder) and the baselines."""

from __future__ import annotations

from joblib.parallel import (
    LokyBackend,
    MultiprocessingBackend,
    SequentialBackend,
    ThreadingBackend,
    get_active_backend,
)

from models.notation import parse_recipe

from .deep import DeepFront, deep_front
from .exhaustive import ExhaustiveFront, exhaustive_front
from .pareto import evenly_spread
from .settings import DEEP_LEVELS_LIMIT, parse_check_rounds
from .space import SELECTION_CHOICES, recipe_params

# automatic depth: expand a depth only while it needs at most this many rounds
# evaluated, which keeps the exhaustive layer to seconds (see tests/benchmarks)
AUTO_MAX_EVALUATIONS = 3_000_000

# joblib backends on this machine: the search's --workers says how many to use
LOCAL_BACKENDS = (LokyBackend, MultiprocessingBackend, SequentialBackend, ThreadingBackend)

NO_EXHAUSTIVE_LAYER = ExhaustiveFront(
    results=[],
    states_per_depth=(),
    evaluations_per_depth=(),
    complete=False,
    complete_depth=0,
    space="no exhaustive layer",
    symmetry="none",
    seconds=0.0,
)
NO_DEEP_LAYER = DeepFront(
    results=[],
    equivalents={},
    pairs_per_level=(),
    evaluations_per_level=(),
    depth=0,
    layers=0,
    width=0,
    space="no deep layer",
    seconds=0.0,
)


def layer_jobs(settings) -> int | None:
    """Workers of the exhaustive and deep layers of a search.

    On this machine (joblib's local backends, local processes by default) the
    search's ``workers``, so one worker runs the layers in its own process; on a
    cluster backend the caller chose with :func:`joblib.parallel_config` (Dask),
    the number configured there, or all of the cluster's workers.
    """
    backend, configured = get_active_backend()
    if isinstance(backend, LOCAL_BACKENDS):
        return settings.workers
    return -1 if configured is None else configured


def release_layer_workers() -> None:
    """End the local processes the layers ran on, once they are done.

    joblib keeps its local worker processes idle for minutes after the work, to
    be used again; a search has no more use for them, and they would outlive a
    killed search (holding its output streams open).
    """
    backend, _ = get_active_backend()
    if isinstance(backend, LokyBackend):
        from joblib.externals.loky import get_reusable_executor

        get_reusable_executor().shutdown(wait=True)


def exhaustive_layer(profile, run, settings, on_depth=None) -> ExhaustiveFront:
    """The exhaustive front of the run, computed once and kept by the :class:`Run`.

    Parameters
    ----------
    profile : models.Profile
    run : optimise.run.Run
    settings : optimise.settings.SearchSettings
    on_depth : callable, optional
        See :func:`optimise.exhaustive.exhaustive_front`.
    """
    requested = settings.exhaustive_depth
    if requested == 0:
        return NO_EXHAUSTIVE_LAYER
    cached = run.read_exhaustive(profile)
    if cached is not None:
        return cached
    depth = settings.depth_cap
    front = exhaustive_front(
        profile,
        max_depth=depth if requested is None else min(requested, depth),
        objectives=settings.objectives,
        limits=settings.limits,
        n_jobs=layer_jobs(settings),
        max_evaluations=AUTO_MAX_EVALUATIONS if requested is None else None,
        on_depth=on_depth,
    )
    run.write_exhaustive(front)
    return front


def enqueue_known(
    study, notations, max_depth: int, between=None, selections=SELECTION_CHOICES
) -> int:
    """Enqueue recipes (skipping those already in the study); returns how many were new.

    ``between``, if given, is called after each recipe enqueued (a place to stop);
    recipes outside the space (``max_depth``, ``selections``) are skipped.
    """
    seen, count = set(), 0
    before = len(study.get_trials(deepcopy=False))
    for notation in notations:
        params = recipe_params(parse_recipe(notation), max_depth, selections)
        if params is None:
            continue
        key = tuple(sorted(params.items()))
        if key in seen:
            continue
        seen.add(key)
        study.enqueue_trial(params, skip_if_exists=True)
        count += 1
        if between is not None:
            between()
    return len(study.get_trials(deepcopy=False)) - before if count else 0


def check_round_selections(profile, settings, directory=None) -> tuple[str, ...]:
    """The general check rounds a search offers its second deep pass and its study.

    From each catalogue of ``settings.check_rounds`` (built for the profile's raw
    pair, two-qubit gates and measurements, or read from the cache,
    :func:`optimise.catalogue.load_or_build`), the rounds whose fidelity on raw
    pairs beats the raw pair's, ``settings.check_rounds_top`` of them spread
    evenly along the front (success descending), in catalogue order.
    """
    from .catalogue import load_or_build

    chosen = []
    for n, g in parse_check_rounds(settings.check_rounds):
        catalogue, _ = load_or_build(
            n,
            g,
            pair=profile.raw,
            two_qubit=profile.noise.two_qubit,
            measurement=profile.noise.measurement,
            directory=directory,
        )
        useful = [e["form"] for e in catalogue.entries if e["fidelity"] > profile.raw[0]]
        picks = evenly_spread(len(useful), settings.check_rounds_top)
        chosen += [useful[i] for i in picks if useful[i] not in chosen]
    return tuple(chosen)


def study_selections(profile, settings, directory=None) -> tuple[str, ...]:
    """The step kinds the study samples: the built-in ones, then the check rounds
    offered (:func:`check_round_selections`), when the search asks for them."""
    if settings.check_rounds is None:
        return SELECTION_CHOICES
    return SELECTION_CHOICES + check_round_selections(profile, settings, directory)


def check_round_layer(profile, settings, seeds, general, on_level=None) -> DeepFront:
    """A second deep pass that may also use general check rounds (``--check-rounds``).

    The same levels, width and layers as :func:`deep_layer`, seeded with the
    same known recipes and the first pass's linear front; its front joins the
    search's front beside the first pass's, so offering the new rounds never
    loses a point the first pass found (its pruning differs: it has more
    candidates per level). ``general``: the rounds offered (the study's, as
    :func:`study_selections` gives them, less the built-in kinds). None when
    there are none or no deep layer.
    """
    if not general or deep_levels(settings) == 0:
        return None
    return deep_layer(profile, settings, seeds, on_level=on_level, general=general)


def deep_levels(settings) -> int:
    """Levels of a search's deep layer: ``settings.deep_levels``, or (None) twice the
    depth cap, at most :data:`optimise.settings.DEEP_LEVELS_LIMIT`."""
    if settings.deep_levels is not None:
        return settings.deep_levels
    return min(2 * settings.depth_cap, DEEP_LEVELS_LIMIT)


def deep_layer(profile, settings, seeds, on_level=None, general=()) -> DeepFront:
    """The deep layer of a search (:mod:`optimise.deep`), seeded with known recipes.

    Levels: :func:`deep_levels` (the default ``--depth 5`` gives 10; 0: no deep
    layer); width and Pareto layers: ``settings.deep_width``, ``deep_layers``.
    Front recipes keep to the depth cap in their main chain, deeper pairs serve as
    sacrificed pairs. Deterministic, so a resumed run computes the same front again.
    ``general``: general check rounds offered besides the built-in kinds
    (:func:`check_round_layer`).
    """
    levels = deep_levels(settings)
    if levels == 0:
        return NO_DEEP_LAYER
    return deep_front(
        profile,
        max_depth=levels,
        max_chain=settings.depth_cap,
        width=settings.deep_width,
        layers=settings.deep_layers,
        objectives=settings.objectives,
        limits=settings.limits,
        seeds=seeds,
        on_level=on_level,
        n_jobs=layer_jobs(settings),
        general=general,
    )
