"""Which die edge an I/O pin sits on and which routing layer reaches it there: one rule for
the pin assignment (:mod:`floorwidget.floorplan.pins`) and the DEF writer."""

from __future__ import annotations

import numpy as np

EDGES = ("left", "bottom", "right", "top")
EDGE_DIR = ("H", "V", "H", "V")  # the track direction that crosses each edge


def nearest_edge(die, cx, cy) -> np.ndarray:
    """Index into :data:`EDGES` of the die edge nearest each centre ``(cx, cy)``."""
    cx = np.asarray(cx, dtype=np.float64)
    cy = np.asarray(cy, dtype=np.float64)
    dist = np.stack([cx - die[0], cy - die[1], die[2] - cx, die[3] - cy], axis=-1)
    return np.argmin(dist, axis=-1)


def edge_layers(routing_layers) -> tuple[str | None, str | None]:
    """The layers ``(H, V)`` a pin without a layer of its own takes: the first of each
    direction above the lowest routing layer (the lowest is the cells' own), or the lowest
    when it is the only one of its direction; ``None`` where the library has none.

    ``routing_layers``: ``(name, "H" | "V", pitch)`` from the bottom up; layers without a
    pitch are left out."""
    layers = [(n, d) for n, d, p in routing_layers if p > 0]
    above = layers[1:] or layers
    return tuple(next((n for n, d in above + layers if d == want), None)  # type: ignore
                 for want in ("H", "V"))
