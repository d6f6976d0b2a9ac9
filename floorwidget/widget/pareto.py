"""The Pareto view of a sweep, and a progress bar for running one from a notebook.

:class:`ParetoView` plots every successful :class:`~floorwidget.explore.SweepResult` as a point:
HPWL across, congestion peak (routing demand over supply) up, colour by density overflow
(with a colour bar).  The
non-dominated results (minimising both axes, :func:`floorwidget.explore.pareto_front`) are drawn
larger with a thick dark outline and joined by a staircase line, so they read without colour
too.  Hovering a point shows its parameters; clicking one makes that result the current
floorplan of the attached :class:`~floorwidget.session.Session` through
``Session.add_alternative`` + ``Session.restore``, i.e. one undoable step.

The figures are early-floorplanning estimates; timing, power and physical sign-off belong to
the full implementation flow.
"""

from __future__ import annotations

import html
from collections.abc import Callable, Sequence

import bqplot as bq
import ipywidgets as widgets
import numpy as np

from ..explore import SweepResult, pareto_front, result_points, sweep
from ..kernels import fmt

__all__ = ["ParetoView", "SweepProgress", "overflow_colors", "run_sweep_with_bar"]

# ColorBrewer "YlOrRd", 5 classes, sequential (Brewer, Harrower, "ColorBrewer.org: an online
# tool for selecting colour schemes for maps", The Cartographic Journal 40(1), 2003; values
# from colorbrewer2.org, from memory).  Used only if floorwidget.style is missing.
YLORRD5 = ["#ffffb2", "#fecc5c", "#fd8d3c", "#f03b20", "#bd0026"]

# Okabe-Ito (Okabe, Ito, "Color Universal Design", 2008): outlines and the front line.
_BLACK = "#000000"
_BLUE = "#0072B2"
_GREY = "#555555"

_LABELS = {
    "hpwl": "HPWL (µm)",
    "hpwl_weighted": "weighted HPWL (µm)",
    "congestion_peak": "congestion peak (demand / supply)",
    "congestion_p99": "congestion p99 (demand / supply)",
    "density_overflow": "density overflow",
    "peak_density": "peak bin density",
    "narrow_channels": "narrow channels (macro pairs)",
    "macros_facing_wall": "macros with pins to a wall",
    "logic_regions": "logic regions",
    "largest_logic_region": "largest logic region (share)",
}


def overflow_colors() -> list[str]:
    """The sequential colour ramp for density overflow.

    The project's density heat scale, ``floorwidget.style.heat_scale("density")`` (viridis key
    colours), so that overflow reads the same here as on the canvas; ColorBrewer YlOrRd
    (:data:`YLORRD5`) should that module be missing.
    """
    try:
        from .. import style as st
    except ImportError:
        return list(YLORRD5)
    for name in ("heat_scale", "heat_colors"):
        fn = getattr(st, name, None)
        if callable(fn):
            try:
                ramp = list(fn("density"))
            except (KeyError, ValueError, TypeError):
                continue
            if len(ramp) >= 2:
                return ramp
    ramp = getattr(st, "SEQUENTIAL", None)
    if isinstance(ramp, (list, tuple)) and len(ramp) >= 2:
        return list(ramp)
    return list(YLORRD5)


