"""Parameter sweeps: the same figures serially, on the default process pool and on a real Dask
cluster; failures kept per run; grid order; weights and pins reach the placer.

The reference for every sweep result is a direct call of the real ``fw.place`` with the same
parameters in this process: a sweep must add nothing and lose nothing.
"""

from __future__ import annotations

import concurrent.futures as cf
import io
import itertools
import pickle
import subprocess
import sys
import threading

import numpy as np
import pytest

import floorwidget as fw
from floorwidget.design import PINNED
from floorwidget.explore import (
    SerialExecutor,
    SweepResult,
    candidates,
    dumps_design,
    expand_grid,
    loads_design,
    net_weight_factors,
    sweep,
    text_progress,
    to_session,
)

# four parameter sets on the demo design; fewer spreading iterations keep the test short
GRID = {"target_density": [0.7, 0.85], "seed": [0, 3]}
FAST = {"max_iterations": 8}


def assert_same(a: list[SweepResult], b: list[SweepResult]) -> None:
    assert len(a) == len(b)
    for ra, rb in zip(a, b):
        assert ra.params == rb.params
        assert ra.error is None and rb.error is None, (ra.error, rb.error)
        assert ra.floorplan.identical(rb.floorplan), ra.params
        assert ra.report == rb.report, ra.params


@pytest.fixture(scope="module")
def serial(demo_design):
    return sweep(demo_design, GRID, executor=SerialExecutor(), **FAST)


def test_serial_matches_direct_place(demo_design, serial):
    sets = expand_grid(GRID)
    assert [r.params for r in serial] == sets == [
        dict(zip(GRID, v)) for v in itertools.product(*GRID.values())]
    for k, r in enumerate(serial):
        assert r.index == k and r.ok and r.seconds > 0, r.error
        assert r.floorplan.design is demo_design
        assert r.fixed == FAST and r.floorplan.info.get("seed") == r.params["seed"]
    for r in serial[1:3]:
        ref = fw.place(demo_design, **r.params, **FAST)
        assert r.floorplan.identical(ref), r.params
        assert r.report == fw.evaluate(demo_design, ref,
                                       target_density=r.params["target_density"])
    # different parameters give different placements (the parameters do reach the placer)
    assert not serial[0].floorplan.identical(serial[1].floorplan)
    assert not serial[0].floorplan.identical(serial[2].floorplan)


def test_default_process_pool_matches_serial(demo_design, serial):
    seen = []
    pooled = sweep(demo_design, GRID, progress=lambda d, t, r: seen.append((d, t, r.index)),
                   **FAST)
    assert_same(pooled, serial)
    assert [d for d, _, _ in seen] == [1, 2, 3, 4] and {t for _, t, _ in seen} == {4}
    assert sorted(i for _, _, i in seen) == [0, 1, 2, 3]


def _worker_designs():
    from floorwidget import explore

    return sorted(explore._WORKER_DESIGNS)


def test_dask_local_cluster_matches_serial(demo_design, serial):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        ex = client.get_executor()
        on_dask = sweep(demo_design, GRID, executor=ex, **FAST)
        # two worker processes; each unpickled the design at most once for all its runs
        cached = client.run(_worker_designs)
    assert len(cached) == 2
    assert all(len(v) <= 1 for v in cached.values()), cached
    assert len({t for v in cached.values() for t in v}) == 1
    assert_same(on_dask, serial)


