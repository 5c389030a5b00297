"""The run folder ``runs/<name>/``: settings, profile and front files, and resume checks.

``settings.json`` records every setting of a search; re-running on the same folder
must ask for the same search (:data:`MUTABLE` settings excepted), or a
:class:`RunError` says which setting differs and how to start a new run.
"""

from __future__ import annotations

import json
import math
from datetime import UTC, datetime
from pathlib import Path

from .errors import RunError
from .files import write_json_atomic

SETTINGS_FILE = "settings.json"
PROFILE_FILE = "profile.json"
FRONT_FILE = "front.json"
EXHAUSTIVE_FILE = "exhaustive.json"
# what a resumed run may change: the budget of trials (the total), the wall-time
# budget of this call, the number of local workers and the target asked of the front
MUTABLE = ("n_trials", "timeout_s", "workers", "target_fidelity")
# written for the reader, not compared ("space" is a sentence derived from the settings)
BOOKKEEPING = ("created", "updated", "stillroom_version", "space")


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


def read_json(path: Path):
    try:
        return json.loads(Path(path).read_text(encoding="utf-8"))
    except json.JSONDecodeError as error:
        raise RunError(
            f"{path} is not valid JSON ({error}); restore it or start a new run"
        ) from error


def _same(old, new) -> bool:
    if isinstance(old, float) or isinstance(new, float):
        try:
            return math.isclose(float(old), float(new), rel_tol=1e-12, abs_tol=0.0)
        except (TypeError, ValueError):
            return False
    if isinstance(old, dict) and isinstance(new, dict):
        return old.keys() == new.keys() and all(_same(old[k], new[k]) for k in old)
    if isinstance(old, (list, tuple)) and isinstance(new, (list, tuple)):
        return len(old) == len(new) and all(_same(a, b) for a, b in zip(old, new, strict=True))
    return old == new


def _first_difference(old, new, prefix=""):
    """Dotted name and both values of the first setting that differs, or None."""
    for key in sorted(set(old) | set(new)):
        name = f"{prefix}{key}"
        a, b = old.get(key, "<unset>"), new.get(key, "<unset>")
        if isinstance(a, dict) and isinstance(b, dict):
            found = _first_difference(a, b, name + ".")
            if found:
                return found
        elif not _same(a, b):
            return name, a, b
    return None


def new_run_hint(run_dir: Path) -> str:
    return (
        f"Run again with the same settings to resume {run_dir.name!r}, or start a new run "
        f"under another name (--name {run_dir.name}-2)"
    )


def prepare_run_dir(run_dir, settings: dict, profile_dict: dict) -> tuple[dict, bool]:
    """Create or check the run folder; write ``settings.json`` and ``profile.json``.

    Returns the settings as written (with ``created``/``updated``) and whether the
    folder already held a search (a resume).

    Raises
    ------
    RunError
        When the folder holds a search with other settings or another profile.
    """
    run_dir = Path(run_dir)
    if run_dir.exists() and not run_dir.is_dir():
        raise RunError(f"run folder {run_dir} exists and is not a folder")
    settings_path = run_dir / SETTINGS_FILE
    profile_path = run_dir / PROFILE_FILE
    resumed = settings_path.exists()
    if resumed:
        old = read_json(settings_path)
        fixed_old = {k: v for k, v in old.items() if k not in MUTABLE + BOOKKEEPING}
        fixed_new = {k: v for k, v in settings.items() if k not in MUTABLE + BOOKKEEPING}
        found = _first_difference(fixed_old, fixed_new)
        if found:
            name, a, b = found
            raise RunError(
                f"run folder {run_dir} holds a search with {name} = {json.dumps(a)}, but this "
                f"call asks for {name} = {json.dumps(b)}. {new_run_hint(run_dir)}."
            )
        if profile_path.exists():
            old_profile = read_json(profile_path)
            found = _first_difference(old_profile, profile_dict)
            if found:
                name, a, b = found
                raise RunError(
                    f"run folder {run_dir} was searched for another noise profile "
                    f"({name} = {json.dumps(a)} there, {json.dumps(b)} now). "
                    f"{new_run_hint(run_dir)}."
                )
        created = old.get("created", now_iso())
    else:
        created = now_iso()
    written = {"created": created, "updated": now_iso(), "stillroom_version": stillroom_version()}
    written.update(settings)
    run_dir.mkdir(parents=True, exist_ok=True)
    write_json_atomic(settings_path, written)
    if not profile_path.exists():
        write_json_atomic(profile_path, profile_dict)
    return written, resumed


def recorded_settings(run_dir) -> dict | None:
    path = Path(run_dir) / SETTINGS_FILE
    return read_json(path) if path.exists() else None


def load_run(run_dir) -> dict:
    """The parsed ``front.json`` of a run folder.

    Raises
    ------
    RunError
        When the folder or its front file is missing.
    """
    run_dir = Path(run_dir)
    path = run_dir / FRONT_FILE
    if not run_dir.is_dir():
        raise RunError(f"no run folder {str(run_dir)!r}; start one with `stillroom search`")
    if not path.exists():
        raise RunError(
            f"{run_dir} has no {FRONT_FILE} yet; a search writes it as soon as it starts"
        )
    return read_json(path)
