"""Several candidates side by side: ask for K macro arrangements, see one small picture of each
with its figures beneath (best first), and make one current with a click.

The request runs :func:`floorwidget.explore.candidates` through the widget's runner (the
shared thread pool, one run at a time, the toolbar's progress bar), and the placements
themselves on the executor the sweeps use (a local process pool unless :attr:`executor` is
set).  The results become alternatives of the Session (:func:`floorwidget.explore.to_session`),
so the table of the alternatives panel lists them too; a click on a picture (or its button) is
:meth:`Session.restore`, one undo step, and the engineer edits from there.
"""

from __future__ import annotations

import concurrent.futures as cf
import html
import itertools
from collections.abc import Sequence

import ipywidgets as W

from .. import explore
from ..kernels import fmt
from ..session import ChangeEvent
from .canvas import thumbnail
from .context import Context, small_text
from .readouts import CAUTION

__all__ = ["MAX_CANDIDATES", "CandidatesPanel"]

#: The most candidates one request may ask for (each is a full placement)
MAX_CANDIDATES = 12
#: Side of each picture, pixels
THUMB = 200
#: Outline of the card of the current floorplan, and of the others (Okabe–Ito blue, grey)
_CURRENT, _OTHER = "3px solid #0072B2", "1px solid #bbbbbb"