def test_failing_runs_are_reported_and_others_complete(demo_design):
    d = demo_design
    a, b = d.macros[0], d.macros[1]
    base = d.initial.copy()
    base.x[d.block(b)] = base.x[d.block(a)]  # two macros on the same spot
    base.y[d.block(b)] = base.y[d.block(a)]
    grid = [
        {"target_density": 0.8, "seed": 0},
        {"target_density": -0.5, "seed": 0},          # invalid density
        {"target_density": 0.8, "seed": 1, "pinned": {a, b}},   # pinned macros overlap
        {"target_density": 0.8, "seed": 2, "pinned": {"no_such_macro"}},
        {"target_density": 0.8, "seed": 1},
    ]
    seen = []
    res = sweep(d, grid, executor=SerialExecutor(), base=base,
                progress=lambda done, total, r: seen.append(r.error), **FAST)
    assert [r.params for r in res] == grid
    assert [r.ok for r in res] == [True, False, False, False, True]
    for r in res[1:4]:
        assert r.floorplan is None and r.report is None
        assert r.error and "\n" not in r.error
    assert "target_density" in res[1].error
    assert res[2].error.startswith("PlacementError")
    assert "no_such_macro" in res[3].error
    assert sum(e is not None for e in seen) == 3
    # the good runs are exactly what a direct call gives
    ref = fw.place(d, base, target_density=0.8, seed=1, **FAST)
    assert res[4].floorplan.identical(ref)
    # the caller's base floorplan is untouched
    assert base.x[d.block(b)] == base.x[d.block(a)]
    assert (base.status == d.initial.status).all()


def test_pinned_macros_stay_at_base(demo_design, serial):
    d = demo_design
    start = serial[0].floorplan  # a legalised placement: its macros do not overlap
    pins = set(d.macros[:3])
    res = sweep(d, {"pinned": [pins], "seed": [5]}, executor=SerialExecutor(), base=start,
                **FAST)
    assert res[0].ok, res[0].error
    idx = [d.block(n) for n in pins]
    fp = res[0].floorplan
    assert (fp.status[idx] == PINNED).all()
    np.testing.assert_array_equal(fp.x[idx], start.x[idx])
    np.testing.assert_array_equal(fp.y[idx], start.y[idx])
    # the other macros did move
    others = [d.block(n) for n in d.macros[3:]]
    assert not np.array_equal(fp.x[others], start.x[others])
    # same as pinning by hand and placing
    manual = start.copy()
    manual.status[idx] = PINNED
    assert fp.identical(fw.place(d, manual, seed=5, **FAST))
    assert (start.status[idx] != PINNED).all()


def test_weight_scale(demo_design, serial):
    d = demo_design
    ws = {"sram_dp": 4.0, "lnk": 0.5}
    f = net_weight_factors(d, ws)
    # plainly: the factor furthest from 1 among each net's blocks
    block_f = np.ones(d.num_blocks)
    for i, name in enumerate(d.names):
        for key in sorted(ws, key=len):
            if name.startswith(key):
                block_f[i] = ws[key]
    want = []
    for k in range(d.num_nets):
        fs = [block_f[b] for b in d.pin_block[d.net_start[k]:d.net_start[k + 1]]]
        want.append(max(fs) if max(fs) > 1 else min(fs))
    np.testing.assert_array_equal(f, want)
    assert (f == 4.0).any() and (f == 0.5).any() and (f == 1.0).any()
    with pytest.raises(ValueError, match="no block"):
        net_weight_factors(d, {"zz_nothing": 2.0})
    with pytest.raises(ValueError, match="factor"):
        net_weight_factors(d, {"lnk": -1.0})

    res = sweep(d, {"weight_scale": [ws]}, executor=SerialExecutor(), seed=0,
                target_density=0.7, **FAST)
    assert res[0].ok, res[0].error
    assert res[0].floorplan.identical(
        fw.place(d, seed=0, target_density=0.7, net_weight_scale=f, **FAST))
    assert not res[0].floorplan.identical(serial[0].floorplan)  # same but for the weights
    # the report keeps the design's own weights, so the runs stay comparable
    ref = fw.evaluate(d, res[0].floorplan)
    assert res[0].report["hpwl_weighted"] == ref["hpwl_weighted"]
    assert res[0].params == {"weight_scale": ws}


class ReverseExecutor(cf.Executor):
    """Holds every call until ``n`` have been submitted, then runs them last-first."""

    def __init__(self, n: int):
        self.n = n
        self.jobs: list = []

    def submit(self, fn, /, *args, **kwargs):
        fut = cf.Future()
        self.jobs.append((fut, fn, args, kwargs))
        if len(self.jobs) == self.n:
            def run():
                for f, g, a, k in reversed(self.jobs):
                    f.set_result(g(*a, **k))
            threading.Thread(target=run).start()
        return fut


