"""Reading LEF libraries: units, sites and macro abstracts (:func:`read_lef`)."""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ...design import (
    CELL,
    CLUSTER,
    MACRO,
    TERMINAL,
)
from .._io import read_text
from ._common import _SYM_GEN, MAX_DBU, _warn_skipped, symmetry_orientations
from .tokens import _Tokens


@dataclass
class LefMacro:
    """One ``MACRO`` abstract, in µm.  ``pins`` maps pin name -> offset from the centre (N)."""

    name: str
    cls: str = ""
    kind: int = MACRO
    width: float = float("nan")
    height: float = float("nan")
    origin: tuple[float, float] = (0.0, 0.0)
    symmetry: tuple[str, ...] = ()
    allowed: int = 1
    pins: dict[str, tuple[float, float]] = field(default_factory=dict)
    file: str = ""
    line: int = 0


@dataclass
class LefLibrary:
    """What :func:`read_lef` keeps: database units, sites ``name -> (w, h)`` and macros."""

    dbu: int | None = None
    sites: dict[str, tuple[float, float]] = field(default_factory=dict)
    macros: dict[str, LefMacro] = field(default_factory=dict)
    files: list[str] = field(default_factory=list)
    #: Routing layers in the order the LEF gives them: ``(name, "H" | "V", pitch µm)``.
    layers: list[tuple[str, str, float]] = field(default_factory=list)
    skipped: Counter = field(default_factory=Counter)


_LEF_END_NAMED = {"LAYER", "VIA", "VIARULE", "NONDEFAULTRULE", "ARRAY"}
_LEF_END_KEYWORD = {"SPACING", "PROPERTYDEFINITIONS", "IRDROP", "NOISETABLE",
                    "CORRECTIONTABLE", "MAXVIASTACK_BLOCK", "DIELECTRIC_BLOCK"}
_LEF_QUIET = {"VERSION", "BUSBITCHARS", "DIVIDERCHAR", "NAMESCASESENSITIVE"}


def _class_kind(cls_tokens: list[str]) -> int:
    c = [t.upper() for t in cls_tokens]
    head = c[0] if c else "BLOCK"
    if head == "BLOCK":
        return CLUSTER if "SOFT" in c[1:] else MACRO
    if head in ("CORE", "ENDCAP"):
        return CELL
    if head in ("PAD", "COVER"):
        return TERMINAL
    return MACRO  # RING and anything unforeseen: a hard block


def _routing_layer(name: str, toks: list[str]) -> tuple[str, str, float] | None:
    """``(name, "H" | "V", pitch)`` of a ``LAYER`` whose ``TYPE`` is ``ROUTING`` and that
    has a ``DIRECTION`` and a ``PITCH``: the track pitch across the preferred direction (LEF
    ``PITCH x y`` gives the x pitch of vertical tracks and the y pitch of horizontal ones);
    ``None`` for any other layer."""
    up = [s.upper() for s in toks]

    def after(word: str, k: int = 1) -> str | None:
        i = up.index(word) + k if word in up else len(up)
        return toks[i] if i < len(toks) else None

    kind, direction = after("TYPE"), after("DIRECTION")
    if kind is None or kind.upper() != "ROUTING" or direction is None or "PITCH" not in up:
        return None
    d = direction.upper()
    second = after("PITCH", 2)
    pick = 2 if d == "HORIZONTAL" and second is not None and second != ";" else 1
    try:
        p = float(after("PITCH", pick))
    except (TypeError, ValueError):
        return None
    if d not in ("HORIZONTAL", "VERTICAL") or not p > 0:
        return None
    return name, d[0], p


