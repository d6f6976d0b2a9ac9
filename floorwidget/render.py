"""Headless static drawings of a floorplan (PNG or SVG) with matplotlib.

matplotlib is an optional extra (``pip install 'floorwidget[render]'``); it is imported only
when :func:`render` runs, and drawn with the Agg canvas, so no display is needed.  Colours and
outlines come from :mod:`floorwidget.style`, the palette the notebook canvas reads too.

The figures drawn in the title are early-floorplanning estimates; sign-off belongs to the full
implementation flow's timing, power and physical checks.
"""

from __future__ import annotations

import sys
import types
from pathlib import Path

import numpy as np

from . import metrics, style
from .design import (
    CELL,
    CLUSTER,
    FENCE,
    MACRO,
    STATUS_NAMES,
    TERMINAL,
    Design,
    DesignError,
    Floorplan,
    orient_offsets,
)
from .kernels import fmt as numfmt

__all__ = ["render", "side_by_side", "SUFFIXES"]

#: Output formats by file suffix.
SUFFIXES = {".png": "png", ".svg": "svg"}
#: Macro label font size, points, and the smallest one a label may shrink to.
LABEL_PT, MIN_LABEL_PT = 8.0, 4.0
#: Average character width and line height of the label font, in ems (DejaVu Sans, measured
#: on instance names: letters, digits, brackets and separators average about 0.6 em).
LABEL_CHAR_EM, LABEL_LINE_EM = 0.62, 1.2


def _nice_length(span: float) -> float:
    """A 1, 2 or 5 times a power of ten close to a fifth of ``span``."""
    raw = span / 5.0
    p = 10.0 ** np.floor(np.log10(raw))
    for m in (5.0, 2.0, 1.0):
        if m * p <= raw:
            return m * p
    return p


def _draw_labels(ax, design: Design, mac: np.ndarray, rects: np.ndarray) -> None:
    """Macro names that fit inside their macros, never two overlapping
    (:func:`floorwidget.style.place_labels`): the part of each name that tells it apart
    (:func:`floorwidget.style.short_labels`), at up to :data:`LABEL_PT` points (down to
    :data:`MIN_LABEL_PT`) and up to four lines; a name that fits nowhere is left out (the SVG
    ids keep the full names)."""
    ax.apply_aspect()
    box = ax.get_position().transformed(ax.figure.transFigure)  # display units at fig.dpi
    x0, x1 = ax.get_xlim()
    pt_per_um = box.width / ax.figure.dpi * 72.0 / (x1 - x0)
    texts = style.short_labels([design.names[i] for i in mac])
    keep, lines, scale, _ = style.place_labels(
        texts, rects * pt_per_um, LABEL_CHAR_EM * LABEL_PT, LABEL_LINE_EM * LABEL_PT,
        max_lines=4, scales=np.arange(LABEL_PT, MIN_LABEL_PT - 0.5, -1.0) / LABEL_PT)
    cx, cy = (rects[:, 0] + rects[:, 2]) / 2, (rects[:, 1] + rects[:, 3]) / 2
    for i in np.flatnonzero(keep):
        ax.text(cx[i], cy[i], "\n".join(lines[i]), ha="center", va="center",
                fontsize=LABEL_PT * scale[i], linespacing=1.0, zorder=6, clip_on=True,
                color=style.BLACK, gid=f"label:{design.names[mac[i]]}")


