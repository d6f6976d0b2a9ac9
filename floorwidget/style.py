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

import numpy as np

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
    "place_labels",
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

#: Power grid (rings, straps, followpins) per net, :data:`floorwidget.kernels.power.NETS`
#: order: VDD light orange, VSS dark blue (apart in greyscale by lightness), both see-through
#: so that the floorplan under them stays readable.
POWER_STYLES = (BlockStyle(ORANGE, 0.45, ORANGE, 0.4, (), "solid", "", "VDD (power grid)"),
                BlockStyle(BLUE, 0.45, BLUE, 0.4, (), "solid", "", "VSS (power grid)"))

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

_SPLIT = re.compile(r"([/|._])")  # hierarchy separators, and "_" of flattened names
_ESCAPE = re.compile(r"\\(.)")    # a backslash escapes the next character (DEF, Verilog)


def _tokens(name: str) -> tuple[list[str], list[str]]:
    """A name's tokens and the separator before each (empty before the first)."""
    parts = _SPLIT.split(_ESCAPE.sub(r"\1", name))
    return parts[0::2], [""] + parts[1::2]


def short_labels(names: Sequence[str], max_len: int = 16) -> list[str]:
    """Display labels for (hierarchical) block names: the part that tells them apart.

    A name of at most ``max_len`` characters is its own label (escapes removed).  A longer one
    is cut into tokens at the hierarchy separators ``/ | .`` and at ``_`` (flattened names
    join their hierarchy with it), and keeps only the tokens where the names branch: the
    token after a prefix of tokens that other names share but continue differently.  Runs of
    tokens every name under that prefix has in common (``i_cache_subsystem``, a trailing
    ``.i_ram``) drop out, so ``i_cache_subsystem_i_icache_sram_block\\[0\\].data_sram_macro_mem
    \\[3\\].i_ram`` among its siblings reads ``icache_block[0].data_mem[3]``.  Each kept token
    keeps the separator that stood before it.  A label that would equal another one, or not be
    shorter than the name, is the name itself.

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
    >>> short_labels(["soc/mem/bank0/sram_64k", "soc/mem/bank1/sram_64k", "pll"], 8)
    ['soc/bank0', 'soc/bank1', 'pll']
    """
    if all(len(nm) <= max_len and "\\" not in nm for nm in names):
        return list(names)  # short plain names: nothing to shorten or unescape
    toks = [_tokens(nm) for nm in names]
    plains = ["".join(s + x for s, x in zip(sep, t)) for t, sep in toks]
    # a trie of the token sequences: node ids by (parent, token); a node's fan-out counts the
    # different tokens (or ends) that follow its prefix
    node: dict[tuple[int, str | None], int] = {}
    fan: list[int] = [0]
    paths = []
    for t, _ in toks:
        at, path = 0, []
        for tok in [*t, None]:
            path.append(at)
            key = (at, tok)
            nxt = node.get(key)
            if nxt is None:
                nxt = node[key] = len(fan)
                fan.append(0)
                fan[at] += 1
            at = nxt
        paths.append(path)
    labels = []
    for (t, sep), plain, path in zip(toks, plains, paths):
        keep = [k for k in range(len(t)) if fan[path[k]] > 1]
        lab = "".join((sep[k] if n else "") + t[k] for n, k in enumerate(keep))
        short = len(plain) > max_len and lab and len(lab) < len(plain)
        labels.append(lab if short else plain)
    seen: dict[str, int] = {}
    for lab in labels:
        seen[lab] = seen.get(lab, 0) + 1
    return [lab if seen[lab] == 1 else plain for plain, lab in zip(plains, labels)]


def _wrap(text: str, lines: int) -> list[str]:
    """``text`` in at most ``lines`` lines, cut after separators, the longest line as short as
    it can be (greedy filling for each width from the longest piece up)."""
    parts = _SPLIT.split(text)
    pieces = [a + b for a, b in zip(parts[0::2], parts[1::2] + [""])]
    for width in range(max(len(p) for p in pieces), len(text) + 1):
        out = [""]
        for p in pieces:
            if out[-1] and len(out[-1]) + len(p) > width:
                out.append(p)
            else:
                out[-1] += p
        if len(out) <= lines:
            return out
    return [text]


