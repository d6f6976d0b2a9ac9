"""How full each rectangle is: the area of other rectangles inside it, by sort and search.

The figure of a partial placement blockage (DEF ``+ PARTIAL``): the share of its area that
standard cells cover, to compare with its maximum density.
"""

from __future__ import annotations

import numpy as np

__all__ = ["covered_share"]

_CHUNK = 1 << 20  # (area, item) pairs compared per numpy step: bounds the memory


def covered_share(areas, items) -> np.ndarray:
    """Per rectangle of ``areas``, the share of its area that the rectangles ``items`` cover.

    Parameters
    ----------
    areas : (k, 4) array_like
        ``xlo, ylo, xhi, yhi`` with positive area (e.g. partial blockages).
    items : (n, 4) array_like
        Rectangles assumed not to overlap each other (e.g. placed standard cells); where they
        do, the overlap counts twice.

    Returns
    -------
    (k,) float64
        ``Σ_j area(areas[i] ∩ items[j]) / area(areas[i])``; 0 for a rectangle without area.

    Notes
    -----
    Items are sorted by left edge; for each area the items whose left edge lies in
    ``[xlo − widest item, xhi)`` are found by ``searchsorted`` and intersected as one flat
    array, in chunks of at most ``2**20`` pairs.  Time is O((n + k) log n + pairs).

    Examples
    --------
    >>> covered_share([[0, 0, 10, 10]], [[0, 0, 2, 10], [9, 9, 12, 12], [20, 0, 21, 1]])
    array([0.21])
    """
    a = np.asarray(areas, dtype=np.float64).reshape(-1, 4)
    c = np.asarray(items, dtype=np.float64).reshape(-1, 4)
    out = np.zeros(len(a))
    if not len(a) or not len(c):
        return out
    c = c[np.argsort(c[:, 0], kind="stable")]
    wmax = float(np.max(c[:, 2] - c[:, 0]))
    lo = np.searchsorted(c[:, 0], a[:, 0] - wmax, side="left")
    hi = np.searchsorted(c[:, 0], a[:, 2], side="left")
    cnt = np.maximum(hi - lo, 0)
    ends = np.cumsum(cnt)
    start = 0
    while start < len(a):  # whole areas per chunk, at least one
        stop = max(int(np.searchsorted(ends, ends[start] - cnt[start] + _CHUNK, "right")),
                   start + 1)
        k = np.arange(start, stop)
        n = cnt[k]
        o = np.repeat(k, n)
        j = lo[o] + (np.arange(int(n.sum())) - np.repeat(np.cumsum(n) - n, n))
        ox = np.minimum(c[j, 2], a[o, 2]) - np.maximum(c[j, 0], a[o, 0])
        oy = np.minimum(c[j, 3], a[o, 3]) - np.maximum(c[j, 1], a[o, 1])
        out[start:stop] = np.bincount(o - start, weights=np.maximum(ox, 0) * np.maximum(oy, 0),
                                      minlength=stop - start)
        start = stop
    area = (a[:, 2] - a[:, 0]) * (a[:, 3] - a[:, 1])
    return np.divide(out, area, out=np.zeros(len(a)), where=area > 0)