def render(design: Design, fp: Floorplan | None = None, path=None, *, heat: str | None = None,
           show_labels: bool = True, ax=None, figsize: tuple[float, float] | None = None,
           dpi: int = 150, title: str | None = None, target_density: float | None = None,
           channel: float | None = None, hierarchy: int | None = None,
           separators: str = "/.", power: bool = True):
    """Draw a floorplan to scale; write it to ``path`` (PNG or SVG, by suffix) if given.

    Layers, bottom to top: a raster of soft-cluster and standard-cell area (or, with ``heat``,
    the density or RUDY congestion map instead), the die and core outlines, placement blockages
    (hatched), macros with their halos (dashed) and an orientation mark (a notch at the corner
    that is lower-left in the N orientation, turned with the macro), I/O terminals as small
    marks, then a legend, a scale bar and a title with the report figures.  Macro status shows
    as fill colour *and* outline pattern (:data:`floorwidget.style.STATUS_STYLES`); macros that
    break a rule (:func:`floorwidget.metrics.legality`) get, on top, the illegal style's
    cross-hatch and heavy dotted outline.  The floorplan's shape: a channel between two facing
    macros that is open but narrower than ``channel`` is a hatched vermillion strip
    (:data:`floorwidget.style.NARROW_CHANNEL`), and a macro whose pins face the nearest core
    edge carries a dashed, hatched bar along its pin side
    (:data:`floorwidget.style.PINS_TO_WALL`).  In SVG output each macro's rectangle carries
    ``id="macro:<name>"``, each narrow channel ``id="channel:<a>:<b>"`` and each bar
    ``id="pins-to-wall:<name>"``.

    Parameters
    ----------
    design : Design
    fp : Floorplan, optional
        Default ``design.initial``.
    path : str or Path, optional
        ``.png`` or ``.svg``; written atomically (a temporary file beside it, then renamed).
    heat : {None, "density", "congestion"}
        Heat layer: bin utilisation (:func:`floorwidget.metrics.density_map`) or routing
        demand over supply (:func:`floorwidget.metrics.congestion_map`, 1.0 = full).
    show_labels : bool
        Write macro names: the part that tells each apart, inside its macro or not at all,
        never two overlapping (:func:`floorwidget.style.place_labels`); the SVG ids keep the
        full names.
    ax : matplotlib Axes, optional
        Draw into these axes instead of a new figure.
    figsize : (float, float), optional
        Inches; default from the die's aspect ratio.
    dpi : int
        PNG resolution.
    title : str, optional
        Replaces the first title line (the design name).
    target_density : float, optional
        The target of the overflow figure in the title; default the one the floorplan was
        placed with (``fp.info["target_density"]``), else the report's default.
    channel : float, optional
        Channels between facing macros narrower than this (µm) are drawn as hatched strips
        (:func:`floorwidget.metrics.channel_gaps`); default the one the floorplan was placed
        with (``fp.info["channel"]``), else :func:`floorwidget.metrics.default_channel`.
    hierarchy : int, optional
        Colour by hierarchy group at this depth (:func:`floorwidget.hierarchy.hierarchy_groups`
        with ``separators``): macro fills take their group's colour (the status stays in the
        outline), the cell raster the colour of the group with most cell area per bin
        (:func:`floorwidget.hierarchy.logic_picture`, unless ``heat`` is given), and the
        legend lists the coloured groups and how many more share the grey.
    power : bool
        Draw the design's power grid (:attr:`floorwidget.design.Design.power`, as laid out
        for ``fp``) under the macros: VDD and VSS shapes in the two
        :data:`floorwidget.style.POWER_STYLES`, followpins lighter; SVG ids ``power:VDD``,
        ``power:VSS``.

    Returns
    -------
    matplotlib.figure.Figure

    Raises
    ------
    DesignError
        Unknown suffix or heat layer, missing folder, or matplotlib not installed; nothing is
        written then.

    Examples
    --------
    >>> import floorwidget as fw
    >>> d = fw.load("demo_data/heron_dsp.json")            # doctest: +SKIP
    >>> fig = fw.render(d, fw.place(d), "heron.svg")        # doctest: +SKIP
    """
    path, fmt = _checked_target(path, heat)
    fp = design.initial if fp is None else fp
    fig, ax = _figure(design, ax, figsize)
    sc = _scene(design, fp, heat, hierarchy, separators)
    _raster(ax, sc)
    _outlines(ax, design)
    sc.show_power = power and design.power is not None
    if sc.show_power:
        _power(ax, design, fp)
    _macros(ax, sc, channel)
    _frame(ax, sc, show_labels)
    _legend(ax, fig, sc)
    _title(ax, sc, title, target_density)
    if path is not None:
        from .formats._io import atomic_write

        meta = {"Date": None} if fmt == "svg" else {}
        with atomic_write(path, "wb") as f:
            fig.savefig(f, format=fmt, dpi=dpi, metadata=meta, bbox_inches="tight")
    return fig


