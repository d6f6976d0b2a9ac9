"""The table of recorded actions: what a Session logs, a session file may hold and a replay
script may call.

Every action a :class:`~floorwidget.session.Session` records is registered here once, with the
type of each positional argument and each keyword.  :func:`check_entry` validates a log entry
against the table (name, argument count, keyword names, value types); the session-file reader
runs it on every entry it loads and the script writer on every entry it writes, and
:func:`call_text` builds the call from the validated values only: keyword names from the table
(or the placer's own option names), values as ``repr`` of plain Python values.  So a session
file is data: nothing in it can become code in a script.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field, fields
from typing import Any

from ..design import ORIENTATIONS, REGION_TYPES, DesignError, Floorplan
from . import checks

__all__ = ["Action", "ACTIONS", "check_entry", "call_text", "literal", "MAX_BATCH_DEPTH"]

MAX_BATCH_DEPTH = 32  # batches inside batches; deeper logs are refused, not recursed into

Kind = Callable[[Any, str], Any]


# --- value kinds: each returns the value (plain) or raises DesignError naming ``where`` ---------
def _text(v, where: str) -> str:
    if not isinstance(v, str):
        raise DesignError(f"{where}: expected text, got {v!r}")
    return str(v)


def _optional_text(v, where: str) -> str | None:
    return None if v is None else _text(v, where)


def _number(v, where: str) -> float:
    return checks.number(v, where)


def _count(v, where: str) -> int:
    return checks.integer(v, where, 0)


def _seed(v, where: str) -> int:
    return checks.integer(v, where, 0, checks.SEED_LIMIT)


def _flag(v, where: str) -> bool:
    if not isinstance(v, bool):
        raise DesignError(f"{where}: expected True or False, got {v!r}")
    return v


def _names(v, where: str):
    """One block name, or a list of them (kept as given: the replay passes the same)."""
    if isinstance(v, str):
        return str(v)
    if not isinstance(v, list):
        raise DesignError(f"{where}: expected a block name or a list of them, got {v!r}")
    return [_text(x, f"{where}[{k}]") for k, x in enumerate(v)]


def _name_list(v, where: str) -> list[str]:
    if not isinstance(v, list):
        raise DesignError(f"{where}: expected a list of block names, got {v!r}")
    return _names(v, where)


def _numbers(v, where: str, n: int) -> list[float]:
    if not isinstance(v, list) or len(v) != n:
        raise DesignError(f"{where}: expected {n} numbers, got {v!r}")
    return [_number(x, f"{where}[{k}]") for k, x in enumerate(v)]


def _rect(v, where: str) -> list[float]:
    return _numbers(v, where, 4)


def _rects(v, where: str):
    """One rectangle or a list of them."""
    if isinstance(v, list) and v and isinstance(v[0], list):
        return [_rect(r, f"{where}[{k}]") for k, r in enumerate(v)]
    return _rect(v, where)


def _halo(v, where: str):
    return _rect(v, where) if isinstance(v, list) else _number(v, where)


def _pitch(v, where: str):
    if v is None:
        return None
    return _numbers(v, where, 2) if isinstance(v, list) else _number(v, where)


def _orientation(v, where: str) -> str:
    if v not in ORIENTATIONS:
        raise DesignError(f"{where}: expected one of {', '.join(ORIENTATIONS)}, got {v!r}")
    return str(v)


def _region_kind(v, where: str) -> str:
    if v not in REGION_TYPES:
        raise DesignError(f"{where}: expected one of {', '.join(REGION_TYPES)}, got {v!r}")
    return str(v)


def _plain(v, where: str):
    try:
        return checks.plain(v, where)
    except DesignError as e:
        raise DesignError(f"{where}: {e.message}") from None


def _mapping(v, where: str) -> dict:
    if not isinstance(v, Mapping):
        raise DesignError(f"{where}: expected an object, got {v!r}")
    return _plain(v, where)


def _floorplan(v, where: str) -> Floorplan:
    if not isinstance(v, Floorplan):
        raise DesignError(f"{where}: expected a floorplan, got {type(v).__name__}")
    return v


# --- the table -----------------------------------------------------------------------------------
@dataclass(frozen=True)
class Action:
    """One recorded action: positional argument kinds (the first ``required`` must be given),
    keyword kinds, and whether the placer's options are accepted as further keywords."""

    name: str
    args: tuple[tuple[str, Kind], ...] = ()
    kwargs: Mapping[str, Kind] = field(default_factory=dict)
    required: int | None = None
    placer_options: bool = False

    def __post_init__(self):
        if self.required is None:  # all positional arguments are required
            object.__setattr__(self, "required", len(self.args))


@functools.cache
def _placer_option_names() -> frozenset[str]:
    from ..placer.options import PlacerOptions  # noqa: PLC0415
    return frozenset(f.name for f in fields(PlacerOptions))


_NAME = ("name", _text)
_NAMES = ("names", _names)
_GROUP = ("names", _name_list)
_INDEX = ("index", _count)
_XY = (("x", _number), ("y", _number))
_RUN = {"target_density": lambda v, w: checks.density(v, w), "seed": _seed}

