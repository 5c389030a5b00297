"""Plots of a run's Pareto front and of a noise sweep (matplotlib, Agg backend).

Sizes are fixed so that a paper's layout does not shift between runs:
``front.png`` is :data:`FIGURE_INCHES` at :data:`PNG_DPI` (1500 x 900 pixels),
``front.svg`` is the same figure in points (540 x 324 pt).
"""

from __future__ import annotations

import io
import math
from pathlib import Path

from .files import write_atomic
from .labels import baseline_title

FIGURE_INCHES = (7.5, 4.5)
PNG_DPI = 200
PNG_PIXELS = (round(FIGURE_INCHES[0] * PNG_DPI), round(FIGURE_INCHES[1] * PNG_DPI))
SVG_POINTS = (FIGURE_INCHES[0] * 72, FIGURE_INCHES[1] * 72)

# a palette of our own: ink, slate teal for the front, warm tones for the references
INK = "#23262b"
FRONT = "#156f73"
FRONT_FILL = "#d6ecea"
RAW = "#8a5a00"
GRID = "#e4e1da"
BASELINE_STYLES = (
    ("#b4462b", "s"),
    ("#7b5ea7", "D"),
    ("#c48a12", "^"),
    ("#4f7a28", "v"),
    ("#8c6d62", "P"),
    ("#3d5a80", "X"),
)
FIDELITY_LABEL = "output fidelity F"
YIELD_LABEL = "yield (output pairs per raw pair)"


def available() -> bool:
    """True when matplotlib is installed (the ``plot`` extra: ``pip install stillroom[plot]``)."""
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        return False
    return True


def _pyplot():
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    return plt


def _style(ax) -> None:
    ax.set_facecolor("#fbfaf7")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(INK)
    ax.tick_params(which="both", colors=INK, labelsize=8)
    ax.grid(True, which="major", color=GRID, linewidth=0.8)
    ax.set_axisbelow(True)


def _save(fig, stem: Path) -> list[Path]:
    import matplotlib

    paths = []
    # a fixed salt for the SVG's element ids: the same figure gives the same file
    with matplotlib.rc_context({"svg.hashsalt": "stillroom"}):
        for ext in ("png", "svg"):
            buffer = io.BytesIO()
            fig.savefig(buffer, format=ext, dpi=PNG_DPI, metadata=_metadata(ext))
            paths.append(write_atomic(stem.with_suffix("." + ext), buffer.getvalue()))
    return paths


def _metadata(ext: str) -> dict:
    # no creation date: the same front gives the same file
    if ext == "svg":
        return {"Date": None, "Creator": "stillroom"}
    return {"Software": "stillroom"}


def front_figure(front):
    """The Pareto front of a run (an :class:`optimise.front.Front`) as a matplotlib figure."""
    from models import hashing_yield

    plt = _pyplot()
    fig, ax = plt.subplots(figsize=FIGURE_INCHES, layout="constrained")
    fig.patch.set_facecolor("white")
    _style(ax)
    points = sorted(front.results, key=lambda r: r.fidelity)
    raw = front.profile["raw_pair"]
    ys_all = [r.pair_yield for r in points] + [b.result.pair_yield for b in front.baselines]
    ys_all.append(1.0)

    if points:
        fs = [r.fidelity for r in points]
        ys = [r.pair_yield for r in points]
        ax.step(fs, ys, where="pre", color=FRONT, linewidth=1.2, alpha=0.6, zorder=2)
        ax.scatter(
            fs,
            ys,
            s=34,
            color=FRONT,
            edgecolor="white",
            linewidth=0.8,
            zorder=4,
            label=f"Pareto front ({len(points)} recipes)",
        )
        if len(points) <= 12:
            for r in points:
                ax.annotate(
                    r.notation,
                    (r.fidelity, r.pair_yield),
                    xytext=(4, 4),
                    textcoords="offset points",
                    fontsize=6.5,
                    color=FRONT,
                    zorder=5,
                )

    families: dict[str, list] = {}
    for b in front.baselines:
        families.setdefault(b.name or "baseline", []).append(b)
    for (name, members), (colour, marker) in zip(families.items(), _cycle(), strict=False):
        members = sorted(members, key=lambda b: b.depth or b.result.rounds)
        ax.plot(
            [b.result.fidelity for b in members],
            [b.result.pair_yield for b in members],
            linestyle=(0, (2, 2)),
            linewidth=0.8,
            color=colour,
            marker=marker,
            markersize=4.5,
            markerfacecolor="white",
            markeredgewidth=1.1,
            zorder=3,
            label=baseline_title(name),
        )

    ax.scatter(
        [raw[0]],
        [1.0],
        marker="o",
        s=40,
        facecolor="white",
        edgecolor=RAW,
        linewidth=1.4,
        zorder=4,
        label="raw pair",
    )
    h = float(hashing_yield(raw))
    if h > 0:
        ax.axhline(h, color=RAW, linewidth=0.8, linestyle=(0, (1, 2)), zorder=1)
        ax.annotate(
            f"raw pair's hashing yield 1 - S = {h:.3f}",
            (0.99, h),
            xycoords=("axes fraction", "data"),
            xytext=(0, 3),
            textcoords="offset points",
            fontsize=6.5,
            color=RAW,
            ha="right",
        )
    positive = [y for y in ys_all if y > 0]
    if positive and max(positive) / min(positive) > 20:
        ax.set_yscale("log")
    ax.set_xlabel(FIDELITY_LABEL, color=INK, fontsize=9)
    ax.set_ylabel(YIELD_LABEL, color=INK, fontsize=9)
    name = front.profile_name
    if front.complete:
        status = "complete for the searched space"
    elif front.complete_depth:
        status = f"complete to depth {front.complete_depth}, sampled beyond"
    else:
        status = "sampled"
    ax.set_title(f"{name}: fidelity against yield ({status})", color=INK, fontsize=10, loc="left")
    fig.legend(fontsize=7, frameon=False, loc="outside right upper")
    return fig