def _checked_target(path, heat: str | None):
    """The output path and format (None, None without a path), checked before anything is
    drawn: a known suffix in an existing folder, a known heat layer, matplotlib installed."""
    fmt = None
    if path is not None:
        path, fmt = _picture_path(path)
        if not (path.parent if str(path.parent) else Path(".")).is_dir():
            raise DesignError(f"folder {path.parent} does not exist", file=str(path))
    if heat not in (None, "density", "congestion"):
        raise DesignError(f"unknown heat layer {heat!r}: use 'density' or 'congestion'")
    try:
        import matplotlib  # noqa: F401
    except ImportError:  # pragma: no cover - depends on the installation
        raise DesignError("rendering needs matplotlib: pip install 'floorwidget[render]'") from None
    return path, fmt


def _figure(design: Design, ax, figsize):
    """The figure and axes to draw into: a new Agg figure (``figsize`` default from the die's
    aspect ratio) unless ``ax`` is given."""
    if ax is not None:
        return ax.figure, ax
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    die = design.die
    dw, dh = die[2] - die[0], die[3] - die[1]
    if figsize is None:
        figsize = (11.0, max(4.0, 8.0 * dh / dw + 1.6))
    fig = Figure(figsize=figsize)
    FigureCanvasAgg(fig)
    return fig, fig.add_axes((0.06, 0.08, 0.66, 0.80))


def _scene(design: Design, fp: Floorplan, heat, hierarchy, separators):
    """What the layers share: the design, floorplan, footprints, the macros, and with
    ``hierarchy`` the groups, their colours and legend entries."""
    sc = types.SimpleNamespace(design=design, fp=fp, heat=heat, rects=fp.rects(),
                               mac=np.flatnonzero(design.kind == MACRO), groups=None,
                               group_fill=None, glegend=None, gcols=None)
    if hierarchy is not None:
        from . import hierarchy as hier

        try:
            sc.groups = hier.hierarchy_groups(design.names, hierarchy, separators)
        except ValueError as e:
            raise DesignError(str(e)) from None
        sc.gcols, sc.glegend = hier.group_colours(hier.group_area(design, sc.groups),
                                                  style.GROUP_PALETTE, style.OTHER_GROUP)
        sc.group_fill = [sc.gcols[g] for g in sc.groups.index]
    return sc


def _raster(ax, sc) -> None:
    """The bottom layer: cell and cluster area per bin, or the density or RUDY heat map, or
    the logic coloured by hierarchy group; what the legend and colour bar need goes on
    ``sc``."""
    design, fp, heat, rects = sc.design, sc.fp, sc.heat, sc.rects
    kind = design.kind
    grid = metrics.bin_grid(design)  # the report's grid, so the colour bar matches the title
    extent = (grid.xlo, grid.xhi, grid.ylo, grid.yhi)
    raster_label = None
    if heat == "density":
        data = metrics.density_map(design, fp, grid).utilisation
        cmap, raster_label = style.mpl_colormap("density"), "bin utilisation (movable + fixed)"
    elif heat == "congestion":
        data = metrics.congestion_map(design, fp, grid)
        cmap, raster_label = (style.mpl_colormap("congestion"),
                              "congestion: routing demand / supply (1.0 = full)")
    else:
        soft = (kind == CLUSTER) | (kind == CELL)
        data = metrics.rect_area_map(grid, rects[soft]) / grid.bin_area if soft.any() else None
        cmap = style.mpl_colormap("cells")
        if data is not None:
            data = np.ma.masked_less_equal(data, 1e-9)
    image = None
    vmax = 1.0
    if data is not None and heat is not None:
        # empty bins stay white; the colour range stops at the 99th percentile of the rest (or
        # 1.0 for utilisation, "exactly full") so one hot spot does not wash out the map
        data = np.ma.masked_less_equal(data, 1e-9)
        filled = data.compressed()
        vmax = float(np.percentile(filled, 99)) if filled.size else 1.0
        if heat == "density":
            vmax = max(vmax, 1.0)
        vmax = vmax if vmax > 0 else 1.0
    if data is not None and sc.group_fill is not None and heat is None:
        from . import hierarchy as hier

        pic = hier.logic_picture(design, fp, grid, sc.groups, sc.gcols,
                                 other=style.OTHER_GROUP)
        ax.imshow(pic, origin="upper", extent=extent, zorder=0,
                  interpolation="nearest").set_gid("raster")
    elif data is not None:
        image = ax.imshow(data.T, origin="lower", extent=extent, cmap=cmap, zorder=0,
                          interpolation="nearest", alpha=0.85 if heat else 0.75,
                          vmin=0.0, vmax=vmax)
        image.set_gid("raster")

    sc.image, sc.data, sc.vmax, sc.raster_label = image, data, vmax, raster_label


