"""Hierarchy in block names: groups by instance-name prefix, I/O buses, search by name.

Pure functions of a list of names, linear in their number, used by the widget to colour and
find blocks; nothing here places anything.  Hierarchy separators are ``/`` and ``.`` as DEF
component names use them (``top/cpu/u1``, ``sram_block\\[0\\].mem\\[3\\].ram``); a character
after a backslash is escaped and belongs to the name, so ``\\[0\\]`` and ``a\\/b`` never split.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .design import CELL, CLUSTER, TERMINAL, Design, Floorplan

__all__ = ["SEPARATORS", "TOP", "Groups", "bus_groups", "find_blocks", "found_message",
           "group_area", "group_colours", "hierarchy_groups", "logic_picture"]

#: Default hierarchy separators.
SEPARATORS = "/."
#: Display name of the group of names without hierarchy (the top level).
TOP = "(top level)"


@dataclass(frozen=True)
class Groups:
    """Names sorted into groups.

    Attributes
    ----------
    index : (n,) int array
        Group of each name, ``0 .. len(keys) - 1``, groups numbered in order of first appearance.
    keys : list of str
        The key of each group (for hierarchy groups the prefix; ``""`` is the top level).
    """

    index: np.ndarray
    keys: list[str]

    def __len__(self) -> int:
        return len(self.keys)

    @property
    def sizes(self) -> np.ndarray:
        """Members per group."""
        return np.bincount(self.index, minlength=len(self.keys))

    def label(self, g: int) -> str:
        """Display name of group ``g`` (:data:`TOP` for the top level)."""
        return self.keys[g] or TOP

    def members(self, g: int) -> np.ndarray:
        """Indices of the names in group ``g``."""
        return np.flatnonzero(self.index == g)


def _number(keys: list[str]) -> Groups:
    ids: dict[str, int] = {}
    index = np.fromiter((ids.setdefault(k, len(ids)) for k in keys), dtype=np.intp,
                        count=len(keys))
    return Groups(index, list(ids))


def hierarchy_groups(names: Sequence[str], depth: int = 1,
                     separators: str = SEPARATORS) -> Groups:
    """Group names by their hierarchy prefix of at most ``depth`` levels.

    A name's hierarchy is every component but the last (the leaf instance), so ``a/b/c/u1`` is
    in group ``a/b`` at depth 2 and in ``a/b/c`` at depth 3 or more, ``a/u1`` is in ``a`` at any
    depth of at least one, and a name without separators is at the top level (key ``""``).
    Depth 0 puts every name in the top level.  One regular-expression match per name: linear
    in the total length of the names.

    Parameters
    ----------
    names : sequence of str
    depth : int
        Hierarchy levels kept, ``>= 0``.
    separators : str
        Characters that separate levels (default ``"/."``); a backslash escapes the next
        character, which then belongs to the component.

    Returns
    -------
    Groups

    Examples
    --------
    >>> g = hierarchy_groups(["cpu/alu/u1", "cpu/alu/u2", "cpu/u3", "u4"], depth=2)
    >>> g.keys, g.index.tolist()
    (['cpu/alu', 'cpu', ''], [0, 0, 1, 2])
    >>> hierarchy_groups([r"mem\\[0\\].bank\\[1\\].ram"], depth=1).keys
    ['mem\\\\[0\\\\]']
    """
    if isinstance(depth, bool) or not isinstance(depth, (int, np.integer)) or depth < 0:
        raise ValueError(f"hierarchy depth must be a whole number >= 0, got {depth!r}")
    if not separators or "\\" in separators:
        raise ValueError(f"separators must be one or more characters other than a backslash, "
                         f"got {separators!r}")
    s = re.escape(separators)
    # up to `depth` components, each followed by its separator; escapes stay in the component
    rx = re.compile(rf"(?:(?:\\.|[^\\{s}])*[{s}]){{0,{int(depth)}}}", re.DOTALL)
    keys = [rx.match(nm).group(0)[:-1] for nm in names]  # drop the trailing separator
    return _number(keys)


_BIT = re.compile(r"(?:\\?\[\s*\d+\s*\\?\]|<\d+>)+$")


def bus_groups(names: Sequence[str]) -> Groups:
    """Group I/O names into buses: the name without its trailing bit index.

    ``data[3]``, ``data\\[4\\]`` and ``data<5>`` are all in bus ``data``; a name without an
    index is a bus of its own.

    Examples
    --------
    >>> g = bus_groups(["d[0]", "d[1]", "clk", "q\\\\[2\\\\]"])
    >>> g.keys, g.index.tolist()
    (['d', 'clk', 'q'], [0, 0, 1, 2])
    """
    return _number([_BIT.sub("", nm) or nm for nm in names])


def _plain(name: str) -> str:
    return name.replace("\\", "").lower()


def find_blocks(names: Sequence[str], query: str) -> tuple[np.ndarray, bool]:
    """Blocks whose name is ``query`` or contains it.

    An exact match wins on its own.  Otherwise the match is by part of the name, ignoring
    letter case and DEF escapes (``block[0]`` finds ``block\\[0\\]``).

    Parameters
    ----------
    names : sequence of str
    query : str
        A full or partial name; surrounding blanks are ignored.

    Returns
    -------
    indices : int array
        The matching names, in input order (empty when nothing matches).
    exact : bool
        Whether the one index is an exact match.

    Raises
    ------
    ValueError
        An empty query.
    """
    q = str(query).strip()
    if not q:
        raise ValueError("Type a block name, or part of one, to find it.")
    try:
        return np.array([list(names).index(q)], np.intp), True  # names are unique
    except ValueError:
        pass
    qp = _plain(q)
    hit = np.fromiter((qp in _plain(nm) for nm in names), dtype=bool, count=len(names))
    return np.flatnonzero(hit), False


def found_message(names: Sequence[str], query: str, found: np.ndarray, exact: bool,
                  show: int = 5) -> str:
    """One line saying what :func:`find_blocks` found for ``query``."""
    q = str(query).strip()
    if exact:
        return f"Found {names[int(found[0])]}."
    if len(found) == 0:
        return f"No block name contains {q!r} (case and DEF escapes ignored)."
    if len(found) == 1:
        return f"Found {names[int(found[0])]} (the only name containing {q!r})."
    some = ", ".join(names[int(i)] for i in found[:show])
    more = f" and {len(found) - show:,d} more" if len(found) > show else ""
    return (f"{len(found):,d} blocks match {q!r}: {some}{more}. The view shows them all; "
            "type more of the name to pick one.")


def group_colours(weight: np.ndarray, palette: Sequence[str], other: str
                  ) -> tuple[list[str], list[tuple[str, list[int]]]]:
    """A colour per group: the palette for the heaviest groups, ``other`` for the rest.

    Parameters
    ----------
    weight : (k,) array
        Importance of each group (e.g. its block area); the heaviest get colours first, ties in
        group order.
    palette : sequence of str
        Distinct colours, used once each.
    other : str
        The colour of every group past the palette's size.

    Returns
    -------
    colours : list of str
        One per group.
    legend : list of ``(colour, groups)``
        Every group exactly once: one entry per coloured group, then one entry (``other``)
        holding all remaining groups, if any.
    """
    w = np.asarray(weight, dtype=np.float64).reshape(-1)
    order = np.argsort(-w, kind="stable")
    k = min(len(palette), len(w))
    colours = [other] * len(w)
    legend: list[tuple[str, list[int]]] = []
    for rank, g in enumerate(order[:k].tolist()):
        colours[g] = palette[rank]
        legend.append((palette[rank], [g]))
    if len(w) > k:
        legend.append((other, sorted(order[k:].tolist())))
    return colours, legend


def group_area(design: Design, groups: Groups) -> np.ndarray:
    """Footprint area (µm²) of each group's blocks, I/O terminals left out."""
    area = design.width * design.height * (design.kind != TERMINAL)
    return np.bincount(groups.index, weights=area, minlength=len(groups))


