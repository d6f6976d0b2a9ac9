"""The notebook side: a to-scale bqplot canvas and an ipywidgets panel over a Session.

:class:`FloorplanWidget` is the editable view; :func:`thumbnail` draws a static floorplan with
the same canvas code; ``ParetoView`` (from :mod:`floorwidget.widget.pareto`) is loaded on first
use.  Only this package imports ipywidgets and bqplot.
"""

from __future__ import annotations

from .app import CAUTION, FloorplanWidget
from .canvas import Canvas, thumbnail

__all__ = ["CAUTION", "Canvas", "FloorplanWidget", "ParetoView", "thumbnail"]


def __getattr__(name: str):
    if name == "ParetoView":
        from .pareto import ParetoView

        globals()[name] = ParetoView
        return ParetoView
    raise AttributeError(f"module 'floorwidget.widget' has no attribute {name!r}")