class CandidatesPanel:
    """K candidates on request, one card each (picture, figures, a button), best first.

    Parameters
    ----------
    ctx : Context

    Attributes
    ----------
    executor : concurrent.futures.Executor or None
        Where the placements run; ``None``: a process pool made for each request
        (:func:`floorwidget.explore.sweep`).
    options : dict
        Placer options given to every candidate (e.g. ``cells="global"`` for quick previews).
    labels : list of str
        The alternatives of the last request, best first (one card each).
    cards : ipywidgets.Box
        The cards, side by side.
    """

    def __init__(self, ctx: Context):
        self.ctx = ctx
        self.executor: cf.Executor | None = None
        self.options: dict = {}
        self.labels: list[str] = []
        self._events: list = []  # the pictures' click listeners (kept alive with the cards)
        self.count = W.BoundedIntText(value=3, min=1, max=MAX_CANDIDATES, description="K",
                                      layout=W.Layout(width="110px"),
                                      style={"description_width": "18px"})
        self.count.add_class("fw-cand-count")
        find = ctx.button("Find candidates", lambda: self.find(self.count.value, wait=False),
                          "Place the design K times with different macro arrangements (in "
                          "the background); pinned and fixed macros stay where they are")
        self.status = W.HTML("")
        self.cards = W.Box([], layout=W.Layout(flex_flow="row wrap", align_items="flex-start"))
        self.box = W.VBox([W.HBox([self.count, find, self.status],
                                  layout=W.Layout(align_items="center")),
                           small_text("Click a picture to make it the current floorplan (one "
                                      "undo step), then edit from there. " + CAUTION),
                           self.cards])
        self.box.add_class("fw-candidates")
        ctx.session.on_change(self._on_change)

    # --- the request ----------------------------------------------------------------------------
    def find(self, k: int, *, wait: bool = True) -> bool:
        """Place ``k`` candidates from the current floorplan and show them.

        Parameters
        ----------
        k : int
            How many, 1 to :data:`MAX_CANDIDATES`.
        wait : bool
            Block until done (scripts, tests); the button passes ``False``.

        Returns
        -------
        bool
            ``False`` (and a message) when another run is going: refused, not queued.

        Raises
        ------
        ValueError
            For a count outside 1..:data:`MAX_CANDIDATES` (nothing runs).
        """
        if isinstance(k, bool) or not isinstance(k, int) or not 1 <= k <= MAX_CANDIDATES:
            raise ValueError(f"candidates: K must be a whole number from 1 to "
                             f"{MAX_CANDIDATES}, got {k!r}")
        s, r = self.ctx.session, self.ctx.runner
        design, base = s.design, s.floorplan
        opts = {"target_density": s.target_density, **self.options}

        def progress(done: int, total: int, _result=None) -> None:
            r.report_progress(f"{done}/{total} runs", done / max(total, 1))
            self.status.value = _small(f"{done} of {total} candidates placed…")

        def run() -> None:
            self.status.value = _small(f"placing {k} candidates…")
            res = explore.candidates(design, k, self.executor, base, progress=progress,
                                     **opts)
            self.show(explore.to_session(s, res, self._prefix()), res)

        return r.run(f"{k} candidate(s)", run, wait)

    def _prefix(self) -> str:
        """``cand<n>``, the first ``n`` whose labels are not taken yet."""
        taken = {a.label.split(" ", 1)[0] for a in self.ctx.session.alternatives}
        return next(p for p in (f"cand{n}" for n in itertools.count(1)) if p not in taken)

    # --- the cards ------------------------------------------------------------------------------
    def show(self, labels: Sequence[str], results: Sequence[explore.SweepResult] = ()) -> None:
        """One card per alternative in ``labels`` (in that order); failed ``results`` are
        named in the status line."""
        s = self.ctx.session
        self.labels = list(labels)
        self._events = []
        self.cards.children = [self._card(rank, s.alternative(lab))
                               for rank, lab in enumerate(self.labels, 1)]
        failed = [r for r in results if not r.ok]
        text = f"{len(self.labels)} candidate(s), best first (legal, then HPWL × congestion)"
        if failed:
            text += (f"; {len(failed)} failed, e.g. {failed[0].label}: {failed[0].error}")
        self.status.value = _small(text)
        self._mark_current()

    def _card(self, rank: int, alt) -> W.VBox:
        rep = alt.report
        params = alt.params or {}
        title = f"{rank}. {params.get('macro_layout', '')} (seed {params.get('seed', 0)})"
        pic = thumbnail(alt.floorplan.design, alt.floorplan, THUMB)
        pic.fig_margin = dict(top=4, bottom=4, left=4, right=4)
        self._listen(pic, alt.label)
        figures = (f"HPWL {fmt.value(rep.get('hpwl'), unit=' µm')}<br>"
                   f"congestion p99 {fmt.value(rep.get('congestion_p99'))} of supply<br>"
                   f"logic regions {fmt.value(rep.get('logic_regions'))}"
                   f"{'' if rep.get('legal') else ' · <b>not legal</b>'}")
        use = W.Button(description="Make current", tooltip=alt.label,
                       layout=W.Layout(width="auto"))
        use.on_click(lambda _b, lab=alt.label: self.ctx.ui(lambda: self.choose(lab)))
        card = W.VBox([W.HTML(f"<b style='font-size:12px'>{html.escape(title)}</b>"), pic,
                       W.HTML(f"<div class='fw-cand-figures' style='font-size:12px;"
                              f"line-height:1.3'>{figures}</div>"), use],
                      layout=W.Layout(margin="0 8px 8px 0", padding="4px", border=_OTHER))
        card.add_class("fw-candidate")
        return card

    def _listen(self, pic, label: str) -> None:
        """A click on the picture chooses it (ipyevents; without it the button does)."""
        try:
            from ipyevents import Event
        except ImportError:
            return
        ev = Event(source=pic, watched_events=["click"])
        ev.on_dom_event(lambda _e: self.ctx.ui(lambda: self.choose(label)))
        self._events.append(ev)

    def choose(self, label: str) -> None:
        """Make candidate ``label`` the current floorplan (:meth:`Session.restore`, one undo
        step); nothing happens when it is current already."""
        self.ctx.refuse_if_busy()
        s = self.ctx.session
        if s.floorplan.identical(s.alternative(label).floorplan):
            self.ctx.notify(f"{label} is the current floorplan already.")
            return
        s.restore(label)
        self.ctx.notify(f"{label} is now the current floorplan; edit from here (Undo returns).")

    def _on_change(self, ev: ChangeEvent) -> None:
        if ev.action not in ("snapshot", "add_alternative"):
            self._mark_current()

    def _mark_current(self) -> None:
        """Outline the card of the current floorplan, if it is one of them."""
        cur = self.current
        for lab, card in zip(self.labels, self.cards.children):
            card.layout.border = _CURRENT if lab == cur else _OTHER

    @property
    def current(self) -> str | None:
        """The label of the candidate that is the current floorplan, else ``None``."""
        s = self.ctx.session
        return next((lab for lab in self.labels
                     if s.floorplan.identical(s.alternative(lab).floorplan)), None)


def _small(text: str) -> str:
    return f"<span style='font-size:12px'>{html.escape(text)}</span>"
