"""Reading a Bookshelf set (:func:`read_aux`) and a placement (:func:`read_pl`); the rules are in
the package docstring."""

from __future__ import annotations

import warnings
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np

from ...design import (
    ALL_ORIENTS,
    CELL,
    FIXED,
    MACRO,
    MAX_SITES,
    MOVABLE,
    ORIENT_CODE,
    ORIENTATIONS,
    TERMINAL,
    Design,
    DesignError,
    Floorplan,
)
from .._io import format_suffix
from .tokens import (
    BookshelfWarning,
    _check_names,
    _first_bad,
    _header_counts,
    _NameTable,
    _Tokens,
)


def _read_nodes(path):
    t = _Tokens(path)
    lines = np.arange(len(t.ls))
    hdr, counts = _header_counts(t, lines, {b"NumNodes": "NumNodes",
                                            b"NumTerminals": "NumTerminals"})
    body = lines[~hdr]
    first = t.ls[body]
    lc = t.lc[body]
    _first_bad(t, body, (lc != 3) & (lc != 4), "expected 'name width height [terminal]'")
    _first_bad(t, body, t.eq(first, b":"), "expected 'name width height [terminal]'")
    w = t.floats(first + 1, "node width")
    h = t.floats(first + 2, "node height")
    neg = (w < 0) | (h < 0)
    _first_bad(t, body, neg, "negative node size")
    term = np.zeros(len(body), np.int8)
    four = np.flatnonzero(lc == 4)
    if len(four):
        ft = first[four] + 3
        is_t = t.eq(ft, b"terminal")
        is_ni = t.eq(ft, b"terminal_NI")
        bad = np.zeros(len(body), bool)
        bad[four] = ~(is_t | is_ni)
        _first_bad(t, body, bad, "node type must be 'terminal' or 'terminal_NI'")
        term[four] = np.where(is_t, 1, 2)
    zero = (term == 0) & ((w == 0) | (h == 0))
    _first_bad(t, body, zero, "movable node of zero size")
    table = _NameTable(t, first, "node")
    n, nterm = len(body), int((term > 0).sum())
    if "NumNodes" in counts and counts["NumNodes"][0] != n:
        t.fail(counts["NumNodes"][1], f"NumNodes says {counts['NumNodes'][0]} but the file has "
                                      f"{n} node lines")
    if "NumTerminals" in counts and counts["NumTerminals"][0] != nterm:
        t.fail(counts["NumTerminals"][1], f"NumTerminals says {counts['NumTerminals'][0]} but "
                                          f"the file has {nterm} terminals")
    return t, first, w, h, term, table


