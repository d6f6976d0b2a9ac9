"""What a design read from DEF keeps of its source, so that writing it back changes only what
the tool changed (the write-back contract; :mod:`.writeback` does the writing).

The source is kept as its text, unparsed: every section the reader skips (``TRACKS``,
``GCELLGRID``, ``VIAS``, ``SPECIALNETS``, ``NONDEFAULTRULES``, ``PROPERTYDEFINITIONS``, ...) and
every statement or option it does not model (pin ``DIRECTION``/``USE``/``LAYER``/ports,
component and net properties, single-pin nets, row names, ``UNPLACED``, ``COVER``) goes back
out as it came in.  Beside the text: where the sections are, and the placement and constraints
as read, against which a floorplan is compared
when it is written.  On ariane136 (145,776 components, a 48 MB DEF) this adds the 48 MB of the
text and about 9 MB of arrays to a design (``benchmarks/bench_def_write.py`` measures it).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ...design import CellRegions, Design


@dataclass(eq=False)
class DefSource:
    """The DEF a design was read from, and the state it described.

    Attributes
    ----------
    text : str
        The file's text as read (comments included).
    spans : dict
        Section keyword -> ``(keyword, body, END keyword, past END)`` positions in ``text``,
        for ``COMPONENTS``, ``PINS``, ``NETS``, ``BLOCKAGES``, ``REGIONS``, ``GROUPS`` and
        ``PROPERTYDEFINITIONS`` when present.
    units_end, design_end : int
        Just past the ``UNITS`` statement; the start of ``END DESIGN``.
    n_comps : int
        Blocks ``0 .. n_comps-1`` are the ``COMPONENTS`` in order, the rest the ``PINS``.
    x, y, orient, status : arrays
        The placement as read, per block: lower-left (µm), orientation and status codes
        (``UNPLACED`` components are at the core centre, as the reader puts them).
    pin_rect : (n_pins, 4) array
        The first ``LAYER`` shape of each I/O pin in its own frame, database units.
    halo, blockages, blockage_max_density, regions
        The constraints as read.
    notches : int
        How many of ``blockages`` (the first ones) come from a rectilinear ``DIEAREA``.
    power : PowerShapes or None
        The power grid as read from ``SPECIALNETS``.
    power_stmts : list
        ``(start, end)`` in ``text`` of each power or ground ``SPECIALNETS`` statement.
    blockage_stmts : list
        Per ``BLOCKAGES`` statement: ``(first, count)`` of its rectangles in ``blockages``
        for a placement blockage, ``None`` for any other.
    """

    text: str
    path: str
    dbu: int
    spans: dict
    units_end: int
    design_end: int
    n_comps: int
    x: np.ndarray
    y: np.ndarray
    orient: np.ndarray
    status: np.ndarray
    pin_rect: np.ndarray
    halo: np.ndarray
    blockages: np.ndarray
    blockage_max_density: np.ndarray
    regions: CellRegions
    notches: int
    blockage_stmts: list
    power: object = None
    power_stmts: list = field(default_factory=list)

    @classmethod
    def keep(cls, text: str, reader, design: Design) -> DefSource:
        """The source of ``design``, read from ``text`` by ``reader`` (a ``_Def``)."""
        dbu = design.dbu
        ini = design.initial
        pins = reader.pins or []
        rects = [r if r is not None else (0.0, 0.0, 0.0, 0.0) for _, r, _ in pins]
        return cls(
            text=text, path=reader.path, dbu=dbu, spans=dict(reader.spans),
            units_end=reader.units_end, design_end=reader.design_end,
            n_comps=design.num_blocks - len(pins),
            x=ini.x.copy(), y=ini.y.copy(),
            orient=ini.orient.copy(), status=ini.status.copy(),
            pin_rect=np.array(rects, dtype=np.float64).reshape(-1, 4),
            halo=design.halo.copy(), blockages=design.blockages.copy(),
            blockage_max_density=design.blockage_max_density.copy(), regions=design.regions,
            notches=reader.notches, blockage_stmts=list(reader.blockage_stmts),
            power=design.power,
            power_stmts=list(reader.power["stmts"]) if reader.power else [])

    @property
    def nbytes(self) -> int:
        """Memory held beyond the design's own arrays (the text and the arrays above)."""
        arrays = (self.x, self.y, self.orient, self.status, self.pin_rect, self.halo,
                  self.blockages, self.blockage_max_density)
        per_char = 1 if self.text.isascii() else 4
        return len(self.text) * per_char + sum(a.nbytes for a in arrays)