def test_results_in_grid_order_whatever_the_completion_order(demo_design):
    order = []
    grid = {"seed": [4, 1, 7, 2]}
    quick = {"max_iterations": 1, "initial_iterations": 1, "legalize_macros": False}
    res = sweep(demo_design, grid, executor=ReverseExecutor(4),
                progress=lambda done, total, r: order.append(r.index), **quick)
    assert order == [3, 2, 1, 0]
    assert [r.params for r in res] == expand_grid(grid)
    assert [r.index for r in res] == [0, 1, 2, 3]
    # each floorplan is the one its own seed produced
    assert [r.floorplan.info["seed"] for r in res] == [4, 1, 7, 2]
    assert res[2].floorplan.identical(fw.place(demo_design, seed=7, **quick))


def test_design_pickles_cheaply_and_exactly(demo_design):
    d = demo_design
    d.block(d.names[0])  # builds the name index cache
    data = dumps_design(d)
    assert len(data) < len(pickle.dumps(d))
    e = loads_design(data)
    assert e._index is None and e.initial.design is e
    for k, v in vars(d).items():
        if k in ("_index", "initial"):
            continue
        w = getattr(e, k)
        if isinstance(v, np.ndarray):
            assert v.dtype == w.dtype and np.array_equal(v, w), k
        else:
            assert v == w, k
    assert e.initial.identical(d.initial)
    assert fw.evaluate(e) == fw.evaluate(d)


def test_bad_grids(demo_design):
    with pytest.raises(ValueError, match="both"):
        sweep(demo_design, {"seed": [0, 1]}, executor=SerialExecutor(), seed=2)
    with pytest.raises(ValueError, match="list of values"):
        sweep(demo_design, {"seed": 3}, executor=SerialExecutor())
    with pytest.raises(ValueError, match="no values"):
        sweep(demo_design, {"seed": []}, executor=SerialExecutor())
    assert sweep(demo_design, [], executor=SerialExecutor()) == []


def test_text_progress_and_to_session(demo_design, serial):
    buf = io.StringIO()
    bad = SweepResult(params={"seed": 9}, index=4, error="ValueError: nope")
    for k, r in enumerate(serial[:3] + [bad], start=1):
        text_progress(k, 4, r, stream=buf, width=8)
    out = buf.getvalue()
    lines = out.split("\r")[1:]
    assert lines[0].startswith("sweep [##......] 1/4  target_density=0.7 seed=0")
    assert lines[-1].startswith("sweep [########] 4/4  seed=9  FAILED ValueError: nope")
    assert out.endswith("\n") and out.count("\n") == 1

    s = fw.Session(demo_design)
    labels = to_session(s, serial + [bad], prefix="td")
    assert len(labels) == 4 and labels[0] == "td 0: target_density=0.7 seed=0"
    alts = {a.label: a for a in s.alternatives}
    for lab, r in zip(labels, serial):
        assert alts[lab].params == r.params
        assert alts[lab].floorplan.identical(r.floorplan)
    s.restore(labels[2])
    assert s.floorplan.identical(serial[2].floorplan)


def test_core_module_imports_no_widget_or_cluster_library():
    code = ("import sys, floorwidget.explore; "
            "bad = [m for m in ('ipywidgets', 'bqplot', 'distributed', 'dask') "
            "if m in sys.modules]; "
            "print(bad); sys.exit(1 if bad else 0)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 0, out.stdout + out.stderr


def test_candidates_are_diverse_ranked_and_become_alternatives(demo_design):
    # the demo has banks (sram_sp4k_*) and 30 large macros: arrays, periphery and free all apply
    res = candidates(demo_design, 3, executor=SerialExecutor(), cells="global")
    assert sorted(r.params["macro_layout"] for r in res) == ["arrays", "free", "periphery"]
    assert all(r.ok for r in res)
    key = [(not r.report["legal"], r.report["hpwl"] * r.report["congestion_p99"]) for r in res]
    assert key == sorted(key)
    s = fw.Session(demo_design)
    labels = to_session(s, res, prefix="candidate")
    assert len(labels) == 3 and set(labels) <= {a.label for a in s.alternatives}
