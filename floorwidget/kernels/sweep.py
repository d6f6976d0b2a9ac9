"""Do any two rectangles overlap?  One sweep over x in O(n log n) time and O(n) memory.

A sweep line moves left to right over the rectangles' left and right sides; the rectangles it
crosses are kept sorted by their bottom edge.  While no two of them overlap, their y spans are
disjoint, so a new span overlaps one of them exactly when it overlaps its neighbour below or
above in that order: two comparisons per rectangle (the sweep of Bentley and Ottmann,
IEEE Trans. Computers C-28(9), 1979, stopped at the first intersection; as in Shamos and Hoey,
FOCS 1976).
"""

from __future__ import annotations

from bisect import bisect_left

import numpy as np

__all__ = ["overlapping_pair"]


def overlapping_pair(rects, group=None) -> tuple[int, int] | None:
    """Two rectangles of one group that share area, or None when there are none.

    Parameters
    ----------
    rects : (n, 4) array_like
        ``xlo, ylo, xhi, yhi``.  Touching sides or corners do not count as overlap; a
        rectangle without area (or not finite) overlaps nothing.
    group : (n,) int array_like, optional
        Only rectangles of equal group are compared (default: all in one group).

    Returns
    -------
    (i, j) or None
        Indices (``i < j``) of an overlapping pair; which pair, when there are several, is
        not specified.

    Examples
    --------
    >>> overlapping_pair([[0, 0, 2, 2], [2, 0, 3, 1], [1, 1, 3, 3]])
    (0, 2)
    >>> overlapping_pair([[0, 0, 2, 2], [1, 1, 3, 3]], group=[0, 1]) is None
    True
    """
    r = np.asarray(rects, dtype=np.float64).reshape(-1, 4)
    n = len(r)
    if n < 2:
        return None
    g = np.zeros(n, np.int64) if group is None else np.asarray(group, np.int64).reshape(n)
    # events by x; at equal x a right side (leave, 0) comes before a left side (enter, 1)
    with np.errstate(invalid="ignore"):
        ok = np.flatnonzero((r[:, 2] > r[:, 0]) & (r[:, 3] > r[:, 1]))
    ex = np.concatenate([r[ok, 2], r[ok, 0]])
    kind = np.concatenate([np.zeros(len(ok), np.int8), np.ones(len(ok), np.int8)])
    idx = np.concatenate([ok, ok])
    o = np.lexsort((kind, ex))
    # the active list holds keys (group, ylo, index), so neighbours share a group when equal
    keys = list(zip(g.tolist(), r[:, 1].tolist(), range(n)))
    yhi = r[:, 3].tolist()
    active: list[tuple[int, float, int]] = []
    for i, enter in zip(idx[o].tolist(), kind[o].tolist()):
        key = keys[i]
        pos = bisect_left(active, key)
        if not enter:
            if pos < len(active) and active[pos] == key:
                del active[pos]
            continue
        if pos > 0:
            below = active[pos - 1]
            if below[0] == key[0] and yhi[below[2]] > key[1]:
                return min(i, below[2]), max(i, below[2])
        if pos < len(active):
            above = active[pos]
            if above[0] == key[0] and above[1] < yhi[i]:
                return min(i, above[2]), max(i, above[2])
        active.insert(pos, key)
    return None
