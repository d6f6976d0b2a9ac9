"""Cell regions (DEF ``REGIONS`` and ``GROUPS``): rectangles that groups of standard cells and
clusters must stay in (fences) or lean to (guides), and the checks of their consistency.
Importable from :mod:`floorwidget.design` too."""

from __future__ import annotations

from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .codes import CELL, CLUSTER, COORD_LIMIT, FENCE, GUIDE, REGION_TYPES, DesignError
from .kernels.sweep import overlapping_pair

__all__ = ["CellRegions"]


@dataclass(frozen=True, eq=False)
class CellRegions:
    """Named regions (DEF ``REGIONS``) and the blocks assigned to them (DEF ``GROUPS``).

    A *fence* keeps its members inside its rectangles and every other cell out; a *guide*
    pulls its members toward them and lets them spill.  Only standard cells and soft clusters
    are members (macros are placed by their own rules).  Not to be confused with the report's
    ``logic_regions`` (the free areas between macros).

    Attributes
    ----------
    names : tuple of str
        Region names, unique.
    kind : (r,) int8
        :data:`FENCE` or :data:`GUIDE`.
    rect_start : (r + 1,) int64
        CSR index: the rectangles of region ``k`` are ``rects[rect_start[k]:rect_start[k+1]]``
        (at least one; they do not overlap each other).
    rects : (m, 4) float64
        ``xlo, ylo, xhi, yhi``, µm.
    member : (n,) int32
        Region of each block, -1 for none.
    groups : tuple of str
        The DEF ``GROUPS`` name that assigns each region its members (default: its name).
    """

    names: tuple
    kind: np.ndarray
    rect_start: np.ndarray
    rects: np.ndarray
    member: np.ndarray
    groups: tuple

    @classmethod
    def empty(cls, n: int) -> CellRegions:
        return cls((), np.zeros(0, np.int8), np.zeros(1, np.int64), np.zeros((0, 4)),
                   np.full(n, -1, np.int32), ())

    @classmethod
    def build(cls, n: int, regions: Sequence[dict], member=None) -> CellRegions:
        """From ``[{"name", "type": "fence"|"guide", "rects": [[..4..], ..], "group"}]`` and a
        ``(n,)`` member array (default: none)."""
        names = tuple(str(r["name"]) for r in regions)
        kind = np.array([REGION_TYPES.index(r.get("type", "fence")) for r in regions],
                        dtype=np.int8)
        counts = [len(r["rects"]) for r in regions]
        rects = np.array([b for r in regions for b in r["rects"]], dtype=np.float64)
        groups = tuple(str(r.get("group") or r["name"]) for r in regions)
        mem = np.full(n, -1, np.int32) if member is None else np.asarray(member, np.int32)
        return cls(names, kind, np.concatenate([[0], np.cumsum(counts)]).astype(np.int64),
                   rects.reshape(-1, 4), mem.reshape(n), groups)

    def __len__(self) -> int:
        return len(self.names)

    def __eq__(self, other) -> bool:
        return isinstance(other, CellRegions) and self.names == other.names \
            and self.groups == other.groups and all(
                np.array_equal(getattr(self, a), getattr(other, a))
                for a in ("kind", "rect_start", "rects", "member"))

    __hash__ = None  # type: ignore[assignment]  # mutable arrays inside

    def index(self, name: str) -> int:
        """Index of region ``name``; :class:`DesignError` naming it when unknown."""
        try:
            return self.names.index(name)
        except ValueError:
            known = ", ".join(map(repr, self.names)) or "none"
            raise DesignError(f"region {name!r}: no such cell region (known: {known})",
                              where=f"region {name!r}") from None

    def rects_of(self, k: int) -> np.ndarray:
        return self.rects[self.rect_start[k]:self.rect_start[k + 1]]

    def members(self, k: int) -> np.ndarray:
        return np.flatnonzero(self.member == k)

    def rect_region(self) -> np.ndarray:
        """Region index of every rectangle."""
        return np.repeat(np.arange(len(self.names)), np.diff(self.rect_start))

    def to_list(self) -> list[dict]:
        """Plain description (as :meth:`build` takes), members not included."""
        return [{"name": nm, "type": REGION_TYPES[int(self.kind[k])],
                 "rects": self.rects_of(k).tolist(), "group": self.groups[k]}
                for k, nm in enumerate(self.names)]

    def problems(self, design) -> list[tuple[str, str]]:
        """``(object, message)`` of every problem, each naming the region or block of
        ``design`` (a :class:`~floorwidget.design.Design`)."""
        out: list[tuple[str, str]] = []
        r = len(self.names)
        if len(set(self.names)) != r or not all(self.names):
            dup = [k for k, c in Counter(self.names).items() if c > 1 or not k]
            out.append((f"region {dup[0]!r}", f"region {dup[0]!r}: region names must be "
                                              "unique and not empty"))
        rs = self.rect_start
        if len(rs) != r + 1 or rs[0] != 0 or rs[-1] != len(self.rects) \
                or (np.diff(rs) < 1).any() or ((self.kind != FENCE) & (self.kind != GUIDE)).any():
            out.append(("regions", "cell regions: every region needs a type and at least one "
                                   "rectangle"))
            return out
        b = self.rects
        with np.errstate(invalid="ignore"):
            bad = ~(np.abs(b) <= COORD_LIMIT).all(axis=1) | ~((b[:, 2] > b[:, 0])
                                                              & (b[:, 3] > b[:, 1]))
        if bad.any():
            nm = self.names[int(self.rect_region()[np.flatnonzero(bad)[0]])]
            out.append((f"region {nm!r}", f"region {nm!r}: a rectangle is not finite or has "
                                          "no area"))
            return out
        die = design.die
        tol = 1e-6 + 1e-9 * np.abs(die).max(initial=0.0)
        outside = (b[:, 0] < die[0] - tol) | (b[:, 1] < die[1] - tol) \
            | (b[:, 2] > die[2] + tol) | (b[:, 3] > die[3] + tol)
        if outside.any():
            k = int(np.flatnonzero(outside)[0])
            nm = self.names[int(self.rect_region()[k])]
            out.append((f"region {nm!r}", f"region {nm!r}: rectangle {b[k].tolist()} reaches "
                                          f"outside the die {die.tolist()}"))
        # the rectangles of one region must not overlap (rows are cut to their union), nor
        # those of two fences (a cell cannot be kept inside one fence and out of the other);
        # guides may overlap other regions.  One sweep, not all pairs.
        reg = self.rect_region()
        pair = overlapping_pair(b, reg)
        if pair is not None:
            i, j = pair
            a = self.names[int(reg[i])]
            out.append((f"region {a!r}", f"region {a!r}: its rectangles overlap "
                                         f"({b[i].tolist()} and {b[j].tolist()})"))
        fence = np.flatnonzero(self.kind[reg] == FENCE)
        pair = None if pair is not None else overlapping_pair(b[fence])
        if pair is not None:
            i, j = fence[list(pair)]
            a, c = self.names[int(reg[i])], self.names[int(reg[j])]
            out.append((f"region {a!r}", f"fences {a!r} and {c!r} overlap (rectangles "
                                         f"{b[i].tolist()} and {b[j].tolist()}): fences must "
                                         "not share area"))
        m = self.member
        if m.shape != (design.num_blocks,) or ((m < -1) | (m >= r)).any():
            out.append(("regions", "cell regions: a member names no region"))
            return out
        wrong = (m >= 0) & (design.kind != CELL) & (design.kind != CLUSTER)
        if wrong.any():
            nm = design.names[int(np.flatnonzero(wrong)[0])]
            out.append((f"block {nm!r}", f"block {nm!r}: only standard cells and clusters "
                                         "belong to cell regions"))
        return out
