"""The one exceptions module: every error a user can cause derives from StillroomError.

The command line turns a StillroomError into one line on stderr and exit code 2.
"""


class StillroomError(Exception):
    """Root of stillroom's own errors."""


class InputError(StillroomError, ValueError):
    """Bad input from a user: a profile, a recipe string, an option. The message says the fix."""


class RunError(StillroomError):
    """A run folder or study storage that cannot be used as asked."""
