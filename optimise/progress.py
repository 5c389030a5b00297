"""A rich progress bar for a search: trials done, rate, best fidelity, front size, time left."""

from __future__ import annotations

import math
import sys
import time

from rich.console import Console
from rich.progress import BarColumn, Progress, ProgressColumn, TextColumn
from rich.text import Text


class _FiguresColumn(ProgressColumn):
    """``12.3 trials/s  best F 0.98765  front 14  left 0:03:12``."""

    def render(self, task) -> Text:
        done = task.completed - task.fields.get("first", 0)
        elapsed = max(task.elapsed or 0.0, 1e-9)
        rate = done / elapsed if done > 0 else 0.0
        parts = [f"{rate:6.1f} trials/s"]
        best = task.fields.get("best_fidelity")
        parts.append("best F  --    " if best is None else f"best F {best:.6f}")
        parts.append(f"front {task.fields.get('front_size', 0):3d}")
        parts.append(f"left {_format_left(task, rate)}")
        return Text("  ".join(parts))


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
    """

    def __init__(self, total: int, done: int = 0, timeout_s=None, enabled: bool = True):
        self.enabled = enabled
        self.total = total
        self.done = done
        self.deadline = None if timeout_s is None else time.monotonic() + timeout_s
        self._progress = None
        self._task = None
        self.console = Console(file=sys.stderr)

    def __enter__(self):
        if self.enabled:
            self._progress = Progress(
                TextColumn("[bold]search"),
                BarColumn(),
                TextColumn("{task.completed}/{task.total} trials"),
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
