"""The run folder ``runs/<name>/``: :class:`Run` is the only reader and writer of its files.

A run folder holds

``settings.json``
    :meth:`optimise.settings.SearchSettings.to_json` with ``created``, ``updated``
    and ``stillroom_version``; a resumed run must ask for the same search (the
    ``budget`` fields excepted), or a :class:`RunError` says which setting differs
    and how to start a new run;
``profile.json``
    the noise profile searched;
``exhaustive.json``
    a cache of the exhaustive layer (:class:`optimise.exhaustive.ExhaustiveFront`);
``front.json``
    the current :class:`optimise.front.Front`, rewritten whenever it changes;
``study.journal`` (or another storage) and the report files, at paths :meth:`Run.path` hands out;
``.search.lock``
    while a search runs (:meth:`Run.lock`): the host and process id of the search
    that owns the folder; a second search of the same folder on this machine is
    refused with one line naming them.

Every write is atomic (:mod:`optimise.files`). A missing, corrupt (not JSON) or
foreign file (JSON of another shape, such as another version's) is one
:class:`RunError` line naming the file and the way out.
"""

from __future__ import annotations

import json
import math
import os
import re
import time
from contextlib import contextmanager
from datetime import UTC, datetime
from pathlib import Path

from .errors import InputError, RunError
from .files import write_atomic, write_json_atomic
from .processes import checkpoint, worker_identity

try:
    import fcntl
except ImportError:  # Windows: no advisory locks; one search per folder is then the user's care
    fcntl = None

SETTINGS_FILE = "settings.json"
PROFILE_FILE = "profile.json"
FRONT_FILE = "front.json"
EXHAUSTIVE_FILE = "exhaustive.json"
LOCK_FILE = ".search.lock"
MAX_NAME_LENGTH = 100
NAME_RULE = (
    f"letters, digits, '.', '_' and '-', starting with a letter or digit, at most "
    f"{MAX_NAME_LENGTH} characters"
)
_NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]*")
EXHAUSTIVE_KEYS = (
    "complete_depth",
    "complete",
    "states_per_depth",
    "evaluations_per_depth",
    "symmetry",
    "seconds",
    "space",
    "front",
)


def now_iso() -> str:
    return datetime.now(UTC).replace(microsecond=0).isoformat()


def stillroom_version() -> str:
    """The installed package version, else the one in the source tree's pyproject.toml."""
    from importlib import metadata

    try:
        return metadata.version("stillroom")
    except metadata.PackageNotFoundError:
        pass
    pyproject = Path(__file__).resolve().parent.parent / "pyproject.toml"
    try:
        import tomllib

        return tomllib.loads(pyproject.read_text())["project"]["version"]
    except (OSError, KeyError, ValueError):
        return "unknown"


def check_run_name(name: str) -> str:
    """A run name that is one safe folder name (see :data:`NAME_RULE`), or an InputError.

    Examples
    --------
    >>> check_run_name("mine-2")
    'mine-2'
    >>> check_run_name("../x")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    optimise.errors.InputError: run name '../x' is not a folder name: use letters, ...
    """
    if not isinstance(name, str) or len(name) > MAX_NAME_LENGTH or not _NAME.fullmatch(name):
        shown = repr(name) if len(str(name)) <= 40 else repr(str(name)[:40]) + "..."
        raise InputError(f"run name {shown} is not a folder name: use {NAME_RULE}")
    return name


def same_values(old, new) -> bool:
    """Equal JSON values, floats compared to 1e-12 relative."""
    if isinstance(old, float) or isinstance(new, float):
        try:
            return math.isclose(float(old), float(new), rel_tol=1e-12, abs_tol=0.0)
        except (TypeError, ValueError):
            return False
    if isinstance(old, dict) and isinstance(new, dict):
        return old.keys() == new.keys() and all(same_values(old[k], new[k]) for k in old)
    if isinstance(old, (list, tuple)) and isinstance(new, (list, tuple)):
        return len(old) == len(new) and all(
            same_values(a, b) for a, b in zip(old, new, strict=True)
        )
    return old == new