def _read_nets(path, node_table: _NameTable, t: _Tokens | None = None):
    t = _Tokens(path) if t is None else t
    lines = np.arange(len(t.ls))
    hdr, counts = _header_counts(t, lines, {b"NumNets": "NumNets", b"NumPins": "NumPins"})
    first_all = t.ls[lines]
    isdeg = t.eq(first_all, b"NetDegree") & ~hdr
    deg_lines = lines[isdeg]
    pin_lines = lines[~isdeg & ~hdr]
    # NetDegree : k [name]
    fd = t.ls[deg_lines]
    lcd = t.lc[deg_lines]
    _first_bad(t, deg_lines, (lcd != 3) & (lcd != 4), "expected 'NetDegree : <pins> [name]'")
    _first_bad(t, deg_lines, ~t.eq(fd + 1, b":"), "expected 'NetDegree : <pins> [name]'")
    degree = t.ints(fd + 2, "NetDegree", minimum=1)
    # pins: node I|O|B [: dx dy]
    fp = t.ls[pin_lines]
    lcp = t.lc[pin_lines]
    _first_bad(t, pin_lines, (lcp != 2) & (lcp != 5), "expected 'node I|O|B [: dx dy]'")
    dtok = fp + 1
    dir_ok = (t.length[dtok] == 1) & np.isin(t.buf[t.start[dtok]], np.frombuffer(b"IOB", np.uint8))
    _first_bad(t, pin_lines, ~dir_ok, "pin direction must be I, O or B")
    five = np.flatnonzero(lcp == 5)
    _first_bad(t, pin_lines[five], ~t.eq(fp[five] + 2, b":"), "expected 'node I|O|B : dx dy'")
    dx = np.zeros(len(pin_lines))
    dy = np.zeros(len(pin_lines))
    dx[five] = t.floats(fp[five] + 3, "pin x offset")
    dy[five] = t.floats(fp[five] + 4, "pin y offset")
    # structure: pins belong to the NetDegree line above them
    if len(pin_lines) and (not len(deg_lines) or pin_lines[0] < deg_lines[0]):
        t.fail(t.lline[pin_lines[0]], "pin line before the first NetDegree")
    m = len(deg_lines)
    owner = np.searchsorted(deg_lines, pin_lines, side="right") - 1
    have = np.bincount(owner, minlength=m) if m else np.zeros(0, np.int64)
    bad = np.flatnonzero(have != degree)
    if len(bad):
        j = int(bad[0])
        ln = t.lline[deg_lines[j]]
        if j == m - 1 and have[j] < degree[j]:
            t.fail(t.num_lines, f"file ends after {have[j]} of the {degree[j]} pins of the net "
                                f"declared on line {ln}")
        t.fail(ln, f"NetDegree says {degree[j]} but the net has {have[j]} pin lines")
    if "NumNets" in counts and counts["NumNets"][0] != m:
        t.fail(counts["NumNets"][1], f"NumNets says {counts['NumNets'][0]} but the file has "
                                     f"{m} nets")
    p = len(pin_lines)
    if "NumPins" in counts and counts["NumPins"][0] != p:
        t.fail(counts["NumPins"][1], f"NumPins says {counts['NumPins'][0]} but the file has "
                                     f"{p} pins")
    block = node_table.lookup(t, fp)
    unknown = np.flatnonzero(block < 0)
    if len(unknown):
        k = pin_lines[unknown[0]]
        t.fail(t.lline[k], f"unknown node {t.text(t.ls[k])!r}")
    net_start = np.concatenate([[0], np.cumsum(have)]).astype(np.int64)
    # net names: given ones must be unique; missing ones are numbered, around the given ones
    named = np.flatnonzero(lcd == 4)
    net_names = [f"net{j}" for j in range(m)] if len(named) < m else []
    if len(named):
        table = _NameTable(t, fd[named] + 3, "net")
        given = t.names(fd[named] + 3)
        if net_names:
            taken = set(given)
            for j, nm in zip(named.tolist(), given):
                net_names[j] = nm
            is_named = np.zeros(m, bool)
            is_named[named] = True
            for j in np.flatnonzero(~is_named).tolist():
                nm, k = net_names[j], 0
                while nm in taken:  # an unnamed net never takes a name the file gives
                    k += 1
                    nm = f"net{j}_{k}"
                net_names[j] = nm
                taken.add(nm)
        else:
            net_names = given
    else:
        table = None
    return t, net_start, block, dx, dy, net_names, table, named


def _read_pl(path, node_table: _NameTable, n: int, t: _Tokens | None = None):
    t = _Tokens(path) if t is None else t
    lines = np.arange(len(t.ls))
    first = t.ls[lines]
    lc = t.lc[lines]
    _first_bad(t, lines, (lc != 3) & (lc != 5) & (lc != 6),
               "expected 'name x y : orientation [/FIXED]'")
    x = t.floats(first + 1, "x")
    y = t.floats(first + 2, "y")
    orient = np.zeros(len(lines), np.int8)
    fixed = np.zeros(len(lines), bool)
    withor = np.flatnonzero(lc >= 5)
    if len(withor):
        _first_bad(t, lines[withor], ~t.eq(first[withor] + 3, b":"),
                   "expected 'name x y : orientation [/FIXED]'")
        otok = first[withor] + 4
        code = np.full(len(withor), -1, np.int8)
        for c, o in enumerate(ORIENTATIONS):
            code[t.eq(otok, o.encode())] = c
        _first_bad(t, lines[withor], code < 0,
                   f"orientation must be one of {', '.join(ORIENTATIONS)}")
        orient[withor] = code
    six = np.flatnonzero(lc == 6)
    if len(six):
        ftok = first[six] + 5
        ok = t.eq(ftok, b"/FIXED") | t.eq(ftok, b"/FIXED_NI")
        _first_bad(t, lines[six], ~ok, "the last field must be /FIXED or /FIXED_NI")
        fixed[six] = True
    block = node_table.lookup(t, first)
    unknown = np.flatnonzero(block < 0)
    if len(unknown):
        k = lines[unknown[0]]
        t.fail(t.lline[k], f"unknown node {t.text(first[unknown[0]])!r}")
    order = np.argsort(block, kind="stable")
    bs = block[order]
    dup = np.flatnonzero(bs[1:] == bs[:-1])
    if len(dup):
        k = int(np.maximum(order[dup], order[dup + 1]).min())
        t.fail(t.lline[lines[k]], f"node {t.text(first[k])!r} placed twice")
    X, Y = np.zeros(n), np.zeros(n)
    OR, F = np.zeros(n, np.int8), np.zeros(n, bool)
    X[block], Y[block], OR[block], F[block] = x, y, orient, fixed
    listed = np.zeros(n, bool)
    listed[block] = True
    return X, Y, OR, F, listed


