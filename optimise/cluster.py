"""The exhaustive and deep layers on a Dask cluster (the optional extra ``stillroom[cluster]``).

Both layers hand their work to joblib, so they run on whatever backend the
caller configured (:func:`joblib.parallel_config`); a notebook user writes::

    from distributed import Client
    import joblib

    with Client("tcp://scheduler:8786"), joblib.parallel_config(backend="dask"):
        run_search(profile, run_dir="runs/mine")

:func:`dask_layers` does the same for ``stillroom search --dask-scheduler``. The
optuna study is not run on the cluster: its ``workers`` stay local processes.
"""

from __future__ import annotations

import contextlib
import re

from .errors import InputError

OPTION = "--dask-scheduler"
INSTALL_HINT = "pip install 'stillroom[cluster]'"
# schemes a Dask scheduler listens on (distributed's comm backends)
SCHEMES = ("tcp", "tls", "ws", "wss")
ADDRESS_FORM = "SCHEME://HOST:PORT with SCHEME one of " + ", ".join(SCHEMES)
# how long to try to reach the scheduler before saying it does not answer
CONNECT_TIMEOUT_S = 10.0

_ADDRESS = re.compile(
    r"(?P<scheme>[a-z]+)://(?P<host>\[[0-9a-fA-F:.]+\]|[A-Za-z0-9.-]+):(?P<port>\d{1,5})"
)


def check_address(text: str) -> str:
    """A scheduler address ``SCHEME://HOST:PORT``, or ValueError saying what is allowed.

    >>> check_address("tcp://127.0.0.1:8786")
    'tcp://127.0.0.1:8786'
    >>> check_address("localhost:8786")
    Traceback (most recent call last):
    ...
    ValueError: 'localhost:8786' is not a scheduler address; write SCHEME://HOST:PORT
    with SCHEME one of tcp, tls, ws, wss (e.g. tcp://127.0.0.1:8786)
    """
    match = _ADDRESS.fullmatch(text)
    if match is None or match["scheme"] not in SCHEMES:
        raise ValueError(
            f"{shown_address(text)!r} is not a scheduler address; write {ADDRESS_FORM} "
            "(e.g. tcp://127.0.0.1:8786)"
        )
    host = match["host"]
    # a host name has labels of 1 to 63 characters, 253 in all (RFC 1035, section 2.3.4)
    if not host.startswith("[") and (
        len(host) > 253 or any(not 1 <= len(label) <= 63 for label in host.split("."))
    ):
        raise ValueError(
            f"host of {shown_address(text)!r} is not a host name (labels of 1 to 63 "
            "characters, at most 253 in all)"
        )
    port = int(match["port"])
    if not 1 <= port <= 65535:
        raise ValueError(f"port {port} of {shown_address(text)!r} must be in [1, 65535]")
    return text


def shown_address(text: str) -> str:
    """An address as an error message shows it: at most 60 characters."""
    return text if len(text) <= 60 else text[:57] + "..."


@contextlib.contextmanager
def dask_layers(address: str, timeout_s: float | None = None):
    """Connect to the Dask scheduler at ``address`` and run joblib work on its cluster.

    Raises
    ------
    InputError
        Without the ``cluster`` extra installed (one line naming the install
        command), or when no scheduler answers at ``address``; nothing has been
        written then.
    """
    address = check_address(address)
    try:
        from distributed import Client
    except ImportError:
        raise InputError(f"{OPTION} needs Dask's distributed package: {INSTALL_HINT}") from None
    import joblib

    timeout_s = CONNECT_TIMEOUT_S if timeout_s is None else timeout_s
    try:
        client = Client(address, timeout=timeout_s)
    except (OSError, TimeoutError, ValueError) as error:  # ValueError: a name DNS refuses
        reason = str(error).splitlines()[0] if str(error) else type(error).__name__
        raise InputError(
            f"{OPTION} = {address}: no Dask scheduler answered within {timeout_s:g} s ({reason})"
        ) from None
    with client, joblib.parallel_config(backend="dask"):
        yield client
