"""Numbers and report values as short text for people: one set of rules for the command line,
the widget's readouts, the sweep view and ``render``'s title.

A float keeps ``digits`` significant digits, or none after the point from ``big`` on, with
thousands separators (``1,234,567``); an integer is written in full with separators; a truth
value reads "yes"/"no"; a missing value a dash.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

__all__ = ["DASH", "number", "percent", "value"]

#: What a missing value reads as.
DASH = "–"


def number(v: float, *, digits: int = 3, big: float = 1e3, unit: str = "",
           nonfinite: str = "n/a") -> str:
    """A float (or int) as text: ``digits`` significant digits below ``big``, whole above.

    Parameters
    ----------
    v : float
    digits : int
        Significant digits below ``big``.
    big : float
        From this magnitude on, rounded to a whole number (``1,234,567`` rather than 1.23e+06).
    unit : str
        Appended as given (``" µm"``).
    nonfinite : str
        What NaN and infinities read as.

    Examples
    --------
    >>> number(1234567.8), number(0.012345), number(12.5, unit=" µm"), number(float("nan"))
    ('1,234,568', '0.0123', '12.5 µm', 'n/a')
    """
    f = float(v)
    if not math.isfinite(f):
        return nonfinite
    if abs(f) >= big:
        return f"{f:,.0f}{unit}"
    return f"{f:,.{digits}g}{unit}"


def percent(v: Any, none: str = DASH) -> str:
    """A share (0.42) as a whole percentage ("42%")."""
    if v is None:
        return none
    f = float(v)
    return f"{f:.0%}" if math.isfinite(f) else "n/a"


def value(v: Any, *, digits: int = 3, big: float = 1e3, unit: str = "", none: str = DASH,
          empty: str = "none") -> str:
    """Any report or parameter value as text.

    ``None`` reads ``none``; truth values "yes"/"no"; integers in full with separators; floats
    by :func:`number`; an empty string ``empty``; mappings ``k: v, ...``; sets sorted, lists in
    order, joined by commas (``empty`` when there is nothing); anything else ``str(v)``.

    Examples
    --------
    >>> value(True), value(12345), value(None), value({"seed": 3, "d": 0.75}), value([])
    ('yes', '12,345', '–', 'seed: 3, d: 0.75', 'none')
    """
    if v is None:
        return none
    if isinstance(v, (bool, np.bool_)):
        return "yes" if v else "no"
    if isinstance(v, (int, np.integer)):
        return f"{int(v):,d}{unit}"
    if isinstance(v, (float, np.floating)):
        return number(v, digits=digits, big=big, unit=unit)
    if isinstance(v, str):
        return v or empty
    if isinstance(v, Mapping):
        return ", ".join(f"{k}: {value(x, digits=digits, big=big)}" for k, x in v.items()) or empty
    if isinstance(v, (set, frozenset)):
        return ", ".join(sorted(map(str, v))) or empty
    if isinstance(v, (list, tuple)):
        return ", ".join(value(x, digits=digits, big=big) for x in v) or empty
    return str(v)
