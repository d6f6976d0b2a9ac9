"""What a session is, as plain data: :class:`SessionState` (what session files and replay
scripts are written from and read into), :class:`Alternative` and :class:`ChangeEvent`.

The session-file reader and writer and the script writer work on a :class:`SessionState`
only; :meth:`Session.state` hands one out and :meth:`Session.from_state` builds a session from
one, so neither side reaches into the other's fields.
"""

from __future__ import annotations

import datetime as _dt
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..design import Design, Floorplan
from .history import Step, freeze

__all__ = ["Alternative", "ChangeEvent", "SessionState", "SESSION_MAX_PINS", "cluster",
           "is_large", "now"]

#: A clustered session keeps coarsening while its clustered netlist has more pins than this
#: (a refine on it costs about 0.3 s per 700,000 pins: DEVELOPERS.md).
SESSION_MAX_PINS = 1_000_000


@dataclass(frozen=True)
class ChangeEvent:
    """What an observer registered with :meth:`Session.on_change` receives.

    Attributes
    ----------
    action : str
        The name of the action (one of :data:`floorwidget.session.actions.ACTIONS`:
        ``"move"``, ``"pin"``, ..., ``"add_region"``, ``"place"``, ``"restore"``, ...), or
        ``"undo"``, ``"redo"``, or the label of a :meth:`Session.batch`.
    blocks : ndarray of int or None
        Indices of the blocks whose position, orientation or status may have changed
        (sorted); ``None`` means "assume all"; an empty array means none did (e.g. a snapshot).
    floorplan : Floorplan
        The new current floorplan (read-only).  ``floorplan.design`` carries the constraints
        in force (blockages, halos, cell regions); it is another object after a constraint
        edit.
    label : str or None
        The snapshot / alternative label for ``snapshot``, ``add_alternative`` and ``restore``.
    """

    action: str
    blocks: np.ndarray | None
    floorplan: Floorplan
    label: str | None = None


@dataclass(frozen=True)
class Alternative:
    """A named floorplan kept by :meth:`Session.snapshot` or :meth:`Session.add_alternative`."""

    label: str
    floorplan: Floorplan
    report: Mapping[str, Any]
    note: str = ""
    time: str = ""
    params: Mapping[str, Any] | None = None


@dataclass
class SessionState:
    """Everything a session file holds, as plain data.

    Attributes
    ----------
    full_design : Design
        The design as read.
    full_initial : Floorplan
        Its starting floorplan (what a replay script passes to ``Session``).
    clustering : Clustering or None
        The levels of a clustered session (``base`` is then the coarsest).
    base : Design
        The design edited, as read (constraints edited later live on derived designs).
    target_density : float
    initial, current : Floorplan
        Of ``base`` (or a design derived from it).
    alternatives : list of Alternative
    log : list of dict
        The action log (see :mod:`floorwidget.session.actions`).
    undo, redo : list of Step
        The history, oldest first; ``state_id`` is the current floorplan's id in it.
    """

    full_design: Design
    full_initial: Floorplan
    clustering: Any
    base: Design
    target_density: float
    initial: Floorplan
    current: Floorplan
    alternatives: list[Alternative] = field(default_factory=list)
    log: list[dict] = field(default_factory=list)
    undo: list[Step] = field(default_factory=list)
    redo: list[Step] = field(default_factory=list)
    state_id: int = 0

    @property
    def clustered(self) -> bool:
        return self.clustering is not None

    @property
    def source(self) -> str | None:
        """Absolute path of the design file (``None``: not read from a file)."""
        src = self.full_design.source
        return os.path.abspath(src) if src else None

    @property
    def lef(self) -> list[str]:
        """Absolute paths of the LEF libraries the design was read with."""
        return [os.path.abspath(p) for p in self.full_design.lef_files]

    @classmethod
    def start(cls, design: Design, fp: Floorplan, target_density: float,
              clustered: bool) -> SessionState:
        """The state of a new session of ``design`` from ``fp`` (clustered or not)."""
        full = freeze(fp.copy())
        clustering = cluster(design, fp) if clustered else None
        base = design if clustering is None else clustering.coarsest
        initial = freeze((fp if clustering is None else base.initial).copy())
        return cls(design, full, clustering, base, target_density, initial, initial)


def is_large(design: Design, fp: Floorplan) -> bool:
    """Whether a session works on the clusters: where ``place`` would go multilevel
    (:func:`floorwidget.placer.flow.use_multilevel`; a flat refine takes seconds there)."""
    from ..placer.flow import use_multilevel  # noqa: PLC0415
    return use_multilevel(design, fp, "auto")


def cluster(design: Design, fp: Floorplan):
    """The clustering a clustered session of ``design`` edits (deterministic: seed 0)."""
    from ..placer.coarsen import coarsen  # noqa: PLC0415
    from ..placer.multilevel import top_blocks  # noqa: PLC0415
    return coarsen(design, fp, target_blocks=top_blocks(design), seed=0,
                   max_pins=SESSION_MAX_PINS)


def now() -> str:
    """The time now, UTC, ISO 8601 to the second."""
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")
