"""Everything around the physics: search, storage, run folders, reports, command line.

Public names are imported on first use, so that ``stillroom --help`` does not
load optuna and numpy (PEP 562 module ``__getattr__``).
"""

from importlib import import_module

_EXPORTS = {
    "StillroomError": "errors",
    "InputError": "errors",
    "RunError": "errors",
    "ExhaustiveFront": "exhaustive",
    "exhaustive_front": "exhaustive",
    "write_atomic": "files",
    "write_json_atomic": "files",
    "Limits": "limits",
    "hypervolume_2d": "pareto",
    "pareto_mask": "pareto",
    "unique_front": "pareto",
    "SearchOutcome": "search",
    "run_search": "search",
    "SearchSettings": "settings",
    "SAMPLERS": "settings",
    "OBJECTIVES": "objectives",
    "ObjectiveInfo": "objectives",
    "Run": "run",
    "load_run": "run",
    "Front": "front",
    "BaselineResult": "front",
    "open_storage": "storage",
    "TargetAnswer": "targets",
    "cheapest_reaching": "targets",
    # noise profiles, reports and sweeps (the command line itself is optimise.cli.main)
    "demo_profile": "profiles",
    "load_profile": "profiles",
    "parse_profile": "profiles",
    "ASSUMPTIONS": "reports",
    "write_reports": "reports",
    "run_sweep": "sweep",
}

__all__ = list(_EXPORTS)


def __getattr__(name):
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'optimise' has no attribute {name!r}")
    value = getattr(import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(__all__))
