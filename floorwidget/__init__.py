"""floorwidget: Jupyter-native macro floorplanning.

A to-scale canvas where macros are dragged, pinned and flipped, and a quadratic placer that
reruns around those hand decisions.  The figures it reports (HPWL, density overflow, RUDY
congestion) are early-floorplanning estimates; sign-off belongs to the full implementation
flow's timing, power and physical checks.

>>> import floorwidget as fw
>>> design = fw.load("demo_data/lumen_aon.json")          # doctest: +SKIP
>>> fp = fw.place(design, target_density=0.8, seed=0)      # doctest: +SKIP
>>> fw.evaluate(design, fp)["hpwl"]                         # doctest: +SKIP

The core (design, formats, metrics, placer, session, explore, cli) never imports ipywidgets or
bqplot; :class:`FloorplanWidget` loads them on first use.
"""

from __future__ import annotations

from .design import ORIENTATIONS, Design, DesignError, Floorplan
from .formats import load as _load_file
from .formats import save

__version__ = "0.1.0"

__all__ = [
    "ORIENTATIONS",
    "Design",
    "DesignError",
    "Floorplan",
    "FloorplanWidget",
    "Session",
    "evaluate",
    "explore",
    "load",
    "place",
    "refine",
    "render",
    "save",
]


def load(path, lef=None, **options) -> Design:
    """Read a design by its suffix (:func:`floorwidget.formats.load`), or a structural Verilog
    netlist (``.v``, ``.v.gz``) with its LEF libraries, given its first floorplan
    (:func:`floorwidget.floorplan.init.load_netlist`: ``top=``, ``utilization=`` (default 0.7),
    ``aspect=``, ``margin=``, ``die=``).

    >>> d = load("blk.v.gz", lef=["tech.lef", "cells.lef"], utilization=0.6)  # doctest: +SKIP
    """
    from .formats._io import format_suffix

    if format_suffix(path) == ".v":
        from .floorplan.init import load_netlist

        return load_netlist(path, lef, **options)
    return _load_file(path, lef, **options)


_LAZY = {
    "evaluate": ("floorwidget.metrics", "evaluate"),
    "place": ("floorwidget.placer", "place"),
    "refine": ("floorwidget.placer", "refine"),
    "render": ("floorwidget.render", "render"),
    "Session": ("floorwidget.session", "Session"),
    "FloorplanWidget": ("floorwidget.widget", "FloorplanWidget"),
    "explore": ("floorwidget.explore", None),
}


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        module, attr = _LAZY[name]
        mod = importlib.import_module(module)
        value = mod if attr is None else getattr(mod, attr)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'floorwidget' has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | set(__all__))
