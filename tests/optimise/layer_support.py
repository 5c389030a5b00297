"""Helpers of the tests that run the exhaustive and deep layers on several workers.

The layers share their work out only when a level has several pieces; at test
sizes a level is one piece, so :func:`split_small` makes the pieces small (the
pieces are then the same for every number of workers, which is what is compared).
"""

from __future__ import annotations

import json

from optimise import deep, exhaustive


def split_small(monkeypatch) -> None:
    """Many pieces per level: deep-layer units of 64 rows, exhaustive chunks at any size."""
    monkeypatch.setattr(deep, "BATCH", 64)
    monkeypatch.setattr(exhaustive, "PARALLEL_MIN_ROWS", 0)


def deep_bytes(front) -> bytes:
    """A deep front as the bytes of its JSON: results, equivalents and level counts."""
    data = {
        "results": [r.to_dict() for r in front.results],
        "equivalents": front.equivalents,
        "pairs_per_level": front.pairs_per_level,
        "evaluations_per_level": front.evaluations_per_level,
    }
    return json.dumps(data, indent=1).encode()


def exhaustive_bytes(front) -> bytes:
    """An exhaustive front as the bytes of its JSON: results and counts per depth."""
    data = {
        "results": [r.to_dict() for r in front.results],
        "states_per_depth": front.states_per_depth,
        "evaluations_per_depth": front.evaluations_per_depth,
    }
    return json.dumps(data, indent=1).encode()


class CountingParallel:
    """Stands in for ``joblib.Parallel`` in a layer's module: counts the calls, then runs them."""

    calls = 0

    def __init__(self, *args, **kwargs):
        from joblib import Parallel

        type(self).calls += 1
        self.parallel = Parallel(*args, **kwargs)

    def __call__(self, tasks):
        return self.parallel(tasks)
