"""The non-dominated set and the Pareto view of a sweep.

Outside check: the definition of Pareto dominance -- a point dominates another when it is no
worse in every objective and strictly better in at least one (K. Deb, *Multi-Objective
Optimization Using Evolutionary Algorithms*, Wiley, 2001, from memory).  The brute-force loop
below is that definition written out plainly; the vectorised function must agree with it.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from floorwidget.explore import SweepResult, pareto_front, result_points


def brute_force_front(points, minimise):
    """Definition of non-dominance, one pair at a time."""
    n = len(points)
    keep = []
    for i in range(n):
        if any(v != v for v in points[i]):  # NaN rows are not comparable
            keep.append(False)
            continue
        dominated = False
        for j in range(n):
            if j == i or any(v != v for v in points[j]):
                continue
            no_worse = True
            better = False
            for a, b, mn in zip(points[j], points[i], minimise):
                if mn:
                    a, b = -a, -b  # compare as "larger is better"
                if a < b:
                    no_worse = False
                if a > b:
                    better = True
            if no_worse and better:
                dominated = True
                break
        keep.append(not dominated)
    return np.array(keep, dtype=bool)


@st.composite
def point_sets(draw):
    n = draw(st.integers(0, 25))
    k = draw(st.integers(1, 4))
    # a small value range so that ties and duplicates happen often
    vals = st.one_of(st.integers(-3, 3).map(float),
                     st.floats(-1e3, 1e3, allow_nan=False, allow_infinity=False))
    pts = draw(arrays(np.float64, (n, k), elements=vals))
    if n and draw(st.booleans()):
        r = draw(st.integers(0, n - 1))
        pts[r, draw(st.integers(0, k - 1))] = np.nan
    minimise = draw(st.lists(st.booleans(), min_size=k, max_size=k))
    return pts, minimise


@settings(max_examples=120, deadline=None)
@given(point_sets())
def test_front_matches_definition(case):
    pts, minimise = case
    got = pareto_front(pts, minimise=minimise)
    want = brute_force_front(pts.tolist(), minimise)
    assert got.dtype == bool and got.shape == (len(pts),)
    np.testing.assert_array_equal(got, want)


def test_front_small_cases():
    # a staircase, one dominated point and a duplicate of a front point
    m = pareto_front([[1, 3], [2, 2], [3, 1], [3, 3], [2, 2]])
    assert m.tolist() == [True, True, True, False, True]
    # maximising the second objective flips which of two points wins
    assert pareto_front([[1, 3], [2, 2]], minimise=(True, False)).tolist() == [True, False]
    assert pareto_front([[1, 3], [2, 4]], minimise=(True, False)).tolist() == [True, True]
    # a one-column problem keeps only the minimum (all copies of it)
    assert pareto_front([[4.0], [1.0], [1.0], [2.0]]).tolist() == [False, True, True, False]
    assert pareto_front(np.zeros((0, 2))).shape == (0,)


def test_front_blocks_agree_with_one_block():
    # many points make the function work in several row blocks
    rng = np.random.default_rng(3)
    pts = rng.integers(0, 60, size=(1500, 3)).astype(float)
    got = pareto_front(pts)
    # no front point is dominated by any point; every other point is dominated by a front one
    f = pts[got]
    le = (f[None, :, :] <= f[:, None, :]).all(-1) & (f[None, :, :] < f[:, None, :]).any(-1)
    assert not le.any()
    rest = pts[~got]
    dom = ((f[None, :, :] <= rest[:, None, :]).all(-1)
           & (f[None, :, :] < rest[:, None, :]).any(-1)).any(1)
    assert dom.all()


# ---------------------------------------------------------------------------------------------
# the view


@pytest.fixture(scope="module")
def sweep_results(demo_design):
    """Real placements of the demo design from a small serial sweep, plus one failed run."""
    from floorwidget.explore import SerialExecutor, sweep

    grid = {"target_density": [0.65, 0.8, 1.5], "seed": [0, 1]}
    return sweep(demo_design, grid, executor=SerialExecutor(), max_iterations=8)


def test_view_marks_front(sweep_results):
    pytest.importorskip("bqplot")
    from floorwidget.widget.pareto import ParetoView

    res = sweep_results
    failed = [r for r in res if not r.ok]
    assert len(failed) == 2 and all(r.params["target_density"] == 1.5 for r in failed)
    view = ParetoView(res)
    ok = [i for i, r in enumerate(res) if r.ok]
    assert view.plotted.tolist() == ok
    # plotted coordinates are the reports' figures
    np.testing.assert_array_equal(view.points.x, [res[i].report["hpwl"] for i in ok])
    np.testing.assert_array_equal(view.points.y, [res[i].report["congestion_peak"] for i in ok])
    np.testing.assert_array_equal(view.points.color,
                                  [res[i].report["density_overflow"] for i in ok])
    # the highlighted set is exactly the brute-force non-dominated set
    pts = result_points([res[i] for i in ok], ("hpwl", "congestion_peak"))
    want = brute_force_front(pts.tolist(), (True, True))
    np.testing.assert_array_equal(view.front, want)
    np.testing.assert_array_equal(np.sort(view.front_points.x), np.sort(pts[want, 0]))
    assert view.front_points.default_size > view.points.default_size
    assert view.front_points.stroke != view.points.stroke
    # the staircase visits every front point
    fx = set(np.asarray(view.front_line.x).tolist())
    assert set(pts[want, 0].tolist()) <= fx
    assert "2 failed" in view.status.value
    # hovering fills the tooltip with the hovered run's parameters
    view._on_hover_points(view.points, {"data": {"index": 1}})
    r = res[ok[1]]
    assert f"seed = {r.params['seed']}" in view.hover_html.value
    assert f"{r.params['target_density']:.5g}" in view.hover_html.value


def test_view_click_sets_session_floorplan_undoably(demo_design, sweep_results):
    pytest.importorskip("bqplot")
    from floorwidget.session import Session
    from floorwidget.widget.pareto import ParetoView

    res = sweep_results
    s = Session(demo_design)
    before = s.floorplan.copy()
    view = ParetoView(res, session=s)
    k = 2  # third plotted point
    target = res[int(view.plotted[k])]
    assert not target.floorplan.identical(before)
    # the same method the bqplot click callback calls
    view._on_click_points(view.points, {"event": "element_click", "data": {"index": k}})
    assert s.floorplan.identical(target.floorplan)
    assert view.points.selected == [k]
    assert any(a.label == view.selected_label for a in s.alternatives)
    s.undo()
    assert s.floorplan.identical(before)
    s.redo()
    assert s.floorplan.identical(target.floorplan)
    # a click on the front marks reaches the same result
    j = 0
    front_target = res[int(view.plotted[np.flatnonzero(view.front)[j]])]
    view._on_click_front(view.front_points, {"data": {"index": j}})
    assert s.floorplan.identical(front_target.floorplan)
    # no session attached, or a failed run: a clear error, nothing changed
    with pytest.raises(ValueError, match="no session"):
        ParetoView(res).select(int(view.plotted[0]))
    bad = next(i for i, r in enumerate(res) if not r.ok)
    cur = s.floorplan.copy()
    with pytest.raises(ValueError, match="failed"):
        view.select(bad)
    assert s.floorplan.identical(cur)


def test_progress_widget_counts():
    pytest.importorskip("ipywidgets")
    from floorwidget.widget.pareto import SweepProgress

    bar = SweepProgress(total=3)
    ok = SweepResult(params={"seed": 0}, index=0)
    bad = SweepResult(params={"seed": 1}, index=1, error="ValueError: no")
    bar(1, 3, ok)
    bar(2, 3, bad)
    assert bar.bar.value == 2 and bar.bar.max == 3
    assert "1 failed" in bar.label.value
    bar(3, 3, ok)
    assert bar.bar.value == 3 and bar.bar.bar_style == "warning"