def _read_wts(path, net_table: _NameTable | None, node_table: _NameTable, m: int,
              named: np.ndarray) -> np.ndarray:
    t = _Tokens(path)
    weight = np.ones(m)
    lines = np.arange(len(t.ls))
    if not len(lines):
        return weight
    first = t.ls[lines]
    _first_bad(t, lines, t.lc[lines] != 2, "expected 'name weight'")
    w = t.floats(first + 1, "weight")
    _first_bad(t, lines, w < 0, "negative weight")
    net = (net_table.lookup(t, first) if net_table is not None
           else np.full(len(lines), -1, np.int64))
    is_net = net >= 0
    if not is_net.all():
        other = np.flatnonzero(~is_net)
        node = node_table.lookup(t, first[other])
        if (node < 0).any():  # weights are advice: lines naming nothing we know are skipped
            bad = other[node < 0]
            k = int(bad[0])
            warnings.warn(f"{t.path}:{int(t.lline[lines[k]])}: ignored {len(bad)} weight "
                          f"line(s) naming no net or node of the design, e.g. "
                          f"{t.text(first[k])!r}", BookshelfWarning, stacklevel=3)
    weight[named[net[is_net]]] = w[is_net]
    return weight


_SCL_KEYS = {"coordinate", "height", "sitewidth", "sitespacing", "siteorient", "sitesymmetry",
             "subroworigin", "numsites"}


def _read_scl(path) -> dict:
    """Rows of a ``.scl`` (a loop over its lines: a file has rows, not cells)."""
    t = _Tokens(path)
    rows = {"x": [], "y": [], "height": [], "site_width": [], "num_sites": [], "orient": []}
    declared = None
    nrows = 0
    cur: dict | None = None
    start_line = 0

    def num(tok, ln, key, positive=False):
        try:
            v = float(tok)
        except ValueError:
            t.fail(ln, f"{key}: {tok[:40]!r} is not a number")
        if not np.isfinite(v):
            t.fail(ln, f"{key}: {tok!r} is not a finite number")
        if positive and v <= 0:
            t.fail(ln, f"{key} must be positive, got {tok}")
        return v

    words = t.all_text()
    for ls_, lc_, ln in zip(t.ls.tolist(), t.lc.tolist(), t.lline.tolist()):
        toks = words[ls_:ls_ + lc_]
        head = toks[0].lower()
        if cur is None:
            if head == "numrows":
                if len(toks) != 3 or toks[1] != ":":
                    t.fail(ln, "expected 'NumRows : <count>'")
                v = num(toks[2], ln, "NumRows")
                if v < 0 or v != int(v):
                    t.fail(ln, "NumRows must be a whole number")
                declared = (int(v), ln)
            elif head == "corerow":
                if len(toks) != 2 or toks[1].lower() != "horizontal":
                    t.fail(ln, "only 'CoreRow Horizontal' rows are supported")
                cur = {"sub": 0}
                start_line = ln
                nrows += 1
            else:
                t.fail(ln, f"expected 'CoreRow Horizontal' or 'NumRows', got {toks[0][:40]!r}")
            continue
        if head == "corerow":
            t.fail(ln, f"the row starting on line {start_line} has no End")
        if head == "end":
            if len(toks) != 1:
                t.fail(ln, "expected 'End'")
            if cur["sub"] == 0:
                t.fail(ln, f"row starting on line {start_line} has no SubrowOrigin")
            cur = None
            continue
        # key : value [key : value]
        if len(toks) % 3 != 0:
            t.fail(ln, "expected 'Key : value' pairs")
        pairs = {}
        for j in range(0, len(toks), 3):
            key = toks[j].lower()
            if toks[j + 1] != ":" or key not in _SCL_KEYS:
                t.fail(ln, f"unknown row field {toks[j][:40]!r}")
            pairs[key] = toks[j + 2]
        for key, val in pairs.items():
            if key == "siteorient":
                cur[key] = ORIENT_CODE.get(val, 0)
            elif key == "sitesymmetry":
                cur[key] = val
            elif key in ("subroworigin", "numsites"):
                pass
            else:
                cur[key] = num(val, ln, key, positive=key != "coordinate")
        if "subroworigin" in pairs or "numsites" in pairs:
            if "subroworigin" not in pairs or "numsites" not in pairs:
                t.fail(ln, "expected 'SubrowOrigin : x NumSites : n'")
            for need in ("coordinate", "height"):
                if need not in cur:
                    t.fail(ln, f"row starting on line {start_line} has no {need.title()}")
            x0 = num(pairs["subroworigin"], ln, "SubrowOrigin")
            ns = num(pairs["numsites"], ln, "NumSites", positive=True)
            if ns != int(ns) or ns > MAX_SITES:
                t.fail(ln, f"NumSites must be a whole number up to {MAX_SITES}")
            sw = cur.get("sitespacing", cur.get("sitewidth", 1.0))
            rows["x"].append(x0)
            rows["y"].append(cur["coordinate"])
            rows["height"].append(cur["height"])
            rows["site_width"].append(sw)
            rows["num_sites"].append(int(ns))
            rows["orient"].append(cur.get("siteorient", 0))
            cur["sub"] += 1
    if cur is not None:
        t.fail(t.num_lines, f"file ends inside the row starting on line {start_line}")
    if declared is not None:
        if declared[0] != nrows:
            t.fail(declared[1], f"NumRows says {declared[0]} but the file has {nrows} rows")
    return rows