def _rgb(colour: str) -> list[int]:
    return [int(colour[i:i + 2], 16) for i in (1, 3, 5)]


def logic_picture(design: Design, fp: Floorplan, grid, groups: Groups,
                  colours: Sequence[str], *, focus: int | None = None,
                  other: str = "#A0A0A0") -> np.ndarray:
    """The logic of each group as one picture: ``(ny, nx, 4)`` uint8 RGBA, top row first.

    Each bin of ``grid`` (a :class:`floorwidget.metrics.BinGrid`) takes the colour of the
    group with most standard-cell and soft-cluster area in it (``colours[g]``; groups that
    share a colour count together), at an opacity growing with the square root of that area,
    the fullest bin at 90 %; bins without logic are transparent.  With ``focus``, only that
    group's logic is coloured and all other logic is ``other`` at a quarter of its opacity.
    Exact areas per bin from :func:`floorwidget.metrics.rect_area_map`, one map per colour.
    """
    from . import metrics

    logic = np.flatnonzero((design.kind == CELL) | (design.kind == CLUSTER))
    rects = fp.rects()[logic]
    gi = groups.index[logic]
    cols = np.asarray(colours, dtype=object)
    if focus is not None:
        key = (gi == focus).astype(np.intp)
        palette = [other, str(cols[focus])]
    else:  # one map per distinct colour: at most the palette's size plus the grey
        palette = sorted(set(cols[gi].tolist())) if gi.size else [other]
        pos = {c: k for k, c in enumerate(palette)}
        key = np.array([pos.get(c, -1) for c in cols], np.intp)[gi]
    maps = np.stack([metrics.rect_area_map(grid, rects[key == k])
                     for k in range(len(palette))])  # (k, nx, ny)
    maps = np.maximum(maps, 0.0)  # the running sums leave rounding-size negatives
    total = maps.sum(axis=0)
    top = maps.argmax(axis=0)
    hi = float(total.max()) if total.size else 0.0
    alpha = np.sqrt(total / hi) if hi > 0 else np.zeros_like(total)
    if focus is not None:
        mine = float(maps[1].max())
        alpha = np.where(top == 1, np.sqrt(maps[1] / mine) if mine > 0 else 0.0, 0.25 * alpha)
    rgb = np.array([_rgb(c) for c in palette], np.uint8)
    out = np.zeros((grid.ny, grid.nx, 4), np.uint8)
    out[..., :3] = rgb[top].transpose(1, 0, 2)
    out[..., 3] = np.round(255 * 0.9 * alpha).T
    return out[::-1]
