"""A rich progress bar for a search: trials done, rate, best fidelity, front size, time left.

The bar is one line of at most 80 columns (:data:`WIDTH`), also with a
study of millions of trials: ``search ━━━━━━━━━━━━━━ 864/1000 12.3/s F 0.987650 front 14
0:03:12 left``.
"""

from __future__ import annotations

import math
import sys
import time

from rich.console import Console
from rich.progress import BarColumn, Progress, ProgressColumn, TextColumn
from rich.text import Text

WIDTH = 80
BAR_WIDTH = 12


class _FiguresColumn(ProgressColumn):
    """``12.3/s F 0.987650 front 14 0:03:12 left`` (trials per second, best fidelity)."""

    def render(self, task) -> Text:
        done = task.completed - task.fields.get("first", 0)
        elapsed = max(task.elapsed or 0.0, 1e-9)
        rate = done / elapsed if done > 0 else 0.0
        parts = [f"{_short(rate)}/s"]
        best = task.fields.get("best_fidelity")
        parts.append("F    --   " if best is None else f"F {best:.6f}")
        parts.append(f"front {task.fields.get('front_size', 0)}")
        parts.append(f"{_format_left(task, rate)} left")
        return Text(" ".join(parts))


def _short(x: float) -> str:
    """A rate in at most 5 characters: ``12.3``, ``1234``, ``12k``."""
    if x < 100:
        return f"{x:4.1f}"
    if x < 10_000:
        return f"{x:4.0f}"
    if x < 1_000_000:
        return f"{x / 1000:3.0f}k"
    return f"{min(x / 1e6, 999):3.0f}M"


def _count(n) -> str:
    """Trials in at most 5 characters: ``864``, ``12345``, ``1.2M``."""
    n = int(n)
    if n < 100_000:
        return str(n)
    if n < 10_000_000:
        return f"{n / 1e6:.1f}M" if n >= 1_000_000 else f"{n // 1000}k"
    return f"{n // 1_000_000}M"


class _TrialsColumn(ProgressColumn):
    """``864/1000`` (compact for large studies)."""

    def render(self, task) -> Text:
        return Text(f"{_count(task.completed)}/{_count(task.total or 0)}")


def _format_left(task, rate) -> str:
    left = math.inf
    if task.total is not None and rate > 0:
        left = (task.total - task.completed) / rate
    deadline = task.fields.get("deadline")
    if deadline is not None:
        left = min(left, max(0.0, deadline - time.monotonic()))
    if math.isinf(left):
        return "-:--:--"
    seconds = int(round(left))
    return f"{seconds // 3600}:{seconds % 3600 // 60:02d}:{seconds % 60:02d}"


class SearchProgress:
    """Context manager showing a search's progress on stderr (nothing when disabled).

    Parameters
    ----------
    total : int
        Trial budget (the total, counting trials done by earlier runs).
    done : int
        Trials already finished when this run starts.
    timeout_s : float or None
        Wall-time budget of this run; the time left is the sooner of the two ends.
    enabled : bool
    console : rich.console.Console, optional
        Where the bar is drawn (default: stderr).
    """

    def __init__(
        self, total: int, done: int = 0, timeout_s=None, enabled: bool = True, console=None
    ):
        self.enabled = enabled
        self.total = total
        self.done = done
        self.deadline = None if timeout_s is None else time.monotonic() + timeout_s
        self._progress = None
        self._task = None
        self.console = console if console is not None else Console(file=sys.stderr)

    def __enter__(self):
        if self.enabled:
            self._progress = Progress(
                TextColumn("[bold]search"),
                BarColumn(bar_width=BAR_WIDTH),
                _TrialsColumn(),
                _FiguresColumn(),
                console=self.console,
                transient=False,
            )
            self._progress.__enter__()
            self._task = self._progress.add_task(
                "search",
                total=self.total,
                completed=self.done,
                first=self.done,
                best_fidelity=None,
                front_size=0,
                deadline=self.deadline,
            )
        return self

    def update(self, done: int, best_fidelity=None, front_size: int = 0) -> None:
        """Show ``done`` finished trials (in the whole study) and the current front."""
        self.done = done
        if self._progress is not None:
            self._progress.update(
                self._task,
                completed=min(done, self.total),
                best_fidelity=best_fidelity,
                front_size=front_size,
            )

    def note(self, message: str) -> None:
        """A line for the user (shown even without the bar, on stderr)."""
        if self._progress is not None:
            self._progress.console.print(message)
        else:
            print(message, file=sys.stderr)

    def __exit__(self, *exc):
        if self._progress is not None:
            self._progress.__exit__(*exc)
        return False
