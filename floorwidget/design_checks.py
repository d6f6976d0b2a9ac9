"""Validation of a :class:`~floorwidget.design.Design`: every problem as ``(object, message)``,
the object named as :attr:`DesignError.where` names it (a block, net, row, blockage, region, the
die or the grid).  :meth:`Design.problems` and :meth:`Design.validate` report them; a derived
design (:meth:`Design.derive`) is checked by :func:`constraint_problems` alone.

The functions take the design as ``self`` (they are its methods' bodies) and never change it.
"""

from __future__ import annotations

from collections import Counter

import numpy as np

from .codes import CELL, COORD_LIMIT, MACRO, MAX_SITES, TERMINAL

__all__ = ["constraint_problems", "design_problems"]


def design_problems(self) -> list[tuple[str, str]]:
    """``(object, message)`` of every problem, the object as ``DesignError.where`` names it."""
    out: list[tuple[str, str]] = []
    n, m = self.num_blocks, self.num_nets
    lim = COORD_LIMIT

    def add(where: str, msg: str) -> None:
        out.append((where, msg))

    def some(mask, what, names=self.names, limit=3, noun="block"):
        idx = np.flatnonzero(mask)
        if len(idx):
            shown = ", ".join(repr(names[i]) for i in idx[:limit])
            more = f" and {len(idx) - limit} more" if len(idx) > limit else ""
            add(f"{noun} {names[idx[0]]!r}", f"{what}: {shown}{more}")

    def big(a) -> np.ndarray:
        """Rows of ``a`` with a value that is not finite or beyond the coordinate limit."""
        a = np.asarray(a, dtype=np.float64)
        with np.errstate(invalid="ignore"):
            bad = ~(np.abs(a) <= lim)
        return bad.any(axis=1) if a.ndim == 2 else bad

    d = self.die
    if big(d).any() or not (d[2] > d[0] and d[3] > d[1]):
        add("die", f"die {d.tolist()} is not a rectangle of positive size within "
                   f"±{lim:g} µm")
    if len(set(self.names)) != n:
        dup = [k for k, c in Counter(self.names).items() if c > 1]
        add(f"block {dup[0]!r}", f"duplicate block names: {', '.join(map(repr, dup[:3]))}"
            + (f" and {len(dup) - 3} more" if len(dup) > 3 else ""))
    if len(set(self.net_names)) != m:
        dup = [k for k, c in Counter(self.net_names).items() if c > 1]
        add(f"net {dup[0]!r}", f"duplicate net names: {', '.join(map(repr, dup[:3]))}")
    if ((self.kind < 0) | (self.kind > TERMINAL)).any():
        some((self.kind < 0) | (self.kind > TERMINAL), "unknown block kind")
    sized = self.kind != TERMINAL
    bad_size = ~(np.isfinite(self.width) & np.isfinite(self.height))
    bad_size |= sized & ((self.width <= 0) | (self.height <= 0))
    bad_size |= (self.width < 0) | (self.height < 0)
    some(bad_size, "non-positive or non-finite size")
    some(~bad_size & (big(self.width) | big(self.height)), f"size beyond {lim:g} µm")
    some(self.orient_allowed == 0, "no allowed orientation")
    # a macro larger than the die in every allowed orientation
    dw, dh = d[2] - d[0], d[3] - d[1]
    fits_n = (self.width <= dw) & (self.height <= dh)
    fits_r = (self.height <= dw) & (self.width <= dh)
    rot_ok = (self.orient_allowed & 0b11001100) != 0
    some((self.kind == MACRO) & ~(fits_n | (rot_ok & fits_r)), "macro larger than the die")
    # nets
    ns = self.net_start
    if len(ns) == 0 or ns[0] != 0 or ns[-1] != self.num_pins or (np.diff(ns) < 0).any():
        add("nets", "net_start is not a valid CSR index over the pins")
        return out
    if len(self.pin_dx) != self.num_pins or len(self.pin_dy) != self.num_pins:
        add("nets", "pin offset arrays do not match the number of pins")
        return out
    some(self.net_degree == 0, "empty net", names=self.net_names, noun="net")
    some(~np.isfinite(self.net_weight) | (self.net_weight < 0) | (self.net_weight > lim),
         "negative, non-finite or huge net weight", names=self.net_names, noun="net")
    unknown = (self.pin_block < 0) | (self.pin_block >= n)
    if unknown.any():
        some(np.isin(np.arange(m), self.pin_net[unknown]), "pins on unknown blocks",
             names=self.net_names, noun="net")
    else:
        b = self.pin_block
        tol = 1e-6 + 1e-9 * np.maximum(self.width[b], self.height[b])
        outside = big(self.pin_dx) | big(self.pin_dy)
        with np.errstate(invalid="ignore"):
            outside |= (self.kind[b] != TERMINAL) & (
                (np.abs(self.pin_dx) > self.width[b] / 2 + tol)
                | (np.abs(self.pin_dy) > self.height[b] / 2 + tol))
        if outside.any():
            blocks = np.zeros(n, bool)
            blocks[b[outside]] = True
            some(blocks, "pin outside its block")
    # rows and grid
    if len(self.row_x):
        bad = big(self.row_x) | big(self.row_y) | big(self.row_height) \
            | big(self.row_site_width) | (self.row_height <= 0) | (self.row_site_width <= 0) \
            | (self.row_num_sites <= 0) | (self.row_num_sites > MAX_SITES)
        if bad.any():
            r = int(np.flatnonzero(bad)[0])
            add(f"row {r}", f"row {r} (and {int(bad.sum()) - 1} more): origin or height, "
                            f"site width or site count (1..{MAX_SITES}) out of range")
        else:
            c = self.core
            xhi = self.row_x + self.row_site_width * self.row_num_sites
            yhi = self.row_y + self.row_height
            e = 1e-6
            out_die = (self.row_x < d[0] - e) | (self.row_y < d[1] - e) | (xhi > d[2] + e) \
                | (yhi > d[3] + e)
            if out_die.any():
                r = int(np.flatnonzero(out_die)[0])
                add(f"row {r}", f"row {r} (and {int(out_die.sum()) - 1} more) reaches "
                                f"outside the die (core {c.tolist()}, die {d.tolist()})")
    if big(self.grid_pitch).any() or not (self.grid_pitch > 0).all() \
            or big(self.grid_origin).any():
        add("grid", f"grid pitch {self.grid_pitch.tolist()} must be positive and origin "
                    f"{self.grid_origin.tolist()} finite")
    out.extend(constraint_problems(self))
    return out


