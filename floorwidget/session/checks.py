"""Argument checks shared by every Session method, the session-file reader and the script writer.

One place decides what a block name, a coordinate, a density or a replayable value is, so a
method, a logged action and a loaded file are refused the same way.  Values go through
:class:`~floorwidget.design.DesignError` (a ``ValueError``) naming what was wrong; a block name
that is not text is a ``TypeError``, as Python itself reports wrong types.
"""

from __future__ import annotations

import math
import numbers
from collections.abc import Iterable, Mapping

import numpy as np

from ..design import FIXED, Design, DesignError

__all__ = ["number", "number_list", "integer", "density", "unit_density", "block_index",
           "name_list", "plain", "fixed_freed"]

SEED_LIMIT = 2**32  # seeds as the command line takes them: [0, 2^32)


def number(v, what: str) -> float:
    """``v`` as a finite float; a string, a bool or anything not a real number is refused.

    Raises
    ------
    DesignError
        Naming ``what``: not a number (``"0.5"`` is text, not a number) or not finite.
    """
    if type(v) is float:  # the common case, first
        f = v
    elif isinstance(v, (bool, np.bool_)) or not isinstance(v, numbers.Real):
        raise DesignError(f"{what} must be a number, got {v!r}")
    else:
        f = float(v)
    if not math.isfinite(f):
        raise DesignError(f"{what} must be finite, got {v!r}")
    return f


def number_list(v, n: int, what: str, form: str) -> list[float]:
    """``v`` as a list of ``n`` finite floats; ``form`` says what was expected in the error
    (e.g. ``"a rectangle is four numbers [xlo, ylo, xhi, yhi]"``)."""
    try:
        vals = list(v)
    except TypeError:
        vals = []
    if len(vals) != n or isinstance(v, (str, Mapping)):
        raise DesignError(f"{what}: {form}, got {v!r}")
    return [number(x, what) for x in vals]


def integer(v, what: str, lo: int = 0, hi: int | None = None) -> int:
    """``v`` as an int in ``[lo, hi)`` (``hi=None``: no upper bound); ``1.7`` and ``True`` are
    refused, numpy integers taken."""
    if isinstance(v, (bool, np.bool_)) or not isinstance(v, numbers.Integral):
        raise DesignError(f"{what} must be a whole number, got {v!r}")
    k = int(v)
    if k < lo or (hi is not None and k >= hi):
        rng = f">= {lo}" if hi is None else f"in [{lo}, {hi})"
        raise DesignError(f"{what} must be {rng}, got {v!r}")
    return k


def density(v, what: str = "target_density") -> float:
    """A target density: a number in (0, 1] (what the placer and the report take)."""
    f = number(v, what)
    if not 0.0 < f <= 1.0:
        raise DesignError(f"{what} must lie in (0, 1], got {v!r}")
    return f


def unit_density(v, what: str) -> float:
    """A blockage's maximum density: a number in [0, 1] (0: a full blockage)."""
    f = number(v, f"{what}: max_density")
    if not 0.0 <= f <= 1.0:
        raise DesignError(f"{what}: max_density must lie in [0, 1] (0: a full blockage), "
                          f"got {v!r}")
    return f


def block_index(design: Design, name) -> int:
    """Index of block ``name`` in ``design``.

    Raises
    ------
    TypeError
        ``name`` is not text.
    DesignError
        No block of that name; the message names it and the design.
    """
    if not isinstance(name, str):
        raise TypeError(f"block names are strings, got {name!r} ({type(name).__name__})")
    i = design.index.get(name)
    if i is None:
        raise DesignError(f"no block named {name!r} in design {design.name!r}",
                          where=f"block {name!r}")
    return i


def name_list(names) -> list[str]:
    """One name or an iterable of names as a list, each checked to be text (``TypeError``)."""
    if isinstance(names, str):
        return [names]
    if not isinstance(names, Iterable) or isinstance(names, Mapping):
        raise TypeError(f"expected a block name or a list of block names, got {names!r}")
    out = list(names)
    for nm in out:
        if not isinstance(nm, str):
            raise TypeError(f"block names are strings, got {nm!r} ({type(nm).__name__})")
    return out


def plain(v, what: str):
    """``v`` as plain Python values (numpy scalars and arrays converted) that ``repr`` and JSON
    reproduce exactly; :class:`DesignError` for anything else (it could not be replayed)."""
    if v is None or isinstance(v, bool):
        return v
    if isinstance(v, str):
        return str(v)
    if isinstance(v, np.generic):
        return plain(v.item(), what)
    if isinstance(v, numbers.Integral):
        return int(v)
    if isinstance(v, float):
        return float(v)
    if isinstance(v, np.ndarray):
        return plain(v.tolist(), what)
    if isinstance(v, (list, tuple)):
        return [plain(x, what) for x in v]
    if isinstance(v, Mapping):
        out = {}
        for k, x in v.items():
            if not isinstance(k, str):
                raise DesignError(f"{what}: keys must be strings, got {k!r}")
            out[str(k)] = plain(x, f"{what}.{k}")
        return out
    raise DesignError(f"{what} is a {type(v).__name__}, which the action record cannot "
                      "replay; pass numbers, strings, lists or dicts")


def fixed_freed(design: Design, status: np.ndarray, idx: np.ndarray | None = None
                ) -> int | None:
    """The first block FIXED in ``design`` as read whose ``status`` (of the blocks ``idx``,
    default all) is not FIXED, or ``None``."""
    ref = design.initial.status if idx is None else design.initial.status[idx]
    bad = np.flatnonzero((ref == FIXED) & (np.asarray(status) != FIXED))
    if not len(bad):
        return None
    return int(bad[0] if idx is None else idx[bad[0]])