def _outlines(ax, design: Design) -> None:
    """Die and core outlines, placement blockages, cell regions."""
    from matplotlib.collections import PathCollection, PolyCollection
    from matplotlib.patches import Rectangle
    from matplotlib.path import Path as MplPath

    die, core = design.die, design.core
    _outline(ax, die, style.DIE, 1).set_gid("die")
    _outline(ax, core, style.CORE, 1).set_gid("core")
    # blockages as two collections (full: solid and hatched; partial, a density cap: dashed,
    # dotted, its fill as light as the share it leaves), never a patch each; the hatch is one
    # compound path over all of a kind (Agg hatches each path of a collection on its own:
    # 17 s for 50,000 small blockages, 0.1 s as one path)
    bl, md = design.blockages, design.blockage_max_density
    for gid, sel, ls, hatch in (("blockages:full", md <= 0, "-", style.BLOCKAGE.hatch),
                                ("blockages:partial", md > 0, "--", "..")):
        b = bl[sel]
        if not len(b):
            continue
        ring = np.stack([b[:, [0, 1]], b[:, [2, 1]], b[:, [2, 3]], b[:, [0, 3]],
                         b[:, [0, 1]]], axis=1)
        face = np.zeros((len(b), 4))
        face[:, 3] = style.BLOCKAGE.fill_opacity * (1.0 - md[sel])
        col = PolyCollection(ring[:, :4], facecolors=face, edgecolors=style.BLOCKAGE.stroke,
                             linewidths=style.BLOCKAGE.stroke_width, linestyles=ls, zorder=2)
        col.set_gid(gid)
        ax.add_collection(col)
        codes = np.tile([MplPath.MOVETO] + [MplPath.LINETO] * 3 + [MplPath.CLOSEPOLY], len(b))
        hatched = PathCollection([MplPath(ring.reshape(-1, 2), codes)], facecolors="none",
                                 edgecolors=style.BLOCKAGE.stroke, linewidths=0, hatch=hatch,
                                 zorder=2)
        hatched.set_gid(f"{gid}:hatch")
        ax.add_collection(hatched, autolim=False)
    reg = design.regions
    for k, nm in enumerate(reg.names):  # cell regions: fences solid, guides dashed, named
        fence = reg.kind[k] == FENCE
        for j, b in enumerate(reg.rects_of(k)):
            p = Rectangle((b[0], b[1]), b[2] - b[0], b[3] - b[1], facecolor="none",
                          edgecolor=style.REDDISH_PURPLE, linewidth=1.6,
                          linestyle="-" if fence else "--", zorder=6)
            p.set_gid(f"region:{nm}:{j}")
            ax.add_patch(p)
        b = reg.rects_of(k)[0]
        ax.text(b[0], b[3], f" {nm}", color=style.REDDISH_PURPLE, fontsize=7, va="top",
                zorder=7)


