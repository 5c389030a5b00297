"""Which process ran a trial, and whether it still runs: portable checks, no /proc.

A trial records its worker as ``{"host", "pid", "start"}``; ``start`` is the
process's start time in whole seconds since the epoch, as ``ps -o lstart``
reports it (POSIX: Linux, the BSDs, macOS), or None where ``ps`` is missing.
A resume on the same host calls a worker gone when its pid no longer exists
(``os.kill(pid, 0)``), or when the pid now belongs to a process started at
another time (a pid reused by a younger process). Where neither can be asked
(Windows), a worker is taken to be alive: its trials then wait for optuna's
heartbeat check (RDB storages) or a later resume, and are never failed under a
live worker.
"""

from __future__ import annotations

import calendar
import os
import socket
import subprocess
import time

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