def first_difference(old: dict, new: dict, prefix=""):
    """Dotted name and both values of the first setting that differs, or None."""
    for key in sorted(set(old) | set(new)):
        name = f"{prefix}{key}"
        a, b = old.get(key, "<unset>"), new.get(key, "<unset>")
        if isinstance(a, dict) and isinstance(b, dict):
            found = first_difference(a, b, name + ".")
            if found:
                return found
        elif not same_values(a, b):
            return name, a, b
    return None


class Run:
    """One run folder. Nothing else opens its files.

    Parameters
    ----------
    folder : path of ``runs/<name>``
    """

    def __init__(self, folder):
        self.folder = Path(folder)

    def __repr__(self) -> str:
        return f"Run({str(self.folder)!r})"

    @property
    def name(self) -> str:
        return self.folder.name

    def path(self, name: str) -> Path:
        """Where the run's file ``name`` lives (reports, the study database)."""
        return self.folder / name

    def new_run_hint(self) -> str:
        return (
            f"Run again with the same settings to resume {self.name!r}, or start a new run "
            f"under another name (--name {self.name}-2)"
        )

    def has_front(self) -> bool:
        """Whether a search has written this folder's front yet."""
        return self.path(FRONT_FILE).exists()

    # ------------------------------------------------------------------ raw files

    def read_text(self, name: str) -> str:
        """A report file's text (written by :func:`optimise.reports.write_reports`)."""
        path = self.path(name)
        try:
            return path.read_text(encoding="utf-8")
        except OSError as error:
            raise RunError(f"{path} cannot be read ({error.strerror})") from error

    def read_json(self, name: str, *, what: str = "stillroom"):
        """The parsed JSON file ``name``.

        Raises
        ------
        RunError
            When the file is missing or not valid JSON.
        """
        path = self.path(name)
        try:
            text = path.read_text(encoding="utf-8")
        except FileNotFoundError:
            raise RunError(f"{path} is missing; {what} writes it") from None
        except OSError as error:
            raise RunError(f"{path} cannot be read ({error.strerror})") from error
        try:
            return json.loads(text)
        except json.JSONDecodeError as error:
            raise RunError(
                f"{path} is not valid JSON ({error}); restore it or start a new run"
            ) from error

    def _foreign(self, name: str, error: Exception) -> RunError:
        return RunError(
            f"{self.path(name)} was not written by this version of stillroom ({error}); "
            "restore it or start a new run"
        )

    def write_json(self, name: str, obj) -> Path:
        checkpoint("write")
        return write_json_atomic(self.path(name), obj)

    def write_text(self, name: str, data: str | bytes) -> Path:
        checkpoint("write")
        return write_atomic(self.path(name), data)

    # ------------------------------------------------------------------ ownership

    def make_folder(self) -> Path | None:
        """Create the run folder (and its parents); the topmost folder made, or None.

        Raises
        ------
        InputError
            One line naming the path when it cannot be a folder (a file in the way,
            no permission, a read-only file system).
        """
        if self.folder.is_dir():
            return None
        if self.folder.exists():
            raise InputError(f"run folder {self.folder}: exists and is not a folder")
        top = self.folder
        while not top.parent.exists() and top.parent != top:
            top = top.parent
        try:
            self.folder.mkdir(parents=True)
        except FileExistsError:
            if not self.folder.is_dir():
                raise InputError(
                    f"run folder {self.folder}: a file is in the way of the folder"
                ) from None
            return None  # made by another process meanwhile
        except OSError as error:
            raise InputError(
                f"run folder {self.folder}: cannot be made ({error.strerror or error})"
            ) from error
        return top

    @contextmanager
    def lock(self):
        """Own the run folder for the block: one search per folder on this machine.

        Creates the folder if needed (and removes it again if the block fails while
        it holds nothing but the lock). The lock is an advisory ``flock`` on
        :data:`LOCK_FILE`, so it dies with its process: a killed search leaves no
        lock behind.

        Raises
        ------
        RunError
            When another search holds the folder (its host and process id named).
        """
        created = self.make_folder()
        path = self.path(LOCK_FILE)
        try:
            handle = self._acquire(path)
        except BaseException:
            self._remove_if_empty(created)
            raise
        ok = False
        try:
            yield self
            ok = True
        finally:
            if handle is not None:
                path.unlink(missing_ok=True)  # before unlocking: a waiter re-checks the inode
                os.close(handle)
            if not ok:
                self._remove_if_empty(created)

    def _acquire(self, path: Path):
        if fcntl is None:
            return None
        me = worker_identity()  # before locking: the holder's name is written at once
        me["since"] = now_iso()
        while True:
            try:
                handle = os.open(path, os.O_RDWR | os.O_CREAT, 0o644)
            except OSError as error:
                raise InputError(
                    f"run folder {self.folder}: cannot be written ({error.strerror or error})"
                ) from error
            try:
                fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:
                os.close(handle)
                raise RunError(self._held_message(path)) from None
            try:
                same = os.fstat(handle).st_ino == os.stat(path).st_ino
            except FileNotFoundError:
                same = False
            if same:  # not a file its last holder removed while we opened it
                break
            os.close(handle)
        os.ftruncate(handle, 0)
        os.write(handle, json.dumps(me).encode())
        return handle

    def _held_message(self, path: Path) -> str:
        who = "another process"
        for _ in range(20):  # a holder that has just locked writes its name a moment later
            try:
                holder = json.loads(path.read_text(encoding="utf-8"))
                who = f"process {holder['pid']} on {holder['host']} (since {holder['since']})"
                break
            except (OSError, ValueError, KeyError, TypeError):
                time.sleep(0.05)
        return (
            f"run folder {self.folder} is in use by the search of {who}; wait for it to end, "
            f"or start another run (--name {self.name}-2). Several workers share a study "
            "through --workers, or --storage on several machines"
        )

    def _remove_if_empty(self, created: Path | None) -> None:
        """Remove the folders :meth:`make_folder` made, up to ``created``, if still empty."""
        if created is None:
            return
        folder = self.folder
        while True:
            try:
                folder.rmdir()
            except OSError:
                return  # something was written after all: keep it
            if folder == created:
                return
            folder = folder.parent

    # ------------------------------------------------------------------ settings

    def recorded_settings(self):
        """The :class:`SearchSettings` of ``settings.json``, or None for a new folder."""
        from .settings import SearchSettings

        if not self.path(SETTINGS_FILE).exists():
            return None
        data = self.read_json(SETTINGS_FILE)
        try:
            return SearchSettings.from_json(data)
        except ValueError as error:
            raise self._foreign(SETTINGS_FILE, error) from error

    def prepare(self, settings, profile_dict: dict) -> tuple[dict, bool]:
        """Create or check the folder; write ``settings.json`` and ``profile.json``.

        Returns the settings as written (with ``created``/``updated``) and whether
        the folder already held a search (a resume).

        Raises
        ------
        RunError
            When the folder holds a search with other settings or another profile.
        """
        recorded = self.check_resume(settings, profile_dict)
        resumed = recorded is not None
        created = now_iso() if recorded is None else recorded.get("created", now_iso())
        written = {
            "created": created,
            "updated": now_iso(),
            "stillroom_version": stillroom_version(),
        }
        written.update(settings.to_json())
        self.make_folder()
        self.write_json(SETTINGS_FILE, written)
        if not self.path(PROFILE_FILE).exists():
            self.write_json(PROFILE_FILE, profile_dict)
        return written, resumed

    def check_resume(self, settings, profile_dict: dict) -> dict | None:
        """Read-only: the recorded settings.json of a resumed run (None for a new folder).

        Raises
        ------
        RunError
            When the folder holds a search with other settings or another profile.
        """
        if self.folder.exists() and not self.folder.is_dir():
            raise InputError(f"run folder {self.folder}: exists and is not a folder")
        if self.recorded_settings() is None:  # also: a foreign file is an error
            return None
        recorded = self.read_json(SETTINGS_FILE)
        fixed = settings.fixed_json()
        # the recorded values themselves (a sampler's settings as they were then);
        # a setting added since the folder was written counts at its default
        old = type(settings).with_added_defaults(recorded)
        found = first_difference({k: old.get(k, "<unset>") for k in fixed}, fixed)
        if found:
            name, a, b = found
            raise RunError(
                f"run folder {self.folder} holds a search with {name} = {json.dumps(a)}, but "
                f"this call asks for {name} = {json.dumps(b)}. {self.new_run_hint()}."
            )
        if self.path(PROFILE_FILE).exists():
            found = first_difference(self.read_json(PROFILE_FILE), profile_dict)
            if found:
                name, a, b = found
                raise RunError(
                    f"run folder {self.folder} was searched for another noise profile "
                    f"({name} = {json.dumps(a)} there, {json.dumps(b)} now). "
                    f"{self.new_run_hint()}."
                )
        return recorded

    # ------------------------------------------------------------------ front

    def read_front(self):
        """The run's :class:`optimise.front.Front`.

        Raises
        ------
        RunError
            When the folder or its front file is missing, corrupt or foreign.
        """
        from .front import Front

        if not self.folder.is_dir():
            raise RunError(f"no run folder {str(self.folder)!r}; start one with `stillroom search`")
        if not self.has_front():
            raise RunError(
                f"{self.folder} has no {FRONT_FILE} yet; a search writes it as soon as it starts"
            )
        data = self.read_json(FRONT_FILE)
        try:
            return Front.from_json(data)
        except ValueError as error:
            raise RunError(
                f"{self.path(FRONT_FILE)} was not written by stillroom search ({error})"
            ) from error

    def write_front(self, front) -> Path:
        """Write ``front.json`` atomically."""
        return self.write_json(FRONT_FILE, front.to_json())

    # ------------------------------------------------------------------ exhaustive layer

    def read_exhaustive(self, profile):
        """The cached :class:`optimise.exhaustive.ExhaustiveFront`, or None if not cached.

        Its recipes are evaluated again for ``profile`` (the cache keeps notations).
        """
        from models.evaluate import evaluate

        from .exhaustive import ExhaustiveFront

        if not self.path(EXHAUSTIVE_FILE).exists():
            return None
        data = self.read_json(EXHAUSTIVE_FILE)
        try:
            if not isinstance(data, dict):
                raise ValueError(f"a JSON {type(data).__name__}, not an object")
            missing = [k for k in EXHAUSTIVE_KEYS if k not in data]
            if missing:
                raise ValueError(f"no {missing[0]!r} key")
            return ExhaustiveFront(
                results=[evaluate(notation, profile) for notation in data["front"]],
                states_per_depth=tuple(data["states_per_depth"]),
                evaluations_per_depth=tuple(data["evaluations_per_depth"]),
                complete=data["complete"],
                complete_depth=data["complete_depth"],
                space=data["space"],
                symmetry=data["symmetry"],
                seconds=data["seconds"],
            )
        except (ValueError, TypeError) as error:
            raise self._foreign(EXHAUSTIVE_FILE, error) from error

    def write_exhaustive(self, front) -> Path:
        from .exhaustive import describe_linear_space

        return self.write_json(
            EXHAUSTIVE_FILE,
            {
                "complete_depth": front.complete_depth,
                "complete": front.complete,
                "states_per_depth": list(front.states_per_depth),
                "evaluations_per_depth": list(front.evaluations_per_depth),
                "symmetry": front.symmetry,
                "seconds": front.seconds,
                "space": describe_linear_space(front.complete_depth),
                "front": [r.notation for r in front.results],
            },
        )


def load_run(run_dir):
    """The :class:`optimise.front.Front` of a run folder (see :meth:`Run.read_front`)."""
    return Run(run_dir).read_front()
