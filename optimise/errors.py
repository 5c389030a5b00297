"""The one exceptions module: every error a user can cause derives from StillroomError.

The command line turns a :class:`StillroomError` into one line on stderr and exit
code 2 (:func:`user_message`). Library code below it raises plain ``ValueError``
(``models`` checks its inputs that way; a recipe string that does not parse is a
``RecipeSyntaxError``, a ``ValueError``) or ``OSError`` (a file that cannot be
read). Where such an error is the user's doing (a value they typed, a file they
named), the code that passes the value on wraps the call in :func:`user_input`,
the one place that makes it an :class:`InputError`; anywhere else it is a bug and
keeps its traceback.
"""

from __future__ import annotations

from contextlib import contextmanager


class StillroomError(Exception):
    """Root of stillroom's own errors."""


class InputError(StillroomError, ValueError):
    """Bad input from a user: a profile, a recipe string, an option. The message says the fix."""


class RunError(StillroomError):
    """A run folder or study storage that cannot be used as asked."""


@contextmanager
def user_input(what: str | None = None):
    """Inside this block, a ``ValueError`` or ``OSError`` is the user's: an :class:`InputError`.

    Parameters
    ----------
    what : str, optional
        What the user gave, prefixed to the message (``"profile mine.toml"``).

    Examples
    --------
    >>> with user_input("--depth"):
    ...     int("five")
    Traceback (most recent call last):
    ...
    optimise.errors.InputError: --depth: invalid literal for int() with base 10: 'five'
    """
    try:
        yield
    except StillroomError:
        raise
    except ValueError as error:
        raise InputError(_prefixed(what, str(error))) from error
    except OSError as error:
        reason = error.strerror or str(error)
        where = error.filename if error.filename is not None else what
        raise InputError(_prefixed(None, f"{where}: {reason}")) from error


def _prefixed(what, message: str) -> str:
    return message if not what else f"{what}: {message}"


def user_message(error: BaseException) -> str:
    """What the command line prints for a user's error (one line; a recipe's caret below it).

    An ``OSError`` (a file the user named that cannot be read or written) gives
    the file and the reason, without a traceback.
    """
    if isinstance(error, OSError) and not isinstance(error, StillroomError):
        where = f"{error.filename}: " if error.filename is not None else ""
        text = f"{where}{error.strerror or error}"
    else:
        text = str(error)
    text = " ".join(text.split())  # one line, whatever the message held
    if len(text) > MAX_MESSAGE:
        text = text[: MAX_MESSAGE - 40] + f"... ({len(text)} characters)"
    return f"stillroom: {text}"


MAX_MESSAGE = 1000
