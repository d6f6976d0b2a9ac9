"""Crash safety of the writers: a writer killed (SIGKILL) at a random moment never leaves an
output that is neither the old nor the new version, and the next reader cleans up after it.

A forked child rewrites one output over and over, alternating between two different designs
(A and B: different sizes, nets and positions, so that a mix of their files reads as neither).
Half of the runs kill it after a random delay; the other half make it kill itself at a random
one of the file-system steps of the writer (open, fsync, rename, unlink), so that every step of
the protocol -- temporaries half written, commit record written, renames half done -- is hit,
not only the text building that takes most of the time.  What must hold, on every run:

* the output loads, and it is exactly A or exactly B (netlist fingerprint and placement);
* after that load, no temporary file and no commit record is left in the folder.

Covered: a Bookshelf set (six files), a DEF with its LEF (two files), a native JSON file.  The
default profile does a few dozen kills per output (a few seconds); ``FW_FUZZ=long`` does ten
times as many.
"""

from __future__ import annotations

import os
import random
import shutil
import signal
import tempfile
import time
import warnings
from collections import Counter
from pathlib import Path

import pytest

import floorwidget as fw
from floorwidget.session_io import design_fingerprint
from floorwidget.synth import rent_design

pytestmark = pytest.mark.skipif(not hasattr(os, "fork"), reason="needs os.fork")

RUNS = 200 if os.environ.get("FW_FUZZ", "").lower() == "long" else 20


@pytest.fixture
def folder(tmp_path):
    """A fresh folder, in memory (/dev/shm) where there is one: fsync is then cheap, so more
    kills fit in the time, and the rename protocol is the same."""
    shm = Path("/dev/shm")
    if not (shm.is_dir() and os.access(shm, os.W_OK)):
        yield tmp_path
        return
    d = Path(tempfile.mkdtemp(prefix="fwcrash", dir=shm))
    try:
        yield d
    finally:
        shutil.rmtree(d, ignore_errors=True)


@pytest.fixture(scope="module")
def pair():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        a = rent_design(120, num_macros=4, seed=1, name="blk")
        b = rent_design(120, num_macros=4, seed=2, name="blk")
    assert design_fingerprint(a) != design_fingerprint(b)
    return a, b


def _state(design):
    fp = design.initial
    return design_fingerprint(design), fp.x.tobytes(), fp.y.tobytes(), fp.orient.tobytes()


_STEPS = ("open", "fsync", "replace", "unlink")


def _count_steps(hook) -> None:
    """Route the writer's file-system steps through ``hook()`` (called before each)."""
    import floorwidget.formats._io as io_mod

    for name in _STEPS:
        real = getattr(os, name)

        def wrapped(*args, _real=real, **kw):
            hook()
            return _real(*args, **kw)

        setattr(io_mod.os, name, wrapped)


def _die_at(k: int):
    """A step hook that SIGKILLs this process at its ``k``-th call."""
    done = [0]

    def hook():
        done[0] += 1
        if done[0] == k:
            os.kill(os.getpid(), signal.SIGKILL)

    return hook


def _leftovers(folder) -> list[str]:
    return sorted(n for n in os.listdir(folder) if ".fw-" in n)


@pytest.mark.parametrize("out_name", ["blk.aux", "blk.def", "blk.json"])
def test_killed_writer_leaves_old_or_new_and_nothing_else(pair, folder, out_name, monkeypatch):
    tmp_path = folder
    a, b = pair
    out = tmp_path / out_name
    # the two complete versions as the reader sees them (a round trip may lose some facts)
    refs = {}
    for label, d in (("A", a), ("B", b)):
        ref_dir = tmp_path / f"ref{label}"
        ref_dir.mkdir()
        fw.save(d, d.initial, ref_dir / out_name)
        refs[_state(fw.load(ref_dir / out_name))] = label
    assert len(refs) == 2
    steps = [0]

    def count():
        steps[0] += 1

    with monkeypatch.context() as m:
        for name in _STEPS:
            m.setattr(os, name, getattr(os, name))  # restored after counting
        _count_steps(count)
        t0 = time.perf_counter()
        fw.save(b, b.initial, out)
        fw.save(a, a.initial, out)
        cycle = time.perf_counter() - t0  # one B-then-A round of the writer below
    per_cycle = steps[0]
    data_files = sorted(os.listdir(tmp_path / "refA"))
    rng = random.Random(out_name)
    seen: Counter = Counter()
    for run in range(RUNS):
        by_step = run % 2 == 1
        kill_at = rng.randint(1, 2 * per_cycle)
        pid = os.fork()
        if pid == 0:  # the writer: rewrite the output until killed
            try:
                if by_step:
                    _count_steps(_die_at(kill_at))
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    while True:
                        fw.save(b, b.initial, out)
                        fw.save(a, a.initial, out)
            finally:
                os._exit(1)
        if not by_step:
            time.sleep(rng.uniform(0.0, 2.5 * cycle))  # anywhere in its first rounds
            os.kill(pid, signal.SIGKILL)
        _, status = os.waitpid(pid, 0)
        assert os.WIFSIGNALED(status), "the writer stopped by itself"
        left = _leftovers(tmp_path)
        seen["record left" if any(n.endswith(".commit") for n in left) else
             "temporaries left" if left else "clean"] += 1
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            got = fw.load(out)  # finishes a committed set, deletes the dead writer's leftovers
        assert _state(got) in refs, f"a mix of old and new after a kill ({left})"
        seen[refs[_state(got)]] += 1
        assert _leftovers(tmp_path) == []
        assert sorted(n for n in os.listdir(tmp_path) if not n.startswith("ref")) == data_files
    assert seen["A"] + seen["B"] == RUNS
    print(f"\n{out_name}: {dict(seen)}")
