"""Processes: which one ran a trial and whether it still runs; stopping one cleanly.

Which process ran a trial, and whether it still runs (portable checks, no /proc):

A trial records its worker as ``{"host", "pid", "start"}``; ``start`` is the
process's start time in whole seconds since the epoch, as ``ps -o lstart``
reports it (POSIX: Linux, the BSDs, macOS), or None where ``ps`` is missing.
A resume on the same host calls a worker gone when its pid no longer exists
(``os.kill(pid, 0)``), or when the pid now belongs to a process started at
another time (a pid reused by a younger process). Where neither can be asked
(Windows), a worker is taken to be alive: its trials then wait for optuna's
heartbeat check (RDB storages) or a later resume, and are never failed under a
live worker.

Stopping (:class:`StopRequest`): a Ctrl-C during a search is noted by a signal
handler and acted on at the next safe point (between trials, between enqueued
recipes), where :meth:`StopRequest.check` raises ``KeyboardInterrupt`` in the
main line of the program. A handler that raised at once could land inside a
garbage-collection callback of the storage layer, where Python prints "Exception
ignored" and goes on; a flag cannot be lost that way. Pure computations (the
exhaustive layer) are :meth:`StopRequest.interruptible`: there the handler
raises at once, as Python's default one does.

:func:`checkpoint` names the safe points; a test may make the process signal
itself at one of them (see its docstring), so that a kill or a Ctrl-C lands at a
chosen moment instead of racing a timer.
"""

from __future__ import annotations

import calendar
import os
import signal
import socket
import subprocess
import threading
import time
from contextlib import contextmanager

_POSIX = os.name == "posix"


def process_start(pid: int) -> int | None:
    """Start time of process ``pid`` (s since the epoch), or None when it cannot be asked."""
    if not _POSIX:
        return None
    try:
        done = subprocess.run(
            ["ps", "-o", "lstart=", "-p", str(int(pid))],
            capture_output=True,
            text=True,
            timeout=10,
            env={**os.environ, "LC_ALL": "C", "TZ": "UTC"},
        )
        stamp = time.strptime(" ".join(done.stdout.split()), "%a %b %d %H:%M:%S %Y")
    except (OSError, ValueError, subprocess.SubprocessError):
        return None
    return calendar.timegm(stamp)  # ps printed it in UTC


def worker_identity() -> dict:
    """Host, process id and start time of this process (see the module docstring)."""
    return {"host": socket.gethostname(), "pid": os.getpid(), "start": process_start(os.getpid())}


def is_running(owner: dict) -> bool:
    """Whether the process a :func:`worker_identity` names still runs (on this host)."""
    pid = owner.get("pid")
    if not isinstance(pid, int):
        return False
    if not _POSIX:
        return True  # os.kill(pid, 0) would end the process on Windows; assume alive
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        pass  # exists, another user's
    started = owner.get("start")
    return started is None or process_start(pid) in (None, started)


TEST_KILL_ENV = "STILLROOM_TEST_KILL_AT"
PHASES = ("exhaustive", "enqueue", "ask", "trial", "write")
_reached: dict[str, int] = {}


def checkpoint(phase: str) -> None:
    """Mark a point of a search; tests only: signal this process when asked to.

    With ``STILLROOM_TEST_KILL_AT=PHASE:N`` in the environment, the N-th time this
    process reaches ``PHASE`` it sends itself SIGKILL, or SIGINT with
    ``PHASE:N:INT``. Phases (:data:`PHASES`): ``exhaustive`` after each depth of the
    exhaustive layer, ``enqueue`` after each recipe enqueued, ``ask`` when a trial
    has been asked (before its worker is recorded on it), ``trial`` after a trial is
    finished, ``write`` before each file a :class:`optimise.run.Run` writes. Unset,
    this costs one dictionary look-up.
    """
    wanted = os.environ.get(TEST_KILL_ENV)
    if not wanted:
        return
    _reached[phase] = n = _reached.get(phase, 0) + 1
    name, _, rest = wanted.partition(":")
    count, _, sig = rest.partition(":")
    if name == phase and count == str(n):
        os.kill(os.getpid(), signal.SIGINT if sig.upper() == "INT" else signal.SIGKILL)


def parent_alive(parent_pid: int) -> bool:
    """Whether the process that started this one still runs (its child is re-parented if not)."""
    return os.getppid() == parent_pid


class StopRequest:
    """A Ctrl-C (SIGINT) noted by a flag and acted on at safe points (module docstring).

    Examples
    --------
    >>> stop = StopRequest()
    >>> stop.requested
    False
    >>> stop.check()  # nothing asked: returns
    """

    def __init__(self):
        self.requested = False
        self._raise_now = 0
        self._previous = None

    def _on_sigint(self, signum, frame):
        self.requested = True
        if self._raise_now:
            raise KeyboardInterrupt

    def check(self) -> None:
        """Raise ``KeyboardInterrupt`` if a stop was asked."""
        if self.requested:
            raise KeyboardInterrupt

    @contextmanager
    def installed(self):
        """Handle SIGINT with this request inside the block (main thread only; else a no-op)."""
        if threading.current_thread() is not threading.main_thread():
            yield self
            return
        self._previous = signal.signal(signal.SIGINT, self._on_sigint)
        try:
            yield self
        finally:
            signal.signal(signal.SIGINT, self._previous)

    @contextmanager
    def interruptible(self):
        """Inside the block (pure computation) a Ctrl-C raises at once."""
        self.check()
        self._raise_now += 1
        try:
            yield
        finally:
            self._raise_now -= 1
        self.check()
