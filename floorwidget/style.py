"""The one palette: colours, outlines and heat scales read by the canvas and by :mod:`render`.

Block colours come from the Okabe-Ito colour-blind-safe palette (M. Okabe and K. Ito, "Color
Universal Design (CUD): how to make figures and presentations that are friendly to colorblind
people", 2008; hex values from memory of that publication).  Status is carried twice: by fill
colour *and* by outline dash pattern and width, so a greyscale print still tells a movable macro
(thin solid outline) from a pinned one (thick dashed), a fixed one (heavy dash-dot) and an
illegal one (heaviest dotted, cross-hatched in static renders).

Heat maps use sequential, perceptually ordered scales written out here: ColorBrewer YlOrRd
(C. A. Brewer, colorbrewer.org; M. Harrower and C. A. Brewer, The Cartographic Journal 40(1),
2003) for congestion and viridis key colours (S. van der Walt and N. Smith, matplotlib's default
map, 2015) for density; both values from memory.  The standard-cell area raster uses a ramp from
white to Okabe-Ito bluish green.

Dash patterns are given as on/off lengths in points (``dash``), as a matplotlib linestyle
(:meth:`BlockStyle.mpl_linestyle`), as an SVG ``stroke-dasharray`` (:meth:`BlockStyle.svg_dash`)
and as the nearest bqplot ``line_style`` name (``bq_line_style``).
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass

from .design import CELL, CLUSTER, FIXED, MACRO, MOVABLE, PINNED, TERMINAL

__all__ = [
    "BLACK",
    "BLOCKAGE",
    "BLUE",
    "BLUISH_GREEN",
    "CELL_RAMP",
    "CONGESTION_SCALE",
    "CORE",
    "DENSITY_SCALE",
    "DIE",
    "GROUP_PALETTE",
    "HALO",
    "KIND_COLOURS",
    "NARROW_CHANNEL",
    "OKABE_ITO",
    "ORANGE",
    "OTHER_GROUP",
    "PINS_TO_WALL",
    "REDDISH_PURPLE",
    "SKY_BLUE",
    "STATUS_STYLES",
    "TERMINAL_MARK",
    "VERMILLION",
    "WHITE",
    "YELLOW",
    "BlockStyle",
    "block_style",
    "heat_colors",
    "heat_scale",
    "status_style",
    "mpl_colormap",
    "short_labels",
]

# --- Okabe-Ito (2008) -------------------------------------------------------------------------
BLACK = "#000000"
ORANGE = "#E69F00"
SKY_BLUE = "#56B4E9"
BLUISH_GREEN = "#009E73"
YELLOW = "#F0E442"
BLUE = "#0072B2"
VERMILLION = "#D55E00"
REDDISH_PURPLE = "#CC79A7"
WHITE = "#FFFFFF"

OKABE_ITO = {
    "black": BLACK, "orange": ORANGE, "sky_blue": SKY_BLUE, "bluish_green": BLUISH_GREEN,
    "yellow": YELLOW, "blue": BLUE, "vermillion": VERMILLION, "reddish_purple": REDDISH_PURPLE,
}


@dataclass(frozen=True)
class BlockStyle:
    """How one kind of rectangle is drawn.

    Attributes
    ----------
    fill, fill_opacity : str, float
        Fill colour (hex) and opacity in [0, 1].
    stroke, stroke_width : str, float
        Outline colour and width (points / CSS pixels).
    dash : tuple of float
        Outline on/off lengths in points; ``()`` is a solid line.
    bq_line_style : str
        The nearest bqplot ``Lines.line_style``: ``solid``, ``dashed``, ``dotted`` or
        ``dash_dotted``.
    hatch : str
        matplotlib hatch for static renders (``""`` none).
    label : str
        Legend text.
    """

    fill: str
    fill_opacity: float
    stroke: str
    stroke_width: float
    dash: tuple[float, ...]
    bq_line_style: str
    hatch: str
    label: str

    def mpl_linestyle(self):
        """matplotlib linestyle: ``"solid"`` or ``(0, dash)``."""
        return "solid" if not self.dash else (0, self.dash)

    def svg_dash(self) -> str:
        """SVG/CSS ``stroke-dasharray`` value (``"none"`` when solid)."""
        return "none" if not self.dash else ",".join(f"{d:g}" for d in self.dash)


#: Macro styles by status; the key ``"illegal"`` overrides status where a macro breaks a rule.
STATUS_STYLES: dict[str, BlockStyle] = {
    "movable": BlockStyle(SKY_BLUE, 0.55, BLUE, 1.0, (), "solid", "", "movable"),
    "pinned": BlockStyle(ORANGE, 0.75, BLACK, 2.0, (5.0, 2.5), "dashed", "", "pinned by you"),
    "fixed": BlockStyle(REDDISH_PURPLE, 0.45, BLACK, 2.5, (6.0, 2.0, 1.5, 2.0), "dash_dotted",
                        "..", "fixed by the input"),
    "illegal": BlockStyle(VERMILLION, 0.85, BLACK, 3.0, (1.5, 1.5), "dotted", "xx",
                          "breaks a rule"),
}

_STATUS_KEY = {MOVABLE: "movable", PINNED: "pinned", FIXED: "fixed"}

#: Halo outline (drawn around every macro, no fill).
HALO = BlockStyle(WHITE, 0.0, BLUE, 0.8, (3.0, 2.0), "dashed", "", "halo")
#: Placement blockage: black hatch on a light fill.
BLOCKAGE = BlockStyle(BLACK, 0.08, BLACK, 1.0, (), "solid", "///", "placement blockage")
#: Die and core outlines.
DIE = BlockStyle(WHITE, 0.0, BLACK, 1.6, (), "solid", "", "die")
CORE = BlockStyle(WHITE, 0.0, BLACK, 0.8, (1.0, 2.0), "dotted", "", "core (rows)")
#: I/O terminal marks.
TERMINAL_MARK = BlockStyle(BLACK, 1.0, BLACK, 0.5, (), "solid", "", "I/O terminal")

#: A channel between two facing macros that is open but narrower than the channel rule:
#: a vermillion strip with a back-diagonal hatch (the hatch carries it in greyscale).
NARROW_CHANNEL = BlockStyle(VERMILLION, 0.30, VERMILLION, 1.0, (), "solid", "\\\\\\",
                            "narrow channel")
#: A macro whose pins face the nearest core edge: a heavy dashed vermillion bar along its pin
#: side, inside the footprint.
PINS_TO_WALL = BlockStyle(VERMILLION, 0.9, BLACK, 0.8, (4.0, 2.0), "dashed", "||",
                          "pins toward a wall")

#: Colours of hierarchy groups, heaviest group first: Okabe-Ito without black (kept for text
#: and outlines); groups past these seven share :data:`OTHER_GROUP`, and the legend says so.
GROUP_PALETTE = (ORANGE, SKY_BLUE, BLUISH_GREEN, YELLOW, BLUE, VERMILLION, REDDISH_PURPLE)
#: A mid grey for every group past the palette.
OTHER_GROUP = "#A0A0A0"

#: Base colour per block kind (soft clusters and cells are shown as an area raster).
KIND_COLOURS = {MACRO: SKY_BLUE, CLUSTER: BLUISH_GREEN, CELL: BLUISH_GREEN, TERMINAL: BLACK}


def block_style(status: int | str, illegal: bool = False) -> BlockStyle:
    """Style of a macro from its status code or name, or the illegal style."""
    if illegal:
        return STATUS_STYLES["illegal"]
    key = status if isinstance(status, str) else _STATUS_KEY[int(status)]
    return STATUS_STYLES[key]


def status_style(key: str) -> dict:
    """One status style (``movable``, ``pinned``, ``fixed`` or ``illegal``) as a plain dict.

    Keys: ``fill``, ``fill_opacity`` (also ``opacity``), ``stroke``, ``stroke_width`` (also
    ``width``), ``dash`` (bqplot ``line_style`` name), ``dasharray`` (SVG), ``hatch``, ``label``.
    """
    try:
        s = STATUS_STYLES[key]
    except KeyError:
        raise KeyError(f"unknown status style {key!r}: expected one of "
                       f"{', '.join(STATUS_STYLES)}") from None
    return {"fill": s.fill, "fill_opacity": s.fill_opacity, "opacity": s.fill_opacity,
            "stroke": s.stroke, "stroke_width": s.stroke_width, "width": s.stroke_width,
            "dash": s.bq_line_style, "dasharray": s.svg_dash(), "hatch": s.hatch,
            "label": s.label}


# --- sequential heat scales (low -> high) --------------------------------------------------
#: ColorBrewer YlOrRd, 9 classes (from memory).
CONGESTION_SCALE = ("#FFFFCC", "#FFEDA0", "#FED976", "#FEB24C", "#FD8D3C", "#FC4E2A", "#E31A1C",
                    "#BD0026", "#800026")
#: viridis key colours, 10 steps (from memory).
DENSITY_SCALE = ("#440154", "#482878", "#3E4989", "#31688E", "#26828E", "#1F9E89", "#35B779",
                 "#6ECE58", "#B5DE2B", "#FDE725")
#: White to Okabe-Ito bluish green, for the standard-cell / cluster area raster.
CELL_RAMP = ("#FFFFFF", "#CCECE3", "#80CFB9", "#33B18F", BLUISH_GREEN)


def heat_scale(kind: str) -> tuple[str, ...]:
    """Colours low to high for ``"density"``, ``"congestion"`` or ``"cells"``."""
    try:
        return {"density": DENSITY_SCALE, "congestion": CONGESTION_SCALE, "cells": CELL_RAMP}[kind]
    except KeyError:
        raise ValueError(f"unknown heat scale {kind!r}: expected 'density', 'congestion' "
                         "or 'cells'") from None


def heat_colors(kind: str) -> list[str]:
    """:func:`heat_scale` as a list (for ``bqplot.ColorScale(colors=...)``)."""
    return list(heat_scale(kind))


def mpl_colormap(kind: str):
    """A matplotlib colormap from :func:`heat_scale` (imports matplotlib)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list(f"floorwidget_{kind}", list(heat_scale(kind)))


