"""Which macros a placer step may touch."""

from __future__ import annotations

import numpy as np

from ..design import MACRO, MOVABLE, Design, Floorplan


def movable_macros(design: Design, fp: Floorplan, macros=None) -> np.ndarray:
    """Mask of the movable macros, limited to ``macros`` (names, indices or a mask) if given."""
    base = (design.kind == MACRO) & (fp.status == MOVABLE)
    if macros is None:
        return base
    sel = np.zeros(design.num_blocks, bool)
    arr = np.asarray(list(macros) if not isinstance(macros, np.ndarray) else macros)
    if arr.dtype == bool:
        sel[:] = arr.reshape(design.num_blocks)
    elif arr.dtype.kind in "iu":
        sel[arr.astype(np.intp)] = True
    else:
        sel[[design.block(str(nm)) for nm in arr]] = True
    return base & sel