def _read_one_lef(path: str, lib: LefLibrary) -> None:
    tk = _Tokens(read_text(path), path)
    skipped = tk.skipped = lib.skipped
    while tk.peek() is not None:
        start = tk.i
        kw = tk.next("a statement").upper()
        if kw == "END":
            t = tk.peek()
            if t is not None and t.upper() == "LIBRARY":
                break
            if t is not None:  # stray END of a block we skipped statement by statement
                tk.i += 1
            continue
        if kw in _LEF_QUIET:
            tk.skip_statement()
        elif kw == "UNITS":
            while True:
                t = tk.next("END UNITS").upper()
                if t == "END":
                    tk.expect("UNITS")
                    break
                if t == "DATABASE":
                    tk.expect("MICRONS")
                    v = tk.num("DATABASE MICRONS")
                    if not 0 < v <= MAX_DBU or v != int(v):
                        tk.fail(f"DATABASE MICRONS must be a whole number in 1..{MAX_DBU}, "
                                f"got {v:g}", tk.i - 1)
                    lib.dbu = int(v)
                    tk.skip_statement()
                else:
                    tk.skip_statement()
        elif kw == "SITE":
            name = tk.next("site name")
            size = None
            while True:
                t = tk.next(f"END {name}")
                if _closes(tk, t.upper(), "SITE", name):
                    break
                if t.upper() == "SIZE":
                    w = tk.num("site width")
                    tk.expect("BY")
                    h = tk.num("site height")
                    size = (w, h)
                tk.skip_statement() if t != ";" else None
            if size is None:
                tk.fail(f"SITE {name} has no SIZE", start)
            lib.sites[name] = size
        elif kw == "MACRO":
            m = _read_macro(tk, start)
            m.file = path
            lib.macros[m.name] = m
        elif kw == "LAYER":
            name = tk.next("layer name")
            first = tk.i
            tk.skip_to_end(name, start)
            layer = _routing_layer(name, tk.toks[first:tk.i - 2])
            if layer is not None:
                lib.layers.append(layer)
            skipped[kw] += 1  # (the rest of a layer's definition is not kept)
        elif kw in _LEF_END_NAMED:
            name = tk.next(f"{kw} name")
            tk.skip_to_end(name, start)
            skipped[kw] += 1
        elif kw in _LEF_END_KEYWORD:
            tk.skip_to_end(kw, start)
            skipped[kw] += 1
        elif kw == "BEGINEXT":
            while tk.peek() is not None and tk.next("ENDEXT").upper() != "ENDEXT":
                pass
            skipped[kw] += 1
        else:
            skipped[kw] += 1
            tk.skip_statement()


def _closes(tk: _Tokens, keyword: str, what: str, name: str) -> bool:
    """Whether ``keyword`` (upper case, just read) is the ``END name`` that closes ``what
    name`` (a SITE, MACRO or PIN); an ``END`` naming something else fails."""
    if keyword != "END":
        return False
    e = tk.next(name)
    if e != name:
        tk.fail(f"END {e} does not close {what} {name}", tk.i - 1)
    return True


def _read_macro(tk: _Tokens, start: int) -> LefMacro:
    name = tk.next("macro name")
    m = LefMacro(name=name, line=tk.line(start))
    cls: list[str] = []
    size = None
    while True:
        i0 = tk.i
        T = tk.next(f"END {name}").upper()
        if _closes(tk, T, "MACRO", name):
            break
        if T == ";":
            continue
        if T == "CLASS":
            cls = tk.statement()
        elif T == "ORIGIN":
            ox, oy = tk.num("ORIGIN x"), tk.num("ORIGIN y")
            m.origin = (ox, oy)
            tk.skip_statement()
        elif T == "SIZE":
            w = tk.num("macro width")
            tk.expect("BY")
            h = tk.num("macro height")
            if w < 0 or h < 0:
                tk.fail(f"MACRO {name}: negative SIZE", i0)
            size = (w, h)
            tk.skip_statement()
        elif T == "SYMMETRY":
            sym = [s.upper() for s in tk.statement()]
            bad = [s for s in sym if s not in _SYM_GEN]
            if bad:
                tk.fail(f"MACRO {name}: unknown SYMMETRY {bad[0]!r} (expected X, Y or R90)", i0)
            m.symmetry = tuple(sym)
        elif T == "PIN":
            pname, pos = _read_pin(tk, i0)
            if pname not in m.pins:
                m.pins[pname] = pos  # type: ignore[assignment]
        elif T in ("OBS", "DENSITY"):
            while tk.next(f"END of {T}").upper() != "END":
                pass
        else:  # FOREIGN, SITE, EEQ, LEQ, SOURCE, PROPERTY, FIXEDMASK, ...
            if T not in ("FOREIGN", "SITE", "EEQ", "LEQ", "SOURCE", "PROPERTY", "FIXEDMASK"):
                tk.skipped[f"MACRO {T}"] += 1
            tk.skip_statement()
    if size is None:
        tk.fail(f"MACRO {name} has no SIZE", start)
    m.cls = " ".join(cls)
    m.kind = _class_kind(cls)
    m.width, m.height = size
    m.allowed = symmetry_orientations(m.symmetry)
    # pins: footprint-relative point = LEF point + ORIGIN; offset from the centre
    ox, oy = m.origin
    hw, hh = size[0] / 2, size[1] / 2
    pins = {}
    for p, c in m.pins.items():
        if c is None:
            pins[p] = (np.nan, np.nan)
            continue
        dx, dy = c[0] + ox - hw, c[1] + oy - hh
        if m.kind != TERMINAL and (abs(dx) > hw + 1e-9 or abs(dy) > hh + 1e-9):
            # a pin shape centred beyond the macro edge: moved onto the edge (and counted)
            tk.skipped["PIN centre outside its MACRO, moved to the edge"] += 1
            dx, dy = min(max(dx, -hw), hw), min(max(dy, -hh), hh)
        pins[p] = (dx, dy)
    m.pins = pins
    return m