def _staircase(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Attainment staircase through front points (both minimised), sorted by ``x``."""
    order = np.lexsort((y, x))
    xs, ys = x[order], y[order]
    if len(xs) < 2:
        return xs, ys
    sx = np.empty(2 * len(xs) - 1)
    sy = np.empty_like(sx)
    sx[0::2], sy[0::2] = xs, ys
    sx[1::2], sy[1::2] = xs[1:], ys[:-1]
    return sx, sy


class ParetoView(widgets.VBox):
    """Scatter of sweep results with the non-dominated set marked; click to adopt one.

    Parameters
    ----------
    results : sequence of SweepResult
        From :func:`floorwidget.explore.sweep`; failed runs are listed in the status line and
        not plotted.
    session : Session, optional
        Where a clicked result goes (:meth:`select`).  Its design must be the results' design.
    x, y : str
        Report keys on the axes (both minimised for the front).  Default ``"hpwl"`` and
        ``"congestion_peak"``.
    color : str
        Report key for the colour.  Default ``"density_overflow"``.
    size : int
        Figure width in pixels.

    Attributes
    ----------
    figure : bqplot.Figure
    points : bqplot.Scatter
        One point per plotted result.
    front_points : bqplot.Scatter
        The non-dominated results (larger, outlined).
    front_line : bqplot.Lines
        The staircase through them.
    plotted : ndarray of int
        Index into ``results`` of each point of :attr:`points`.
    front : ndarray of bool
        Per plotted point, whether it is non-dominated.
    hover_html : ipywidgets.HTML
        Shown on hover, filled with the hovered result's parameters and figures.
    status : ipywidgets.HTML
        One line under the figure (counts, failures, the last selection).

    Examples
    --------
    >>> res = fw.explore.sweep(design, {"target_density": [0.6, 0.7, 0.8], "seed": [0, 1]})
    ... # doctest: +SKIP
    >>> view = ParetoView(res, session=w.session)                           # doctest: +SKIP
    >>> view                                                                # doctest: +SKIP
    """

    def __init__(self, results: Sequence[SweepResult], session=None, *, x: str = "hpwl",
                 y: str = "congestion_peak", color: str = "density_overflow", size: int = 560):
        self.results = list(results)
        self.session = session
        self.figure_keys = (x, y, color)
        pts = result_points(self.results, (x, y, color))
        ok = ~np.isnan(pts[:, :2]).any(axis=1)
        self.plotted = np.flatnonzero(ok)
        self._pos_of = {int(r): k for k, r in enumerate(self.plotted)}
        xy = pts[ok, :2]
        c = pts[ok, 2]
        self.front = pareto_front(xy) if len(xy) else np.zeros(0, bool)
        self.selected_label: str | None = None

        sx, sy = bq.LinearScale(), bq.LinearScale()
        cfin = c[np.isfinite(c)]
        cmin, cmax = (float(cfin.min()), float(cfin.max())) if len(cfin) else (0.0, 1.0)
        if cmax <= cmin:
            cmax = cmin + 1e-9
        sc = bq.ColorScale(colors=overflow_colors(), min=cmin, max=cmax)
        cvals = np.where(np.isfinite(c), c, cmin)

        self.hover_html = widgets.HTML(value="", layout=widgets.Layout(padding="2px 6px"))
        self.points = bq.Scatter(
            x=xy[:, 0], y=xy[:, 1], color=cvals,
            scales={"x": sx, "y": sy, "color": sc},
            default_size=64, stroke=_GREY, stroke_width=1.0,
            tooltip=self.hover_html, interactions={"hover": "tooltip", "click": "select"},
            selected_style={"stroke": _BLUE, "stroke-width": 3},
            unselected_style={"opacity": 0.9},
        )
        fx, fy = xy[self.front, 0], xy[self.front, 1]
        lx, ly = _staircase(fx, fy)
        self.front_line = bq.Lines(x=lx, y=ly, scales={"x": sx, "y": sy}, colors=[_BLUE],
                                   stroke_width=1.5, line_style="dashed")
        self.front_points = bq.Scatter(
            x=fx, y=fy, color=cvals[self.front], scales={"x": sx, "y": sy, "color": sc},
            default_size=170, stroke=_BLACK, stroke_width=2.5, marker="diamond",
            tooltip=self.hover_html, interactions={"hover": "tooltip", "click": "select"},
        )
        self._front_pos = np.flatnonzero(self.front)
        self.points.on_hover(self._on_hover_points)
        self.front_points.on_hover(self._on_hover_front)
        self.points.on_element_click(self._on_click_points)
        self.front_points.on_element_click(self._on_click_front)

        ax = bq.Axis(scale=sx, label=_LABELS.get(x, x), tick_format=".3s", num_ticks=5)
        ay = bq.Axis(scale=sy, side="left", label=_LABELS.get(y, y),
                     tick_format=".3g", num_ticks=5)
        acol = bq.ColorAxis(scale=sc, side="right",
                            label=_LABELS.get(color, color), tick_format=".2g")
        self.figure = bq.Figure(
            marks=[self.front_line, self.points, self.front_points], axes=[ax, ay, acol],
            title="Sweep: non-dominated runs as outlined diamonds",
            fig_margin={"top": 50, "bottom": 55, "left": 70, "right": 90},
            layout=widgets.Layout(width=f"{size}px", height=f"{int(size * 0.78)}px"),
        )
        self.status = widgets.HTML(value=self._status_text())
        caution = widgets.HTML(value="<small>Early-floorplanning estimates; sign-off belongs to "
                               "the implementation flow's timing, power and physical checks."
                               "</small>")
        super().__init__(children=[self.figure, self.status, caution])

    # --- text ----------------------------------------------------------------------------------
    @property
    def front_results(self) -> list[SweepResult]:
        """The non-dominated results, in grid order."""
        return [self.results[int(i)] for i in self.plotted[self.front]]

    def _status_text(self) -> str:
        n_fail = sum(1 for r in self.results if not r.ok)
        s = (f"{len(self.plotted)} runs plotted, {int(self.front.sum())} non-dominated"
             f" (lower {self.figure_keys[0]} and {self.figure_keys[1]} is better)")
        if n_fail:
            first = next(r for r in self.results if not r.ok)
            s += (f"; {n_fail} failed, e.g. {html.escape(first.label)}: "
                  f"{html.escape(first.error or '')}")
        if self.selected_label:
            s += f"; current floorplan: <b>{html.escape(self.selected_label)}</b>"
        return s

    def describe(self, index: int) -> str:
        """HTML of result ``index`` (into ``results``): parameters and figures."""
        r = self.results[index]
        rows = [f"<b>run {r.index}</b>"]
        rows += [f"{html.escape(str(k))} = {html.escape(fmt.value(v, digits=5, big=1e5))}"
                 for k, v in r.params.items()]
        if r.report:
            for k in dict.fromkeys(self.figure_keys):
                if k in r.report:
                    v = fmt.number(r.report[k], digits=5, big=1e5)
                    rows.append(f"{html.escape(_LABELS.get(k, k))}: {v}")
        pos = self._pos_of.get(int(index))
        if pos is not None and self.front[pos]:
            rows.append("<i>non-dominated</i>")
        return "<br>".join(rows)

    # --- events -------------------------------------------------------------------------------
    @staticmethod
    def _event_index(event) -> int | None:
        try:
            return int(event["data"]["index"])
        except (KeyError, TypeError, ValueError):
            return None

    def _on_hover_points(self, mark, event) -> None:
        k = self._event_index(event)
        if k is not None and 0 <= k < len(self.plotted):
            self.hover_html.value = self.describe(int(self.plotted[k]))

    def _on_hover_front(self, mark, event) -> None:
        k = self._event_index(event)
        if k is not None and 0 <= k < len(self._front_pos):
            self.hover_html.value = self.describe(int(self.plotted[self._front_pos[k]]))

    def _on_click_points(self, mark, event) -> None:
        k = self._event_index(event)
        if k is not None and 0 <= k < len(self.plotted):
            self.select(int(self.plotted[k]))

    def _on_click_front(self, mark, event) -> None:
        k = self._event_index(event)
        if k is not None and 0 <= k < len(self._front_pos):
            self.select(int(self.plotted[self._front_pos[k]]))

    def select(self, index: int, prefix: str = "sweep") -> str:
        """Make result ``index`` (into ``results``) the session's current floorplan.

        This is what a click on a point calls.  The result is kept as alternative
        ``f"{prefix} {run}: {params}"`` (added once; a second click reuses it) and restored,
        which is one undoable step of the session.

        Returns
        -------
        str
            The alternative's label.

        Raises
        ------
        ValueError
            When no session is attached, or the run failed.
        """
        r = self.results[index]
        if self.session is None:
            raise ValueError("ParetoView.select: no session attached")
        if not r.ok:
            raise ValueError(f"run {r.index} failed ({r.error}); it has no floorplan")
        label = f"{prefix} {r.index}: {r.label}"
        known = {a.label for a in self.session.alternatives}
        if label not in known:
            report = None
            td = getattr(self.session, "target_density", None)
            if r.report is not None and td is not None and r.target_density == float(td):
                report = r.report
            self.session.add_alternative(label, r.floorplan, note="from a parameter sweep",
                                         params=dict(r.params), report=report)
        self.session.restore(label)
        self.selected_label = label
        pos = self._pos_of.get(int(index))
        self.points.selected = None if pos is None else [pos]
        self.status.value = self._status_text()
        return label


class SweepProgress(widgets.HBox):
    """A progress bar that plugs into ``sweep(progress=...)``.

    Examples
    --------
    >>> bar = SweepProgress()                                       # doctest: +SKIP
    >>> display(bar)                                                # doctest: +SKIP
    >>> res = fw.explore.sweep(design, grid, progress=bar)          # doctest: +SKIP
    """

    def __init__(self, total: int = 0, description: str = "sweep"):
        self.bar = widgets.IntProgress(value=0, min=0, max=max(total, 1),
                                       description=description, bar_style="info")
        self.label = widgets.HTML(value=f"0/{total}" if total else "waiting")
        self.failed = 0
        super().__init__(children=[self.bar, self.label])

    def __call__(self, done: int, total: int, result: SweepResult | None = None) -> None:
        self.bar.max = max(int(total), 1)
        self.bar.value = int(done)
        if result is not None and not result.ok:
            self.failed += 1
        text = f"{done}/{total}"
        if self.failed:
            text += f", {self.failed} failed"
        if result is not None:
            text += f" &mdash; last: {html.escape(result.label)}"
        self.label.value = text
        if done >= total:
            self.bar.bar_style = "warning" if self.failed else "success"


def run_sweep_with_bar(design, grid, executor=None, base=None, *, display: bool = True,
                       progress: Callable | None = None, **options) -> list[SweepResult]:
    """Run :func:`floorwidget.explore.sweep` with a :class:`SweepProgress` bar shown above.

    ``progress`` (if given) is called too.  Returns the sweep's results.
    """
    from ..explore import expand_grid

    bar = SweepProgress(total=len(expand_grid(grid)))
    if display:
        from IPython.display import display as show

        show(bar)

    def both(done, total, result):
        bar(done, total, result)
        if progress is not None:
            progress(done, total, result)

    return sweep(design, grid, executor, base, progress=both, **options)