def _cycle():
    while True:
        yield from BASELINE_STYLES


def write_front_plots(front, stem, *, targets=()) -> list[Path]:
    """Write ``<stem>.png`` and ``<stem>.svg`` (a run's ``front``); returns their paths."""
    plt = _pyplot()
    fig = front_figure(front)
    try:
        return _save(fig, Path(stem))
    finally:
        plt.close(fig)


def sweep_figure(sweep: dict):
    """Highest reachable fidelity and cheapest cost per target along a parameter sweep.

    ``sweep`` is the document :func:`optimise.sweep.run_sweep` returns.
    """
    plt = _pyplot()
    fig, (top, bottom) = plt.subplots(
        2,
        1,
        figsize=FIGURE_INCHES,
        sharex=True,
        layout="constrained",
        gridspec_kw={"height_ratios": (1, 1)},
    )
    fig.patch.set_facecolor("white")
    for ax in (top, bottom):
        _style(ax)
    xs = [point["value"] for point in sweep["points"]]
    top.plot(
        xs,
        [p["best"]["fidelity"] for p in sweep["points"]],
        color=FRONT,
        marker="o",
        markersize=4,
        linewidth=1.4,
        label="highest fidelity reachable",
    )
    top.plot(
        xs,
        [p["raw_fidelity"] for p in sweep["points"]],
        color=RAW,
        linestyle=(0, (1, 2)),
        linewidth=1.0,
        label="raw pair",
    )
    top.set_ylabel(FIDELITY_LABEL, color=INK, fontsize=8)
    top.legend(fontsize=7, frameon=False)
    reached = []
    for k, (target, (colour, marker)) in enumerate(zip(sweep["targets"], _cycle(), strict=False)):
        ys = []
        for p in sweep["points"]:
            answer = p["targets"][k]
            ys.append(answer["recipe"]["yield"] if answer["reached"] else math.nan)
        reached += [y for y in ys if y > 0]
        bottom.plot(
            xs,
            ys,
            color=colour,
            marker=marker,
            markersize=4,
            linewidth=1.2,
            label=f"cheapest recipe reaching F >= {target:g}",
        )
    if reached and max(reached) / min(reached) > 20:
        bottom.set_yscale("log")
    bottom.set_ylabel(YIELD_LABEL, color=INK, fontsize=8)
    bottom.set_xlabel(sweep["parameter_label"], color=INK, fontsize=9)
    if sweep.get("log_scale"):
        bottom.set_xscale("log")
    if sweep["targets"]:
        bottom.legend(fontsize=7, frameon=False)
    top.set_title(
        f"{sweep['profile']['name']}: sweep of {sweep['parameter']} "
        f"(every linear recipe to depth {sweep['depth']})",
        color=INK,
        fontsize=9,
        loc="left",
    )
    return fig


def write_sweep_plots(sweep: dict, stem) -> list[Path]:
    """Write ``<stem>.png`` and ``<stem>.svg``; returns their paths."""
    plt = _pyplot()
    fig = sweep_figure(sweep)
    try:
        return _save(fig, Path(stem))
    finally:
        plt.close(fig)
