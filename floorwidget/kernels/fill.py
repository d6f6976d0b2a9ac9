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
    Items are sorted by horizontal band (as tall as the tallest item, so an item meets at
    most two bands), then by left edge; for each area and each occupied band it reaches, the
    items whose left edge lies in ``[xlo − widest item, xhi)`` are found by ``searchsorted`` on one
    integer key (band, rank of the left edge) and intersected as one flat array, in chunks of
    at most ``2**20`` pairs.  Time is O((n + q) log n + pairs) for q (area, band) queries.

    Examples
    --------
    >>> covered_share([[0, 0, 10, 10]], [[0, 0, 2, 10], [9, 9, 12, 12], [20, 0, 21, 1]])
    array([0.21])
    """
    a = np.asarray(areas, dtype=np.float64).reshape(-1, 4)
    c = np.asarray(items, dtype=np.float64).reshape(-1, 4)
    out = np.zeros(len(a))
    with np.errstate(invalid="ignore"):
        c = c[(c[:, 2] > c[:, 0]) & (c[:, 3] > c[:, 1])]  # items without area cover nothing
    if not len(a) or not len(c):
        return out
    y0 = float(c[:, 1].min())
    hb = max(float(np.max(c[:, 3] - c[:, 1])), 1e-300)
    band = np.floor((c[:, 1] - y0) / hb).astype(np.int64)
    ux = np.unique(c[:, 0])
    stride = np.int64(len(ux) + 1)
    key = band * stride + np.searchsorted(ux, c[:, 0])
    order = np.argsort(key, kind="stable")
    c, key = c[order], key[order]
    wmax = float(np.max(c[:, 2] - c[:, 0]))
    # queries: every (area, occupied band) an item meeting the area can start in
    ub = np.unique(band)
    top = float(ub[-1]) + 1.0
    i0 = np.searchsorted(ub, np.clip(np.floor((a[:, 1] - y0) / hb) - 1, -1.0, top))
    i1 = np.searchsorted(ub, np.clip(np.floor((a[:, 3] - y0) / hb), -1.0, top), side="right")
    nq = np.maximum(i1 - i0, 0)
    q_area = np.repeat(np.arange(len(a)), nq)
    q_band = ub[np.repeat(i0, nq) + (np.arange(int(nq.sum())) - np.repeat(np.cumsum(nq) - nq, nq))]
    lo = np.searchsorted(key, q_band * stride + np.searchsorted(ux, a[q_area, 0] - wmax))
    hi = np.searchsorted(key, q_band * stride + np.searchsorted(ux, a[q_area, 2]))
    cnt = np.maximum(hi - lo, 0)
    ends = np.cumsum(cnt)
    start = 0
    while start < len(cnt):  # whole queries per chunk, at least one
        stop = max(int(np.searchsorted(ends, ends[start] - cnt[start] + _CHUNK, "right")),
                   start + 1)
        n = cnt[start:stop]
        o = np.repeat(q_area[start:stop], n)
        j = np.repeat(lo[start:stop], n) + (np.arange(int(n.sum()))
                                           - np.repeat(np.cumsum(n) - n, n))
        ox = np.minimum(c[j, 2], a[o, 2]) - np.maximum(c[j, 0], a[o, 0])
        oy = np.minimum(c[j, 3], a[o, 3]) - np.maximum(c[j, 1], a[o, 1])
        out += np.bincount(o, weights=np.maximum(ox, 0) * np.maximum(oy, 0), minlength=len(a))
        start = stop
    area = (a[:, 2] - a[:, 0]) * (a[:, 3] - a[:, 1])
    return np.divide(out, area, out=np.zeros(len(a)), where=area > 0)
