"""Session files are data, and Session methods refuse bad arguments clearly.

The replay-script checks parse the script (Python's own ``ast``) and accept only calls of the
action table's methods with literal arguments; the crafted files are the attacks of a hostile
review: a keyword name holding Python, an unknown action, values of the wrong type, a file that
frees a block FIXED in the design.
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from session_script_check import script_is_data_only

import floorwidget as fw
from floorwidget.design import CELL, FIXED, MACRO, Design, DesignError
from floorwidget.formats.bookshelf import read_aux
from floorwidget.session import ACTIONS, Session
from floorwidget.session.actions import check_entry

DATA = Path(__file__).parent / "data"
CRAFTED_KEY = "seed=0); __import__('os').system('touch PWNED'); print(1"


@pytest.fixture()
def tiny(tmp_path):
    d = read_aux(DATA / "bookshelf" / "tiny.aux")
    return d


def _saved(tmp_path, tiny) -> tuple[Path, dict]:
    s = Session(tiny)
    s.move("m1", 3.0, 2.0)
    with s.batch("two"):
        s.pin("m1")
        s.add_blockage([1.0, 1.0, 4.0, 3.0], max_density=0.5)
    s.snapshot("first", note='a "quoted" note\nwith a newline')
    p = tmp_path / "s.json"
    s.save(p)
    return p, json.loads(p.read_text())


def _write(p: Path, doc: dict) -> Path:
    p.write_text(json.dumps(doc))
    return p


def test_the_table_lists_exactly_what_sessions_log():
    """Every action in the table is a public Session method, and every method that records
    itself is in the table (the session refuses to log an action the table lacks)."""
    for name in ACTIONS:
        assert callable(getattr(Session, name, None)), name
    with pytest.raises(AssertionError, match="not in the action table"):
        Session._record(None, "rm_rf")


def test_crafted_keyword_in_a_session_file_is_refused(tmp_path, tiny):
    p, doc = _saved(tmp_path, tiny)
    doc["log"].append({"op": "place", "args": [], "kwargs": {CRAFTED_KEY: 1}})
    with pytest.raises(DesignError, match=r"log\[3\]") as e:
        Session.load(_write(p, doc), design=tiny)
    assert e.value.file == str(p) and "takes no keyword" in str(e.value)
    # hidden inside a batch, too
    doc["log"][-1] = {"op": "batch", "label": "x", "actions": [
        {"op": "move", "args": ["m1", 1.0, 1.0], "kwargs": {CRAFTED_KEY: 1}}]}
    with pytest.raises(DesignError, match=r"log\[3\]\.actions\[0\]"):
        Session.load(_write(p, doc), design=tiny)


def test_a_crafted_log_never_reaches_a_script(tmp_path, tiny):
    """Even a log handed to the script writer without the file reader (a state built by hand)
    is checked against the table before one line is written."""
    s = Session(tiny)
    s.move("m1", 3.0, 2.0)
    state = s.state()
    state.log.append({"op": "refine", "args": [], "kwargs": {CRAFTED_KEY: 1}})
    with pytest.raises(DesignError, match="takes no keyword"):
        Session.from_state(state).script()
    state.log[-1] = {"op": "__import__('os').system('x') or session.move", "args": []}
    with pytest.raises(DesignError, match="unknown action"):
        Session.from_state(state).script()
    state.log[-1] = {"op": "move", "args": ["m1", "1); import os; (", 2.0]}
    with pytest.raises(DesignError, match="must be a number"):
        Session.from_state(state).script()


@pytest.mark.parametrize("entry, match", [
    ({"op": "eval", "args": ["1"]}, "unknown action"),
    ({"op": "move", "args": ["m1", "1.0", 2.0]}, "must be a number"),
    ({"op": "move", "args": ["m1", 1.0]}, "takes 3 argument"),
    ({"op": "move", "args": ["m1", 1.0, 2.0, 3.0]}, "takes 3 argument"),
    ({"op": "move", "args": [{"__class__": 1}, 1.0, 2.0]}, "expected text"),
    ({"op": "pin", "args": [["m1", 3]]}, "expected text"),
    ({"op": "array", "args": [["m1"], 1.5, 1]}, "whole number"),
    ({"op": "place", "kwargs": {"seed": 1.7}}, "whole number"),
    ({"op": "place", "kwargs": {"target_density": "0.5"}}, "must be a number"),
    ({"op": "place", "kwargs": {"no_such_option": 1}}, "takes no keyword"),
    ({"op": "add_blockage", "args": [[0, 0, 1]]}, "expected 4 numbers"),
    ({"op": "set_orientation", "args": ["m1", "N); x("]}, "expected one of"),
    ({"op": "batch", "label": 3, "actions": []}, "expected text"),
    ({"op": "undo", "kwargs": []}, "expected an object"),
])
def test_log_entries_are_checked_against_the_table(entry, match):
    with pytest.raises(DesignError, match=match):
        check_entry(entry)


def test_valid_session_script_is_data_only_and_replays(tmp_path, tiny):
    """A script with hostile-looking but valid text (quotes, newlines in labels and notes) is
    still only literal calls, and runs to the same floorplan in a fresh interpreter."""
    src = tmp_path / "tiny.json"
    fw.save(tiny, tiny.initial, src)
    d = fw.load(src)
    s = Session(d)
    s.move("m1", 3.0, 2.0)
    with s.batch("drag'); import os; ('"):
        s.set_halo("m1", [0.5, 0.0, 0.5, 0.0])
        s.add_region("r\"\n", [0.0, 0.0, 10.0, 8.0])
    s.snapshot("a\nb", note="'); os.system('x')")
    code = s.script()
    assert script_is_data_only(code)
    f = tmp_path / "replay.py"
    f.write_text(code + "\nprint(repr(session.floorplan.position('m1')))\n")
    out = subprocess.run([sys.executable, str(f)], capture_output=True, text=True, cwd=tmp_path,
                         timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == repr(s.floorplan.position("m1"))
    assert not (tmp_path / "PWNED").exists()


def test_a_session_file_cannot_free_a_fixed_block(tmp_path, tiny):
    p, doc = _saved(tmp_path, tiny)
    k = tiny.names.index("p2")
    assert tiny.initial.status[k] == FIXED
    for where in ("current", "initial"):
        bad = json.loads(json.dumps(doc))
        bad[where]["status"][k] = 0
        with pytest.raises(DesignError, match=f"{where}: block 'p2' is FIXED"):
            Session.load(_write(p, bad), design=tiny)
    bad = json.loads(json.dumps(doc))
    bad["alternatives"][0]["floorplan"]["status"][k] = 1
    with pytest.raises(DesignError, match=r"alternatives\[0\]\.floorplan: block 'p2'"):
        Session.load(_write(p, bad), design=tiny)
    s = Session(tiny)
    fp = tiny.initial.copy()
    fp.status[k] = 0
    with pytest.raises(DesignError, match="'p2' is FIXED"):
        s.add_alternative("free", fp)


def test_unknown_and_non_string_names(tiny):
    s = Session(tiny)
    before = s.log
    for call in (lambda: s.move("nope", 1, 1), lambda: s.pin(["m1", "nope"]),
                 lambda: s.rotate("nope"), lambda: s.set_halo("nope", 1.0),
                 lambda: s.align(["m1", "nope"], "left"),
                 lambda: s.assign_group(None, ["nope"]), lambda: s.restore("nope")):
        with pytest.raises(DesignError, match=f"'nope'.*{tiny.name!r}|no alternative") as e:
            call()
        assert not isinstance(e.value, KeyError)
    for call in (lambda: s.move(3, 1, 1), lambda: s.pin(["m1", 3]), lambda: s.flip(None)):
        with pytest.raises(TypeError, match="block names are strings"):
            call()
    assert s.log == before and s.history == []


@pytest.mark.parametrize("call, match", [
    (lambda s: s.add_blockage([1, 1, 4, 3], max_density="0.5"), "max_density must be a number"),
    (lambda s: s.place(seed=1.7), "seed must be a whole number"),
    (lambda s: s.refine(seed=-1), "seed must be in"),
    (lambda s: s.place(target_density="0.5"), "target_density must be a number"),
    (lambda s: s.move("m1", "3", 2), "x must be a number"),
    (lambda s: s.set_halo("m1", "1"), "halo must be a number"),
    (lambda s: s.shift("m1", True, 0), "dx must be a number"),
    (lambda s: s.array(["m1"], 10**9, 10**9), "at most 1"),
    (lambda s: s.move_blockage(0, 1, 1), "no such placement blockage"),
])
def test_argument_types_are_checked(tiny, call, match):
    s = Session(tiny)
    fp = s.floorplan
    with pytest.raises(DesignError, match=match):
        call(s)
    assert s.floorplan is fp and s.log == []


def test_a_halo_too_large_names_macro_and_sides(tiny):
    s = Session(tiny)
    core = tiny.core
    with pytest.raises(DesignError, match=r"block 'm1': halo left \+ right \(8 \+ 8 µm\) "
                                          r"around its 6 µm width exceeds the core width "
                                          f"{core[2] - core[0]:g}"):
        s.set_halo("m1", [8.0, 0.0, 8.0, 0.0])
    with pytest.raises(DesignError, match="halo bottom \\+ top"):
        s.set_halo("m1", [0.0, 3.0, 0.0, 3.0])
    s.set_halo("m1", [1.0, 1.0, 1.0, 1.0])  # fits: taken
    assert s.design.halo[tiny.names.index("m1")].tolist() == [1.0, 1.0, 1.0, 1.0]


def test_a_blockage_over_the_core_survives_round_off():
    """Rows of 33 sites of 0.1 µm from x = 0.1 end at 3.4000000000000004 in float64, past a die
    edge at 3.4 (IEEE 754 round-off); a blockage over the whole core is still taken."""
    rows = {"x": [0.1], "y": [0.1], "height": [1.0], "site_width": [0.1], "num_sites": [33]}
    d = Design("ro", [0.0, 0.0, 3.4, 1.2], ["c", "m"], [CELL, MACRO], [0.2, 0.5], [1.0, 1.0],
               np.array([0]), np.zeros(0, np.int64), np.zeros(0), np.zeros(0), rows=rows)
    assert d.core[2] > d.die[2]  # the round-off the test is about
    s = Session(d)
    k = s.add_blockage(d.core)
    assert s.design.blockages[k].tolist() == [0.1, 0.1, 3.4, 1.1]
    with pytest.raises(DesignError, match="outside the die"):
        s.add_blockage([0.1, 0.1, 3.5, 1.1])


def test_the_script_check_itself_catches_code():
    """The syntax-tree check used above refuses what an injected keyword would produce."""
    head = ("import floorwidget as fw\n\ndesign = fw.load('/x.json')\n"
            "assert design.num_blocks == 6, 'changed'\nsession = fw.Session(design)\n")
    assert script_is_data_only(head + "session.move('m1', 1.0, 2.0)\n")
    for bad in ("session.place(seed=0); __import__('os').system('x')\n",
                "session.place(seed=__import__('os').system('x'))\n",
                "session.move('m1', 1.0, 2.0)\nimport os\n",
                "session.rm('m1')\n",
                "with session.batch('b'):\n    print(1)\n"):
        assert not script_is_data_only(head + bad), bad
