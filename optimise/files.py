"""Atomic file writes: a reader sees the old file or the new one, never half of one."""

from __future__ import annotations

import json
import os
import tempfile
from pathlib import Path


def _read_umask() -> int:
    # os.umask can only be read by setting it: done once, at import, before any
    # thread of ours writes a file, rather than on every write
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


_UMASK = _read_umask()


def write_atomic(path, data: str | bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file in the same folder and a rename."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    mode = "wb" if isinstance(data, bytes) else "w"
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, mode, **({} if mode == "wb" else {"encoding": "utf-8"})) as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        # mkstemp makes the file private (0600); give it the mode a plain open() would
        os.chmod(tmp, 0o666 & ~_UMASK)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return path


def write_json_atomic(path, obj) -> Path:
    """Write ``obj`` as indented JSON (keys in insertion order) atomically."""
    return write_atomic(path, json.dumps(obj, indent=2, allow_nan=False) + "\n")


def folder_problem(path) -> str | None:
    """Why ``path`` cannot be (made into) a folder we write in, or None if it can.

    Checked before long work, so that a bad output folder is refused at once and
    nothing is computed in vain: a file in the way, or a nearest existing folder
    that this process may not write in.

    Examples
    --------
    >>> folder_problem(__file__)
    'exists and is not a folder'
    """
    path = Path(path)
    probe = path
    while not probe.exists():
        if probe.parent == probe:
            break
        probe = probe.parent
    if not probe.is_dir():
        return "exists and is not a folder" if probe == path else f"{probe} is not a folder"
    if not os.access(probe, os.W_OK | os.X_OK):
        return f"{probe} is not writable"
    return None
