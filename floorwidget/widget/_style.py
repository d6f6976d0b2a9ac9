"""Adapter from :mod:`floorwidget.style` (the project's one palette) to what the canvas needs.

Colours are the Okabe–Ito colour-blind-safe palette (Okabe, Ito, 2008) as :mod:`floorwidget.style`
defines them; status is shown by fill colour, fill opacity *and* outline dash/width so it reads
in greyscale.  This module only reshapes those styles into per-status dictionaries with keys
``fill, opacity, stroke, dash, width, dasharray, label`` and picks the colours of the layers the
style module does not name (flylines, selection, drag handles) from the same palette.
"""

from __future__ import annotations

from functools import lru_cache

from .. import style as _st


@lru_cache(maxsize=1)
def status_style() -> dict[str, dict]:
    """Per-status drawing style: ``movable, pinned, fixed, illegal``."""
    out = {}
    for key in ("movable", "pinned", "fixed", "illegal"):
        s = _st.status_style(key)
        out[key] = {"fill": s["fill"], "opacity": float(s["fill_opacity"]),
                    "stroke": s["stroke"], "dash": s["dash"], "width": float(s["stroke_width"]),
                    "dasharray": s["dasharray"], "hatch": s["hatch"], "label": s["label"]}
    return out


@lru_cache(maxsize=1)
def ui_colors() -> dict:
    """Colours (and a few widths/dashes) of the non-status layers."""
    return {
        "die": _st.DIE.stroke, "die_width": _st.DIE.stroke_width,
        "core": _st.CORE.stroke, "core_width": _st.CORE.stroke_width,
        "core_dash": _st.CORE.bq_line_style,
        "rows": "#999999",
        "blockage": _st.BLOCKAGE.stroke, "blockage_fill": _st.BLOCKAGE.fill,
        "blockage_opacity": max(_st.BLOCKAGE.fill_opacity, 0.15),
        "halo": _st.HALO.stroke, "halo_width": _st.HALO.stroke_width,
        "halo_dash": _st.HALO.bq_line_style,
        "terminal": _st.TERMINAL_MARK.fill,
        "outline": _st.BLACK, "label": _st.BLACK,
        "flyline": _st.BLACK, "flyline_through": _st.BLACK, "found": _st.BLACK,
        "selection": _st.YELLOW, "selection_under": _st.BLACK,
        "handle": _st.WHITE,
        "channel": _st.NARROW_CHANNEL.fill, "channel_opacity": _st.NARROW_CHANNEL.fill_opacity,
        "channel_label": _st.NARROW_CHANNEL.label,
        "wall": _st.PINS_TO_WALL.fill, "wall_opacity": _st.PINS_TO_WALL.fill_opacity,
        "wall_stroke": _st.PINS_TO_WALL.stroke, "wall_dash": _st.PINS_TO_WALL.bq_line_style,
        "wall_label": _st.PINS_TO_WALL.label,
        # cell regions: fences solid, guides dashed, both outlined with their name
        "region": _st.REDDISH_PURPLE, "region_width": 2.0,
        # the power grid (off by default): VDD and VSS rings and straps, see-through
        "power": [st.fill for st in _st.POWER_STYLES],
        "power_opacity": _st.POWER_STYLES[0].fill_opacity,
        "power_labels": [st.label for st in _st.POWER_STYLES],
    }


def heat_colors(layer: str) -> list[str]:
    """Sequential colours low to high for ``cells``, ``density`` or ``congestion``."""
    return _st.heat_colors(layer)