# --- labels -----------------------------------------------------------------------------------

_HIER = re.compile(r"([/|.])")  # hierarchy separators kept in labels
_ELLIPSIS = "\u2026"


def _label(name: str, keep: set[int], max_len: int) -> str:
    """``name`` shortened to its first component, its leaf and the components ``keep``
    (counted from the end, the leaf being 1), with an ellipsis for each run left out; the full
    name when that is not shorter.  A name without separators keeps its start and end, or is
    shown in full once ``keep`` holds anything."""
    parts = _HIER.split(name)  # components at even indices, separators at odd ones
    comps, seps = parts[0::2], parts[1::2]
    n = len(comps)
    if n == 1:
        if keep:
            return name
        room = max(max_len - 1, 4)
        return name[: room // 3] + _ELLIPSIS + name[len(name) - (room - room // 3):]
    idx = sorted({0, n - 1} | {n - k for k in keep if 0 < n - k < n})
    out = comps[0] if len(comps[0]) <= 12 or idx[1] == 1 else comps[0][:11] + _ELLIPSIS
    for prev, i in zip(idx, idx[1:]):
        out += (seps[i - 1] if i == prev + 1 else seps[prev] + _ELLIPSIS + seps[i - 1]) + comps[i]
    return out if len(out) < len(name) else name


def _tell_apart(names: list[str]) -> int | None:
    """The component (counted from the end, above the leaf) nearest the leaf in which
    ``names`` do not all agree, or None."""
    comps = [_HIER.split(nm)[0::2] for nm in names]
    for k in range(2, max(len(c) for c in comps)):
        if len({c[-k] if k < len(c) else None for c in comps}) > 1:
            return k
    return None


def short_labels(names: Sequence[str], max_len: int = 24) -> list[str]:
    """Display labels for (hierarchical) block names: short, readable and all different.

    A name of at most ``max_len`` characters is its own label.  A longer one keeps its first
    component (cut to 12 characters) and its leaf, with an ellipsis for what lies between
    (``top/…/sram_0``); hierarchy separators are ``/``, ``|`` and ``.``.  A name without a
    separator keeps its start and end.  Where labels would be equal, each of them also keeps
    the component nearest the leaf in which those names differ (``soc/cpu/…/bank_3`` and
    ``soc/dsp/…/bank_3``), and so on; a name that cannot be told apart otherwise is shown in
    full.  Names are assumed different (as block names are).

    Parameters
    ----------
    names : sequence of str
    max_len : int
        Names up to this length are not shortened.

    Returns
    -------
    list of str
        One label per name, pairwise different when the names are.

    Examples
    --------
    >>> short_labels(["soc/mem_subsystem/bank0/sram_64k", "soc/mem_subsystem/bank1/sram_64k",
    ...               "soc/io/pads"])
    ['soc/\u2026/bank0/sram_64k', 'soc/\u2026/bank1/sram_64k', 'soc/io/pads']
    """
    keep: list[set[int]] = [set() for _ in names]
    labels = [nm if len(nm) <= max_len else _label(nm, keep[i], max_len)
              for i, nm in enumerate(names)]
    while True:
        groups: dict[str, list[int]] = {}
        for i, lab in enumerate(labels):
            groups.setdefault(lab, []).append(i)
        clashes = [[i for i in g if labels[i] != names[i]] for g in groups.values()
                   if len(g) > 1]
        clashes = [g for g in clashes if g]
        if not clashes:
            return labels
        for g in clashes:
            k = _tell_apart([names[i] for i in g])
            for i in g:
                if k is None or k in keep[i]:
                    labels[i] = names[i]  # nothing left to tell them apart by: in full
                else:
                    keep[i].add(k)
                    labels[i] = _label(names[i], keep[i], max_len)