def _read_pin(tk: _Tokens, start: int):
    pname = tk.next("pin name")
    centre = None
    while True:
        T = tk.next(f"END {pname}").upper()
        if _closes(tk, T, "PIN", pname):
            return pname, centre
        if T == ";":
            continue
        if T == "PORT":
            while True:
                i0 = tk.i
                s = tk.next("END of PORT")
                S = s.upper()
                if S == "END":
                    break
                if S == ";":
                    continue
                if S in ("RECT", "POLYGON"):
                    toks = tk.statement()
                    k = 0
                    while k < len(toks) and toks[k].upper() in ("MASK", "ITERATE"):
                        k += 2 if toks[k].upper() == "MASK" else 1
                    nums = []
                    for v in toks[k:]:
                        if v.upper() in ("DO", "STEP"):
                            break
                        try:
                            f = float(v)
                        except ValueError:
                            f = np.nan
                        if not np.isfinite(f):
                            tk.fail(f"PIN {pname}: bad number {v!r} in {S}", i0)
                        nums.append(f)
                    need = 4 if S == "RECT" else 6
                    if len(nums) < need or len(nums) % 2:
                        tk.fail(f"PIN {pname}: {S} needs {need} coordinates or more", i0)
                    if centre is None:
                        xs, ys = nums[0::2], nums[1::2]
                        if S == "RECT":
                            xs, ys = xs[:2], ys[:2]
                        centre = ((min(xs) + max(xs)) / 2, (min(ys) + max(ys)) / 2)
                else:  # LAYER, VIA, PATH, CLASS, WIDTH
                    tk.skip_statement()
        else:  # DIRECTION, USE, SHAPE, ANTENNA*, PROPERTY, MUSTJOIN, ...
            tk.skip_statement()


def read_lef(paths: str | Path | Sequence[str | Path]) -> LefLibrary:
    """Read one or more LEF files into one library (later files override earlier macros).

    Parameters
    ----------
    paths : path or list of paths
        Technology and cell LEF files, in order.

    Returns
    -------
    LefLibrary
        ``sites`` (name -> (w, h) µm) and ``macros`` (name -> :class:`LefMacro`).

    Raises
    ------
    DesignError
        Naming file and line of a malformed statement (bad number, unterminated block,
        ``END`` name mismatch, macro without ``SIZE``).

    Examples
    --------
    >>> lib = read_lef(["tech.lef", "cells.lef"])            # doctest: +SKIP
    >>> lib.macros["ram_a"].width                              # doctest: +SKIP
    """
    if isinstance(paths, (str, Path)):
        paths = [paths]
    lib = LefLibrary()
    for p in paths:
        lib.files.append(str(p))
        _read_one_lef(str(p), lib)
    if lib.skipped:
        _warn_skipped(", ".join(lib.files), lib.skipped)
    return lib