def _power(ax, design: Design, fp: Floorplan) -> None:
    """The power grid: one collection per net (followpins at half the opacity)."""
    from matplotlib.collections import PolyCollection

    from .kernels.power import FOLLOWPIN, NETS

    g = design.power_shapes(fp)
    if g is None or not len(g):
        return
    r = g.rects
    quads = np.stack([r[:, [0, 1]], r[:, [2, 1]], r[:, [2, 3]], r[:, [0, 3]]], axis=1)
    for k, st in enumerate(style.POWER_STYLES):
        sel = g.net == k
        if not sel.any():
            continue
        alpha = np.where(g.shape[sel] == FOLLOWPIN, st.fill_opacity / 2, st.fill_opacity)
        face = np.zeros((int(sel.sum()), 4))
        face[:, :3] = _rgb(st.fill)
        face[:, 3] = alpha
        col = PolyCollection(quads[sel], facecolors=face, edgecolors="none", zorder=2.5)
        col.set_gid(f"power:{NETS[k]}")
        ax.add_collection(col, autolim=False)


def _outline(ax, r, st, z, **kw):
    """An unfilled rectangle in a block style."""
    from matplotlib.patches import Rectangle

    p = Rectangle((r[0], r[1]), r[2] - r[0], r[3] - r[1], facecolor="none",
                  edgecolor=st.stroke, linewidth=st.stroke_width,
                  linestyle=st.mpl_linestyle(), zorder=z, **kw)
    ax.add_patch(p)
    return p


def _macros(ax, sc, channel) -> None:
    """Macros (fill and outline by status, the illegal style on top where a rule breaks),
    halos, narrow channels, pins-to-a-wall bars and orientation notches."""
    from matplotlib.collections import PolyCollection
    from matplotlib.patches import Rectangle

    design, fp, rects, mac = sc.design, sc.fp, sc.rects, sc.mac
    status, group_fill = fp.status, sc.group_fill
    bad = metrics.illegal_blocks(design, fp)
    hrects = fp.rects(halo=True)
    has_halo = (design.halo[mac] > 0).any(axis=1)
    ill = style.STATUS_STYLES["illegal"]
    for i in mac:
        st = style.block_style(int(status[i]))
        r = rects[i]
        xy, w, h = (r[0], r[1]), r[2] - r[0], r[3] - r[1]
        fill = (*_rgb(st.fill), st.fill_opacity) if group_fill is None \
            else (*_rgb(group_fill[i]), 0.85)
        p = Rectangle(xy, w, h, facecolor=fill,
                      edgecolor=st.stroke, linewidth=st.stroke_width,
                      linestyle=st.mpl_linestyle(), hatch=st.hatch or None, zorder=4)
        p.set_gid(f"macro:{design.names[i]}")
        ax.add_patch(p)
        if bad[i]:
            # the status stays readable; the rule break is a cross-hatch and a heavy outline
            ax.add_patch(Rectangle(xy, w, h, facecolor="none", edgecolor=ill.fill,
                                   hatch=ill.hatch, linewidth=0.0, zorder=4.2))
            ax.add_patch(Rectangle(xy, w, h, facecolor="none", edgecolor=ill.fill,
                                   linewidth=ill.stroke_width, linestyle=ill.mpl_linestyle(),
                                   zorder=4.4))
    for i in mac[has_halo]:
        _outline(ax, hrects[i], style.HALO, 3, alpha=0.9)
    # floorplan shape: narrow channels (hatched strips) and pins toward a wall (a bar on the
    # pin side)
    nc, wc = style.NARROW_CHANNEL, style.PINS_TO_WALL
    chans = metrics.channel_gaps(design, fp, channel if channel is not None
                                 else fp.info.get("channel"))
    for (a, b), s in zip(chans.pairs, chans.strips):
        p = Rectangle((s[0], s[1]), s[2] - s[0], s[3] - s[1],
                      facecolor=(*_rgb(nc.fill), nc.fill_opacity), edgecolor=nc.stroke,
                      linewidth=nc.stroke_width, hatch=nc.hatch, zorder=4.6)
        p.set_gid(f"channel:{design.names[a]}:{design.names[b]}")
        ax.add_patch(p)
    walled, bars = metrics.wall_bars(design, fp)
    for i, s in zip(walled, bars):
        p = Rectangle((s[0], s[1]), s[2] - s[0], s[3] - s[1],
                      facecolor=(*_rgb(wc.fill), wc.fill_opacity), edgecolor=wc.stroke,
                      linewidth=wc.stroke_width, linestyle=wc.mpl_linestyle(), hatch=wc.hatch,
                      zorder=4.8)
        p.set_gid(f"pins-to-wall:{design.names[i]}")
        ax.add_patch(p)
    if len(mac):
        # orientation notch: the N-frame lower-left corner, mapped through the orientation
        w0, h0 = design.width[mac], design.height[mac]
        s = 0.22 * np.minimum(w0, h0)
        vx = np.stack([-w0 / 2, -w0 / 2 + s, -w0 / 2], axis=1)
        vy = np.stack([-h0 / 2, -h0 / 2, -h0 / 2 + s], axis=1)
        ox, oy = orient_offsets(vx, vy, fp.orient[mac][:, None])
        cx = (rects[mac, 0] + rects[mac, 2]) / 2
        cy = (rects[mac, 1] + rects[mac, 3]) / 2
        tris = np.stack([cx[:, None] + ox, cy[:, None] + oy], axis=2)
        notch = PolyCollection(tris, facecolors=style.BLACK, edgecolors="none", alpha=0.8,
                               zorder=5)
        notch.set_gid("orientation-marks")
        ax.add_collection(notch)

    # --- terminals -----------------------------------------------------------------------
    term = design.kind == TERMINAL
    if term.any():
        tx = (rects[term, 0] + rects[term, 2]) / 2
        ty = (rects[term, 1] + rects[term, 3]) / 2
        pts = ax.scatter(tx, ty, s=9, marker="s", c=style.TERMINAL_MARK.fill, linewidths=0,
                         zorder=7)
        pts.set_gid("terminals")

    sc.bad, sc.chans, sc.walled = bad, chans, walled


