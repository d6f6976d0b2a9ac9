"""Readers and writers.  :func:`load` and :func:`save` pick the format by file extension.

=========  ====================================  ==========================================
suffix     format                                module
=========  ====================================  ==========================================
``.json``  native, versioned JSON (µm)           :mod:`floorwidget.formats.native_json`
``.aux``   Bookshelf (.nodes .nets .pl .scl)     :mod:`floorwidget.formats.bookshelf`
``.pl``    Bookshelf placement (write only)      :mod:`floorwidget.formats.bookshelf`
``.def``   DEF (+ LEF libraries)                 :mod:`floorwidget.formats.lefdef`
=========  ====================================  ==========================================

GSRC floorplanning sets are read from their ``.blocks`` or ``.hardblocks`` file (with ``.nets``
and ``.pl`` beside it): :mod:`floorwidget.formats.gsrc`.

Every input may be compressed: ``x.def.gz``, ``x.json.bz2``, an ``.aux`` naming ``.nodes.gz``
and so on (the suffix before ``.gz``/``.bz2`` decides the format; decompression streams into
memory, no temporary copy).  ``.json``, ``.pl`` and ``.def`` outputs are compressed when OUT
ends in ``.gz`` or ``.bz2``.  Writers are all or nothing, also for sets of files
(:func:`floorwidget.formats._io.write_files`).
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence
from pathlib import Path

from ..design import Design, DesignError, Floorplan
from ._io import COMPRESSED, format_suffix

__all__ = ["load", "save", "READ_SUFFIXES", "WRITE_SUFFIXES"]

READ_SUFFIXES = (".json", ".aux", ".def", ".blocks", ".hardblocks")
WRITE_SUFFIXES = (".json", ".aux", ".pl", ".def")


def _lefs(lef) -> list[str]:
    if lef is None:
        return []
    if isinstance(lef, (str, Path)):
        return [str(lef)]
    return [str(p) for p in lef]


def load(path, lef: str | Sequence[str] | None = None, *, whitespace: float | None = None,
         aspect: float | None = None) -> Design:
    """Read a design: ``.json`` native, ``.aux`` Bookshelf, ``.def`` (with ``lef=`` libraries),
    ``.blocks``/``.hardblocks`` GSRC (``whitespace`` and ``aspect`` derive its outline; see
    :mod:`floorwidget.formats.gsrc`).

    Parameters
    ----------
    path : path
        The design file, optionally compressed (``.gz``, ``.bz2``).
    lef : path or list of paths, optional
        LEF libraries for a ``.def`` (technology LEF first), each optionally compressed.
    whitespace, aspect : float, optional
        GSRC sets only: derive the outline from the block area (see
        :func:`floorwidget.formats.gsrc.read_gsrc`).

    Raises
    ------
    DesignError
        Naming the file and line of the first bad statement (or every validation problem).
    """
    p = Path(path)
    suffix = format_suffix(p)
    if suffix == ".v":
        raise DesignError("a Verilog netlist has no floorplan yet: read it with "
                          "floorwidget.load(path, lef=[...], utilization=...)", file=str(p))
    if lef is not None and _lefs(lef) and suffix != ".def":
        raise DesignError(f"lef= applies to .def designs only, not {suffix or 'this file'}",
                          file=str(p))
    if suffix in (".blocks", ".hardblocks"):
        from .gsrc import read_gsrc
        return read_gsrc(p, whitespace=whitespace, aspect=aspect)
    if whitespace is not None or aspect is not None:
        raise DesignError("whitespace and aspect apply only to GSRC .blocks/.hardblocks sets",
                          file=str(p))
    if suffix == ".json":
        from .native_json import read_json
        return read_json(p)
    if suffix == ".aux":
        from .bookshelf import read_aux
        return read_aux(p)
    if suffix == ".def":
        from .lefdef import read_def
        return read_def(p, lef=_lefs(lef))
    raise DesignError(f"unknown design format {suffix or '(no suffix)'!r}; "
                      f"expected one of {', '.join(READ_SUFFIXES)}", file=str(p))


def save(design: Design, floorplan: Floorplan | None, path) -> None:
    """Write ``floorplan`` (default: the design's initial one) by extension, all or nothing.

    ``.json``, ``.pl`` and ``.def`` are written compressed when ``path`` ends in ``.gz`` or
    ``.bz2``.  ``.aux`` writes a whole Bookshelf set beside it.  ``.def`` also writes LEF
    abstracts to ``y.lef`` beside ``y.def`` when the design was not read with LEF libraries
    (``design.lef_files`` empty), so that the pair reads back with ``load("y.def")``.
    """
    p = Path(path)
    fp = design.initial if floorplan is None else floorplan
    if fp.design is not design:
        raise DesignError("the floorplan belongs to another design", file=str(p))
    suffix = format_suffix(p)
    if suffix == ".aux" and p.suffix.lower() in COMPRESSED:
        raise DesignError("a Bookshelf set is written uncompressed; name the .aux without "
                          f"{p.suffix}", file=str(p))
    if design.power is not None and design.power.spec is not None \
            and suffix in (".json", ".aux", ".pl"):  # (a grid set in the tool, not read)
        warnings.warn(f"{p}: the power grid is not stored in {suffix} files; write DEF "
                      "(SPECIALNETS) or save the session to keep it", UserWarning, stacklevel=2)
    if suffix == ".json":
        from .native_json import write_json
        return write_json(design, fp, p)
    if suffix == ".aux":
        from .bookshelf import write_aux
        write_aux(design, fp, p)
        return None
    if suffix == ".pl":
        from .bookshelf import write_pl
        return write_pl(design, fp, p)
    if suffix == ".def":
        from .lefdef import write_def
        return write_def(design, fp, p)
    raise DesignError(f"unknown output format {suffix or '(no suffix)'!r}; "
                      f"expected one of {', '.join(WRITE_SUFFIXES)}", file=str(p))
