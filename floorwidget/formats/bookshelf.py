"""Bookshelf placement format: ``.aux`` naming ``.nodes .nets .wts .pl .scl``.

Reading
-------
:func:`read_aux` reads a full set; :func:`read_pl` reads a placement for an already loaded design.
The readers never keep a Python object per pin or per token: a file is read whole, split into
tokens by numpy over its bytes (colons are tokens of their own, ``#`` starts a comment), the
line structure is found over the token arrays, numeric columns are converted in bulk (an exact
integer fast path for plain decimals), and node names are matched through an open-addressing
hash table keyed by each name's bytes (names over eight bytes are confirmed byte by byte).  The
first token of every line knows its line number, so every error names the file and the line;
a token's line is looked up only when an error is reported.  A node name may not contain ``:``
(it always ends a token).

How Bookshelf nodes become floorwidget blocks (our choices, documented here and in DEVELOPERS):

* A movable node taller than the row height is a ``MACRO``; any other movable node a ``CELL``.
  The row height is the smallest row height of the ``.scl``; without rows it is the most common
  movable node height.
* A ``terminal`` node whose area exceeds ``row height ** 2`` is a fixed ``MACRO`` (a pre-placed
  block); a smaller or zero-area ``terminal`` and every ``terminal_NI`` is a ``TERMINAL`` (an I/O
  pin).  Both are ``FIXED``.  ``/FIXED`` or ``/FIXED_NI`` in the ``.pl`` also make a node ``FIXED``.
* Macros may take all eight orientations; other blocks their ``.pl`` orientation only.
* The placement grid pitch is (site spacing, row height) of the first row, from its origin.
* The die is the bounding box of the rows and of every fixed object (the format has no die).
* Pins of ``.nets`` are offsets from the node centre in the N orientation, as in floorwidget; a
  pin line without ``: dx dy`` sits at the centre.  Pin directions are not kept.
* ``.wts`` lines naming a net set its weight; lines naming a node are ignored (node weights have
  no use here); lines naming neither are skipped with a :class:`BookshelfWarning` (weights are
  advice, not structure).
* Every ``terminal`` and ``terminal_NI`` node must be placed by the ``.pl`` (a fixed object
  left out is an error, naming the first one); a movable node left out starts at (0, 0).
* ``terminal_NI`` nodes are remembered (``design.terminal_ni``) so that writing the design
  back gives ``terminal_NI`` and ``/FIXED_NI`` exactly for them and ``terminal`` and ``/FIXED``
  for every other fixed node.  Designs from other formats write their I/O terminals as
  ``terminal_NI`` (pins may be overlapped).
* ``.scl`` ``Siteorient`` is kept when it names an orientation (``N``, ``FS``, ...); numeric codes
  read as N.  Vertical rows are refused.

Writing
-------
:func:`write_pl` writes a placement atomically; :func:`write_aux` a complete set for a design, all
or nothing (a failure or a kill never leaves old and new files mixed).  What Bookshelf cannot say
is lost on a round trip: halos, allowed orientations, blockages, a die larger than the rows and
fixed objects, pin names, block kinds other than those the rules above give back (soft clusters
come back as cells or macros), and the difference between pinned and fixed (both are written
``/FIXED``).

References
----------
The format as used by the ISPD placement contests: Nam, Alpert, Villarrubia, Winter, Yildiz,
"The ISPD2005 placement contest and benchmark suite", ISPD 2005 (from memory).
"""

from __future__ import annotations

import itertools
import re
import warnings
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np

