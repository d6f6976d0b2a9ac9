"""Bookshelf files as numpy token arrays: the tokenizer, bulk number conversion, the name hash
table and line-numbered errors (see the package docstring)."""

from __future__ import annotations

import re

import numpy as np

from ...design import (
    DesignError,
)
from .._io import read_text

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


_BAD_NAME = re.compile(r"[\s:#]")


def _check_names(names, what: str, where) -> None:
    for nm in names:
        if not nm or _BAD_NAME.search(nm):
            raise DesignError(f"{what} name {nm!r} cannot be written to Bookshelf (empty, or "
                              f"contains white space, ':' or '#')", file=str(where))

