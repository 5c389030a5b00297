"""What the plots draw: the artists' coordinates against the figures of the front and the sweep.

The fronts come from exactly evaluated recipes (tests/optimise/test_reports.make_run);
the expected coordinates are computed here from front.json, and the hashing rate
from its published formula.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from test_reports import make_run

pytest.importorskip("matplotlib")

from optimise.plots import ORIENTATION, front_figure, half_decades, sweep_figure  # noqa: E402
from optimise.run import Run  # noqa: E402


@pytest.fixture
def front(tmp_path):
    folder = tmp_path / "made"
    make_run(folder)
    return Run(folder).read_front()


def artist(fig, gid):
    for ax in fig.axes:
        for a in list(ax.collections) + list(ax.lines):
            if a.get_gid() == gid:
                return a
    raise AssertionError(f"no artist {gid!r}; have {gids(fig)}")


def gids(fig):
    return sorted(
        a.get_gid() for ax in fig.axes for a in list(ax.collections) + list(ax.lines) if a.get_gid()
    )


def close(fig):
    import matplotlib.pyplot as plt

    plt.close(fig)


def test_front_points_are_the_front(front):
    fig = front_figure(front)
    try:
        drawn = np.asarray(artist(fig, "front").get_offsets())
        expected = np.array([(r.raw_pairs_per_output, 1 - r.fidelity) for r in front.results])
        order = np.lexsort(expected.T[::-1])
        np.testing.assert_allclose(drawn[np.lexsort(drawn.T[::-1])], expected[order], rtol=1e-12)
        ax = fig.axes[0]
        assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
        assert ORIENTATION in ax.get_title(loc="left")
        assert "infidelity" in ax.get_ylabel() and "raw pairs" in fig.axes[
            0
        ].get_xlabel() + " ".join(a.get_xlabel() for a in fig.axes)
        raw = np.asarray(artist(fig, "raw").get_offsets())
        np.testing.assert_allclose(raw, [[1.0, 1 - front.raw_fidelity]])
    finally:
        close(fig)


def test_baselines_are_drawn_by_name_with_their_depths(front):
    fig = front_figure(front)
    try:
        ax = fig.axes[0]
        texts = [t.get_text() for t in ax.texts]
        for name in {b.name for b in front.baselines}:
            members = sorted((b for b in front.baselines if b.name == name), key=lambda b: b.depth)
            line = artist(fig, f"baseline:{name}")
            np.testing.assert_allclose(
                line.get_xdata(), [b.result.raw_pairs_per_output for b in members]
            )
            np.testing.assert_allclose(line.get_ydata(), [1 - b.result.fidelity for b in members])
            assert line.get_label() in ("DEJMPS", "pumping")
            for b in members:
                assert str(b.depth) in texts
    finally:
        close(fig)


def test_targets_limits_and_the_hashing_rate_are_written_on_the_plot(front):
    limited = dataclasses.replace(
        front, settings={**front.settings, "limits": {"max_memory_per_node": 3}}
    )
    fig = front_figure(limited, targets=[0.95])
    try:
        ax = fig.axes[0]
        np.testing.assert_allclose(artist(fig, "target:0.95").get_ydata(), [0.05, 0.05])
        assert any("target F >= 0.95" in t.get_text() for t in ax.texts)
        assert "at most 3 qubits per node" in ax.get_title(loc="left")
        # hashing yield 1 - S(p) (Bennett, DiVincenzo, Smolin and Wootters, PRA 54, 3824 (1996))
        p = np.array(front.profile["raw_pair"])
        rate = 1 + np.sum(p * np.log2(p))
        np.testing.assert_allclose(artist(fig, "hashing").get_xdata(), [1 / rate, 1 / rate])
        assert any("not a bound" in t.get_text() for t in ax.texts)
    finally:
        close(fig)
    fig = front_figure(front)
    try:
        assert "no limits" in fig.axes[0].get_title(loc="left")
    finally:
        close(fig)


def test_ticks_sit_at_decades_and_their_halves(front):
    fig = front_figure(front)
    try:
        ax = fig.axes[0]
        for ticks in (ax.get_xticks(), ax.get_yticks()):
            assert len(ticks) >= 2
            for t in ticks:
                mantissa = t / 10 ** math.floor(math.log10(t) + 1e-9)
                assert mantissa == pytest.approx(1) or mantissa == pytest.approx(5), t
    finally:
        close(fig)
    assert half_decades(0.0123, 0.9) == [0.01, 0.05, 0.1, 0.5, 1.0]


def test_identical_points_are_drawn_once(front):
    r = front.results[0]
    twin = dataclasses.replace(r, notation=r.notation + ".sZ", recipe_id="0" * 12)
    doubled = dataclasses.replace(front, results=(r, twin) + front.results[1:])
    fig = front_figure(doubled)
    try:
        assert len(artist(fig, "front").get_offsets()) == len(front.results)
        assert any(t.get_text() == "x2" for t in fig.axes[0].texts)
    finally:
        close(fig)


def test_an_extra_objective_gets_its_own_panel(front):
    settings = {**front.settings, "objectives": ["fidelity", "yield", "memory"]}
    fig = front_figure(dataclasses.replace(front, settings=settings))
    try:
        panel = artist(fig, "panel:memory")
        drawn = sorted(map(tuple, np.asarray(panel.get_offsets())))
        expected = sorted((r.raw_pairs_per_output, r.memory_per_node) for r in front.results)
        np.testing.assert_allclose(drawn, expected)
        assert panel.axes is not fig.axes[0]
    finally:
        close(fig)


def test_sweep_plot_shows_the_baselines_and_the_followed_recipe():
    from models.baselines import BASELINES, baseline
    from models.evaluate import evaluate
    from optimise.profiles import demo_profile
    from optimise.sweep import run_sweep, sweep_profiles

    values = [0.98, 1.0]
    profiles = sweep_profiles(demo_profile(), "two_qubit", values)
    recipe = baseline("dejmps", 1)
    document = run_sweep(
        profiles,
        parameter="two_qubit",
        values=values,
        targets=[0.95],
        depth=1,
        recipes=[("dejmps:1", recipe)],
    )
    fig = sweep_figure(document)
    try:
        line = artist(fig, "sweep:baseline:dejmps")
        expected = [1 - evaluate(recipe, p).fidelity for p in profiles]  # depth 1 is its best
        np.testing.assert_allclose(line.get_ydata(), expected)
        followed = artist(fig, "sweep:recipe:0")
        np.testing.assert_allclose(followed.get_ydata(), expected)
        cheapest = artist(fig, "sweep:baseline-target:0.95")
        for y, p in zip(cheapest.get_ydata(), profiles, strict=True):
            reaching = [evaluate(baseline(n, 1), p) for n in BASELINES]
            costs = [r.raw_pairs_per_output for r in reaching if r.fidelity >= 0.95]
            assert (min(costs) if costs else math.nan) == pytest.approx(y, nan_ok=True)
        assert fig.axes[0].get_yscale() == "log"
    finally:
        close(fig)