from ..design import (
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
from ._io import atomic_write, format_suffix, read_text, write_files

__all__ = ["BookshelfWarning", "read_aux", "read_pl", "write_aux", "write_pl"]

_COMMENT = re.compile(rb"#[^\n]*")


class BookshelfWarning(UserWarning):
    """Something in a Bookshelf set was skipped (a weight naming nothing in the design)."""

_MASKS = np.array([(1 << (8 * k)) - 1 for k in range(9)], dtype=np.uint64)
_MAX_NUMBER_LEN = 64
_CLASS = np.full(256, 13, np.int64)  # byte -> digit value, 10 '.', 11 '-', 12 '+', 13 other
_CLASS[48:58] = np.arange(10)
_CLASS[46], _CLASS[45], _CLASS[43] = 10, 11, 12
_POW10F = np.array([float(10**k) for k in range(23)])  # exact


# ---------------------------------------------------------------------------------------------
# tokens


class _Tokens:
    """Whitespace-separated tokens of one text file as byte offsets (no per-token objects).

    Attributes: ``start``/``length`` per token; ``line`` (1-based) per token; ``ls``/``lc`` the
    first token and token count of every non-empty line; ``lline`` its line number.
    """

    def __init__(self, path, text: str | None = None):
        self.path = str(path)
        if text is None:
            text = read_text(path)
        data = text.encode("utf-8")
        del text
        hashes = data.count(b"#")
        if hashes > 10000:  # blank out comments, keeping every byte offset
            data = _COMMENT.sub(lambda m: b" " * len(m.group()), data)
        elif hashes:
            arr = bytearray(data)
            pos = data.find(b"#")
            while pos >= 0:
                end = data.find(b"\n", pos)
                end = len(data) if end < 0 else end
                arr[pos:end] = b" " * (end - pos)
                pos = data.find(b"#", end)
            data = bytes(arr)
        ends_nl = data.endswith(b"\n")
        data += b" " * 8  # padding so that an 8-byte word can be read at any token start
        self.data = data
        buf = np.frombuffer(data, np.uint8)
        self.buf = buf
        # every 8-byte little-endian word of the file, one per byte offset (a strided view)
        self.words = np.ndarray(shape=(len(buf) - 7,), dtype="<u8", buffer=data, offset=0,
                                strides=(1,))
        itype = np.int32 if len(buf) < 2**31 - 2 else np.int64
        colon = buf == 58
        tc = buf > 32
        tc &= ~colon
        st = tc.copy()
        st[1:] &= ~tc[:-1]
        st |= colon
        self.start = np.flatnonzero(st).astype(itype)
        del st
        en = tc
        en[:-1] &= ~tc[1:]
        en |= colon
        del colon
        self.length = (np.flatnonzero(en).astype(itype) + 1 - self.start).astype(itype)
        del en, tc
        nl = np.flatnonzero(buf == 10)
        self.num_lines = len(nl) + (0 if ends_nl else 1)
        ntok = len(self.start)
        # the first token after each newline starts a line; its line is one past the last
        # newline before it (a run of blank lines maps to one token)
        f = np.searchsorted(self.start, nl)
        last = np.flatnonzero(np.diff(np.append(f, ntok + 1)) != 0)
        first_tok, first_line = f[last], last + 2
        keep = first_tok < ntok
        first_tok, first_line = first_tok[keep], first_line[keep]
        if ntok and (not len(first_tok) or first_tok[0] != 0):
            first_tok = np.concatenate([[0], first_tok])
            first_line = np.concatenate([[1], first_line])
        del nl, f
        self.ls = first_tok.astype(itype)
        self.lc = np.diff(np.append(self.ls, ntok)).astype(itype)
        self.lline = first_line.astype(itype)
        self._ls_all, self._lline_all = self.ls, self.lline
        self.header_skipped = False
        # skip the ``UCLA <kind> 1.0`` header when it is the first statement
        if len(self.ls) and self.eq(self.ls[:1], b"UCLA")[0]:
            self.ls, self.lc, self.lline = self.ls[1:], self.lc[1:], self.lline[1:]
            self.header_skipped = True

    def line_of(self, i) -> int:
        """Line number of token ``i`` (looked up only when reporting an error)."""
        k = int(np.searchsorted(self._ls_all, int(i), side="right")) - 1
        return int(self._lline_all[k])

    # --- errors ------------------------------------------------------------------------------
    def fail(self, line, msg: str):
        raise DesignError(msg, file=self.path, line=None if line is None else int(line))

    def all_text(self) -> list[str]:
        """Every token as a str (for the small files read line by line)."""
        return self.names(np.arange(len(self.start)))

    def text(self, i) -> str:
        i = int(i)
        s = int(self.start[i])
        return self.data[s:s + int(self.length[i])].decode("utf-8", "replace")

    def line_text(self, k) -> str:
        """Tokens of body line ``k`` joined by spaces (for messages)."""
        s, c = int(self.ls[k]), int(self.lc[k])
        return " ".join(self.text(i) for i in range(s, s + min(c, 8)))

    # --- vectorised token tests --------------------------------------------------------------
    def eq(self, idx, word: bytes) -> np.ndarray:
        """Mask of tokens ``idx`` equal to ``word`` (compared eight bytes at a time)."""
        idx = np.asarray(idx)
        res = self.length[idx] == len(word)
        if len(word) == 1:  # a colon, say: one byte each
            res &= self.buf[self.start[idx]] == word[0]
            return res
        sel = np.flatnonzero(res)
        s = self.start[idx[sel]]
        ok = np.ones(len(sel), bool)
        for c in range(0, len(word), 8):
            chunk = word[c:c + 8]
            ok &= (self.words[s + c] & _MASKS[len(chunk)]) == np.uint64(
                int.from_bytes(chunk, "little"))
        res[sel] = ok
        return res

    def floats(self, idx, what: str = "number") -> np.ndarray:
        """Tokens ``idx`` as finite float64 (an error names the line of the first bad one).

        Plain decimals of at most 15 digits (``-12.375``) are converted by integer arithmetic
        over the bytes: the digits as an exact integer divided by an exact power of ten, which
        IEEE division rounds correctly (the fast path of Clinger, "How to read floating point
        numbers accurately", PLDI 1990).  Anything else (exponents, long mantissas, ``nan``)
        goes through numpy's string-to-float conversion.
        """
        idx = np.asarray(idx)
        k = len(idx)
        out = np.empty(k)
        if k == 0:
            return out
        L = self.length[idx]
        long = np.flatnonzero(L > _MAX_NUMBER_LEN)
        if len(long):
            i = idx[long[0]]
            self.fail(self.line_of(i), f"{what}: {self.text(i)[:40]!r} is not a number")
        slow = np.zeros(k, bool)
        step = 1 << 20
        for c0 in range(0, k, step):  # chunks bound the temporary arrays, not a loop per token
            sl = slice(c0, min(k, c0 + step))
            out[sl], slow[sl] = self._decimals(idx[sl])
        rest = np.flatnonzero(slow)
        if len(rest):
            out[rest] = self._floats_numpy(idx[rest], what)
        bad = ~np.isfinite(out)
        if bad.any():
            i = idx[np.flatnonzero(bad)[0]]
            self.fail(self.line_of(i), f"{what}: {self.text(i)!r} is not a finite number")
        return out

    def _decimals(self, idx) -> tuple[np.ndarray, np.ndarray]:
        """(values, needs-the-slow-path mask) for tokens ``idx`` by the exact fast path.

        Byte columns left to right over the tokens sorted by length (Horner's rule on the
        digits), so each step works on a prefix slice and no per-byte index arrays are built.
        """
        k = len(idx)
        L = self.length[idx]
        order, cnt = _by_length(L, int(L.max()))
        s = self.start[idx][order]
        m = np.zeros(k, np.int64)
        ndot = np.zeros(k, np.int8)
        dotpos = np.full(k, -1, np.int16)
        bad = np.zeros(k, bool)
        sign = np.zeros(k, bool)
        neg = np.zeros(k, bool)
        for j, c in enumerate(cnt.tolist()):
            d = _CLASS[self.buf[s[:c] + j]]     # digit value, 10 '.', 11 '-', 12 '+', 13 other
            isd = d < 10
            isdot = d == 10
            if j == 0:
                neg = d == 11
                sign = neg | (d == 12)
                bad |= d == 13
            else:
                bad[:c] |= d > 10
            mc = m[:c]
            np.copyto(mc, mc * 10 + d, where=isd)
            ndot[:c] += isdot
            np.copyto(dotpos[:c], np.int16(j), where=isdot)
        Ls = L[order].astype(np.int16)
        nd = Ls - ndot - sign
        frac = np.where(dotpos >= 0, Ls - 1 - dotpos, 0)
        fast = ~bad & (ndot <= 1) & (nd >= 1) & (nd <= 15)
        v = m / _POW10F[np.clip(frac, 0, 22)]
        v[neg] *= -1.0
        out = np.empty(k)
        out[order] = v
        slow = np.empty(k, bool)
        slow[order] = ~fast
        return out, slow

    def _floats_numpy(self, idx, what) -> np.ndarray:
        k = len(idx)
        L = self.length[idx]
        W = int(L.max())
        order, cnt = _by_length(L, W)
        s = self.start[idx][order]
        mat = np.zeros((k, W), np.uint8)
        for j, c in enumerate(cnt.tolist()):  # byte columns, longest tokens first
            mat[:c, j] = self.buf[s[:c] + j]
        arr = mat.view(f"S{W}").reshape(k)
        out = np.empty(k)
        try:
            out[order] = arr.astype(np.float64)
        except ValueError:
            self._bad_number(idx[order], arr, what)
        return out

    def _bad_number(self, idx, arr, what):
        chunk = 4096
        for c0 in range(0, len(arr), chunk):
            try:
                arr[c0:c0 + chunk].astype(np.float64)
                continue
            except ValueError:
                pass
            for j in range(c0, min(c0 + chunk, len(arr))):
                try:
                    np.array(arr[j:j + 1]).astype(np.float64)
                except ValueError:
                    i = idx[j]
                    self.fail(self.line_of(i), f"{what}: {self.text(i)[:40]!r} is not a number")
        i = idx[0]  # pragma: no cover - astype failed on the whole but on no chunk
        self.fail(self.line_of(i), f"{what}: not a number")

    def ints(self, idx, what: str, minimum: int = 0) -> np.ndarray:
        v = self.floats(idx, what)
        bad = (v != np.round(v)) | (v < minimum) | (v > 2**62)
        if bad.any():
            i = idx[np.flatnonzero(bad)[0]]
            self.fail(self.line_of(i), f"{what}: expected a whole number >= {minimum}, "
                                    f"got {self.text(i)!r}")
        return v.astype(np.int64)

    def names(self, idx) -> list[str]:
        """Tokens ``idx`` as a list of str (gathered in one go)."""
        idx = np.asarray(idx)
        k = len(idx)
        if k == 0:
            return []
        L = self.length[idx].astype(np.int64)
        tot = int(L.sum())
        excl = np.cumsum(L) - L
        rep = np.repeat(np.arange(k), L)
        ar = np.arange(tot)
        out = np.full(tot + k, 10, np.uint8)
        out[ar + rep] = self.buf[ar + np.repeat(self.start[idx].astype(np.int64) - excl, L)]
        return out[:-1].tobytes().decode("utf-8", "replace").split("\n")

    def keys(self, idx) -> np.ndarray:
        """A uint64 key per token: its bytes themselves when at most 8 long (exact, as tokens
        hold no NUL), else a mix of its 8-byte words (equal keys then need :func:`_same`)."""
        idx = np.asarray(idx)
        L = self.length[idx]
        s = self.start[idx]
        key = self.words[s] & _MASKS[np.minimum(L, 8)]
        long = np.flatnonzero(L > 8)
        if len(long):
            h = key[long]
            sl, ll = s[long], L[long]
            act = np.arange(len(long))
            c = 8
            while len(act):
                w = self.words[sl[act] + c] & _MASKS[np.clip(ll[act] - c, 0, 8)]
                h[act] = _mix(h[act]) ^ w
                c += 8
                act = act[ll[act] > c]
            key[long] = _mix(h ^ ll.astype(np.uint64))
        return key


def _mix(h: np.ndarray) -> np.ndarray:
    """The splitmix64 finaliser (Steele, Lea, Flood, OOPSLA 2014): scrambles all 64 bits."""
    h = (h ^ (h >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    h = (h ^ (h >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return h ^ (h >> np.uint64(31))


def _by_length(L: np.ndarray, W: int) -> tuple[np.ndarray, np.ndarray]:
    """Order of tokens by decreasing length and, per byte column j, how many are longer than j."""
    key = (W - L).astype(np.int16 if W < 32000 else np.int64)
    order = np.argsort(key, kind="stable")
    Ls = L[order]
    cnt = np.searchsorted(-Ls, -np.arange(W), side="left")
    return order, cnt


def _same(ta: _Tokens, ia, tb: _Tokens, ib) -> np.ndarray:
    """Mask: token ``ia[k]`` of ``ta`` equals token ``ib[k]`` of ``tb`` byte for byte."""
    ia, ib = np.asarray(ia), np.asarray(ib)
    la, lb = ta.length[ia], tb.length[ib]
    ok = la == lb
    if not len(ia):
        return ok
    order, cnt = _by_length(la, int(la.max()))
    sa = ta.start[ia][order].astype(np.int64)
    sb = tb.start[ib][order].astype(np.int64)
    oks = ok[order]
    for j, c in enumerate(cnt.tolist()):
        oks[:c] &= ta.buf[sa[:c] + j] == tb.buf[np.minimum(sb[:c] + j, len(tb.buf) - 1)]
    ok[order] = oks
    return ok


class _NameTable:
    """Exact name -> index lookup over tokens of one file.

    Keys (:meth:`_Tokens.keys`) go into an open-addressing hash table with linear probing,
    built and probed with whole-array steps (one step per probe round, not per name).  Names
    longer than eight bytes are confirmed byte by byte after a key match.
    """

    def __init__(self, tok: _Tokens, idx: np.ndarray, what: str):
        self.tok, self.idx = tok, np.asarray(idx)
        keys = tok.keys(self.idx)
        L = tok.length[self.idx]
        order = np.argsort(keys)
        ks = keys[order]
        self.fallback: dict[str, int] | None = None
        dup = np.flatnonzero(ks[1:] == ks[:-1])
        if len(dup):
            a, b = order[dup], order[dup + 1]
            same = (L[a] == L[b]) & ((L[a] <= 8) | _same(tok, self.idx[a], tok, self.idx[b]))
            if same.any():
                k = int(np.maximum(a, b)[same].min())
                i = self.idx[k]
                tok.fail(tok.line_of(i), f"duplicate {what} name {tok.text(i)!r}")
            # two long names with one key: an exact dictionary instead (practically never)
            self.fallback = {nm: i for i, nm in enumerate(tok.names(self.idx))}
            return
        self._keys = keys
        self.tab = None  # built on the first lookup

    def _build(self) -> None:
        keys, n = self._keys, len(self._keys)
        size = 16
        while size < 2 * n:
            size *= 2
        self.mask = np.int64(size - 1)
        self.tab = np.full(size, -1, np.int64)
        self.tkey = np.zeros(size, np.uint64)
        slot = (_mix(keys) & np.uint64(size - 1)).astype(np.int64)
        pending = np.arange(n)
        while len(pending):
            sp = slot[pending]
            free = np.flatnonzero(self.tab[sp] < 0)
            uniq, first = np.unique(sp[free], return_index=True)
            win = pending[free[first]]
            self.tab[uniq] = win
            self.tkey[uniq] = keys[win]
            lose = np.ones(len(pending), bool)
            lose[free[first]] = False
            pending = pending[lose]
            slot[pending] = (slot[pending] + 1) & self.mask

    def lookup(self, tok: _Tokens, idx) -> np.ndarray:
        """Index of every token ``idx`` of ``tok`` in the table, -1 where unknown."""
        idx = np.asarray(idx)
        if self.fallback is not None:
            fb = self.fallback
            return np.array([fb.get(nm, -1) for nm in tok.names(idx)], dtype=np.int64)
        if self.tab is None:
            self._build()
        q = tok.keys(idx)
        res = np.full(len(idx), -1, np.int64)
        slot = (_mix(q) & np.uint64(self.mask)).astype(np.int64)
        act = np.arange(len(idx))
        while len(act):
            sa = slot[act]
            v = self.tab[sa]
            hit = (v >= 0) & (self.tkey[sa] == q[act])
            res[act[hit]] = v[hit]
            act = act[(v >= 0) & ~hit]
            slot[act] = (slot[act] + 1) & self.mask
        found = np.flatnonzero(res >= 0)
        ql = tok.length[idx[found]]
        ok = ql == self.tok.length[self.idx[res[found]]]
        lng = np.flatnonzero(ok & (ql > 8))
        if len(lng):
            f = found[lng]
            ok[lng] = _same(tok, idx[f], self.tok, self.idx[res[f]])
        res[found[~ok]] = -1
        return res


def _header_counts(t: _Tokens, lines: np.ndarray, keys: dict[bytes, str]) -> tuple[
        np.ndarray, dict[str, tuple[int, int]]]:
    """Find ``Key : value`` header lines; return (mask of header lines, {key: (value, line)})."""
    first = t.ls[lines]
    mask = np.zeros(len(lines), bool)
    found: dict[str, tuple[int, int]] = {}
    for word, key in keys.items():
        m = t.eq(first, word)
        for k in np.flatnonzero(m):
            ln, f, c = t.lline[lines[k]], int(first[k]), int(t.lc[lines[k]])
            if c != 3 or not t.eq([f + 1], b":")[0]:
                t.fail(ln, f"expected '{key} : <count>'")
            if key in found:
                t.fail(ln, f"{key} given twice (first on line {found[key][1]})")
            found[key] = (int(t.ints([f + 2], key)[0]), int(ln))
        mask |= m
    return mask, found


def _first_bad(t: _Tokens, lines: np.ndarray, bad: np.ndarray, msg: str):
    if bad.any():
        k = lines[np.flatnonzero(bad)[0]]
        t.fail(t.lline[k], f"{msg}, got '{t.line_text(k)}'")


# ---------------------------------------------------------------------------------------------
# the files


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


_BAD_NAME = re.compile(r"[\s:#]")


def _check_names(names, what: str, where) -> None:
    for nm in names:
        if not nm or _BAD_NAME.search(nm):
            raise DesignError(f"{what} name {nm!r} cannot be written to Bookshelf (empty, or "
                              f"contains white space, ':' or '#')", file=str(where))


def _r(values) -> list[str]:
    return list(map(repr, np.asarray(values, dtype=np.float64).tolist()))


def _ni(design: Design) -> np.ndarray:
    """Mask of the blocks written as ``terminal_NI`` / ``/FIXED_NI`` (see the module notes)."""
    ni = getattr(design, "terminal_ni", None)
    if ni is not None and len(ni) == design.num_blocks:
        return np.asarray(ni, bool)
    return design.kind == TERMINAL


CHUNK = 1 << 18  # lines formatted at a time: the text of a 10^7-cell design is never whole


def _pl_chunks(design: Design, fp: Floorplan):
    d = design
    yield "UCLA pl 1.0\n# written by floorwidget\n\n"
    fixed = fp.status != MOVABLE
    ni = _ni(d)
    orn = np.array(ORIENTATIONS, dtype=object)
    for a in range(0, d.num_blocks, CHUNK):
        b = min(a + CHUNK, d.num_blocks)
        flag = np.where(fixed[a:b], np.where(ni[a:b], " /FIXED_NI", " /FIXED"), "").tolist()
        yield "".join(f"{nm} {x} {y} : {o}{f}\n" for nm, x, y, o, f in
                      zip(d.names[a:b], _r(fp.x[a:b]), _r(fp.y[a:b]),
                          orn[fp.orient[a:b]].tolist(), flag))


def _pl_text(design: Design, fp: Floorplan) -> str:
    return "".join(_pl_chunks(design, fp))


def _nodes_chunks(d: Design, tflag: np.ndarray):
    for a in range(0, d.num_blocks, CHUNK):
        b = min(a + CHUNK, d.num_blocks)
        yield "".join(f"{nm} {w} {h}{t}\n" for nm, w, h, t in
                      zip(d.names[a:b], _r(d.width[a:b]), _r(d.height[a:b]),
                          tflag[a:b].tolist()))


def _nets_chunks(d: Design):
    """The ``.nets`` body, a few hundred thousand nets at a time."""
    deg = d.net_degree
    m = d.num_nets
    for a in range(0, m, CHUNK):
        b = min(a + CHUNK, m)
        p0, p1 = int(d.net_start[a]), int(d.net_start[b])
        names = [d.names[i] for i in d.pin_block[p0:p1].tolist()]
        pins = [f"  {nm} B : {x} {y}\n" for nm, x, y in
                zip(names, _r(d.pin_dx[p0:p1]), _r(d.pin_dy[p0:p1]))]
        out = np.empty((b - a) + (p1 - p0), dtype=object)
        head = d.net_start[a:b] - p0 + np.arange(b - a)
        is_head = np.zeros(len(out), bool)
        is_head[head] = True
        out[head] = [f"NetDegree : {k} {nm}\n" for k, nm in
                     zip(deg[a:b].tolist(), d.net_names[a:b])]
        out[~is_head] = pins
        yield "".join(out.tolist())


def _write_chunks(chunks):
    def write(f):
        for c in chunks():
            f.write(c)
    return write


def write_pl(design: Design, fp: Floorplan, path) -> None:
    """Write a Bookshelf ``.pl`` placement atomically.

    Positions are lower-left corners of the oriented footprint; pinned and fixed blocks get
    ``/FIXED`` (``/FIXED_NI`` for I/O terminals).
    """
    _check_names(design.names, "block", path)
    text = _pl_text(design, fp)
    with atomic_write(path) as f:
        f.write(text)


def write_aux(design: Design, fp: Floorplan | None, target) -> Path:
    """Write a full Bookshelf set (.aux .nodes .nets .wts .pl .scl) for ``design`` placed as ``fp``.

    Parameters
    ----------
    design : Design
    fp : Floorplan or None
        The placement for the ``.pl`` (default ``design.initial``).
    target : str or Path
        An existing directory (files are named after the design) or a path ending in ``.aux``
        (files are named after its stem, beside it).

    Returns
    -------
    Path
        The ``.aux`` written.  The set is written all or nothing (every file to a temporary
        first, then all renamed; see :func:`floorwidget.formats._io.write_files`), and nothing
        is written when a name cannot be expressed in Bookshelf.
    """
    d = design
    fp = d.initial if fp is None else fp
    target = Path(target)
    if target.suffix.lower() == ".aux":
        directory, stem = target.parent, target.stem
    else:
        directory, stem = target, d.name
    if not directory.is_dir():
        raise DesignError(f"cannot write: folder {directory} does not exist", file=str(target))
    _check_names([stem], "design", target)
    _check_names(d.names, "block", target)
    _check_names(d.net_names, "net", target)

    fixed_macro = (d.kind == MACRO) & (fp.status == FIXED)
    ni = _ni(d)
    tflag = np.where(ni, " terminal_NI",
                     np.where(fixed_macro | (d.kind == TERMINAL), " terminal", ""))
    nterm = int((tflag != "").sum())
    nodes_head = (f"UCLA nodes 1.0\n# written by floorwidget\n\nNumNodes : {d.num_blocks}\n"
                  f"NumTerminals : {nterm}\n")
    nets_head = (f"UCLA nets 1.0\n# written by floorwidget\n\nNumNets : {d.num_nets}\n"
                 f"NumPins : {d.num_pins}\n")

    heavy = np.flatnonzero(d.net_weight != 1.0)  # nets not listed weigh 1
    wts = "UCLA wts 1.0\n# written by floorwidget; nets not listed weigh 1\n\n" + "".join(
        f"{d.net_names[j]} {w}\n" for j, w in zip(heavy.tolist(), _r(d.net_weight[heavy])))

    scl = [f"UCLA scl 1.0\n# written by floorwidget\n\nNumRows : {len(d.row_x)}\n\n"]
    for i in range(len(d.row_x)):  # rows, not cells
        sw = repr(float(d.row_site_width[i]))
        scl.append(f"CoreRow Horizontal\n  Coordinate : {float(d.row_y[i])!r}\n"
                   f"  Height : {float(d.row_height[i])!r}\n  Sitewidth : {sw}\n"
                   f"  Sitespacing : {sw}\n  Siteorient : {ORIENTATIONS[int(d.row_orient[i])]}\n"
                   f"  Sitesymmetry : Y\n  SubrowOrigin : {float(d.row_x[i])!r} "
                   f"NumSites : {int(d.row_num_sites[i])}\nEnd\n")
    aux = (f"RowBasedPlacement : {stem}.nodes {stem}.nets {stem}.wts {stem}.pl "
           f"{stem}.scl\n")
    # the large files are formatted and written a chunk at a time
    chunks = {".nodes": lambda: itertools.chain([nodes_head], _nodes_chunks(d, tflag)),
              ".nets": lambda: itertools.chain([nets_head], _nets_chunks(d)),
              ".wts": lambda: [wts], ".pl": lambda: _pl_chunks(d, fp),
              ".scl": lambda: scl, ".aux": lambda: [aux]}
    write_files([(directory / f"{stem}{suffix}", _write_chunks(make))
                 for suffix, make in chunks.items()])  # all or nothing
    return directory / f"{stem}.aux"
