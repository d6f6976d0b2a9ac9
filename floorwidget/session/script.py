"""The replay script: plain Python that rebuilds a session from its :class:`SessionState`.

Every logged action goes through :func:`floorwidget.session.actions.call_text`, which checks
it against the action table and writes only validated values (``repr`` of plain Python values,
keyword names from the table), so a log read from a file cannot put code into the script.
"""

from __future__ import annotations

from ..design import DesignError
from .actions import call_text, literal
from .state import SessionState, is_large, now

__all__ = ["script_text"]


def script_text(state: SessionState) -> str:
    """The replay script of ``state`` (see :meth:`floorwidget.session.Session.script`).

    Raises
    ------
    DesignError
        When the design was not read from a file, or a log entry fails the action table.
    """
    src = state.source
    if src is None:
        raise DesignError(f"design {state.base.name!r} has no source file, so a script "
                          "cannot load it; save it with fw.save() and fw.load() it first")
    d = state.full_design
    lef = state.lef
    lines = [
        "# Replays a floorwidget session: same design, same actions, same floorplan.",
        f"# Generated {now()}; figures are early-floorplanning estimates, not sign-off.",
        "import floorwidget as fw",
        "",
        f"design = fw.load({literal(src)}" + (f", lef={literal(lef)})" if lef else ")"),
        f"assert design.num_blocks == {int(d.num_blocks)}, 'the design file has changed'",
    ]
    args = ["design"]
    start = state.full_initial
    if not start.identical(d.initial):
        lines.append(f"initial = {literal(start)}")
        args.append("initial")
    if state.target_density != 0.8:
        args.append(f"target_density={literal(float(state.target_density))}")
    if state.clustered != is_large(d, start):
        args.append(f"clustered={literal(state.clustered)}")
    lines.append(f"session = fw.Session({', '.join(args)})")
    for k, e in enumerate(state.log):
        lines.extend(call_text(e, "", f"log[{k}]"))
    lines.append("")
    return "\n".join(lines)
