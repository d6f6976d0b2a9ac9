"""GSRC floorplanning sets: ``.blocks`` or ``.hardblocks``, with ``.nets`` and ``.pl``.

:func:`read_gsrc` is given the ``.blocks``/``.hardblocks`` file; the ``.nets`` and ``.pl`` files
are found beside it by stem (``n300.hardblocks`` -> ``n300.nets``, ``n300.pl``).  An optional
first line ``UCLA blocks 1.0`` (``UCLA nets 1.0``, ``UCLA pl 1.0``) is accepted; ``#`` starts a
comment.  The ``.nets`` file is required; the ``.pl`` only when there are terminals.

What the statements become (our choices):

* ``name hardrectilinear k (x1, y1) ... (xk, yk)``: a ``MACRO`` whose footprint is the bounding
  box of the ``k`` corner points.  For a rectangle (four corners) that is the block itself; a
  rectilinear block with more corners is *also* read as its bounding box, which may claim more
  area than the block has (a conservative early estimate).  The corners must be axis-parallel
  (each edge keeps x or y) and ``k`` an even number of at least 4.
* ``name softrectangular area min_aspect max_aspect``: a ``MACRO`` of that area whose shape is
  fixed at load time, as square as its bounds allow: aspect (height / width) ``clip(1, min,
  max)``, width ``sqrt(area / aspect)``, height ``area / width``.  Soft shapes are not changed
  later.
* ``name terminal``: an I/O ``TERMINAL`` (zero size, ``FIXED``) at its ``.pl`` position.
* Macros may take all eight orientations; they snap to a 1 µm grid from the outline's origin;
  there are no rows.  The files' abstract units are read as µm.
* ``.nets``: ``NetDegree : k [name]`` followed by ``k`` pin lines ``node [direction] [: dx dy]``.
  Pin offsets are from the node centre; an offset written ``%p`` is ``p`` percent of the node's
  half width (half height), so ``%100`` is the edge.  Without an offset a pin is at the centre.
* ``.pl``: ``name x y [: orientation] [/FIXED]`` gives terminal positions (and, optionally,
  block lower-left corners; unlisted blocks start stacked at the outline centre, unplaced;
  blocks stay movable).

The outline (die and core):

* When the ``.pl`` places terminals and neither ``whitespace`` nor ``aspect`` is passed: the
  bounding box of the terminals together with the origin (the suites scale the pads to the
  outline, with the origin at its lower-left corner).
* Otherwise: area ``(1 + whitespace) * block area`` (``whitespace`` default 0.10), with
  height / width ``aspect`` (default 1.0), lower-left at the origin -- the fixed-outline setting
  of Adya and Markov, IEEE TVLSI 2003.  Terminals placed by the ``.pl`` are then scaled from
  their own bounding box (with the origin) onto the new outline.

References
----------
S. N. Adya, I. L. Markov, "Fixed-outline floorplanning: enabling hierarchical design",
IEEE Trans. VLSI Systems 11(6), 2003 (the fixed-outline setting and its whitespace measure).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ..design import FIXED, MACRO, MOVABLE, ORIENT_CODE, TERMINAL, Design, DesignError
from ._io import COMPRESSED, read_text

__all__ = ["read_gsrc"]

_POINT = re.compile(r"\(\s*([^,()\s]+)\s*,\s*([^,()\s]+)\s*\)")
_COUNT_KEYS = {"numsoftrectangularblocks": "soft", "numhardrectilinearblocks": "hard",
               "numterminals": "terminal", "numnets": "nets", "numpins": "pins"}


def _lines(path: Path, kind: str):
    """``(line number, text)`` of the non-empty, comment-free lines, the header line dropped."""
    text = read_text(path)
    first = True
    for no, raw in enumerate(text.splitlines(), 1):
        line = raw.split("#", 1)[0].strip()
        if not line:
            continue
        if first:
            first = False
            if line.split()[:2] == ["UCLA", kind]:
                continue
        yield no, line


def _num(tok: str, path: Path, no: int, what: str) -> float:
    try:
        v = float(tok)
    except ValueError:
        raise DesignError(f"{what}: expected a number, got {tok!r}", file=str(path),
                          line=no) from None
    if not np.isfinite(v):
        raise DesignError(f"{what}: {tok!r} is not a finite number", file=str(path), line=no)
    return v


def _header(line: str, path: Path, no: int) -> tuple[str, int] | None:
    """``NumXxx : n`` -> (key, n); None for any other line."""
    parts = line.replace(":", " : ").split()
    if len(parts) == 3 and parts[1] == ":" and parts[0].lower() in _COUNT_KEYS:
        v = _num(parts[2], path, no, parts[0])
        if v < 0 or v != int(v):
            raise DesignError(f"{parts[0]}: expected a count, got {parts[2]!r}",
                              file=str(path), line=no)
        return _COUNT_KEYS[parts[0].lower()], int(v)
    return None


def _read_blocks(path: Path):
    names: list[str] = []
    kind: list[int] = []
    size: list[tuple[float, float]] = []
    counts: dict[str, tuple[int, int]] = {}
    seen: dict[str, int] = {}
    have = {"hard": 0, "soft": 0, "terminal": 0}
    for no, line in _lines(path, "blocks"):
        h = _header(line, path, no)
        if h is not None:
            counts[h[0]] = (h[1], no)
            continue
        tok = line.split()
        if len(tok) < 2:
            raise DesignError(f"expected 'name type ...', got {line!r}", file=str(path), line=no)
        name, typ = tok[0], tok[1].lower()
        if name in seen:
            raise DesignError(f"block {name!r} defined twice (first on line {seen[name]})",
                              file=str(path), line=no)
        if typ == "hardrectilinear":
            if len(tok) < 3:
                raise DesignError(f"block {name!r}: missing the number of corners",
                                  file=str(path), line=no)
            k = _num(tok[2], path, no, f"block {name!r} corner count")
            rest = line.split(None, 3)[3] if len(tok) > 3 else ""
            pts = _POINT.findall(rest)
            leftover = _POINT.sub("", rest).strip()
            if leftover:
                raise DesignError(f"block {name!r}: cannot read {leftover!r} as '(x, y)' corners",
                                  file=str(path), line=no)
            if k != len(pts) or k < 4 or k % 2:
                raise DesignError(f"block {name!r}: {tok[2]} corners announced, {len(pts)} given "
                                  "(a rectilinear block needs an even number, at least 4)",
                                  file=str(path), line=no)
            xy = np.array([[_num(a, path, no, f"block {name!r} corner"),
                            _num(b, path, no, f"block {name!r} corner")] for a, b in pts])
            nxt = np.roll(xy, -1, axis=0)
            if not ((xy[:, 0] == nxt[:, 0]) | (xy[:, 1] == nxt[:, 1])).all():
                raise DesignError(f"block {name!r}: corners do not form a rectilinear outline "
                                  "(an edge is neither horizontal nor vertical)",
                                  file=str(path), line=no)
            w = float(xy[:, 0].max() - xy[:, 0].min())
            hgt = float(xy[:, 1].max() - xy[:, 1].min())
            if w <= 0 or hgt <= 0:
                raise DesignError(f"block {name!r}: zero width or height", file=str(path),
                                  line=no)
            names.append(name)
            kind.append(MACRO)
            size.append((w, hgt))
            have["hard"] += 1
        elif typ == "softrectangular":
            if len(tok) != 5:
                raise DesignError(f"block {name!r}: expected 'softrectangular area min_aspect "
                                  "max_aspect'", file=str(path), line=no)
            area, lo, hi = (_num(t, path, no, f"block {name!r}") for t in tok[2:5])
            if area <= 0 or lo <= 0 or hi < lo:
                raise DesignError(f"block {name!r}: need area > 0 and 0 < min_aspect <= "
                                  "max_aspect", file=str(path), line=no)
            r = min(max(1.0, lo), hi)
            w = float(np.sqrt(area / r))
            names.append(name)
            kind.append(MACRO)
            size.append((w, area / w))
            have["soft"] += 1
        elif typ in ("terminal", "terminal_ni"):
            if len(tok) != 2:
                raise DesignError(f"terminal {name!r}: unexpected {' '.join(tok[2:])!r}",
                                  file=str(path), line=no)
            names.append(name)
            kind.append(TERMINAL)
            size.append((0.0, 0.0))
            have["terminal"] += 1
        else:
            raise DesignError(f"block {name!r}: unknown type {tok[1]!r} (expected "
                              "hardrectilinear, softrectangular or terminal)",
                              file=str(path), line=no)
        seen[name] = no
    kinds = np.array(kind, dtype=np.int8)
    for key in ("hard", "soft", "terminal"):
        if key in counts and counts[key][0] != have[key]:
            raise DesignError(f"header announces {counts[key][0]} {key} block(s), the file "
                              f"defines {have[key]}", file=str(path), line=counts[key][1])
    if not names:
        raise DesignError("no blocks defined", file=str(path), where="the block list")
    return names, kinds, np.array(size, dtype=np.float64).reshape(-1, 2)


def _offset(tok: str, half: float, path: Path, no: int) -> float:
    if tok.startswith("%"):
        return _num(tok[1:], path, no, "pin offset") / 100.0 * half
    return _num(tok, path, no, "pin offset")


def _read_nets(path: Path, index: dict[str, int], size: np.ndarray):
    starts = [0]
    pin_block: list[int] = []
    dx: list[float] = []
    dy: list[float] = []
    net_names: list[str] = []
    counts: dict[str, tuple[int, int]] = {}
    need = 0  # pins still expected for the open net
    open_no = 0
    for no, line in _lines(path, "nets"):
        h = _header(line, path, no)
        if h is not None:
            counts[h[0]] = (h[1], no)
            continue
        tok = line.replace(":", " : ").split()
        if tok[0].lower() == "netdegree":
            if need:
                raise DesignError(f"net on line {open_no} has {need} pin(s) fewer than its "
                                  "NetDegree", file=str(path), line=no)
            if len(tok) < 3 or tok[1] != ":" or len(tok) > 4:
                raise DesignError("expected 'NetDegree : k [name]'", file=str(path), line=no)
            k = _num(tok[2], path, no, "NetDegree")
            if k < 1 or k != int(k):
                raise DesignError(f"NetDegree {tok[2]!r} is not a positive count",
                                  file=str(path), line=no)
            if net_names:
                starts.append(len(pin_block))
            net_names.append(tok[3] if len(tok) == 4 else f"net{len(net_names)}")
            need, open_no = int(k), no
            continue
        if not need:
            raise DesignError(f"pin line {line!r} outside a net (no open NetDegree)",
                              file=str(path), line=no)
        name = tok[0]
        b = index.get(name)
        if b is None:
            raise DesignError(f"unknown block {name!r} in a net", file=str(path), line=no)
        rest = tok[1:]
        if rest and rest[0] != ":":
            rest = rest[1:]  # the pin direction (B, I, O), not kept
        ox = oy = 0.0
        if rest:
            if len(rest) != 3 or rest[0] != ":":
                raise DesignError(f"expected 'node [direction] [: dx dy]', got {line!r}",
                                  file=str(path), line=no)
            ox = _offset(rest[1], size[b, 0] / 2, path, no)
            oy = _offset(rest[2], size[b, 1] / 2, path, no)
        pin_block.append(b)
        dx.append(ox)
        dy.append(oy)
        need -= 1
    if need:
        raise DesignError(f"the file ends {need} pin(s) short of this NetDegree",
                          file=str(path), line=open_no)
    if net_names:
        starts.append(len(pin_block))
    for key, have in (("nets", len(net_names)), ("pins", len(pin_block))):
        if key in counts and counts[key][0] != have:
            raise DesignError(f"header announces {counts[key][0]} {key}, the file has {have}",
                              file=str(path), line=counts[key][1])
    return (np.array(starts if net_names else [0], np.int64), np.array(pin_block, np.int64),
            np.array(dx), np.array(dy), net_names)


def _read_pl(path: Path, index: dict[str, int], n: int):
    x = np.full(n, np.nan)
    y = np.full(n, np.nan)
    orient = np.zeros(n, np.int8)
    for no, line in _lines(path, "pl"):
        tok = line.replace(":", " : ").split()
        if tok and tok[-1].upper() in ("/FIXED", "/FIXED_NI"):
            tok = tok[:-1]  # terminals are fixed anyway; blocks stay movable
        if len(tok) not in (3, 5) or (len(tok) == 5 and tok[3] != ":"):
            raise DesignError(f"expected 'name x y [: orientation] [/FIXED]', got {line!r}",
                              file=str(path), line=no)
        b = index.get(tok[0])
        if b is None:
            raise DesignError(f"unknown block {tok[0]!r}", file=str(path), line=no)
        x[b] = _num(tok[1], path, no, f"{tok[0]!r} x")
        y[b] = _num(tok[2], path, no, f"{tok[0]!r} y")
        if len(tok) == 5:
            if tok[4] not in ORIENT_CODE:
                raise DesignError(f"{tok[0]!r}: unknown orientation {tok[4]!r}",
                                  file=str(path), line=no)
            orient[b] = ORIENT_CODE[tok[4]]
    return x, y, orient


def _sibling(p: Path, suffix: str) -> Path:
    """``stem + suffix`` beside ``p`` (also ``.gz``/``.bz2``); the plain name when none exists."""
    name = p.name
    if p.suffix.lower() in COMPRESSED:
        name = p.stem
    plain = p.with_name(Path(name).stem + suffix)
    for cand in [plain] + [plain.with_name(plain.name + c) for c in COMPRESSED]:
        if cand.exists():
            return cand
    return plain


def read_gsrc(path, *, whitespace: float | None = None, aspect: float | None = None) -> Design:
    """Read a GSRC floorplanning set from its ``.blocks`` or ``.hardblocks`` file.

    Parameters
    ----------
    path : path-like
        The ``.blocks`` / ``.hardblocks`` file; ``.nets`` and ``.pl`` are found by stem.
    whitespace : float, optional
        Fraction of the block area added as white space when the outline is derived (default
        0.10).  Passing it (or ``aspect``) derives the outline even when the ``.pl`` places
        terminals, which are then scaled onto it.
    aspect : float, optional
        Outline height / width when the outline is derived (default 1.0).

    Returns
    -------
    Design
        Blocks as macros on a 1 µm grid, terminals as fixed I/O terminals, no rows.

    Raises
    ------
    DesignError
        Naming the file and line of the first bad statement.

    Examples
    --------
    >>> import floorwidget as fw                                            # doctest: +SKIP
    >>> d = fw.load("../shared/realdata/gsrc-n300/n300.hardblocks")       # doctest: +SKIP
    >>> len(d.macros)                                                       # doctest: +SKIP
    300
    """
    p = Path(path)
    for what, v, ok in (("whitespace", whitespace, lambda t: t >= 0),
                        ("aspect", aspect, lambda t: t > 0)):
        if v is not None and not (np.isfinite(v) and ok(v)):
            raise DesignError(f"{what} must be a finite number "
                              f"{'>= 0' if what == 'whitespace' else '> 0'}, got {v!r}",
                              file=str(p), where=what)
    names, kind, size = _read_blocks(p)
    index = {nm: i for i, nm in enumerate(names)}
    n = len(names)
    nets_path = _sibling(p, ".nets")
    if not nets_path.exists():
        raise DesignError(f"missing {nets_path.name} beside it (GSRC sets are found by stem)",
                          file=str(p), where=nets_path.name)
    net_start, pin_block, pin_dx, pin_dy, net_names = _read_nets(nets_path, index, size)
    pl_path = _sibling(p, ".pl")
    term = kind == TERMINAL
    if pl_path.exists():
        x, y, orient = _read_pl(pl_path, index, n)
        missing = term & np.isnan(x)
        if missing.any():
            first = f"terminal {names[int(np.flatnonzero(missing)[0])]!r}"
            raise DesignError(f"{first} has no position ({int(missing.sum())} terminal(s) "
                              "missing)", file=str(pl_path), where=first)
    elif term.any():
        raise DesignError(f"missing {pl_path.name} beside it: the terminals need positions",
                          file=str(p), where=pl_path.name)
    else:
        x, y, orient = np.full(n, np.nan), np.full(n, np.nan), np.zeros(n, np.int8)
    block_area = float((size[:, 0] * size[:, 1]).sum())
    derive = whitespace is not None or aspect is not None or not term.any()
    if term.any():
        tx0, ty0 = min(0.0, x[term].min()), min(0.0, y[term].min())
        tx1, ty1 = x[term].max(), y[term].max()
    if not derive and (tx1 - tx0) * (ty1 - ty0) <= 0:
        derive = True  # terminals on one line: no outline from them
    if derive:
        ws = 0.10 if whitespace is None else float(whitespace)
        ar = 1.0 if aspect is None else float(aspect)
        wd = float(np.sqrt((1 + ws) * block_area / ar))
        die = np.array([0.0, 0.0, wd, wd * ar])
        if term.any():
            sx = die[2] / (tx1 - tx0) if tx1 > tx0 else 0.0
            sy = die[3] / (ty1 - ty0) if ty1 > ty0 else 0.0
            x[term] = np.where(sx > 0, (x[term] - tx0) * sx, die[2] / 2)
            y[term] = np.where(sy > 0, (y[term] - ty0) * sy, die[3] / 2)
    else:
        die = np.array([tx0, ty0, tx1, ty1])
    free = np.isnan(x)
    x[free] = (die[0] + die[2]) / 2 - size[free, 0] / 2
    y[free] = (die[1] + die[3]) / 2 - size[free, 1] / 2
    status = np.where(term, FIXED, MOVABLE).astype(np.int8)
    name = Path(p.stem).stem if p.suffix.lower() in COMPRESSED else p.stem
    return Design(name, die, names, kind, size[:, 0], size[:, 1], net_start, pin_block,
                  pin_dx, pin_dy, net_names=net_names, grid_pitch=(1.0, 1.0),
                  grid_origin=die[:2], x=x, y=y, orient=orient, status=status, dbu=1000,
                  source=str(p))