def place_labels(texts: Sequence[str], boxes, char_px: float, line_px: float, *,
                 max_lines: int = 1, keep_out: float = 0.0, pad: float = 1.0,
                 scales: Sequence[float] = (1.0,)):
    """Which labels to draw, at what size and in how many lines, so that each lies inside its
    box and no two overlap.

    Each label is centred in its box, or with ``keep_out`` in the part of the box above
    ``keep_out`` from its centre (where a handle is drawn); at each font scale in turn
    (largest first) it is tried on one line, then cut before separators into up to
    ``max_lines`` shorter ones; the first layout that fits inside the box less ``pad`` on every
    side is taken, else the label is dropped.  Labels that still overlap each other (over
    macros that overlap) are dropped, smaller box first.  Sizes are screen units at scale 1: a
    character is ``char_px`` wide on average, a line ``line_px`` high.

    Parameters
    ----------
    texts : sequence of str
    boxes : (n, 4) array of ``xlo, ylo, xhi, yhi``, screen units, y up
    char_px, line_px : float
    max_lines : int
    keep_out : float
        Half the height of a band across the box's centre that labels leave free.
    pad : float
    scales : sequence of float
        Font scales to try, largest first.

    Returns
    -------
    keep : (n,) bool array
    lines : list of list of str
        The lines of every label (empty where dropped).
    scale : (n,) float array
        The font scale taken (0 where dropped).
    extents : (n, 4) float array
        Every label's box, screen units (meaningful where kept).
    """
    from .kernels.rects import overlap_pairs

    b = np.asarray(boxes, np.float64).reshape(-1, 4)
    n = len(b)
    cx = (b[:, 0] + b[:, 2]) / 2
    low = b[:, 1] if keep_out <= 0 else (b[:, 1] + b[:, 3]) / 2 + keep_out
    cy = (low + b[:, 3]) / 2
    room_w = b[:, 2] - b[:, 0] - 2 * pad
    room_h = b[:, 3] - low - 2 * pad
    nchar = np.fromiter((len(t) for t in texts), np.float64, n)
    keep = np.zeros(n, bool)
    lines: list[list[str]] = [[] for _ in range(n)]
    scale, width, height = np.zeros(n), np.zeros(n), np.zeros(n)
    for f in scales:
        cw, lh = char_px * f, line_px * f
        one = ~keep & (nchar * cw <= room_w) & (lh <= room_h)
        for i in np.flatnonzero(one):
            lines[i] = [texts[i]]
        keep |= one
        scale[one], width[one], height[one] = f, nchar[one] * cw, lh
        for i in np.flatnonzero(~keep & (room_h >= 2 * lh) & (room_w > 0)) if max_lines > 1 \
                else ():
            for k in range(2, min(max_lines, int(room_h[i] // lh)) + 1):
                cut = _wrap(texts[i], k)
                wi = max(len(t) for t in cut) * cw
                if wi <= room_w[i]:
                    keep[i], lines[i] = True, cut
                    scale[i], width[i], height[i] = f, wi, len(cut) * lh
                    break
    ext = np.stack([cx - width / 2, cy - height / 2, cx + width / 2, cy + height / 2], axis=1)
    idx = np.flatnonzero(keep)
    a, c = overlap_pairs(ext[idx])
    if len(a):  # greedy, largest box first: a label survives unless a survivor overlaps it
        area = (b[idx, 2] - b[idx, 0]) * (b[idx, 3] - b[idx, 1])
        rank = np.empty(len(idx), np.intp)
        rank[np.lexsort((idx, -area))] = np.arange(len(idx))
        nbr: dict[int, list[int]] = {}
        for p, q in zip(a.tolist(), c.tolist()):
            nbr.setdefault(p, []).append(q)
            nbr.setdefault(q, []).append(p)
        alive = np.ones(len(idx), bool)
        for p in sorted(nbr, key=lambda v: rank[v]):  # only the labels in conflict
            if alive[p]:
                alive[[q for q in nbr[p] if rank[q] > rank[p]]] = False
        for i in idx[~alive]:
            keep[i], lines[i], scale[i] = False, [], 0.0
    return keep, lines, scale, ext


