"""DEF statements that both writers emit (:mod:`.def_writer` for a design of its own,
:mod:`.writeback` for one read from DEF), and the placement as written."""

from __future__ import annotations

import warnings

import numpy as np

from ...design import COORD_LIMIT, FIXED, REGION_TYPES, Design, DesignError, Floorplan
from ._common import LefDefWarning, _check_names, _dbu_ints, _percent


def placement_ints(design: Design, fp: Floorplan, path) -> tuple[np.ndarray, ...]:
    """``x, y`` (database units), orientation and status of every block as written: blocks
    fixed by the input (``design.initial``) stay where the input put them, whatever ``fp``
    says (a warning counts those ``fp`` moved).  Positions that would wrap the integers raise
    :class:`DesignError` naming the block."""
    with np.errstate(invalid="ignore"):
        far = ~((np.abs(fp.x) <= COORD_LIMIT) & (np.abs(fp.y) <= COORD_LIMIT))
    if far.any():  # beyond it the database-unit integers would wrap
        i = int(np.flatnonzero(far)[0])
        nm = design.names[i]
        raise DesignError(f"block {nm!r} at ({fp.x[i]:g}, {fp.y[i]:g}) µm is not finite "
                          f"or beyond ±{COORD_LIMIT:g} µm: cannot be written to DEF",
                          file=str(path), where=f"block {nm!r}")
    ini = design.initial
    held = ini.status == FIXED
    x, y = _dbu_ints(fp.x, design.dbu), _dbu_ints(fp.y, design.dbu)
    orient, status = fp.orient.copy(), fp.status.copy()
    if held.any():
        x0, y0 = _dbu_ints(ini.x[held], design.dbu), _dbu_ints(ini.y[held], design.dbu)
        moved = (x[held] != x0) | (y[held] != y0) | (orient[held] != ini.orient[held])
        if moved.any():
            i = int(np.flatnonzero(held)[np.flatnonzero(moved)[0]])
            warnings.warn(f"{path}: {int(moved.sum())} block(s) fixed in the input, e.g. "
                          f"{design.names[i]!r}, written at their input position, not where "
                          "the floorplan has them", LefDefWarning, stacklevel=3)
        x[held], y[held], orient[held], status[held] = x0, y0, ini.orient[held], FIXED
    return x, y, orient, status


def region_lines(d: Design, path) -> list[str]:
    """The ``REGIONS`` section of ``d`` (empty when it has none)."""
    reg = d.regions
    if not len(reg):
        return []
    _check_names(reg.names, "region", path)
    out = [f"REGIONS {len(reg)} ;"]
    for k, nm in enumerate(reg.names):
        pts = " ".join(f"( {r[0]} {r[1]} ) ( {r[2]} {r[3]} )"
                       for r in _dbu_ints(reg.rects_of(k), d.dbu).tolist())
        out.append(f"- {nm} {pts} + TYPE {REGION_TYPES[int(reg.kind[k])].upper()} ;")
    out.append("END REGIONS")
    return out


def group_statements(d: Design, path) -> list[str]:
    """One ``GROUPS`` statement per cell region of ``d``: its members and ``+ REGION``."""
    reg = d.regions
    _check_names(reg.groups, "group", path)
    out = []
    for k, g in enumerate(reg.groups):
        mem = [d.names[i] for i in reg.members(k)]
        out.append("\n".join([f"- {g}"] + ["   " + " ".join(mem[j:j + 8])
                                           for j in range(0, len(mem), 8)]
                             + [f"   + REGION {reg.names[k]} ;"]))
    return out


def blockage_statement(rect, max_density: float) -> str:
    """A placement blockage ``rect`` (database units), partial when ``max_density`` > 0."""
    part = f"+ PARTIAL {_percent(max_density)} " if max_density > 0 else ""
    return f"- PLACEMENT {part}RECT ( {rect[0]} {rect[1]} ) ( {rect[2]} {rect[3]} ) ;"