ACTIONS: dict[str, Action] = {a.name: a for a in (
    Action("move", (_NAME, *_XY)),
    Action("pin", (_NAMES,)),
    Action("unpin", (_NAMES,)),
    Action("rotate", (_NAME,)),
    Action("flip", (_NAME,)),
    Action("set_orientation", (_NAME, ("orientation", _orientation))),
    Action("align", (_GROUP, ("side", _text))),
    Action("distribute", (_GROUP, ("axis", _text))),
    Action("array", (_GROUP, ("rows", _count), ("cols", _count)), {"pitch": _pitch}),
    Action("mirror", (_GROUP, ("axis", _text))),
    Action("push", (_GROUP,), {"side": _optional_text}),
    Action("shift", (_NAMES, ("dx", _number), ("dy", _number))),
    Action("add_blockage", (("rect", _rect),), {"max_density": _number}),
    Action("move_blockage", (_INDEX, *_XY)),
    Action("set_blockage_density", (_INDEX, ("max_density", _number))),
    Action("remove_blockage", (_INDEX,)),
    Action("set_halo", (_NAMES, ("halo", _halo))),
    Action("add_region", (_NAME, ("rects", _rects)), {"kind": _region_kind}),
    Action("remove_region", (_NAME,)),
    Action("assign_group", (("region", _optional_text), _GROUP), required=1,
           kwargs={"prefix": _text, "depth": _count, "separators": _text}),
    Action("power_grid", (("spec", _mapping),)),
    Action("clear_power_grid"),
    Action("place", kwargs=_RUN, placer_options=True),
    Action("refine", kwargs={**_RUN, "local": _flag}, placer_options=True),
    Action("legalize", placer_options=True),
    Action("assign_pins", kwargs={"groups": _plain, "corner_keepout": _number,
                                  "held": _name_list}),
    Action("undo"),
    Action("redo"),
    Action("snapshot", (("label", _text),), {"note": _text}),
    Action("add_alternative", (("label", _text), ("floorplan", _floorplan)),
           {"note": _text, "params": _mapping}),
    Action("restore", (("label", _text),)),
)}


def check_entry(entry, where: str = "entry", depth: int = 0) -> dict:
    """A validated copy of log entry ``entry`` (a batch with its actions, recursively).

    Raises
    ------
    DesignError
        Naming ``where`` (e.g. ``log[3].kwargs``): an unknown action or keyword, a wrong
        number of arguments or a value of the wrong type.
    """
    if not isinstance(entry, dict):
        raise DesignError(f"{where}: expected an object, got {type(entry).__name__}")
    op = entry.get("op")
    if op == "batch":
        if depth >= MAX_BATCH_DEPTH:
            raise DesignError(f"{where}: batches nested more than {MAX_BATCH_DEPTH} deep")
        actions = entry.get("actions")
        if not isinstance(actions, list):
            raise DesignError(f"{where}.actions: expected a list")
        return {"op": "batch", "label": _text(entry.get("label"), where + ".label"),
                "actions": [check_entry(e, f"{where}.actions[{k}]", depth + 1)
                            for k, e in enumerate(actions)]}
    act = ACTIONS.get(op) if isinstance(op, str) else None
    if act is None:
        raise DesignError(f"{where}.op: unknown action {op!r}")
    args, kwargs = entry.get("args", []), entry.get("kwargs", {})
    if not isinstance(args, list) or not act.required <= len(args) <= len(act.args):
        n = act.required if act.required == len(act.args) else \
            f"{act.required}..{len(act.args)}"
        raise DesignError(f"{where}.args: {op} takes {n} argument(s), got {args!r}")
    if not isinstance(kwargs, dict):
        raise DesignError(f"{where}.kwargs: expected an object, got {type(kwargs).__name__}")
    at = "args"
    try:  # the kinds name the argument; the entry's place is added only on an error
        out_args = [kind(v, name) for (name, kind), v in zip(act.args, args)]
        at = "kwargs"
        out_kw = {}
        for key, v in kwargs.items():
            kind = act.kwargs.get(key) if isinstance(key, str) else None
            if kind is None and act.placer_options and isinstance(key, str) \
                    and key in _placer_option_names():
                kind = _plain
            if kind is None:
                raise DesignError(f"{op} takes no keyword {key!r}")
            out_kw[str(key)] = kind(v, str(key))
    except DesignError as e:
        raise DesignError(f"{where}.{at}: {e.message}") from None
    return {"op": op, "args": out_args, "kwargs": out_kw}


def literal(v) -> str:
    """Python source for a plain value (None, bool, int, float, str, list, dict with text
    keys) or a floorplan; built from ``repr`` of the exact built-in types, nothing else."""
    t = type(v)
    if v is None or t in (bool, int, str):
        return repr(v)
    if t is float:
        return repr(v) if math.isfinite(v) else f"float({repr(v)!r})"
    if t is list:
        return "[" + ", ".join(literal(x) for x in v) + "]"
    if t is dict and all(type(k) is str for k in v):
        return "{" + ", ".join(f"{literal(k)}: {literal(x)}" for k, x in v.items()) + "}"
    if isinstance(v, Floorplan):
        arrays = (v.x.tolist(), v.y.tolist(), v.orient.tolist(), v.status.tolist())
        return "fw.Floorplan(design, " + ", ".join(literal(a) for a in arrays) + ")"
    raise DesignError(f"a {t.__name__} cannot be written into a replay script")


def call_text(entry: dict, indent: str = "", where: str = "log") -> list[str]:
    """Lines of Python for log entry ``entry``, validated by :func:`check_entry` first."""
    e = check_entry(entry, where)
    return _lines(e, indent)


def _lines(e: dict, indent: str) -> list[str]:
    if e["op"] == "batch":
        body = [ln for a in e["actions"] for ln in _lines(a, indent + "    ")]
        return [f"{indent}with session.batch({literal(e['label'])}):"] + (
            body or [indent + "    pass"])
    parts = [literal(a) for a in e["args"]]
    parts += [f"{k}={literal(v)}" for k, v in e["kwargs"].items()]
    return [f"{indent}session.{e['op']}({', '.join(parts)})"]