def _frame(ax, sc, show_labels: bool) -> None:
    """Limits (the die and a margin, room for the scale bar), the macro labels, axes, the
    scale bar."""
    design, mac = sc.design, sc.mac
    die = design.die
    dw, dh = die[2] - die[0], die[3] - die[1]
    pad = 0.03 * max(dw, dh)
    ax.set_xlim(die[0] - pad, die[2] + pad)
    ax.set_ylim(die[1] - 2.5 * pad, die[3] + pad)
    ax.set_aspect("equal")
    if show_labels and len(mac):
        _draw_labels(ax, design, mac, sc.rects[mac])
    ax.set_xlabel("x (µm)")
    ax.set_ylabel("y (µm)")
    ax.tick_params(labelsize=7)
    bar = _nice_length(dw)
    by = die[1] - 1.6 * pad
    ax.plot([die[0], die[0] + bar], [by, by], color=style.BLACK, linewidth=3,
            solid_capstyle="butt", zorder=8, gid="scale-bar")
    ax.text(die[0] + bar / 2, by + 0.25 * pad, f"{bar:g} µm", ha="center", va="bottom",
            fontsize=7)


def _legend(ax, fig, sc) -> None:
    """The legend of what is drawn (only what is there), and the heat layer's colour bar."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    design, mac, status, group_fill = sc.design, sc.mac, sc.fp.status, sc.group_fill
    bad, chans, walled, heat, data = sc.bad, sc.chans, sc.walled, sc.heat, sc.data
    nc, wc, ill = style.NARROW_CHANNEL, style.PINS_TO_WALL, style.STATUS_STYLES["illegal"]
    reg, term = design.regions, design.kind == TERMINAL
    present = {int(s) for s in status[mac]}
    handles = [Patch(facecolor=(*_rgb(st.fill), st.fill_opacity) if group_fill is None
                     else "none", edgecolor=st.stroke,
                     linewidth=st.stroke_width, linestyle=st.mpl_linestyle(),
                     hatch=st.hatch or None, label=st.label)
               for code, st in ((c, style.block_style(c)) for c in range(3))
               if code in present or code == 0]
    if group_fill is not None:
        for colour, members in sc.glegend:
            label = (f"group {sc.groups.label(members[0])}" if len(members) == 1 else
                     f"{len(members)} more groups, all grey ({len(style.GROUP_PALETTE)} colours "
                     "in the palette)")
            handles.append(Patch(facecolor=(*_rgb(colour), 0.85), edgecolor="none",
                                 label=label))
    if bad.any():
        handles.append(Patch(facecolor="none", edgecolor=ill.fill, linewidth=ill.stroke_width,
                             linestyle=ill.mpl_linestyle(), hatch=ill.hatch,
                             label="breaks a rule (overlap, die, core, blockage or grid)"))
    if len(chans):
        below = numfmt.number(chans.channel, unit=" µm")
        handles.append(Patch(facecolor=(*_rgb(nc.fill), nc.fill_opacity), edgecolor=nc.stroke,
                             hatch=nc.hatch, label=f"{nc.label} (< {below})"))
    if len(walled):
        handles.append(Patch(facecolor=(*_rgb(wc.fill), wc.fill_opacity), edgecolor=wc.stroke,
                             linestyle=wc.mpl_linestyle(), hatch=wc.hatch, label=wc.label))
    if (design.halo[mac] > 0).any():
        handles.append(Patch(facecolor="none", edgecolor=style.HALO.stroke,
                             linewidth=style.HALO.stroke_width,
                             linestyle=style.HALO.mpl_linestyle(), label="halo"))
    if len(mac):
        handles.append(Line2D([], [], marker=(3, 0, 45), linestyle="none", color=style.BLACK,
                              markersize=6, label="orientation mark (N lower-left)"))
    md = design.blockage_max_density
    if (md <= 0).any():
        handles.append(Patch(facecolor=(0, 0, 0, style.BLOCKAGE.fill_opacity),
                             edgecolor=style.BLACK, hatch=style.BLOCKAGE.hatch,
                             label=style.BLOCKAGE.label))
    if (md > 0).any():
        handles.append(Patch(facecolor="none", edgecolor=style.BLACK, hatch="..",
                             linestyle="--", label="partial blockage (density cap)"))
    if sc.show_power:
        for k, st in enumerate(style.POWER_STYLES):
            if (design.power.net == k).any():
                handles.append(Patch(facecolor=(*_rgb(st.fill), st.fill_opacity),
                                     edgecolor="none", label=st.label))
    for fence, label in ((True, "fence (cells stay inside)"), (False, "guide (cells pulled in)")):
        if len(reg) and ((reg.kind == FENCE) == fence).any():
            handles.append(Patch(facecolor="none", edgecolor=style.REDDISH_PURPLE,
                                 linestyle="-" if fence else "--", label=label))
    if term.any():
        handles.append(Line2D([], [], marker="s", linestyle="none", color=style.BLACK,
                              markersize=4, label="I/O terminal"))
    if heat is None and data is not None and group_fill is None:
        handles.append(Patch(facecolor=style.CELL_RAMP[3], label="standard-cell area"))
    elif heat is None and data is not None:
        handles.append(Patch(facecolor="none", edgecolor="none",
                             label="cell area: colour of the group with most area per bin"))
    handles.append(Line2D([], [], color=style.BLACK, linewidth=1.6, label="die"))
    handles.append(Line2D([], [], color=style.BLACK, linewidth=0.8,
                          linestyle=style.CORE.mpl_linestyle(), label="core (rows)"))
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=7,
              frameon=False, borderaxespad=0.0)
    if sc.image is not None and heat is not None:
        over = float(data.max()) > sc.vmax if data.count() else False
        cb = fig.colorbar(sc.image, ax=ax, shrink=0.45, pad=0.02, anchor=(0.0, 0.0),
                          location="right", extend="max" if over else "neither")
        cb.set_label(sc.raster_label, fontsize=7)
        cb.ax.tick_params(labelsize=6)


def _title(ax, sc, title: str | None, target_density: float | None) -> None:
    """The design, its macros by status, and the report's figures (estimates)."""
    design, fp, mac, status = sc.design, sc.fp, sc.mac, sc.fp.status
    if target_density is None:
        target_density = fp.info.get("target_density")
    rep = metrics.evaluate(design, fp, target_density=target_density, channel=sc.chans.channel)
    names = np.bincount(status[mac], minlength=3) if len(mac) else np.zeros(3, int)
    counts = ", ".join(f"{int(c)} {STATUS_NAMES[k]}" for k, c in enumerate(names) if c)
    head = title if title is not None else f"{design.name}: {len(mac)} macros ({counts or 'none'})"
    state = ("legal" if rep["legal"]
             else f"{numfmt.value(rep['macro_overlaps'])} macro overlaps")
    sub = (f"HPWL {numfmt.number(rep['hpwl'], digits=4, unit=' µm')} · overflow "
           f"{numfmt.number(rep['density_overflow'])} at "
           f"{numfmt.number(rep['target_density'])} · "
           f"congestion p99 {numfmt.number(rep['congestion_p99'])} of supply · "
           f"{state}"
           f"\n{rep['narrow_channels']} narrow channels · {rep['macros_facing_wall']} macros "
           f"with pins to a wall · {rep['logic_regions']} logic regions (largest "
           f"{numfmt.percent(rep['largest_logic_region'])} of the free area)"
           f"\nearly floorplanning estimates; sign-off belongs to the implementation flow")
    ax.set_title(f"{head}\n{sub}", fontsize=8.5, loc="left")


