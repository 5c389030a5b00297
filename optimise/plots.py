"""Plots of a run's Pareto front and of a noise sweep (matplotlib, Agg backend).

One look for every plot stillroom draws: white background, thin dark axes, a
light grid, the Okabe-Ito colours (distinguishable with the common forms of
colour blindness; Okabe and Ito, "Color Universal Design" (2008): common
practice), and one orientation: **infidelity 1 - F on a log axis (up is
worse) against raw pairs per output pair on a log axis (right is dearer)**.
The right axis repeats the fidelity F and the top axis the yield, so either
reading is at hand. Log ticks sit at every decade and its half (1, 5, 10,
50, ...).

Sizes are fixed so that a paper's layout does not shift between runs:
``front.png`` is :data:`FIGURE_INCHES` at :data:`PNG_DPI` (1500 x 900 pixels),
``front.svg`` is the same figure in points (540 x 324 pt).

Every data artist carries a ``gid`` (``front``, ``front-steps``, ``raw``,
``baseline:<name>``, ``hashing``, ``target:<F>``, ``panel:<objective>``,
``sweep:...``) so that tests and notebooks find the drawn coordinates.
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

# Okabe-Ito palette
BLACK = "#000000"
ORANGE = "#E69F00"
SKY = "#56B4E9"
GREEN = "#009E73"
YELLOW = "#F0E442"
BLUE = "#0072B2"
VERMILLION = "#D55E00"
PURPLE = "#CC79A7"
INK = "#222222"
GRID = "#e6e6e6"
FRONT = BLUE
RAW = BLACK
TARGET = "#555555"
BASELINE_STYLES = (
    (VERMILLION, "s"),
    (ORANGE, "D"),
    (GREEN, "^"),
    (PURPLE, "v"),
    (SKY, "P"),
    (BLACK, "X"),
)

INFIDELITY_LABEL = "infidelity 1 - F"
COST_LABEL = "raw pairs per output pair"
FIDELITY_LABEL = "output fidelity F"
YIELD_LABEL = "yield (output pairs per raw pair)"
ORIENTATION = "infidelity 1 - F against raw pairs per output pair"
EXTRA_PANELS = {"memory": ("memory / node", "qubits"), "time": ("time / output", "s")}


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
    ax.set_facecolor("white")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(INK)
        ax.spines[side].set_linewidth(0.8)
    ax.tick_params(which="both", colors=INK, labelsize=7)
    ax.grid(True, which="major", color=GRID, linewidth=0.6)
    ax.set_axisbelow(True)


def half_decades(low: float, high: float) -> list[float]:
    """Ticks at 1 and 5 times each power of ten, from the last at or below ``low``
    to the first at or above ``high`` (both positive).

    Examples
    --------
    >>> half_decades(0.003, 0.08)
    [0.001, 0.005, 0.01, 0.05, 0.1]
    >>> half_decades(1, 41.6)
    [1.0, 5.0, 10.0, 50.0]
    """
    first, last = math.floor(math.log10(low)), math.ceil(math.log10(high))
    values = [float(f"{m}e{k}") for k in range(first, last + 1) for m in (1, 5)]
    lo = max(v for v in values if v <= low * (1 + 1e-12))
    hi = min(v for v in values if v >= high * (1 - 1e-12))
    return [v for v in values if lo <= v <= hi]


def _log_ticks(axis, values, *, floor: float | None = None) -> list[float]:
    """Ticks at decades and halves around ``values`` on a log axis; returns them."""
    from matplotlib.ticker import FixedLocator, NullLocator

    positive = [v for v in values if v > 0 and math.isfinite(v)]
    if floor is not None:
        positive = [max(v, floor) for v in positive]
    low, high = (min(positive), max(positive)) if positive else (0.1, 1.0)
    ticks = half_decades(low, high)
    axis.set_major_locator(FixedLocator(ticks))
    axis.set_minor_locator(NullLocator())
    axis.set_major_formatter(_tick_formatter())
    return ticks


def _tick_formatter():
    from matplotlib.ticker import FuncFormatter

    return FuncFormatter(lambda v, _: f"{v:g}")


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


def _point(r) -> tuple[float, float]:
    return float(r.raw_pairs_per_output), max(1.0 - float(r.fidelity), 0.0)


def distinct_points(results) -> list[tuple[tuple[float, float], list]]:
    """Front points with identical (raw pairs, infidelity), each drawn once with its recipes."""
    from .pareto import quantise

    groups: dict[tuple, list] = {}
    for r in results:
        x, y = _point(r)
        key = tuple(quantise([x, y]).tolist())
        groups.setdefault(key, []).append(r)
    return [(_point(members[0]), members) for members in groups.values()]


def _limits_text(front) -> str:
    from .limits import as_limits

    try:
        limits = as_limits((front.settings or {}).get("limits"))
    except (TypeError, ValueError):
        return ""
    return f"limits: {limits.describe()}" if limits.any else "no limits"


def _status(front) -> str:
    if front.complete:
        return "complete for the searched space"
    if front.complete_depth:
        # beyond the exhaustive layer the deep layer and the study search without proof
        return f"complete to depth {front.complete_depth}, searched beyond (not proven)"
    return "sampled"


def _finish_axes(ax, xs, ys) -> None:
    """Log axes with ticks at decades and halves, and the mirrored F (right) and yield (top)."""
    ax.set_xscale("log")
    ax.set_yscale("log")
    xticks = _log_ticks(ax.xaxis, xs + [1.0])
    yticks = _log_ticks(ax.yaxis, ys, floor=1e-9)
    ax.set_xlim(min(xticks), max(xticks))
    ax.set_ylim(min(yticks), max(yticks))
    right = ax.twinx()
    right.set_yscale("log")
    right.set_ylim(ax.get_ylim())
    right.set_yticks(yticks, [f"{1 - t:.10g}" for t in yticks])
    right.minorticks_off()
    right.set_ylabel(FIDELITY_LABEL, color=INK, fontsize=8)
    top = ax.twiny()
    top.set_xscale("log")
    top.set_xlim(ax.get_xlim())
    top.set_xticks(xticks, [f"{1 / t:.3g}" for t in xticks])
    top.minorticks_off()
    top.set_xlabel(YIELD_LABEL, color=INK, fontsize=8)
    for twin in (right, top):
        twin.tick_params(colors=INK, labelsize=7)
        for spine in twin.spines.values():
            spine.set_visible(False)


def front_figure(front, *, targets=()):
    """The Pareto front of a run (an :class:`optimise.front.Front`) as a matplotlib figure.

    Parameters
    ----------
    front : optimise.front.Front
    targets : sequence of float
        Target fidelities drawn as horizontal lines (the run's own target is added).

    Returns
    -------
    matplotlib.figure.Figure
        Infidelity against raw pairs per output (both log), the textbook
        baselines by name with each point's depth written beside it, the raw
        pair, the targets, the raw pair's hashing rate marked "not a bound";
        below it one small panel per objective beyond fidelity and yield.
    """
    from models import hashing_yield

    plt = _pyplot()
    objectives = list((front.settings or {}).get("objectives") or ("fidelity", "yield"))
    extras = [o for o in objectives if o in EXTRA_PANELS]
    ratios = (3,) + (1,) * len(extras)
    fig, axes = plt.subplots(
        1 + len(extras),
        1,
        figsize=FIGURE_INCHES,
        sharex=True,
        layout="constrained",
        gridspec_kw={"height_ratios": ratios},
        squeeze=False,
    )
    axes = list(axes[:, 0])
    ax = axes[0]
    fig.patch.set_facecolor("white")
    for a in axes:
        _style(a)
    raw = front.profile["raw_pair"]
    xs, ys = [1.0], [1.0 - raw[0]]

    drawn = distinct_points(front.results)
    if drawn:
        px = [p[0] for p, _ in drawn]
        py = [p[1] for p, _ in drawn]
        xs += px
        ys += py
        steps = _staircase([p for p, _ in drawn])
        ax.step(
            [p[0] for p in steps],
            [p[1] for p in steps],
            where="post",
            color=FRONT,
            linewidth=1.0,
            alpha=0.5,
            zorder=2,
            gid="front-steps",
        )
        ax.scatter(
            px,
            py,
            s=22,
            color=FRONT,
            edgecolor="white",
            linewidth=0.6,
            zorder=4,
            label=f"Pareto front ({len(front.results)} recipes)",
            gid="front",
        )
        for (x, y), members in drawn:
            if len(members) > 1:
                ax.annotate(
                    f"x{len(members)}",
                    (x, y),
                    xytext=(3, -7),
                    textcoords="offset points",
                    fontsize=5.5,
                    color=FRONT,
                )
        from .rows import cover

        ordered = [members[0] for _, members in drawn]
        for i in cover(ordered, 5):
            r = ordered[i]
            text = r.notation if len(r.notation) <= 20 else r.notation[:19] + "..."
            ax.annotate(
                text,
                _point(r),
                xytext=(4, 3),
                textcoords="offset points",
                fontsize=5.5,
                color=FRONT,
                zorder=5,
            )

    families: dict[str, list] = {}
    for b in front.baselines:
        families.setdefault(b.name or "baseline", []).append(b)
    for name, members in families.items():
        colour, marker = baseline_style(name)
        members = sorted(members, key=lambda b: b.depth or b.result.rounds)
        bx = [_point(b.result)[0] for b in members]
        by = [_point(b.result)[1] for b in members]
        xs += [x for x in bx if math.isfinite(x)]
        ys += by
        ax.plot(
            bx,
            by,
            linestyle=(0, (2, 2)),
            linewidth=0.8,
            color=colour,
            marker=marker,
            markersize=4,
            markerfacecolor="white",
            markeredgewidth=1.0,
            zorder=3,
            label=f"{baseline_title(name)}",
            gid=f"baseline:{name}",
        )
        for b, x, y in zip(members, bx, by, strict=True):
            if math.isfinite(x):
                ax.annotate(
                    str(b.depth),
                    (x, y),
                    xytext=(-3, 4),
                    textcoords="offset points",
                    fontsize=5.5,
                    color=colour,
                    ha="right",
                )

    ax.scatter(
        [1.0],
        [1.0 - raw[0]],
        marker="o",
        s=30,
        facecolor="white",
        edgecolor=RAW,
        linewidth=1.2,
        zorder=4,
        label="raw pair",
        gid="raw",
    )
    wanted = sorted(set(targets) | ({front.target.target_fidelity} if front.target else set()))
    ys += [1.0 - t for t in wanted]
    _finish_axes(ax, xs, ys)
    for t in wanted:
        ax.axhline(1.0 - t, color=TARGET, linewidth=0.8, linestyle=(0, (4, 2)), gid=f"target:{t:g}")
        ax.annotate(
            f"target F >= {t:g}",
            (0.995, 1.0 - t),
            xycoords=("axes fraction", "data"),
            xytext=(0, 2),
            textcoords="offset points",
            fontsize=6,
            color=TARGET,
            ha="right",
        )
    h = float(hashing_yield(raw))
    if h > 0 and 1.0 / h <= ax.get_xlim()[1]:
        ax.axvline(1.0 / h, color=RAW, linewidth=0.7, linestyle=(0, (1, 2)), gid="hashing")
        ax.annotate(
            f"hashing rate of the raw pair, 1/(1 - S) = {1 / h:.3g}: not a bound",
            (1.0 / h, 0.98),
            xycoords=("data", "axes fraction"),
            xytext=(-2, 0),
            textcoords="offset points",
            fontsize=5.5,
            color=RAW,
            rotation=90,
            va="top",
            ha="right",
        )
    ax.set_ylabel(INFIDELITY_LABEL, color=INK, fontsize=8)

    for panel, objective in zip(axes[1:], extras, strict=True):
        title, unit = EXTRA_PANELS[objective]
        from .objectives import OBJECTIVES

        attribute = OBJECTIVES[objective].attribute
        values = [float(getattr(r, attribute)) for _, members in drawn for r in members[:1]]
        panel.scatter([p[0] for p, _ in drawn], values, s=12, color=FRONT, gid=f"panel:{objective}")
        panel.set_ylabel(f"{title}\n({unit})", color=INK, fontsize=7)
    axes[-1].set_xlabel(COST_LABEL + " (log)", color=INK, fontsize=8)
    for panel in axes[1:]:
        panel.tick_params(labelbottom=panel is axes[-1])
    ax.tick_params(labelbottom=not extras)

    name = front.profile_name
    caption = f"{_status(front)}; {_limits_text(front)}".strip("; ")
    ax.set_title(f"{name}: {ORIENTATION}\n{caption}", color=INK, fontsize=8.5, loc="left")
    legend = fig.legend(
        fontsize=6,
        frameon=False,
        loc="outside right upper",
        title="numbers beside a baseline:\nits depth (rounds)",
        title_fontsize=6,
    )
    legend.get_title().set_color(INK)
    return fig


def _staircase(points) -> list[tuple[float, float]]:
    """The points no other beats in both plotted figures, by raw pairs ascending.

    With two objectives that is every point; with more, the others are off
    this staircase because they win on memory or time (their own panels).
    """
    finite = sorted(p for p in points if math.isfinite(p[0]))
    out = []
    for x, y in finite:
        if not out or y < out[-1][1]:
            out.append((x, y))
    return out


def _cycle():
    while True:
        yield from BASELINE_STYLES


def baseline_style(name: str) -> tuple[str, str]:
    """Colour and marker of a textbook baseline, the same in every plot."""
    from models.baselines import BASELINES

    names = list(BASELINES)
    index = names.index(name) if name in names else len(names)
    return BASELINE_STYLES[index % len(BASELINE_STYLES)]


# the cheapest recipe per target (sweep plots) and the recipes a sweep follows
TARGET_STYLES = ((BLUE, "o"), (GREEN, "s"), (PURPLE, "^"), (ORANGE, "D"))
FOLLOWED_STYLES = ((BLACK, "o"), (BLACK, "s"), (BLACK, "^"), (BLACK, "D"))
# references (baselines) are dashed with hollow markers; followed recipes solid
REFERENCE_LINE = {
    "markersize": 3,
    "markerfacecolor": "white",
    "linewidth": 0.8,
    "linestyle": (0, (2, 2)),
}
FOLLOWED_LINE = {"markersize": 3, "linewidth": 1.0}


def write_front_plots(front, stem, *, targets=()) -> list[Path]:
    """Write ``<stem>.png`` and ``<stem>.svg`` (a run's ``front``); returns their paths."""
    plt = _pyplot()
    fig = front_figure(front, targets=targets)
    try:
        return _save(fig, Path(stem))
    finally:
        plt.close(fig)


def sweep_figure(sweep: dict):
    """Along a parameter sweep: infidelity reachable (top), cost per target (bottom).

    ``sweep`` is the document :func:`optimise.sweep.run_sweep` returns. The top
    panel shows the highest fidelity reachable, each textbook baseline's best
    over its depths, the raw pair and any swept recipes; the bottom panel the
    raw pairs per output of the cheapest recipe reaching each target, with the
    cheapest baseline reaching it dashed in the same colour.
    """
    plt = _pyplot()
    fig, (top, bottom) = plt.subplots(
        2, 1, figsize=FIGURE_INCHES, sharex=True, layout="constrained"
    )
    fig.patch.set_facecolor("white")
    for ax in (top, bottom):
        _style(ax)
    points = sweep["points"]
    xs = [p["value"] for p in points]
    top_values = []

    def infidelity(f):
        return max(1.0 - f, 1e-12)

    best = [infidelity(p["best"]["fidelity"]) for p in points]
    top.plot(
        xs,
        best,
        color=FRONT,
        marker="o",
        markersize=3.5,
        linewidth=1.3,
        label="highest fidelity reachable",
        gid="sweep:best",
    )
    rawline = [infidelity(p["raw_fidelity"]) for p in points]
    top.plot(
        xs,
        rawline,
        color=RAW,
        linestyle=(0, (1, 2)),
        linewidth=0.9,
        label="raw pair",
        gid="sweep:raw",
    )
    top_values += best + rawline
    names = list(
        dict.fromkeys(b["baseline"] for p in points for b in p.get("baselines", {}).get("best", []))
    )
    for name in names:
        colour, marker = baseline_style(name)
        ys = []
        for p in points:
            entry = next(b for b in p["baselines"]["best"] if b["baseline"] == name)
            ys.append(infidelity(entry["fidelity"]))
        top_values += ys
        top.plot(
            xs,
            ys,
            color=colour,
            marker=marker,
            **REFERENCE_LINE,
            label=f"{baseline_title(name)}, best depth",
            gid=f"sweep:baseline:{name}",
        )
    for k, recipe in enumerate(sweep.get("recipes", [])):
        ys = [infidelity(p["recipes"][k]["fidelity"]) for p in points]
        top_values += ys
        colour, marker = FOLLOWED_STYLES[k % len(FOLLOWED_STYLES)]
        top.plot(
            xs,
            ys,
            color=colour,
            marker=marker,
            **FOLLOWED_LINE,
            label=f"{recipe['label']} (followed)",
            gid=f"sweep:recipe:{k}",
        )
    top.set_yscale("log")
    yt = _log_ticks(top.yaxis, top_values, floor=1e-9)
    top.set_ylim(min(yt), max(yt))
    top.set_ylabel(INFIDELITY_LABEL, color=INK, fontsize=8)

    reached = []
    for k, target in enumerate(sweep["targets"]):
        colour, marker = TARGET_STYLES[k % len(TARGET_STYLES)]
        ys, bys = [], []
        for p in points:
            answer = p["targets"][k]
            ys.append(answer["recipe"]["raw_pairs_per_output"] if answer["reached"] else math.nan)
            theirs = p.get("baselines", {}).get("targets", [None] * (k + 1))[k]
            bys.append(theirs["raw_pairs_per_output"] if theirs else math.nan)
        reached += [y for y in ys + bys if y == y and y is not None]
        bottom.plot(
            xs,
            ys,
            color=colour,
            marker=marker,
            markersize=3.5,
            linewidth=1.2,
            label=f"below: cheapest recipe, F >= {target:g}",
            gid=f"sweep:target:{target:g}",
        )
        bottom.plot(
            xs,
            bys,
            color=colour,
            marker=marker,
            **REFERENCE_LINE,
            label=f"below: cheapest baseline, F >= {target:g}",
            gid=f"sweep:baseline-target:{target:g}",
        )
    for k in range(len(sweep.get("recipes", []))):
        ys = [p["recipes"][k]["raw_pairs_per_output"] or math.nan for p in points]
        reached += [y for y in ys if y == y]
        colour, marker = FOLLOWED_STYLES[k % len(FOLLOWED_STYLES)]
        bottom.plot(
            xs,
            ys,
            color=colour,
            marker=marker,
            **FOLLOWED_LINE,
            gid=f"sweep:recipe-cost:{k}",
        )
    bottom.set_yscale("log")
    if reached:
        bt = _log_ticks(bottom.yaxis, reached)
        bottom.set_ylim(min(bt), max(bt))
    bottom.set_ylabel(COST_LABEL, color=INK, fontsize=8)
    bottom.set_xlabel(sweep["parameter_label"], color=INK, fontsize=8)
    if sweep.get("log_scale"):
        bottom.set_xscale("log")
    top.set_title(
        f"{sweep['profile']['name']}: {INFIDELITY_LABEL} and {COST_LABEL} against "
        f"{sweep['parameter']}\n(every linear recipe to depth {sweep['depth']})",
        color=INK,
        fontsize=8.5,
        loc="left",
    )
    fig.legend(fontsize=6, frameon=False, loc="outside right upper")
    return fig


def write_sweep_plots(sweep: dict, stem) -> list[Path]:
    """Write ``<stem>.png`` and ``<stem>.svg``; returns their paths."""
    plt = _pyplot()
    fig = sweep_figure(sweep)
    try:
        return _save(fig, Path(stem))
    finally:
        plt.close(fig)
