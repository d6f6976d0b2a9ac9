"""Write ``drag_widget.ipynb``, the notebook the browser test opens (run this after editing).

The notebook loads the demo design from its own folder, shows a :class:`FloorplanWidget`, and
writes the session's state to ``state.json`` beside it on every change (a Session observer), so
the test can check from the kernel side what a drag in the browser did; ``labels.json`` holds
the macro labels drawn.  ``real_widget.ipynb`` does the same for a real design (``real.json``
names its files), zoomed on its densest group of macros.  ``live_widget.ipynb`` shows the same
real design with its macros movable and "Live refine" on, and logs when each drop, change and
readout happened (kernel clock) to ``state.json``.
"""

from __future__ import annotations

from pathlib import Path

import nbformat

HERE = Path(__file__).resolve().parent

SETUP = '''\
import json
from pathlib import Path

import numpy as np

import floorwidget as fw

HERE = Path.cwd()
design = fw.load(HERE / "heron_dsp.json")
w = fw.FloorplanWidget(design)
# Start from a placed floorplan when the placer can; else spread the macros on shelves so
# that each drag handle sits alone.
setup = "place"
try:
    w.place()
    w.legalize()
except Exception as e:  # the notebook must run whatever the placer does
    setup = f"shelves ({e})"
    s, fp = w.session, w.session.floorplan
    core = design.core
    with s.batch("spread"):
        x, y, row_h = core[0] + 20, core[1] + 20, 0.0
        for name in design.macros:
            i = design.block(name)
            mw, mh = design.width[i], design.height[i]
            if x + mw > core[2] - 20:
                x, y, row_h = core[0] + 20, y + row_h + 30, 0.0
            s.move(name, x, y)
            x += mw + 30
            row_h = max(row_h, mh)
# one macro pinned before the drag, so the picture shows both statuses
w.pin(design.macros[-6])
print("setup:", setup)
'''

STATE = '''\
STATE = HERE / "state.json"
changes = []

def write_state(ev=None):
    fp = w.session.floorplan
    changes.append("ready" if ev is None else ev.action)
    cx, cy = fp.centres()
    idx = w.macro_idx
    st = {
        "changes": changes,
        "macros": design.macros,
        "positions": {n: list(fp.position(n)) for n in design.macros},
        "status": {n: fp.status_of(n) for n in design.macros},
        "centres": np.stack([cx[idx], cy[idx]], axis=1).tolist(),
        "report": w.session.report,
        "readout": w.readouts.html.value,
        "message": w.message.value,
        "x_scale": [w.canvas.x_scale.min, w.canvas.x_scale.max],
        "y_scale": [w.canvas.y_scale.min, w.canvas.y_scale.max],
        "pitch": design.grid_pitch.tolist(),
        "core": design.core.tolist(),
        "undo": w.session.history,
        "blockages": w.session.design.blockages.tolist(),
        "max_density": w.session.design.blockage_max_density.tolist(),
    }
    tmp = STATE.with_suffix(".tmp")
    tmp.write_text(json.dumps(st, default=float))
    tmp.replace(STATE)

w.session.on_change(write_state)


def write_labels(change=None):
    """The macro labels drawn now (one text per line), whenever they change."""
    mk = w.canvas.marks["labels"]
    tmp = HERE / "labels.tmp"
    tmp.write_text(json.dumps({"lines": list(mk.text) if mk.visible else [],
                               "px_per_um": w.canvas.px_per_um}))
    tmp.replace(HERE / "labels.json")


w.canvas.marks["labels"].observe(write_labels, names=["text", "visible"])
write_labels()
'''

SHOW = '''\
w
'''

READY = '''\
write_state()
'''


#: The second notebook: a real design named by ``real.json`` (its DEF and LEFs), zoomed on its
#: densest group of macros, with the same state files.
REAL_SETUP = '''\
import json
from pathlib import Path

import numpy as np

import floorwidget as fw

HERE = Path.cwd()
cfg = json.loads((HERE / "real.json").read_text())
design = fw.load(cfg["def"], lef=cfg["lef"])
w = fw.FloorplanWidget(design, live=False)
'''

