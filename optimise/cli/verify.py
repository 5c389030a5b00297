"""``stillroom verify``: one recipe re-simulated with full density matrices, beside the model."""

from __future__ import annotations

from . import common

NAME = "verify"


def add_parser(sub, parents) -> None:
    from .evaluate import RECIPE_HELP

    p = sub.add_parser(
        NAME,
        parents=parents,
        formatter_class=common.Formatter,
        help="check one recipe independently with full density matrices",
        description=common.wrap(
            "Re-simulate RECIPE on PROFILE (default: the built-in demo) with full "
            "density matrices (Kraus maps for every noise source, no Bell-diagonal "
            "shortcut) and print, beside the model's figures, the re-simulated fidelity, "
            "success probability of every step, raw pairs per output and mean time, and "
            "their differences. Waits are handled exactly where no wait is random or "
            "memories are perfect; otherwise the production process is sampled and "
            "standard errors are printed.\n"
            "The re-simulation keeps each pair's Bell diagonal after each wait, as the "
            "model assumes (a twirl after every wait). When a memory decays it also runs "
            "without that twirl and prints how much each figure moves."
        ),
        epilog=RECIPE_HELP + "\nexamples:\n  stillroom verify sY^3\n"
        "  stillroom verify 'dsY^2.pX' mine.toml --samples 5000 --seed 7\n"
        "  stillroom verify dejmps:3 mine.toml --json",
    )
    p.add_argument("recipe", metavar="RECIPE", help="recipe string, or NAME:DEPTH of a baseline")
    common.add_profile_argument(p)
    p.add_argument(
        "--samples",
        type=common.sample_count,
        default=2000,
        metavar="N",
        help="outputs sampled where waits are random (default: %(default)s)",
    )
    p.add_argument(
        "--seed", type=common.non_negative_int, default=0, help="seed (default: %(default)s)"
    )
    p.set_defaults(handler=run)


def run(args) -> int:
    from ..errors import user_input
    from ..verify import verify
    from .evaluate import resolve_recipe

    profile, label = common.profile_or_demo(args.profile)
    recipe = resolve_recipe(args.recipe)
    with user_input():
        checked = verify(recipe, profile, samples=args.samples, seed=args.seed)
    if args.json:
        common.print_json(
            {
                "kind": "verify",
                "profile_source": label,
                "profile": profile.to_dict(),
                **checked.to_dict(),
            }
        )
        return 0
    out = common.console()
    how = (
        "exact (no random wait changes a state)"
        if checked.method == "exact"
        else f"sampled: {checked.samples} outputs, seed {checked.seed}; ± is one standard error"
    )
    out.print(common.bold(checked.recipe, f"  (canonical {checked.canonical})  on {label}"))
    out.print(f"re-simulated with full density matrices, {how}")
    out.print(verification_table(checked))
    for line in summary(checked):
        out.print(line)
    return 0


def _number(x: float) -> str:
    return f"{x:.6g}" if abs(x) >= 1e-3 or x == 0 else f"{x:.3e}"


def verification_table(checked):
    """A rich table: figure, model, re-simulated, ± s.e., difference (and the no-twirl run)."""
    from rich.table import Table

    table = Table(box=None, header_style="bold", pad_edge=False)
    table.add_column("figure")
    columns = ["model", "re-simulated", "±", "difference"]
    if checked.untwirled is not None:
        columns += ["no twirl", "moved"]
    for name in columns:
        table.add_column(name, justify="right")
    for row in checked.rows():
        cells = [
            row["figure"],
            _number(row["model"]),
            _number(row["simulated"]),
            _number(row["standard_error"]) if row["standard_error"] else "",
            f"{row['difference']:+.2e}",
        ]
        if "untwirled" in row:
            cells += [_number(row["untwirled"]), f"{row['moved']:+.2e}"]
        table.add_row(*cells)
    return table


def summary(checked) -> list[str]:
    """A few sentences: agreement with the model, and whether the twirl matters."""
    lines = []
    worst = max(
        (
            abs(r["difference"]) / r["standard_error"]
            for r in checked.rows()
            if r["standard_error"] > 0
        ),
        default=None,
    )
    if checked.method == "exact":
        biggest = max(abs(r["difference"]) for r in checked.rows())
        lines.append(f"model against re-simulation: largest difference {biggest:.1e}")
    elif worst is not None:
        lines.append(f"model against re-simulation: largest difference {worst:.1f} standard errors")
    t = checked.twirled
    lines.append(
        "mean output state (Phi+ Psi+ Psi- Phi-): "
        + " ".join(f"{w:.6f}" for w in t.bell)
        + f"; off-diagonal norm {t.coherence:.1e}"
    )
    u = checked.untwirled
    if u is None:
        lines.append("memories are perfect: the twirl after each wait changes nothing")
    else:
        moved = u.fidelity - t.fidelity
        se = f" ± {checked.fidelity_moved_se:.1e}" if checked.fidelity_moved_se else ""
        lines.append(
            f"without the twirl after each wait: F = {u.fidelity:.8f} (moved {moved:+.2e}{se}); "
            f"output off-diagonal norm {u.coherence:.1e}"
        )
    return lines


def verified_table(rows):
    """The verified column of ``stillroom table --verify``, one row per front recipe."""
    from rich.table import Table

    table = Table(
        title="Verified: model F against full density-matrix re-simulation",
        title_justify="left",
        header_style="bold",
        box=None,
        pad_edge=False,
    )
    table.add_column("#", justify="right")
    table.add_column("recipe")
    for name in ("model F", "re-simulated F", "±", "difference", "how"):
        table.add_column(name, justify="right")
    for i, row in enumerate(rows, 1):
        table.add_row(
            str(i),
            row["recipe"],
            f"{row['model']:.6f}",
            f"{row['simulated']:.6f}",
            f"{row['standard_error']:.1e}" if row["standard_error"] else "",
            f"{row['difference']:+.1e}",
            row["method"],
        )
    return table
