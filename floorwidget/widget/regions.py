"""The Regions tab: cell regions (fences and guides) drawn in the "Draw region" mode with the
name and kind typed here; the hierarchy group picked in the View tab is given to the chosen
region.  Session calls only; the placer honours them on the next Place all."""

from __future__ import annotations

from typing import TYPE_CHECKING

import ipywidgets as W
import numpy as np

from ..session import ChangeEvent
from .context import Context, small_text

if TYPE_CHECKING:
    from .view import ViewPanel

__all__ = ["RegionsPanel"]


class RegionsPanel:
    """Owns the region controls; reads the picked hierarchy group from ``view``."""

    def __init__(self, ctx: Context, view: ViewPanel):
        self.ctx, self.view = ctx, view
        self.name = W.Text(placeholder="region name", layout=W.Layout(width="150px"))
        self.kind = W.Dropdown(options=[("fence (cells stay inside)", "fence"),
                                        ("guide (cells pulled toward it)", "guide")],
                               value="fence", layout=W.Layout(width="200px"))
        self.pick = W.Dropdown(layout=W.Layout(width="200px"),
                               tooltip="The region to give cells or remove")
        self.name.add_class("fw-region-name")
        assign = ctx.button("Assign group", self.assign_picked_group,
                            "Make the cells of the hierarchy group picked in the View tab "
                            "members of this region (one undo step)")
        rm = ctx.button("Remove region", lambda: ctx.session.remove_region(self._picked()),
                        "Delete the region; its cells belong to none")
        self.box = W.VBox([
            small_text("Mode Draw region: drag a rectangle on the canvas."),
            W.HBox([self.name, self.kind]), W.HBox([self.pick, assign]), W.HBox([rm])])
        ctx.session.on_change(self._on_change)
        self.refresh()

    def _on_change(self, ev: ChangeEvent) -> None:
        if ev.floorplan.design is not self._shown:
            self.refresh()

    def _picked(self) -> str:
        if self.pick.value is None:
            raise ValueError("Draw a region first (mode Draw region), or pick one.")
        return self.pick.value

    def draw(self, x0: float, y0: float, x1: float, y1: float) -> str:
        """Add a cell region over the rectangle ``(x0, y0)``–``(x1, y1)`` (clipped to the
        die) named by the panel (default ``region_k``) of the panel's kind."""
        self.ctx.refuse_if_busy()
        die, reg = self.ctx.design.die, self.ctx.design.regions
        name = self.name.value.strip() or next(
            f"region_{k}" for k in range(len(reg) + 1) if f"region_{k}" not in reg.names)
        xs = np.clip([x0, x1], die[0], die[2])
        ys = np.clip([y0, y1], die[1], die[3])
        self.ctx.session.add_region(name, [xs[0], ys[0], xs[1], ys[1]], self.kind.value)
        self.pick.value = name
        self.name.value = ""
        self.ctx.notify(f"Added {self.kind.value} {name}; pick a hierarchy group in the View "
                        "tab and press Assign group.")
        return name

    def assign_picked_group(self) -> int:
        """:meth:`Session.assign_group` of the hierarchy group picked in the View tab."""
        region = self._picked()
        picked = self.view.picked_group
        if picked is None:
            raise ValueError("Pick a hierarchy group first.")
        self.ctx.refuse_if_busy()
        key, depth, seps = picked
        n = self.ctx.session.assign_group(region, prefix=key, depth=depth, separators=seps)
        label = self.ctx.canvas.groups.label(int(self.view.group_pick.value))
        self.ctx.notify(f"{n:,d} cells of {label} now belong to {region}.")
        return n

    def refresh(self) -> None:
        self._shown = self.ctx.design
        names = list(self._shown.regions.names)
        keep = self.pick.value
        self.pick.options = names
        self.pick.value = keep if keep in names else (names[-1] if names else None)
