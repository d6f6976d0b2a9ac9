"""Tokenisers: the LEF whole-file token stream, the DEF statement splitter and the
whitespace-split section (:class:`_Words`) the fast DEF paths read with numpy."""

from __future__ import annotations

import re
from collections import Counter

import numpy as np

from ...design import (
    DesignError,
)

_LEF_TOKEN = re.compile(r'#[^\n]*|"[^"]*"|;|[^\s;]+')


class _Tokens:
    """Whole-file tokeniser with positions; line numbers are computed only for errors."""

    def __init__(self, text: str, path: str):
        self.text, self.path = text, path
        toks, pos = [], []
        for m in _LEF_TOKEN.finditer(text):
            s = m.group()
            if s[0] != "#":
                toks.append(s)
                pos.append(m.start())
        self.toks, self.pos, self.i = toks, pos, 0
        self.skipped: Counter = Counter()

    def line(self, i: int | None = None) -> int:
        i = self.i if i is None else i
        if not self.pos:
            return 1
        p = self.pos[min(i, len(self.pos) - 1)] if i < len(self.pos) else len(self.text)
        return self.text.count("\n", 0, p) + 1

    def fail(self, msg: str, i: int | None = None):
        raise DesignError(msg, file=self.path, line=self.line(i))

    def peek(self) -> str | None:
        return self.toks[self.i] if self.i < len(self.toks) else None

    def next(self, what: str) -> str:
        if self.i >= len(self.toks):
            self.fail(f"unexpected end of file, expected {what}", len(self.toks))
        t = self.toks[self.i]
        self.i += 1
        return t

    def num(self, what: str) -> float:
        t = self.next(what)
        try:
            v = float(t)
        except ValueError:
            self.fail(f"bad number {t!r} for {what}", self.i - 1)
        if not np.isfinite(v):
            self.fail(f"bad number {t!r} for {what}", self.i - 1)
        return v

    def expect(self, word: str) -> None:
        t = self.next(word)
        if t.upper() != word:
            self.fail(f"expected {word}, got {t!r}", self.i - 1)

    def skip_statement(self) -> None:
        """Advance past the next ``;``."""
        while self.i < len(self.toks):
            t = self.toks[self.i]
            self.i += 1
            if t == ";":
                return
        self.fail("statement not terminated by ';'", len(self.toks))

    def statement(self) -> list[str]:
        """Tokens up to (not including) the next ``;``, consuming it."""
        out = []
        while True:
            t = self.next("';'")
            if t == ";":
                return out
            out.append(t)

    def skip_to_end(self, name: str, start: int) -> None:
        """Advance past ``END name`` (``name`` compared case-insensitively)."""
        up = name.upper()
        toks, n = self.toks, len(self.toks)
        i = self.i
        while i < n - 1:
            if toks[i].upper() == "END" and toks[i + 1].upper() == up:
                self.i = i + 2
                return
            i += 1
        self.fail(f"{name} is not terminated (no END {name})", start)


_TOK = re.compile(r'\s*("[^"]*"|[();]|[^\s();"]+)')
_COMMENT = re.compile(r"(?:^|(?<=[\s;]))#[^\n]*", re.M)


def blank_comments(text: str) -> str:
    """``text`` with its ``#`` comments turned into spaces: positions and lines stay put."""
    if "#" not in text:
        return text
    return _COMMENT.sub(lambda m: " " * len(m.group()), text)


def _split_tokens(s: str) -> list[str]:
    """Tokens of one statement; parentheses standing at a token's ends are split off."""
    out = []
    for t in re.findall(r'"[^"]*"|[^\s"]+', s):
        while len(t) > 1 and t[0] == "(":
            out.append("(")
            t = t[1:]
        tail = 0
        while len(t) > 1 and t[-1] == ")" and t.count("(") < t.count(")"):
            t = t[:-1]
            tail += 1
        if t.endswith(";") and len(t) > 1:
            out.append(t[:-1])
            out.append(";")
        else:
            out.append(t)
        out.extend(")" * tail)
    return out