REAL_ZOOM = '''\
# zoom on the macro with most macros within 25 µm of its centre: a view 42 µm wide
cx, cy = w.session.floorplan.centres()
mx, my = cx[w.macro_idx], cy[w.macro_idx]
near = (np.abs(mx[:, None] - mx[None, :]) < 25) & (np.abs(my[:, None] - my[None, :]) < 25)
k = int(np.argmax(near.sum(axis=1)))
w.canvas.show_box(mx[k] - 7, my[k] - 7, mx[k] + 7, my[k] + 7, min_span=40.0)
'''


#: The third notebook: the real design with its macros movable (the DEF's FIXED taken as
#: PLACED), live refine on, and a log of the drop, the session's changes and the readouts.
LIVE_SETUP = '''\
import json
import time
from pathlib import Path

import floorwidget as fw
from floorwidget.design import MACRO, MOVABLE

HERE = Path.cwd()
cfg = json.loads((HERE / "real.json").read_text())
design = fw.load(cfg["def"], lef=cfg["lef"])
fp = design.initial.copy()
fp.status[design.kind == MACRO] = MOVABLE
w = fw.FloorplanWidget(design, fp, live=True)
'''

LIVE_STATE = '''\
STATE = HERE / "state.json"
changes, events = [], []


def write_state():
    fp = w.session.floorplan
    cx, cy = fp.centres()
    idx = w.macro_idx
    st = {"changes": changes, "events": events, "macros": design.macros,
          "positions": {n: list(fp.position(n)) for n in design.macros},
          "centres": [[float(cx[i]), float(cy[i])] for i in idx],
          "rects": fp.rects(halo=True)[idx].tolist(), "core": design.core.tolist(),
          "undo": w.session.history, "message": w.message.value}
    tmp = STATE.with_suffix(".tmp")
    tmp.write_text(json.dumps(st, default=float))
    tmp.replace(STATE)


def on_change(ev):
    changes.append(ev.action)
    events.append(["change", time.perf_counter(), ev.action])
    write_state()


def on_readout(change):
    r = w.readouts
    ev = ["readout", time.perf_counter(), r.complete, r.report.get("hpwl")]
    if r.complete and changes[-1:] == ["refine"]:  # the staged report ends equal to evaluate
        ev.append(r.report == fw.evaluate(design, w.session.floorplan,
                                          target_density=w.session.target_density))
    events.append(ev)
    write_state()


untimed_drop = w.dragging.drop


def timed_drop(*args, **kwargs):
    events.append(["drop", time.perf_counter()])
    out = untimed_drop(*args, **kwargs)
    events.append(["dropped", time.perf_counter(), out["message"]])
    write_state()
    return out


untimed_update = w.canvas.update


def timed_update(*args, **kwargs):
    t = time.perf_counter()
    untimed_update(*args, **kwargs)
    events.append(["canvas", t, time.perf_counter()])


w.dragging.drop = timed_drop
w.canvas.update = timed_update
w.session.on_change(on_change)
w.readouts.html.observe(on_readout, names=["value"])
'''

LIVE_READY = '''\
changes.append("ready")
write_state()
'''


def _notebook(cells) -> nbformat.NotebookNode:
    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3",
                                 "language": "python"}
    nb.cells = [nbformat.v4.new_code_cell(c) for c in cells]
    return nb


def build() -> nbformat.NotebookNode:
    return _notebook((SETUP, STATE, SHOW, READY))


def build_real() -> nbformat.NotebookNode:
    return _notebook((REAL_SETUP, STATE, SHOW, REAL_ZOOM, READY))


def build_live() -> nbformat.NotebookNode:
    return _notebook((LIVE_SETUP, LIVE_STATE, SHOW, LIVE_READY))


if __name__ == "__main__":
    nbformat.write(build(), HERE / "drag_widget.ipynb")
    nbformat.write(build_real(), HERE / "real_widget.ipynb")
    nbformat.write(build_live(), HERE / "live_widget.ipynb")
