"""Session record: model-based random action sequences, replay in a fresh interpreter, session
files (round trip, damage, atomic writes).

The random sequences follow the model-based (stateful) testing method of property-based
testing — Claessen and Hughes, ICFP 2000, with the state-machine form of Hypothesis
(MacIver et al., JOSS 2019): a plain reference model (a list of expected floorplan states and a
cursor) predicts every undo/redo bit for bit.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, settings
from hypothesis import strategies as st
from hypothesis.stateful import (
    RuleBasedStateMachine,
    initialize,
    invariant,
    precondition,
    rule,
)

import floorwidget as fw
from floorwidget.design import FIXED, MACRO, PINNED, TERMINAL, DesignError, snap
from floorwidget.session import Session

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_data" / "heron_dsp.json"
_DESIGN = fw.load(DEMO)


def state(fp):
    return (fp.x.copy(), fp.y.copy(), fp.orient.copy(), fp.status.copy())


def same_bits(a, b) -> bool:
    return all(np.array_equal(np.asarray(p).view(np.uint8), np.asarray(q).view(np.uint8))
               for p, q in zip(a, b))


def _pick_names(d):
    by_mask = {}
    for m in d.macros:
        by_mask.setdefault(int(d.orient_allowed[d.block(m)]), []).append(m)
    macros = by_mask[0xFF][:4] + by_mask.get(0b10001, [])[:1] + by_mask.get(0b110011, [])[:1]
    fixed = [d.names[i] for i in np.flatnonzero((d.kind == TERMINAL)
                                                & (d.initial.status == FIXED))][:1]
    return macros, fixed


MACROS, FIXED_NAMES = _pick_names(_DESIGN)
ALL_NAMES = MACROS + FIXED_NAMES
LABELS = ["a", "b", "c"]


class SessionModel(RuleBasedStateMachine):
    """Random hand edits, undo/redo, snapshots and restores against a reference model."""

    @initialize()
    def start(self):
        self.d = _DESIGN
        self.s = Session(self.d)
        self.states = [state(self.s.floorplan)]  # expected state after each step
        self.pos = 0
        self.alts: dict[str, tuple] = {}

    # --- model helpers ---------------------------------------------------------------------
    def _expect_push(self, new):
        if not same_bits(new, self.states[self.pos]):
            del self.states[self.pos + 1:]
            self.states.append(new)
            self.pos += 1

    def _only_block_changed(self, before, after, i, fields):
        mask = np.ones(self.d.num_blocks, bool)
        mask[i] = False
        for k in range(4):
            assert np.array_equal(before[k][mask], after[k][mask])
            if k not in fields:
                assert np.array_equal(before[k][i], after[k][i])

    def _fails_unchanged(self, exc, fn, *args):
        before, log = state(self.s.floorplan), self.s.log
        try:
            fn(*args)
        except exc:
            pass
        else:
            raise AssertionError(f"{fn.__name__}{args} should have failed")
        assert same_bits(state(self.s.floorplan), before) and self.s.log == log

    # --- rules -----------------------------------------------------------------------------
    @rule(name=st.sampled_from(ALL_NAMES), x=st.floats(-300, 2700), y=st.floats(-300, 2300))
    def move(self, name, x, y):
        if name in FIXED_NAMES:
            self._fails_unchanged(DesignError, self.s.move, name, x, y)
            return
        before = state(self.s.floorplan)
        nx, ny = self.s.move(name, x, y)
        after = state(self.s.floorplan)
        i = self.d.block(name)
        self._only_block_changed(before, after, i, {0, 1})
        w, h = self.s.floorplan.sizes()
        c = self.d.core
        assert c[0] - 1e-9 <= nx and nx + w[i] <= c[2] + 1e-9
        assert c[1] - 1e-9 <= ny and ny + h[i] <= c[3] + 1e-9
        sx = float(snap(x, self.d.grid_origin[0], self.d.grid_pitch[0]))
        sy = float(snap(y, self.d.grid_origin[1], self.d.grid_pitch[1]))
        if c[0] <= sx and sx + w[i] <= c[2]:
            assert nx == sx
        if c[1] <= sy and sy + h[i] <= c[3]:
            assert ny == sy
        self._expect_push(after)

    @rule(name=st.sampled_from(ALL_NAMES))
    def pin(self, name):
        if name in FIXED_NAMES:
            self._fails_unchanged(DesignError, self.s.pin, name)
            return
        exp = tuple(a.copy() for a in self.states[self.pos])
        exp[3][self.d.block(name)] = PINNED
        self.s.pin(name)
        assert same_bits(state(self.s.floorplan), exp)
        self._expect_push(exp)

    @rule(name=st.sampled_from(MACROS))
    def unpin(self, name):
        exp = tuple(a.copy() for a in self.states[self.pos])
        exp[3][self.d.block(name)] = 0
        self.s.unpin(name)
        assert same_bits(state(self.s.floorplan), exp)
        self._expect_push(exp)

    @rule(name=st.sampled_from(MACROS), flip=st.booleans())
    def reorient(self, name, flip):
        i = self.d.block(name)
        allowed = int(self.d.orient_allowed[i])
        cur = int(self.s.floorplan.orient[i])
        # the rotation orbit of N is {N, W, S, E}; of FN {FN, FE, FS, FW}
        orbit = [0, 3, 1, 2] if cur in (0, 1, 2, 3) else [4, 6, 5, 7]
        fn = self.s.flip if flip else self.s.rotate
        possible = (any(allowed >> o & 1 for o in orbit if o != cur) if not flip else
                    bool(allowed >> {0: 4, 4: 0, 1: 5, 5: 1, 2: 6, 6: 2, 3: 7, 7: 3}[cur] & 1))
        if not possible:
            self._fails_unchanged(DesignError, fn, name)
            return
        before = state(self.s.floorplan)
        fn(name)
        after = state(self.s.floorplan)
        self._only_block_changed(before, after, i, {0, 1, 2})
        assert after[2][i] != before[2][i] and allowed >> int(after[2][i]) & 1
        self._expect_push(after)

    @rule(op=st.sampled_from(["align", "distribute", "array", "mirror", "push", "shift"]),
          k=st.integers(0, 11))
    def arrange(self, op, k):
        names = MACROS[:4]  # macros that allow all eight orientations (mirror never refused)
        args = {"align": (["left", "right", "bottom", "top", "x_centre", "y_centre"][k % 6],),
                "distribute": ("xy"[k % 2],), "array": (1 + k % 2, 4 - 2 * (k % 2)),
                "mirror": ("xy"[k % 2],), "push": (), "shift": (7.0 * k - 30.0, 3.3)}[op]
        fn = getattr(self.s, op)
        pinned = any(self.s.floorplan.status_of(n) == "pinned" for n in names)
        if pinned and op != "shift":  # arranging refuses pinned macros; a shift is a hand move
            self._fails_unchanged(DesignError, fn, names, *args)
            return
        before = state(self.s.floorplan)
        fn(names, *args)
        after = state(self.s.floorplan)
        rest = np.ones(self.d.num_blocks, bool)
        rest[[self.d.block(n) for n in names]] = False
        assert all(np.array_equal(b[rest], a[rest]) for b, a in zip(before, after))
        self._expect_push(after)

    @rule()
    def undo(self):
        if self.pos == 0:
            self._fails_unchanged(DesignError, self.s.undo)
            return
        prev = self.states[self.pos]
        self.s.undo()
        self.pos -= 1
        now = state(self.s.floorplan)
        assert same_bits(now, self.states[self.pos])
        self._pinned_kept(prev, now)

    @rule()
    def redo(self):
        if self.pos == len(self.states) - 1:
            self._fails_unchanged(DesignError, self.s.redo)
            return
        prev = self.states[self.pos]
        self.s.redo()
        self.pos += 1
        now = state(self.s.floorplan)
        assert same_bits(now, self.states[self.pos])
        self._pinned_kept(prev, now)

    def _pinned_kept(self, prev, now):
        """Every block pinned in the target state is pinned there at its recorded position."""
        exp = self.states[self.pos]
        pinned = exp[3] == PINNED
        assert np.array_equal(now[3] == PINNED, pinned)
        assert np.array_equal(now[0][pinned], exp[0][pinned])
        assert np.array_equal(now[1][pinned], exp[1][pinned])
        fixed = prev[3] == FIXED
        assert np.array_equal(now[0][fixed], prev[0][fixed])

    @precondition(lambda self: len(self.alts) < len(LABELS))
    @rule(k=st.integers(0, 10))
    def snapshot(self, k):
        free = [lb for lb in LABELS if lb not in self.alts]
        label = free[k % len(free)]
        self.s.snapshot(label)
        self.alts[label] = state(self.s.floorplan)
        assert same_bits(state(self.s.floorplan), self.states[self.pos])

    @precondition(lambda self: bool(self.alts))
    @rule(k=st.integers(0, 10))
    def restore(self, k):
        label = sorted(self.alts)[k % len(self.alts)]
        self.s.restore(label)
        assert same_bits(state(self.s.floorplan), self.alts[label])
        self._expect_push(self.alts[label])

    @invariant()
    def matches_model(self):
        if hasattr(self, "s"):
            assert same_bits(state(self.s.floorplan), self.states[self.pos])
            assert len(self.s.history) == self.pos

    def teardown(self):
        if not hasattr(self, "s"):
            return
        while self.s.can_undo:
            self.s.undo()
        assert same_bits(state(self.s.floorplan), state(self.d.initial))


SessionModel.TestCase.settings = settings(
    max_examples=25, stateful_step_count=25, deadline=None,
    suppress_health_check=[HealthCheck.too_slow])
TestSessionModel = SessionModel.TestCase


# --- replay in a fresh interpreter ----------------------------------------------------------


def _has_placer() -> bool:
    try:
        from floorwidget.placer import place  # noqa: F401
    except ImportError:
        return False
    return True


def _busy_session(with_placer: bool) -> Session:
    d = _DESIGN
    s = Session(d)
    a, b, c = MACROS[0], MACROS[1], MACROS[4]
    s.move(a, 333.3, 444.4)
    s.pin(a)
    s.rotate(b)
    s.flip(c)
    with s.batch("drag b"):
        s.move(b, 1001.7, 801.3)
        s.pin(b)
    s.snapshot("hand", note="two macros pinned")
    if with_placer:
        s.place(seed=3)
        s.snapshot("placed")
        s.refine(seed=1)
    alt = s.floorplan.copy()
    alt.x[d.kind == MACRO] += 0.125
    s.add_alternative("sweep-1", alt, params={"seed": 7, "target_density": 0.7})
    s.move(MACROS[2], 1700.05, 300.2)
    s.undo()
    s.undo()
    s.redo()
    s.restore("hand")
    s.unpin(a)
    return s


def _dump_cmd(out: Path) -> str:
    return (
        "\nimport numpy as _np\n"
        "_fp = session.floorplan\n"
        f"_np.savez({str(out)!r}, x=_fp.x, y=_fp.y, orient=_fp.orient, status=_fp.status,\n"
        "          labels=_np.array([a.label for a in session.alternatives]),\n"
        "          ax=_np.array([a.floorplan.x for a in session.alternatives]),\n"
        "          hist=_np.array(session.history))\n"
    )


@pytest.mark.parametrize("with_placer", [False, pytest.param(True, marks=[
    pytest.mark.slow, pytest.mark.skipif(not _has_placer(), reason="placer not available yet")])])
def test_script_replays_bit_identically_in_fresh_process(tmp_path, with_placer):
    s = _busy_session(with_placer)
    code = s.script()
    assert "import floorwidget as fw" in code and "session = fw.Session(design" in code
    if with_placer:
        assert "session.place(target_density=0.8, seed=3)" in code
    compile(code, "<script>", "exec")
    path = tmp_path / "replay.py"
    out = tmp_path / "replayed.npz"
    path.write_text(code + _dump_cmd(out))
    env = dict(os.environ, PYTHONHASHSEED="12345")
    r = subprocess.run([sys.executable, str(path)], capture_output=True, text=True,
                       cwd=tmp_path, env=env, timeout=300)
    assert r.returncode == 0, r.stderr[-2000:]
    got = np.load(out)
    fp = s.floorplan
    for k in ("x", "y", "orient", "status"):
        assert np.array_equal(got[k].view(np.uint8), getattr(fp, k).view(np.uint8)), k
    assert list(got["labels"]) == [a.label for a in s.alternatives]
    assert np.array_equal(got["ax"].view(np.uint8),
                          np.stack([a.floorplan.x for a in s.alternatives]).view(np.uint8))
    assert list(got["hist"]) == s.history


def test_script_needs_a_source(demo_design):
    d = fw.Design("nofile", demo_design.die, demo_design.names, demo_design.kind,
                  demo_design.width, demo_design.height, demo_design.net_start,
                  demo_design.pin_block, demo_design.pin_dx, demo_design.pin_dy, validate=False)
    with pytest.raises(DesignError, match="no source file"):
        Session(d).script()


def test_script_embeds_a_custom_initial_floorplan(tmp_path):
    d = _DESIGN
    fp = d.initial.copy()
    fp.x[d.block(MACROS[0])] = 100.0
    s = Session(d, fp, target_density=0.7)
    s.move(MACROS[1], 400, 400)
    path = tmp_path / "r.py"
    out = tmp_path / "r.npz"
    path.write_text(s.script() + _dump_cmd(out))
    r = subprocess.run([sys.executable, str(path)], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr[-2000:]
    got = np.load(out)
    assert np.array_equal(got["x"], s.floorplan.x) and "target_density=0.7" in s.script()


# --- session files ------------------------------------------------------------------------


def test_session_file_round_trip(tmp_path):
    s = _busy_session(False)
    p = tmp_path / "work.fws.json"
    s.save(p)
    doc = json.loads(p.read_text())
    assert doc["format"] == "floorwidget-session" and doc["version"] == 1
    assert doc["design"]["source"] == str(DEMO)
    t = Session.load(p)
    assert t.floorplan.identical(s.floorplan) and t.initial.identical(s.initial)
    assert [a.label for a in t.alternatives] == [a.label for a in s.alternatives]
    for a, b in zip(s.alternatives, t.alternatives):
        assert a.floorplan.identical(b.floorplan)
        assert a.report == b.report and a.note == b.note and a.params == b.params
    assert t.history == s.history
    # the log round-trips (floorplans inside add_alternative compared separately)
    def strip(log):
        return [{k: (v if k != "args" else [x if not isinstance(x, fw.Floorplan) else "fp"
                                            for x in v]) for k, v in e.items()} for e in log]
    assert strip(t.log) == strip(s.log)
    # undo and redo keep working after loading, bit for bit
    while s.can_undo:
        s.undo()
        t.undo()
        assert same_bits(state(s.floorplan), state(t.floorplan))
    assert t.floorplan.identical(t.initial)
    # the loaded session's script still replays from the start
    assert t.script().count("session.") == s.script().count("session.")
    # saving again gives the same document (apart from the time stamp)
    p2 = tmp_path / "again.json"
    Session.load(p).save(p2)
    d1, d2 = json.loads(p.read_text()), json.loads(p2.read_text())
    d1.pop("saved"), d2.pop("saved")
    assert d1 == d2


def test_session_file_floats_exact(tmp_path):
    s = Session(_DESIGN)
    fp = _DESIGN.initial.copy()
    rng = np.random.default_rng(0)
    fp.x[:] = rng.uniform(0, 2000, fp.x.shape)  # arbitrary float64 bits
    fp.x[0] = -0.0
    s.add_alternative("odd", fp)
    s.restore("odd")
    s.save(tmp_path / "f.json")
    t = Session.load(tmp_path / "f.json", design=_DESIGN)
    assert np.array_equal(t.floorplan.x.view(np.uint64), fp.x.view(np.uint64))


def test_damaged_session_file_names_file_and_place(tmp_path):
    s = _busy_session(False)
    good = tmp_path / "good.json"
    s.save(good)
    text = good.read_text()
    bad = tmp_path / "bad.json"
    bad.write_text(text[: len(text) // 2])
    with pytest.raises(DesignError, match=r"bad\.json:\d+: invalid JSON"):
        Session.load(bad)
    doc = json.loads(text)
    doc["current"]["x"] = doc["current"]["x"][:-1]
    bad.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match=r"bad\.json: current\.x: expected 575 numbers"):
        Session.load(bad)
    doc = json.loads(text)
    doc["alternatives"][0]["floorplan"]["orient"][3] = 9
    bad.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match=r"alternatives\[0\]\.floorplan\.orient\[3\]"):
        Session.load(bad)
    doc = json.loads(text)
    doc["design"]["fingerprint"] = "0" * 64
    bad.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match="differs"):
        Session.load(bad)
    doc = json.loads(text)
    doc["log"][0]["op"] = "explode"
    bad.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match=r"log\[0\]\.op: unknown action"):
        Session.load(bad)
    doc = json.loads(text)
    doc["version"] = 99
    bad.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match="version"):
        Session.load(bad)
    with pytest.raises(DesignError, match="not found"):
        Session.load(tmp_path / "missing.json")
    assert good.read_text() == text  # nothing ever wrote over the good file


def test_failed_save_keeps_previous_file(tmp_path, monkeypatch):
    s = _busy_session(False)
    p = tmp_path / "keep.json"
    s.save(p)
    before = p.read_bytes()
    s.move(MACROS[3], 1500, 1500)
    # a crash while the new file is being written
    import floorwidget.formats._io as io_mod

    def boom(fd):
        raise OSError("disk full")

    monkeypatch.setattr(io_mod.os, "fsync", boom)
    with pytest.raises(DesignError, match=r"keep\.json: cannot write: disk full"):  # names OUT
        s.save(p)
    monkeypatch.undo()
    assert p.read_bytes() == before
    assert sorted(x.name for x in tmp_path.iterdir()) == ["keep.json"]  # no temp file left
    with pytest.raises(DesignError, match="batch"):
        with s.batch("open"):
            s.save(p)
    assert p.read_bytes() == before
    s.save(p)
    assert Session.load(p).floorplan.identical(s.floorplan)


def test_load_finds_design_beside_the_session(tmp_path):
    import shutil

    dd = tmp_path / "proj"
    dd.mkdir()
    shutil.copy(DEMO, dd / "chip.json")
    d = fw.load(dd / "chip.json")
    s = Session(d)
    s.move(MACROS[0], 500, 500)
    s.save(dd / "s.json")
    moved = tmp_path / "moved"
    shutil.move(str(dd), str(moved))
    t = Session.load(moved / "s.json")  # absolute source gone; the relative one is found
    assert np.array_equal(t.floorplan.x, s.floorplan.x)
    assert Path(t.design.source).resolve() == (moved / "chip.json").resolve()


def test_large_arrays_packed_exactly(tmp_path, monkeypatch):
    """Arrays above the list limit are written as raw bytes in base64 and read back exactly."""
    import floorwidget.session.files as sio

    monkeypatch.setattr(sio, "LIST_LIMIT", 10)
    s = _busy_session(False)
    fp = _DESIGN.initial.copy()
    fp.x[:] = np.random.default_rng(3).uniform(0, 2000, fp.x.shape)
    s.add_alternative("rnd", fp)
    s.restore("rnd")
    p = tmp_path / "packed.json"
    s.save(p)
    doc = json.loads(p.read_text())
    assert set(doc["current"]["x"]) == {"dtype", "base64"}
    t = Session.load(p)
    assert np.array_equal(t.floorplan.x.view(np.uint64), s.floorplan.x.view(np.uint64))
    assert t.floorplan.identical(s.floorplan) and t.history == s.history
    for a, b in zip(s.alternatives, t.alternatives):
        assert a.floorplan.identical(b.floorplan)
    while s.can_undo:
        s.undo()
        t.undo()
        assert same_bits(state(s.floorplan), state(t.floorplan))
    doc["current"]["orient"]["base64"] = doc["current"]["orient"]["base64"][:-8] + "!!!!!!!!"
    p.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match=r"current\.orient: damaged base64"):
        Session.load(p)


# ---------------------------------------------------------------------------------------------
# hardening: DEF designs read with LEF libraries, damaged numbers and densities


def _def_with_libraries_elsewhere(tmp_path):
    """kestrel.def in one folder, its two LEFs under other names in another (so the reader's
    ``<stem>.lef`` rule cannot find them)."""
    import shutil

    data = Path(__file__).parent / "data" / "lefdef"
    (tmp_path / "blk").mkdir()
    (tmp_path / "lib").mkdir()
    shutil.copy(data / "kestrel.def", tmp_path / "blk" / "top.def")
    lefs = [tmp_path / "lib" / "t.lef", tmp_path / "lib" / "c.lef"]
    shutil.copy(data / "kestrel_tech.lef", lefs[0])
    shutil.copy(data / "kestrel_cells.lef", lefs[1])
    return tmp_path / "blk" / "top.def", lefs


def test_script_and_session_file_carry_the_lef_list(tmp_path):
    dpath, lefs = _def_with_libraries_elsewhere(tmp_path)
    d = fw.load(dpath, lef=lefs)
    s = Session(d)
    s.move("u_ram1", 260.0, 150.0)
    s.pin("u_ram1")
    code = s.script()
    assert f"lef={[str(p) for p in lefs]!r}" in code
    ns: dict = {}
    exec(compile(code, "<replay>", "exec"), ns)  # the script loads the DEF with its LEFs
    assert ns["session"].floorplan.identical(s.floorplan)
    s.save(tmp_path / "blk" / "s.json")
    back = Session.load(tmp_path / "blk" / "s.json")
    assert back.floorplan.identical(s.floorplan)
    assert back.design.lef_files == [str(p) for p in lefs]
    # moved as a whole: the relative paths still find the libraries
    import shutil

    shutil.move(str(tmp_path / "blk"), str(tmp_path / "new" / "blk"))
    shutil.move(str(tmp_path / "lib"), str(tmp_path / "new" / "lib"))
    again = Session.load(tmp_path / "new" / "blk" / "s.json")
    assert again.floorplan.identical(s.floorplan)


@pytest.mark.parametrize("edit, where", [
    (lambda doc: doc["current"]["status"].__setitem__(0, 2**63), r"current\.status\[0\]"),
    (lambda doc: doc["initial"]["orient"].__setitem__(2, -2**70), r"initial\.orient\[2\]"),
    (lambda doc: doc.__setitem__("target_density", -3), "target_density"),
    (lambda doc: doc.__setitem__("target_density", 0), "target_density"),
    (lambda doc: doc.__setitem__("target_density", 1e308), "target_density"),
])
def test_bad_numbers_in_session_files_are_refused(tmp_path, edit, where):
    s = _busy_session(False)
    good = tmp_path / "good.json"
    s.save(good)
    doc = json.loads(good.read_text())
    edit(doc)
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match=where) as e:
        Session.load(bad)
    assert e.value.file == str(bad) and e.value.where


def test_deeply_nested_session_file_is_refused(tmp_path):
    p = tmp_path / "deep.json"
    p.write_text('{"format": "floorwidget-session",\n"log": ' + "[" * 2000 + "]" * 2000 + "}")
    with pytest.raises(DesignError, match="nested") as e:
        Session.load(p)
    assert e.value.line == 2


@pytest.mark.parametrize("td", [-3, 0, 1e308, float("nan"), 1.5])
def test_session_refuses_a_bad_target_density(td):
    with pytest.raises(DesignError, match="target_density"):
        Session(_DESIGN, target_density=td)


def test_deeply_nested_batches_are_refused(tmp_path):
    s = _busy_session(False)
    good = tmp_path / "good.json"
    s.save(good)
    doc = json.loads(good.read_text())
    log = []
    for _ in range(300):  # decodes fine, but would recurse 300 deep on checking and replay
        log = [{"op": "batch", "label": "b", "actions": log}]
    doc["log"] = log
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match="nested more than 32") as e:
        Session.load(bad)
    assert e.value.where.startswith("log[0].actions[0]")