# ---------------------------------------------------------------------------------------------


def _aux_files(aux: Path) -> dict[str, tuple[Path, int]]:
    t = _Tokens(aux)
    files: dict[str, tuple[Path, int]] = {}
    for k in range(len(t.ls)):
        ln = int(t.lline[k])
        toks = [t.text(i) for i in range(int(t.ls[k]), int(t.ls[k] + t.lc[k]))]
        if len(toks) < 3 or toks[1] != ":":
            t.fail(ln, "expected '<placement kind> : file.nodes file.nets ...'")
        for name in toks[2:]:
            suffix = format_suffix(name)
            if suffix in (".nodes", ".nets", ".wts", ".pl", ".scl"):
                if suffix in files:
                    t.fail(ln, f"two {suffix} files named")
                files[suffix] = (aux.parent / name, ln)
    for need in (".nodes", ".nets"):
        if need not in files:
            t.fail(int(t.lline[0]) if len(t.ls) else 1, f"no {need} file named")
    for p, ln in files.values():
        if not p.is_file():
            t.fail(ln, f"{p.name} (named here) not found")
    return files


def read_aux(path) -> Design:
    """Read a Bookshelf design from its ``.aux`` file.

    Parameters
    ----------
    path : str or Path
        The ``.aux`` file; the files it names are looked up beside it.

    Returns
    -------
    Design
        With the ``.pl`` placement (when given) as ``design.initial``.

    Raises
    ------
    DesignError
        Naming the file and line of the first problem.

    Examples
    --------
    >>> design = read_aux("tests/data/bookshelf/tiny.aux")   # doctest: +SKIP
    """
    aux = Path(path)
    files = _aux_files(aux)
    # tokenise the large .nets (and .pl) in a second thread while the nodes are read: numpy
    # releases the GIL over whole arrays, and errors are still raised in file order below
    with ThreadPoolExecutor(max_workers=1) as pool:
        fut_nets = pool.submit(_Tokens, files[".nets"][0])
        fut_pl = pool.submit(_Tokens, files[".pl"][0]) if ".pl" in files else None
        try:
            rows = _read_scl(files[".scl"][0]) if ".scl" in files else None
            tn, first, w, h, term, node_table = _read_nodes(files[".nodes"][0])
        except BaseException:
            fut_nets.cancel()
            if fut_pl is not None:
                fut_pl.cancel()
            raise
        n = len(first)
        names = tn.names(first)
        del tn
        _, net_start, pin_block, pin_dx, pin_dy, net_names, net_table, named = _read_nets(
            files[".nets"][0], node_table, fut_nets.result())
        tpl = fut_pl.result() if fut_pl is not None else None
    if ".pl" in files:
        x, y, orient, pl_fixed, listed = _read_pl(files[".pl"][0], node_table, n, tpl)
        missing = np.flatnonzero((term > 0) & ~listed)
        if len(missing):  # a cut-short .pl must not put fixed objects at (0, 0)
            raise DesignError(f"does not place {len(missing)} fixed node(s) (terminal or "
                              f"terminal_NI), e.g. {names[int(missing[0])]!r}; the file may be "
                              f"cut short", file=str(files[".pl"][0]), line=tpl.num_lines,
                              where=f"node {names[int(missing[0])]!r}")
    else:
        x, y = np.zeros(n), np.zeros(n)
        orient, pl_fixed = np.zeros(n, np.int8), np.zeros(n, bool)
    weight = (_read_wts(files[".wts"][0], net_table, node_table, len(net_names), named)
              if ".wts" in files else None)

    # kinds (see the module docstring)
    movable_node = term == 0
    if rows and rows["height"]:
        row_h = float(np.min(rows["height"]))
    elif movable_node.any():
        vals, cnt = np.unique(h[movable_node], return_counts=True)
        row_h = float(vals[np.argmax(cnt)])
    else:
        row_h = 0.0
    kind = np.where(h > row_h, MACRO, CELL).astype(np.int8)
    big = w * h > row_h * row_h
    kind[term == 1] = np.where(big[term == 1], MACRO, TERMINAL)
    kind[term == 2] = TERMINAL
    status = np.where((term > 0) | pl_fixed, FIXED, MOVABLE).astype(np.int8)
    allowed = np.where(kind == MACRO, ALL_ORIENTS, 0).astype(np.uint8)
    allowed |= (np.uint8(1) << orient.astype(np.uint8)).astype(np.uint8)

    # die: rows and fixed objects
    fw_, fh_ = np.where(np.isin(orient, (2, 3, 6, 7)), h, w), np.where(
        np.isin(orient, (2, 3, 6, 7)), w, h)
    boxes = []
    if rows and rows["x"]:
        rx, ry = np.array(rows["x"]), np.array(rows["y"])
        rxh = rx + np.array(rows["site_width"]) * np.array(rows["num_sites"])
        ryh = ry + np.array(rows["height"])
        boxes.append([rx.min(), ry.min(), rxh.max(), ryh.max()])
    fx = status == FIXED
    if fx.any():
        boxes.append([x[fx].min(), y[fx].min(), (x + fw_)[fx].max(), (y + fh_)[fx].max()])
    if not boxes and n:
        boxes.append([x.min(), y.min(), (x + fw_).max(), (y + fh_).max()])
    if not boxes:
        raise DesignError("no rows and no nodes: cannot tell the die", file=str(aux),
                          where="die")
    b = np.array(boxes)
    die = [b[:, 0].min(), b[:, 1].min(), b[:, 2].max(), b[:, 3].max()]
    if not (die[2] > die[0] and die[3] > die[1]):
        raise DesignError(f"the rows and fixed nodes span no area "
                          f"({[float(v) for v in die]}); cannot tell the die", file=str(aux),
                          where="die")
    design = Design(aux.stem, die, names, kind, w, h, net_start, pin_block, pin_dx, pin_dy,
                    orient_allowed=allowed, net_names=net_names, net_weight=weight,
                    rows=rows if rows and rows["x"] else None, x=x, y=y, orient=orient,
                    status=status, source=str(aux))
    design.terminal_ni = term == 2
    return design


def read_pl(design: Design, path) -> Floorplan:
    """Read a ``.pl`` placement for ``design``; blocks it does not list keep their initial spot.

    ``/FIXED`` lines and the design's fixed blocks come back ``FIXED``; others ``MOVABLE``.
    """
    path = Path(path)
    _check_names(design.names, "block", path)
    nt = _Tokens("<design names>", "\n".join(design.names))
    table = _NameTable(nt, np.arange(len(nt.start)), "block")
    X, Y, OR, F, listed = _read_pl(path, table, design.num_blocks)
    init = design.initial
    x = np.where(listed, X, init.x)
    y = np.where(listed, Y, init.y)
    o = np.where(listed, OR, init.orient)
    st = np.where(F | (init.status == FIXED), FIXED, MOVABLE).astype(np.int8)
    return Floorplan(design, x, y, o, st)


# ---------------------------------------------------------------------------------------------
# writing