_WS = np.zeros(256, bool)
_WS[[9, 10, 11, 12, 13, 28, 29, 30, 31, 32]] = True  # what str.split() splits on (ASCII)


def _pack(word: str) -> np.uint64:
    """``word`` (ASCII, at most eight bytes) packed as :meth:`_Words.packed` does."""
    b = word.encode("ascii").ljust(8, b"\0")
    return np.uint64(int.from_bytes(b, "big"))


class _Words:
    """A section split on whitespace (``str.split``, in C), with every token's first byte and
    length from one vectorised pass over the bytes, so structural tokens (``;`` ``(`` ``)``
    ``+`` ``-``) are found without a Python comparison per token."""

    def __init__(self, sec: str):
        self.words = sec.split()
        raw = np.frombuffer(sec.encode("utf-8"), np.uint8)
        ns = np.zeros(len(raw) + 2, np.int8)  # 1 on token bytes, padded with 0 at both ends
        ns[1:-1] = ~_WS[raw]
        d = np.diff(ns)
        del ns
        starts = np.flatnonzero(d == 1)
        ends = np.flatnonzero(d == -1)
        del d
        self.ok = len(starts) == len(self.words) == len(ends)  # False: non-ASCII whitespace
        if not self.ok:
            return
        self.first = raw[starts]
        self.length = (ends - starts).astype(np.int32)
        self.raw, self.starts = raw, starts
        del ends
        self._arr = None
        semi = self.mask(";")
        self.semi = np.flatnonzero(semi)
        self.n_open_text = sec.count("(")
        n = len(self.words)
        if len(self.semi) != sec.count(";") or (n and not semi[-1]):
            self.ok = False
            return
        self.begin = np.concatenate([[0], self.semi[:-1] + 1]).astype(np.int64) \
            if len(self.semi) else np.zeros(0, np.int64)
        if len(self.begin) and not self.mask("-")[self.begin].all():
            self.ok = False

    def mask(self, ch: str) -> np.ndarray:
        """Tokens that are exactly the one ASCII character ``ch``."""
        return (self.length == 1) & (self.first == ord(ch))

    def packed(self, idx) -> np.ndarray | None:
        """Tokens at ``idx`` packed big-endian into uint64 (``None`` when one is longer than
        eight bytes): exact keys for comparing short words without Python strings."""
        idx = np.asarray(idx, dtype=np.intp)
        ln = self.length[idx]
        if len(idx) and ln.max() > 8:
            return None
        key = np.zeros(len(idx), np.uint64)
        st = self.starts[idx]
        top = len(self.raw) - 1
        for k in range(8):
            b = self.raw[np.minimum(st + k, top)].astype(np.uint64)
            key = (key << np.uint64(8)) | np.where(ln > k, b, np.uint64(0))
        return key

    def integers(self, idx) -> np.ndarray | None:
        """Tokens at ``idx`` read as integers by arithmetic on their bytes (``None`` unless
        every one is an optional ``-`` and 1 to 15 digits)."""
        idx = np.asarray(idx, dtype=np.intp)
        if not len(idx):
            return np.zeros(0)
        ln = self.length[idx].astype(np.int64)
        st = self.starts[idx]
        neg = self.first[idx] == ord("-")
        st = st + neg
        ln = ln - neg
        if ln.min() < 1 or ln.max() > 15:
            return None
        val = np.zeros(len(idx), np.int64)
        top = len(self.raw) - 1
        for k in range(int(ln.max())):
            on = ln > k
            dg = self.raw[np.minimum(st + k, top)].astype(np.int64) - 48
            if ((dg < 0) | (dg > 9))[on].any():
                return None
            val = np.where(on, val * 10 + dg, val)
        return np.where(neg, -val, val).astype(np.float64)

    def get(self, idx) -> list[str]:
        """The tokens at ``idx`` (a gather in C through an object array built once)."""
        if self._arr is None:
            self._arr = np.array(self.words, dtype=object)
        return self._arr[np.asarray(idx, dtype=np.intp)].tolist()
