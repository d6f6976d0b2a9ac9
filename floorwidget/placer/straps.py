"""Macros leave channels where power straps run (the channel rule of
:mod:`floorwidget.kernels.power`).

After the macro legaliser, :func:`clear_strap_channels` moves each movable macro that clips a
strap on a low layer — a strap band (widened by the grid spacing) overlapping the macro's
footprint across the strap without lying inside it — to the nearest position where none does:
per axis the candidates put a macro edge on either side of a nearby band (the band then runs
in the channel beside the macro or over it), snapped to the macro grid away from the band;
the pairs of x and y candidates are tried by increasing displacement and the first one inside
the core, off full blockages and fences, in no halo conflict with another macro and clipping
no strap is taken.  Macros are visited one at a time (a few per design clip a strap; the loop
is over those macros, each candidate check vectorised over the others).  A macro with no such
position within the candidates stays and is counted by the report's ``straps_blocked``.
"""

from __future__ import annotations

import numpy as np

from ..design import MACRO, MOVABLE, Design, Floorplan
from ..kernels.power import channel_conflicts
from .constraints import macro_keepouts

__all__ = ["clear_strap_channels"]

CANDIDATES = 12 # nearest candidate positions tried per axis (and the current one)


def _snap(v: np.ndarray, origin: float, pitch: float, up: np.ndarray) -> np.ndarray:
    k = (v - origin) / pitch
    return origin + pitch * np.where(up, np.ceil(k - 1e-9), np.floor(k + 1e-9))


def _axis_candidates(lo: float, size: float, bands: np.ndarray, origin: float,
                     pitch: float) -> np.ndarray:
    """Lower-edge positions near ``lo`` that put an edge on either side of each band."""
    b0, b1 = bands[:, 0], bands[:, 1]
    v = np.concatenate([b1, b0 - size, b0, b1 - size])
    up = np.concatenate([np.ones(len(b0), bool), np.zeros(len(b0), bool),
                         np.zeros(len(b0), bool), np.ones(len(b0), bool)])
    c = np.unique(_snap(v, origin, pitch, up))
    c = c[np.argsort(np.abs(c - lo), kind="stable")][:CANDIDATES]
    return np.concatenate([[lo], c])


PASSES = 3  # visits of the macros still clipping a strap (one move can free another's room)


def clear_strap_channels(design: Design, fp: Floorplan, macros=None) -> tuple[Floorplan, int]:
    """Move movable macros off the low straps' edges (module docstring).

    Parameters
    ----------
    design, fp : the design (with :attr:`~floorwidget.design.Design.power`) and a floorplan
        with legal macros (not modified).
    macros : int array, optional
        Macros that may move (default: every movable macro).

    Returns
    -------
    (Floorplan, int)
        The new floorplan (``fp`` itself when no macro clips a strap) and how many macros
        still clip one (pinned and fixed ones included: they never move).
    """
    g = design.power
    is_macro = design.kind == MACRO
    if g is None or not g.low_stripes().any() or not is_macro.any():
        return fp, 0
    stripes = g.rects[g.low_stripes()]
    sp = g.spacing
    r = fp.rects()
    m_idx = np.flatnonzero(is_macro)
    foot = r[m_idx].copy()
    _, m = channel_conflicts(stripes, sp, foot)
    if not len(m):
        return fp, 0
    may = np.zeros(design.num_blocks, bool)
    may[m_idx] = fp.status[m_idx] == MOVABLE
    if macros is not None:
        sel = np.zeros(design.num_blocks, bool)
        sel[np.asarray(macros, np.intp)] = True
        may &= sel
    keep = macro_keepouts(design)
    vert = (stripes[:, 3] - stripes[:, 1]) > (stripes[:, 2] - stripes[:, 0])
    bands = [np.stack([stripes[vert, 0] - sp, stripes[vert, 2] + sp], 1),
             np.stack([stripes[~vert, 1] - sp, stripes[~vert, 3] + sp], 1)]
    out = fp.copy()
    left = np.unique(m)
    for _ in range(PASSES):
        stuck = _one_pass(design, out, left, m_idx, foot, may, stripes, sp, bands, keep)
        if len(stuck) in (0, len(left)):
            break
        left = stuck
    return out, len(stuck)


def _one_pass(design, out, left, m_idx, foot, may, stripes, sp, bands, keep) -> np.ndarray:
    """Move each macro of ``left`` (indices into ``m_idx``) to its nearest position clipping
    no strap; ``out`` and ``foot`` updated in place.  Returns the macros that stayed."""
    halo = design.halo[m_idx]
    core = design.core
    stuck = []
    for k in left.tolist():
        i = int(m_idx[k])
        if not may[i]:
            stuck.append(k)
            continue
        x0, y0, x1, y1 = foot[k]
        w, h = x1 - x0, y1 - y0
        cx = _axis_candidates(x0, w, bands[0], design.grid_origin[0], design.grid_pitch[0])
        cy = _axis_candidates(y0, h, bands[1], design.grid_origin[1], design.grid_pitch[1])
        X, Y = np.meshgrid(cx, cy, indexing="ij")
        X, Y = X.ravel(), Y.ravel()
        order = np.argsort(np.abs(X - x0) + np.abs(Y - y0), kind="stable")
        others = np.ones(len(m_idx), bool)
        others[k] = False
        fo, ho = foot[others], halo[others]
        hb_o = fo + np.concatenate([-ho[:, :2], ho[:, 2:]], 1)
        hk = halo[k]
        done = False
        for q in order[1:].tolist():  # (order[0] is the current position)
            nf = np.array([X[q], Y[q], X[q] + w, Y[q] + h])
            if (nf[:2] < core[:2] - 1e-9).any() or (nf[2:] > core[2:] + 1e-9).any():
                continue
            if len(channel_conflicts(stripes, sp, nf[None])[0]):
                continue
            hb = nf + np.array([-hk[0], -hk[1], hk[2], hk[3]])
            if _overlaps(nf, hb_o).any() or _overlaps(hb, fo).any():
                continue
            if len(keep) and _overlaps(nf, keep).any():
                continue
            foot[k] = nf
            out.x[i], out.y[i] = nf[0], nf[1]  # (the lower-left of the oriented footprint)
            done = True
            break
        if not done:
            stuck.append(k)
    return np.asarray(stuck, np.int64)


def _overlaps(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return ((np.minimum(a[2], b[:, 2]) - np.maximum(a[0], b[:, 0]) > 1e-9)
            & (np.minimum(a[3], b[:, 3]) - np.maximum(a[1], b[:, 1]) > 1e-9))