def _rgb(hex_colour: str) -> tuple[float, float, float]:
    h = hex_colour.lstrip("#")
    return tuple(int(h[k:k + 2], 16) / 255.0 for k in (0, 2, 4))


def side_by_side(design: Design, floorplans: dict, path=None, *, heat: str | None = None,
                 width: float = 8.0, dpi: int = 120, channel: float | None = None):
    """Several floorplans of one design drawn next to each other by :func:`render`.

    Each panel is a full :func:`render` (its legend beside it, its figures in its title), so
    alternatives read the same way as single pictures.

    Parameters
    ----------
    design : Design
    floorplans : dict
        ``{title: Floorplan}``, drawn left to right.
    path : str or Path, optional
        ``.png`` or ``.svg``, written atomically.
    heat, channel
        As for :func:`render`.
    width : float
        Inches per panel (plot and legend).
    dpi : int

    Returns
    -------
    matplotlib.figure.Figure
    """
    try:
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
    except ImportError:  # pragma: no cover - depends on the installation
        raise DesignError("rendering needs matplotlib: pip install 'floorwidget[render]'") from None
    if not floorplans:
        raise ValueError("side_by_side needs at least one floorplan")
    die = design.die
    k = len(floorplans)
    plot_w = 0.62 / k  # of the figure width per panel; the rest of a panel holds its legend
    fig = Figure(figsize=(width * k, max(3.5, 0.62 * width * (die[3] - die[1])
                                          / (die[2] - die[0]) + 1.8)))
    FigureCanvasAgg(fig)
    for j, (title, fp) in enumerate(floorplans.items()):
        ax = fig.add_axes((j / k + 0.04 / k, 0.08, plot_w, 0.72))
        render(design, fp, ax=ax, heat=heat, title=str(title), channel=channel)
    if path is not None:
        path, fmt = _picture_path(path)
        from .formats._io import atomic_write

        meta = {"Date": None} if fmt == "svg" else {}
        with atomic_write(path, "wb") as f:
            fig.savefig(f, format=fmt, dpi=dpi, metadata=meta, bbox_inches="tight")
    return fig


def _picture_path(path) -> tuple[Path, str]:
    """The output path and its picture format; a :class:`DesignError` for another suffix."""
    path = Path(path)
    fmt = SUFFIXES.get(path.suffix.lower())
    if fmt is None:
        raise DesignError(f"cannot render to a {path.suffix or 'suffix-less'} file: use .png "
                          "or .svg", file=str(path))
    return path, fmt


class _CallableModule(types.ModuleType):
    """``import floorwidget.render`` (or ``from floorwidget.render import ...``) binds the
    package attribute ``floorwidget.render`` to this module, hiding the lazily exported function
    of the same name; calling the module calls the function, so ``fw.render(...)`` works either
    way."""

    def __call__(self, *args, **kwargs):
        return render(*args, **kwargs)


sys.modules[__name__].__class__ = _CallableModule
