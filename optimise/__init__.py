"""Everything around the physics: search, storage, run folders, reports, command line."""

from .errors import InputError, RunError, StillroomError
from .exhaustive import ExhaustiveFront, exhaustive_front
from .files import write_atomic, write_json_atomic
from .limits import Limits
from .pareto import hypervolume_2d, pareto_mask, unique_front
from .search import SearchOutcome, load_run, run_search
from .storage import open_storage
from .targets import TargetAnswer, cheapest_reaching

__all__ = [
    "StillroomError",
    "InputError",
    "RunError",
    "ExhaustiveFront",
    "exhaustive_front",
    "write_atomic",
    "write_json_atomic",
    "Limits",
    "hypervolume_2d",
    "pareto_mask",
    "unique_front",
    "SearchOutcome",
    "load_run",
    "run_search",
    "open_storage",
    "TargetAnswer",
    "cheapest_reaching",
]

# noise profiles, reports and sweeps (the command line itself is optimise.cli.main)
from .profiles import demo_profile, load_profile, parse_profile  # noqa: E402
from .reports import ASSUMPTIONS, write_reports  # noqa: E402
from .sweep import run_sweep  # noqa: E402

__all__ += [
    "demo_profile",
    "load_profile",
    "parse_profile",
    "ASSUMPTIONS",
    "write_reports",
    "run_sweep",
]