def constraint_problems(self) -> list[tuple[str, str]]:
    """``(object, message)`` for halos, blockages and their densities, and cell regions
    (what :meth:`derive` changes), each naming the object."""
    out: list[tuple[str, str]] = self.regions.problems(self)
    with np.errstate(invalid="ignore"):
        hl = self.halo
        bad = ~(np.abs(hl) <= COORD_LIMIT).all(axis=1) | (hl < 0).any(axis=1)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            out.append((f"block {self.names[i]!r}",
                        f"block {self.names[i]!r}: halo {hl[i].tolist()} must be four "
                        "finite numbers >= 0 (left, bottom, right, top)"))
        cell_halo = (self.kind == CELL) & (hl != 0).any(axis=1)
        if cell_halo.any():
            i = int(np.flatnonzero(cell_halo)[0])
            out.append((f"block {self.names[i]!r}",
                        f"block {self.names[i]!r}: halo {hl[i].tolist()} on a standard "
                        f"cell (a halo keeps cells away from a macro; "
                        f"{int(cell_halo.sum())} cell(s) have one)"))
        bl = self.blockages
        bad = ~(np.abs(bl) <= COORD_LIMIT).all(axis=1) \
            | ~((bl[:, 2] > bl[:, 0]) & (bl[:, 3] > bl[:, 1]))
        d = self.die
        tol = 1e-6 + 1e-9 * np.abs(d).max(initial=0.0)
        outside = ~bad & ((bl[:, 0] < d[0] - tol) | (bl[:, 1] < d[1] - tol)
                          | (bl[:, 2] > d[2] + tol) | (bl[:, 3] > d[3] + tol))
        if bad.any():
            k = int(np.flatnonzero(bad)[0])
            out.append((f"blockage {k}", f"placement blockage {k} {bl[k].tolist()} is not "
                                         "a finite rectangle of positive size"))
        elif outside.any():
            k = int(np.flatnonzero(outside)[0])
            out.append((f"blockage {k}", f"placement blockage {k} {bl[k].tolist()} "
                                         f"reaches outside the die {d.tolist()} "
                                         f"({int(outside.sum())} blockage(s) do)"))
        md = self.blockage_max_density
        bad = ~((md >= 0.0) & (md <= 1.0))
        if bad.any():
            k = int(np.flatnonzero(bad)[0])
            out.append((f"blockage {k}", f"placement blockage {k}: maximum density "
                                         f"{float(md[k])!r} is not in [0, 1]"))
    return out
