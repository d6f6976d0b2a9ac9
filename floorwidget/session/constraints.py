"""Constraint edits of a session: placement blockages, halos and cell regions.

Each edit derives a new :class:`~floorwidget.design.Design` sharing the netlist
(:meth:`Design.derive`) and commits it as one undoable step with the positions kept.
:class:`ConstraintEdits` is a mixin of :class:`~floorwidget.session.Session`.
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np

from ..design import (
    CELL,
    CLUSTER,
    MACRO,
    REGION_TYPES,
    CellRegions,
    DesignError,
    Floorplan,
    orient_size,
)
from . import checks
from .edits import locked

__all__ = ["ConstraintEdits", "EDGE_TOLERANCE"]

#: A rectangle may pass the die edge by this fraction of the placement grid pitch (float
#: round-off of a core computed from rows and sites); it is then put on the edge.
EDGE_TOLERANCE = 1e-3


class ConstraintEdits:
    """Session methods that edit blockages, halos and cell regions (a mixin of ``Session``)."""

    def _constrain(self, action: str, log: tuple, blocks=(), **changes) -> None:
        """Commit a design derived with ``changes`` as one undoable step (positions kept)."""
        fp = self._fp
        design = fp.design.derive(**changes)
        new = Floorplan(design, fp.x, fp.y, fp.orient, fp.status, fp.info)
        self._commit(action, new, log=log, blocks=np.asarray(blocks, dtype=np.int64))

    def _blockage_index(self, index) -> int:
        k = len(self.design.blockages)
        if isinstance(index, bool) or not isinstance(index, (int, np.integer)) \
                or not 0 <= int(index) < k:
            raise DesignError(f"blockage {index!r}: no such placement blockage (there are {k})")
        return int(index)

    def _rect_in_die(self, rect, what: str) -> list[float]:
        """``rect`` (two corners in any order) as ``[xlo, ylo, xhi, yhi]``, checked: four
        finite numbers, some area, inside the die up to round-off (:data:`EDGE_TOLERANCE`
        of the grid pitch; put on the edge then).  Errors name ``what``."""
        a, b, c, d = checks.number_list(rect, 4, what,
                                    "a rectangle is four numbers [xlo, ylo, xhi, yhi]")
        r = [min(a, c), min(b, d), max(a, c), max(b, d)]
        if not (r[2] > r[0] and r[3] > r[1]):
            raise DesignError(f"{what}: rectangle {r} has no area")
        die = self.design.die
        tol = EDGE_TOLERANCE * float(np.min(self.design.grid_pitch))
        if r[0] < die[0] - tol or r[1] < die[1] - tol or r[2] > die[2] + tol \
                or r[3] > die[3] + tol:
            raise DesignError(f"{what}: rectangle {r} reaches outside the die {die.tolist()}")
        lo, hi = die[:2].tolist(), die[2:].tolist()
        return [max(r[0], lo[0]), max(r[1], lo[1]), min(r[2], hi[0]), min(r[3], hi[1])]

    @locked
    def add_blockage(self, rect, max_density: float = 0.0) -> int:
        """Add a placement blockage over ``rect = [xlo, ylo, xhi, yhi]`` µm (one undo step).

        Parameters
        ----------
        rect : four numbers
            Two opposite corners (in any order), inside the die.
        max_density : float
            0 (default): a full blockage — no macro footprint and no standard cell on it.  A
            value in (0, 1]: a partial one, where cells and clusters fill at most this share
            of the area (DEF ``+ PARTIAL`` percentage ÷ 100); macros may sit on it.

        Returns
        -------
        int
            The new blockage's index (the last one).

        Raises
        ------
        DesignError
            A rectangle without area or outside the die, or a density that is not a number
            in [0, 1]; nothing changes.  The placer honours the blockage on the next
            :meth:`place` or :meth:`refine`; :attr:`report` counts macros on it at once.
        """
        k = len(self.design.blockages)
        r = self._rect_in_die(rect, f"blockage {k}")
        md = checks.unit_density(max_density, f"blockage {k}")
        d = self.design
        self._constrain("add_blockage", ((r,), {"max_density": md} if md else {}),
                        blockages=np.vstack([d.blockages, [r]]),
                        blockage_max_density=np.append(d.blockage_max_density, md))
        return k

    @locked
    def move_blockage(self, index: int, x: float, y: float) -> tuple[float, float]:
        """Move blockage ``index`` so its lower-left corner is at ``(x, y)`` µm (size kept).

        Raises :class:`DesignError` when it would reach outside the die (nothing changes).
        Returns the corner taken.
        """
        k = self._blockage_index(index)
        d = self.design
        b = d.blockages[k]
        fx = checks.number(x, f"blockage {k}: x")
        fy = checks.number(y, f"blockage {k}: y")
        r = self._rect_in_die([fx, fy, fx + (b[2] - b[0]), fy + (b[3] - b[1])],
                              f"blockage {k}")
        bl = d.blockages.copy()
        bl[k] = r
        self._constrain("move_blockage", ((k, fx, fy),), blockages=bl,
                        blockage_max_density=d.blockage_max_density)
        return r[0], r[1]

    @locked
    def set_blockage_density(self, index: int, max_density: float) -> None:
        """Make blockage ``index`` full (``max_density=0``) or partial (in (0, 1])."""
        k = self._blockage_index(index)
        md = checks.unit_density(max_density, f"blockage {k}")
        dens = self.design.blockage_max_density.copy()
        dens[k] = md
        self._constrain("set_blockage_density", ((k, md),), blockage_max_density=dens)

    @locked
    def remove_blockage(self, index: int) -> None:
        """Delete blockage ``index`` (later ones move down by one index)."""
        k = self._blockage_index(index)
        d = self.design
        self._constrain("remove_blockage", ((k,),), blockages=np.delete(d.blockages, k, axis=0),
                        blockage_max_density=np.delete(d.blockage_max_density, k))

    def _check_halo_fits(self, idx: np.ndarray, h: list[float]) -> None:
        """Refuse a halo that, with its macro in the current orientation, is wider or taller
        than the core, naming the macro and the sides."""
        d, fp = self.design, self._fp
        w, hh = orient_size(d.width[idx], d.height[idx], fp.orient[idx])
        c = d.core
        for size, lo, hi, span, sides, dim in ((w, h[0], h[2], c[2] - c[0], "left + right",
                                                "width"),
                                               (hh, h[1], h[3], c[3] - c[1], "bottom + top",
                                                "height")):
            with np.errstate(over="ignore"):  # a halo of 1e308 is simply too large
                big = np.asarray(size) + lo + hi > span
            if big.any():
                j = int(np.flatnonzero(big)[0])
                raise DesignError(
                    f"block {d.names[int(idx[j])]!r}: halo {sides} ({lo:g} + {hi:g} µm) around "
                    f"its {float(np.asarray(size)[j]):g} µm {dim} exceeds the core {dim} "
                    f"{float(span):g} µm")

    @locked
    def set_halo(self, names: str | Iterable[str], halo) -> None:
        """Give macro(s) a halo (keep-out) of ``halo`` µm: one number for every side, or
        ``(left, bottom, right, top)`` of the placed footprint (one undo step).

        The halo keeps standard cells and other macros' footprints away (the halo rule in
        DEVELOPERS.md); the placer honours it on the next :meth:`place`, :meth:`refine` or
        :meth:`legalize`.  Raises :class:`DesignError` naming the macro for a negative or
        non-finite value, a halo that with its macro does not fit in the core, or a block
        that is not a macro; nothing changes then.
        """
        lst, idx = self._indices(names)
        kind = self.design.kind[idx]
        if (kind != MACRO).any():
            nm = lst[int(np.flatnonzero(kind != MACRO)[0])]
            raise DesignError(f"block {nm!r}: halos are set on macros only")
        where = f"block {lst[0]!r}" if lst else "set_halo"
        one = np.ndim(halo) == 0
        h = [checks.number(halo, f"{where}: halo")] * 4 if one else checks.number_list(
            halo, 4, f"{where}: halo", "a halo is one number or four (left, bottom, right, top)")
        if min(h) < 0:
            raise DesignError(f"{where}: halo {h} must not be negative")
        self._check_halo_fits(idx, h)
        hl = self.design.halo.copy()
        hl[idx] = h
        self._constrain("set_halo", ((names if isinstance(names, str) else lst,
                                      h[0] if one else h),), blocks=idx, halo=hl)

    # --- cell regions: fences and guides for groups of cells -----------------------------------
    @locked
    def add_region(self, name: str, rects, kind: str = "fence") -> None:
        """Add an empty cell region ``name`` over ``rects`` (one rectangle ``[xlo, ylo, xhi,
        yhi]`` or a list of non-overlapping ones, inside the die); :meth:`assign_group` gives
        it cells.  ``kind``: ``"fence"`` (members stay inside, other cells stay out) or
        ``"guide"`` (members pulled toward it, may spill).  One undo step; the placer honours
        it on the next :meth:`place` or :meth:`refine`.

        Raises :class:`DesignError` naming the region for a used or empty name, an unknown
        kind, or a rectangle without area, outside the die or overlapping another of it.
        """
        if not isinstance(name, str) or not name.strip():
            raise DesignError(f"region {name!r}: a region needs a non-empty text name")
        reg = self.design.regions
        if name in reg.names:
            raise DesignError(f"region {name!r}: there is already a region of that name")
        if kind not in REGION_TYPES:
            raise DesignError(f"region {name!r}: kind must be one of "
                              f"{', '.join(REGION_TYPES)}, got {kind!r}")
        many = isinstance(rects, (list, tuple, np.ndarray)) and len(rects) > 0 \
            and isinstance(rects[0], (list, tuple, np.ndarray))
        boxes = [self._rect_in_die(r, f"region {name!r}") for r in (rects if many
                                                                     else [rects])]
        regions = reg.to_list() + [{"name": name, "type": kind, "rects": boxes}]
        self._constrain("add_region", ((name, boxes if many else boxes[0]),
                                       {} if kind == "fence" else {"kind": kind}),
                        regions=CellRegions.build(self.design.num_blocks, regions, reg.member))

    @locked
    def remove_region(self, name: str) -> None:
        """Delete cell region ``name``; its cells belong to no region afterwards."""
        reg = self.design.regions
        k = reg.index(name)
        regions = reg.to_list()
        del regions[k]
        m = reg.member.copy()
        m[m == k] = -1
        m[m > k] -= 1
        self._constrain("remove_region", ((name,),), blocks=reg.members(k),
                        regions=CellRegions.build(self.design.num_blocks, regions, m))

    def _hierarchy_members(self, region, prefix, depth, separators) -> np.ndarray:
        """Cells and clusters of hierarchy group ``prefix`` at ``depth``."""
        from ..hierarchy import hierarchy_groups  # noqa: PLC0415
        d = self.design
        depth = checks.integer(depth, f"region {region!r}: depth", 0)
        if not isinstance(prefix, str) or not isinstance(separators, str):
            raise TypeError(f"region {region!r}: prefix and separators are text, got "
                            f"{prefix!r} and {separators!r}")
        g = hierarchy_groups(d.names, depth, separators)
        if prefix not in g.keys:
            raise DesignError(f"region {region!r}: no hierarchy group {prefix!r} at depth "
                              f"{depth}")
        soft = (d.kind == CELL) | (d.kind == CLUSTER)
        idx = np.flatnonzero((g.index == g.keys.index(prefix)) & soft)
        if not len(idx):
            raise DesignError(f"region {region!r}: hierarchy group {prefix!r} has no "
                              "standard cells or clusters")
        return idx

    @locked
    def assign_group(self, region: str | None, names: Iterable[str] | None = None, *,
                     prefix: str | None = None, depth: int = 1, separators: str = "/."):
        """Make a group of cells members of ``region`` (``None``: of no region).

        The group is either ``names`` (standard cells and clusters only), or the hierarchy
        group ``prefix`` at ``depth`` (:func:`floorwidget.hierarchy.hierarchy_groups` with
        ``separators``; ``""`` is the top level), whose cells and clusters are taken (its
        macros and terminals are not regions' business).  A block belongs to one region at
        most: assigning moves it.  One undo step.

        Returns
        -------
        int
            The number of blocks assigned.

        Raises
        ------
        DesignError
            Unknown region or block, a name that is not a cell or cluster, an unknown or
            cell-less hierarchy group, or both or neither of ``names`` and ``prefix``; nothing
            changes.
        """
        d = self.design
        reg = d.regions
        k = -1 if region is None else reg.index(region)
        if (names is None) == (prefix is None):
            raise DesignError(f"region {region!r}: give either names or a hierarchy prefix")
        if names is not None:
            lst, idx = self._indices(names)
            bad = ~((d.kind[idx] == CELL) | (d.kind[idx] == CLUSTER))
            if bad.any():
                raise DesignError(f"block {lst[int(np.flatnonzero(bad)[0])]!r}: only standard "
                                  "cells and clusters belong to cell regions")
            log = ((region, lst), {})
        else:
            idx = self._hierarchy_members(region, prefix, depth, separators)
            kw = {"prefix": prefix, "depth": int(depth)}
            if separators != "/.":
                kw["separators"] = separators
            log = ((region,), kw)
        m = reg.member.copy()
        m[idx] = k
        self._constrain("assign_group", log, blocks=idx,
                        regions=CellRegions(reg.names, reg.kind, reg.rect_start, reg.rects, m,
                                            reg.groups))
        return int(len(idx))
