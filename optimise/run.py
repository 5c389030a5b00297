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
``study.db`` (or another storage) and the report files, at paths :meth:`Run.path` hands out.

Every write is atomic (:mod:`optimise.files`). A missing, corrupt (not JSON) or
foreign file (JSON of another shape, such as another version's) is one
:class:`RunError` line naming the file and the way out.
"""

from __future__ import annotations

import json
import math
from datetime import UTC, datetime
from pathlib import Path

from .errors import RunError
from .files import write_atomic, write_json_atomic

SETTINGS_FILE = "settings.json"
PROFILE_FILE = "profile.json"
FRONT_FILE = "front.json"
EXHAUSTIVE_FILE = "exhaustive.json"
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
        return write_json_atomic(self.path(name), obj)

    def write_text(self, name: str, data: str | bytes) -> Path:
        return write_atomic(self.path(name), data)

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
        if self.folder.exists() and not self.folder.is_dir():
            raise RunError(f"run folder {self.folder} exists and is not a folder")
        resumed = self.recorded_settings() is not None  # also: a foreign file is an error
        created = now_iso()
        if resumed:
            recorded = self.read_json(SETTINGS_FILE)
            fixed = settings.fixed_json()
            # the recorded values themselves (a sampler's settings as they were then)
            found = first_difference({k: recorded.get(k, "<unset>") for k in fixed}, fixed)
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
            created = recorded.get("created", created)
        written = {"created": created, "updated": now_iso(), "stillroom_version": stillroom_version()}
        written.update(settings.to_json())
        self.folder.mkdir(parents=True, exist_ok=True)
        self.write_json(SETTINGS_FILE, written)
        if not self.path(PROFILE_FILE).exists():
            self.write_json(PROFILE_FILE, profile_dict)
        return written, resumed

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
