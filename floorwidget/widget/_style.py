"""Adapter from :mod:`floorwidget.style` (the project's one palette) to what the canvas needs.

Colours come from the Okabe–Ito colour-blind-safe palette (Okabe, Ito, "Color Universal
Design", 2008); status is shown by fill colour *and* fill opacity *and* outline dash/width so it
reads in greyscale.  The mapping itself lives in :mod:`floorwidget.style`; this module only
reshapes it into per-status dictionaries with keys ``fill, opacity, stroke, dash, width``.
"""

from __future__ import annotations

from functools import lru_cache

# The published Okabe–Ito colours, used only until/unless floorwidget.style provides them.
_OI = {
    "black": "#000000", "orange": "#E69F00", "sky_blue": "#56B4E9", "bluish_green": "#009E73",
    "yellow": "#F0E442", "blue": "#0072B2", "vermillion": "#D55E00", "reddish_purple": "#CC79A7",
}

_DASH_NAMES = {"solid": "solid", "dashed": "dashed", "dotted": "dotted",
               "dash_dotted": "dash_dotted", "dashdot": "dash_dotted", "dash-dot": "dash_dotted"}


def _bq_dash(value) -> str:
    """Map a dash description (name or SVG dasharray) to a bqplot ``line_style``."""
    if value is None or value == "" or value == "none":
        return "solid"
    if isinstance(value, str) and value in _DASH_NAMES:
        return _DASH_NAMES[value]
    parts = [float(p) for p in str(value).replace(",", " ").split()] if isinstance(
        value, str) else [float(p) for p in value]
    if len(parts) >= 4:
        return "dash_dotted"
    if parts and max(parts) <= 2.0:
        return "dotted"
    return "dashed"


@lru_cache(maxsize=1)
def status_style() -> dict[str, dict]:
    """Per-status drawing style: ``movable, pinned, fixed, illegal``."""
    try:
        from .. import style as st
    except ImportError:  # pragma: no cover - only while the style module is missing
        st = None
    if st is not None and hasattr(st, "status_style"):
        out = {}
        for key in ("movable", "pinned", "fixed", "illegal"):
            s = dict(st.status_style(key))
            out[key] = {
                "fill": s.get("fill") or s.get("fill_color"),
                "opacity": float(s.get("opacity", s.get("fill_opacity", 0.6))),
                "stroke": s.get("stroke") or s.get("outline") or s.get("edge") or "#000000",
                "dash": _bq_dash(s.get("dash", s.get("linestyle"))),
                "width": float(s.get("width", s.get("linewidth", s.get("stroke_width", 1.0)))),
            }
        return out
    return {
        "movable": {"fill": _OI["sky_blue"], "opacity": 0.45, "stroke": _OI["blue"],
                    "dash": "solid", "width": 1.0},
        "pinned": {"fill": _OI["orange"], "opacity": 0.75, "stroke": _OI["black"],
                   "dash": "solid", "width": 2.5},
        "fixed": {"fill": _OI["bluish_green"], "opacity": 0.9, "stroke": _OI["black"],
                  "dash": "dash_dotted", "width": 2.0},
        "illegal": {"fill": _OI["vermillion"], "opacity": 0.8, "stroke": _OI["black"],
                    "dash": "dashed", "width": 2.5},
    }


@lru_cache(maxsize=1)
def ui_colors() -> dict[str, str]:
    """Colours of the non-status layers (outlines, pins, flylines, selection)."""
    return {
        "die": _OI["black"], "core": "#666666", "rows": "#999999", "blockage": "#555555",
        "halo": "#444444", "outline": _OI["black"], "flyline": _OI["reddish_purple"],
        "selection": _OI["yellow"], "terminal": _OI["vermillion"], "label": _OI["black"],
        "handle": "#ffffff",
    }


def heat_colors(layer: str) -> list[str]:
    """Sequential colour ramp for heat layer ``layer`` (``cells``, ``density``, ``congestion``)."""
    try:
        from .. import style as st
    except ImportError:  # pragma: no cover
        st = None
    if st is not None and hasattr(st, "heat_colors"):
        try:
            return list(st.heat_colors(layer))
        except (KeyError, ValueError, TypeError):
            pass
    if layer == "cells":
        return ["#ffffff", "#d9d9d9"]
    if layer == "density":
        return ["#ffffff", _OI["sky_blue"], _OI["blue"]]
    return ["#ffffff", _OI["yellow"], _OI["orange"], _OI["vermillion"]]
