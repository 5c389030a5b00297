"""How numbers and names are written for people: in tables, plots and on the terminal.

Shared by :mod:`optimise.reports`, :mod:`optimise.plots`, :mod:`optimise.sweep`
and the command line, so that each writes a figure the same way.
"""

from __future__ import annotations

import math

# short names for the tables; the baseline's full title and source are in models.baselines
SHORT_NAMES = {
    "bbpssw": "BBPSSW",
    "dejmps": "DEJMPS",
    "alternating-pumping": "alternating pumping",
    "double-selection-pumping": "double-selection pumping",
}


def baseline_title(name: str) -> str:
    """Short name of a textbook baseline (``dejmps`` -> ``DEJMPS``)."""
    return SHORT_NAMES.get(name, name)


def baseline_label(name: str, depth: int | None) -> str:
    """``"DEJMPS, depth 3"``."""
    title = baseline_title(name)
    return f"{title}, depth {depth}" if depth is not None else title


def fmt_fidelity(f: float) -> str:
    return f"{f:.6f}"


def fmt_number(x: float | None, digits: int = 4) -> str:
    """``digits`` significant digits; infinite (or None, how JSON stores it) is ``inf``."""
    if x is None or math.isinf(x):
        return "inf"
    return f"{x:.{digits}g}"


def fmt_time(t: float | None) -> str:
    """Seconds with a unit people read at a glance: ``1.25 ms``, ``3.4 s``.

    Examples
    --------
    >>> fmt_time(0.00125), fmt_time(3.4), fmt_time(None)
    ('1.25 ms', '3.4 s', 'inf')
    """
    if t is None or math.isinf(t):  # None: how JSON stores an infinite time
        return "inf"
    if t == 0:
        return "0 s"
    for scale, unit in ((1.0, "s"), (1e-3, "ms"), (1e-6, "us"), (1e-9, "ns")):
        if abs(t) >= scale:
            return f"{t / scale:.3g} {unit}"
    return f"{t:.3g} s"
