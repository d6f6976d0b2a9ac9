"""The canvas's selection and connections: the selection outline, rings around found blocks,
the flyline source (selection or focus group) and the flyline bundles to macros, I/O buses and
the logic of each group (:class:`CanvasLinks`, a part of
:class:`~floorwidget.widget.canvas.Canvas`)."""

from __future__ import annotations

import numpy as np

from .. import hierarchy as hier
from ..design import CELL, CLUSTER, MACRO, TERMINAL
from . import geometry as geo

#: most blocks ringed after a search by name
FOUND_LIMIT = 200
#: most flyline bundles drawn per kind (direct, through one cell): the heaviest ones
BUNDLE_LIMIT = 100


class CanvasLinks:
    """Selection, focus, found blocks and flylines."""

    def select(self, blocks) -> None:
        """Highlight ``blocks`` (indices) and show the flylines of their nets."""
        self.selected = np.unique(np.asarray(blocks, dtype=np.intp))
        unfocus = self.focus_group is not None
        self.focus_group = None
        self._draw_selection()
        self._draw_flylines()
        if unfocus and self.colour_groups:  # the logic picture showed the focus group alone
            self._draw_cells()

    def focus(self, group: int | None) -> None:
        """Make hierarchy group ``group`` the flyline source and select its macros.

        With colours by group on, the logic picture then shows that group's logic alone.
        ``None`` clears it (and the selection).
        """
        if group is None:
            self.select([])
            return
        g = int(group)
        if not 0 <= g < len(self.groups):
            raise IndexError(f"no hierarchy group {group!r} (there are {len(self.groups)})")
        mem = self.groups.members(g)
        self.selected = mem[self.design.kind[mem] == MACRO]
        self.focus_group = g
        self._draw_selection()
        self._draw_flylines()
        if self.colour_groups:
            self._draw_cells()

    def show_through(self, on: bool = True) -> None:
        """Also draw the flyline bundles reached through one standard cell or soft cluster."""
        self.through_logic = bool(on)
        if self.interactive:
            self._draw_flylines()

    def mark_found(self, blocks) -> None:
        """Ring the centres of ``blocks`` (at most :data:`FOUND_LIMIT`; none clears)."""
        mk = self.marks.get("found")
        if mk is None:
            return
        blocks = np.asarray(blocks, dtype=np.intp)[:FOUND_LIMIT]
        self.found = blocks
        if blocks.size == 0:
            mk.visible = False
            return
        cx, cy = self.fp.centres()
        with mk.hold_sync():
            mk.x, mk.y = cx[blocks], cy[blocks]
            mk.visible = True

    def source_blocks(self) -> np.ndarray:
        """The flyline source: the focus group's blocks, else the selection."""
        if self.focus_group is not None:
            return self.groups.members(self.focus_group)
        return self.selected

    def _draw_selection(self):
        marks = (self.marks["selection_under"], self.marks["selection"])
        if self.selected.size == 0:
            for mk in marks:
                mk.visible = False
            return
        x, y = geo.rect_rows(self.fp.rects()[self.selected])
        for mk in marks:
            with mk.hold_sync():
                mk.x, mk.y = x, y
                mk.visible = True

    @property
    def buses(self) -> hier.Groups:
        """The I/O terminals grouped into buses (:func:`floorwidget.hierarchy.bus_groups`)."""
        if self._buses is None:
            d = self.design
            self._buses = hier.bus_groups([d.names[i] for i in np.flatnonzero(d.kind == TERMINAL)])
        return self._buses

    def _targets(self) -> np.ndarray:
        """Flyline target of each block: the macro itself, its I/O bus, its group's logic."""
        if self._target_of is None:
            d = self.design
            n = d.num_blocks
            t = np.full(n, -1, np.intp)
            mac = d.kind == MACRO
            t[mac] = np.flatnonzero(mac)
            term = d.kind == TERMINAL
            t[term] = n + self.buses.index
            logic = (d.kind == CELL) | (d.kind == CLUSTER)
            t[logic] = n + len(self.buses) + self.groups.index[logic]
            self._target_of = t
        return self._target_of

    def target_label(self, t: int) -> str:
        """What flyline target ``t`` is: a macro's name, an I/O bus or a group's logic."""
        n = self.design.num_blocks
        if t < n:
            return self.design.names[t]
        if t < n + len(self.buses):
            return f"I/O {self.buses.keys[t - n]}"
        return f"logic of {self.groups.label(t - n - len(self.buses))}"

    def bundle_data(self, through: bool = False):
        """Flyline bundles of :meth:`source_blocks` (see :func:`geometry.net_bundles`).

        Targets are the other macros (each its own bundle), the I/O buses and the logic of each
        hierarchy group (:meth:`target_label` names them).  ``through=True`` gives the bundles
        reached through one standard cell or soft cluster instead.  Kept per source: the
        bundles depend on the netlist only.
        """
        src = self.source_blocks()
        key = (src.tobytes(), bool(through))
        cache = self._bundle_cache
        if key not in cache:
            if len(cache) > 8:
                cache.clear()
            d = self.design
            mask = ((d.kind == CELL) | (d.kind == CLUSTER)) if through else None
            cache[key] = geo.net_bundles(d, src, self._targets(), through=mask,
                                         limit=BUNDLE_LIMIT)
        return cache[key]

    def _draw_flylines(self):
        src = self.source_blocks()
        cx, cy = self.fp.centres()
        for name, through in (("flylines", False), ("flylines_through", True)):
            mk = self.marks[name]
            if src.size == 0 or (through and not self.through_logic):
                mk.visible = False
                continue
            tg, cnt, pt, pb = self.bundle_data(through)
            if tg.size == 0:
                mk.visible = False
                continue
            # each bundle ends in the middle of the blocks of its target that it reaches
            u, inv = np.unique(pt, return_inverse=True)
            k = np.bincount(inv, minlength=len(u))
            ex = np.bincount(inv, weights=cx[pb], minlength=len(u)) / k
            ey = np.bincount(inv, weights=cy[pb], minlength=len(u)) / k
            at = np.searchsorted(u, tg)
            x0, y0 = float(cx[src].mean()), float(cy[src].mean())
            # width in pixels grows with the number of nets in the bundle, converted to µm
            width_px = 1.0 + 1.5 * np.log2(cnt.astype(np.float64))
            xs, ys = geo.bundle_rows(x0, y0, ex[at], ey[at], width_px / self.px_per_um)
            with mk.hold_sync():
                mk.x, mk.y = xs, ys
                if not through and len(mk.fill_colors) != len(tg):  # lists validate slowly
                    mk.fill_colors = [self.ui["flyline"]] * len(tg)
                    mk.fill_opacities = [0.45] * len(tg)
                mk.visible = True
