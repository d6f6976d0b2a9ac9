"""Placer checks against closed forms, the net model's published property, scipy's direct solver
and the flow's contracts (pinned blocks, determinism, untouched input)."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.sparse.linalg import spsolve

from floorwidget import metrics
from floorwidget.design import (
    CELL,
    CLUSTER,
    FIXED,
    MACRO,
    MOVABLE,
    PINNED,
    TERMINAL,
    Design,
    Floorplan,
)
from floorwidget.placer import (
    PlacementError,
    PlacementWarning,
    legalize,
    make_options,
    place,
    refine,
)
from floorwidget.placer.flow import TARGET_MARGIN
from floorwidget.placer.netmodel import NetTopology, b2b_cost, b2b_edges
from floorwidget.placer.solve import QuadraticSystem, assemble_axis, solve_spd
from floorwidget.placer.spread import capacity_map, lookahead, make_grid, rasterize


def make_design(widths, heights, kinds, nets, die=(0.0, 0.0, 100.0, 100.0), x=None, y=None,
                status=None, weights=None, halo=0.0, blockages=None):
    """A design from plain lists; ``nets`` is a list of lists of ``(block, dx, dy)``."""
    n = len(widths)
    start = np.cumsum([0] + [len(p) for p in nets])
    flat = [p for ps in nets for p in ps]
    return Design("t", die, [f"b{i}" for i in range(n)], kinds, widths, heights, start,
                  [p[0] for p in flat], [p[1] for p in flat], [p[2] for p in flat],
                  net_weight=weights, halo=np.full((n, 4), halo), blockages=blockages,
                  grid_pitch=(1.0, 1.0), x=x, y=y, status=status)


def random_design(rng, n_mov=30, n_fix=6, n_nets=60, max_deg=7, size=2.0):
    """Random small blocks and nets with pin offsets, a few fixed terminals on the boundary."""
    n = n_mov + n_fix
    w = np.r_[rng.uniform(0.5, size, n_mov), np.zeros(n_fix)]
    h = np.r_[rng.uniform(0.5, size, n_mov), np.zeros(n_fix)]
    kinds = [CELL] * n_mov + [TERMINAL] * n_fix
    nets = []
    for _ in range(n_nets):
        deg = int(rng.integers(2, max_deg + 1))
        blocks = rng.choice(n, size=deg, replace=False)
        nets.append([(int(b), float(rng.uniform(-w[b] / 2, w[b] / 2)),
                      float(rng.uniform(-h[b] / 2, h[b] / 2))) for b in blocks])
    # make sure every movable block is connected to something
    for b in range(n_mov):
        nets.append([(b, 0.0, 0.0), (int(rng.integers(n_mov, n)), 0.0, 0.0)])
    x = rng.uniform(0, 100, n)
    y = rng.uniform(0, 100, n)
    status = [MOVABLE] * n_mov + [FIXED] * n_fix
    return make_design(w, h, kinds, nets, x=x, y=y, status=status,
                       weights=rng.uniform(0.5, 2.0, len(nets)))


# --------------------------------------------------------------------------------------------
# net model and solve


def test_chain_between_fixed_pins_is_evenly_spaced():
    """A chain of n movable cells between fixed pins at 0 and L: with equal connection weights
    the minimiser of Σ (x_{i+1} - x_i)² is the linear interpolation x_i = i L / (n + 1)
    (closed form: the discrete Laplace equation x_{i-1} - 2 x_i + x_{i+1} = 0)."""
    n, L = 9, 100.0
    kinds = [TERMINAL, TERMINAL] + [CELL] * n
    chain = [0] + list(range(2, n + 2)) + [1]
    nets = [[(a, 0.0, 0.0), (b, 0.0, 0.0)] for a, b in zip(chain[:-1], chain[1:])]
    rng = np.random.default_rng(3)
    x = np.r_[0.0, L, rng.uniform(0, L, n)]
    d = make_design([0, 0] + [1.0] * n, [0, 0] + [1.0] * n, kinds, nets, x=x,
                    y=np.r_[50.0, 50.0, rng.uniform(0, 100, n)],
                    status=[FIXED, FIXED] + [MOVABLE] * n)
    fp = d.initial
    qs = QuadraticSystem(d, fp.status == MOVABLE)
    qs.eps = 1e9  # every distance below eps: all Bound2Bound weights equal
    cx, cy = fp.centres()
    nx, ny, info = qs.solve(cx, cy, fp.orient, rtol=1e-12, maxiter=1000)
    assert info == (0, 0)
    np.testing.assert_allclose(nx, L * np.arange(1, n + 1) / (n + 1), atol=1e-6)
    np.testing.assert_allclose(ny, 50.0, atol=1e-6)


def test_b2b_cost_equals_hpwl_at_linearisation_point():
    """Spindler, Schlichtmann, Johannes, IEEE TCAD 27(8), 2008: the Bound2Bound weights make the
    quadratic cost ½ Σ w (x_i − x_j)² equal the (weighted) HPWL at the positions they were
    built from.  Reference HPWL: ``floorwidget.metrics`` and a per-net loop here."""
    rng = np.random.default_rng(11)
    for _trial in range(5):
        d = random_design(rng, n_mov=40, n_fix=8, n_nets=80, max_deg=12)
        fp = d.initial.copy()
        fp.orient[:40] = rng.integers(0, 8, 40)
        px, py = fp.pin_positions()
        topo = NetTopology.from_design(d)
        cost = (b2b_cost(px[topo.pin], topo) + b2b_cost(py[topo.pin], topo))
        ref = 0.0
        for k in range(d.num_nets):
            s = slice(d.net_start[k], d.net_start[k + 1])
            ref += d.net_weight[k] * (np.ptp(px[s]) + np.ptp(py[s]))
        assert cost == pytest.approx(ref, rel=1e-9)
        assert cost == pytest.approx(metrics.hpwl(d, fp, weighted=True), rel=1e-9)


def test_b2b_edges_no_cliques():
    """A p-pin net gets 2p - 3 connections (bound-bound plus two per inner pin), not p(p-1)/2."""
    rng = np.random.default_rng(0)
    d = random_design(rng, n_mov=50, n_fix=5, n_nets=20, max_deg=30)
    topo = NetTopology.from_design(d)
    px, _ = d.initial.pin_positions()
    a, b, w = b2b_edges(px[topo.pin], topo, 1e-9)
    deg = np.diff(topo.start)
    assert len(a) == int(np.sum(2 * deg - 3))
    assert (w > 0).all() and np.isfinite(w).all()
    assert (a != b).all()


def test_cg_matches_direct_solve():
    """The Jacobi-preconditioned CG solution (ours and scipy.sparse.linalg.cg) equals
    scipy.sparse.linalg.spsolve (a direct LU solve, SuperLU) on random connected instances, and
    it zeroes the gradient of the quadratic energy Σ w (x_a + o_a − x_b − o_b)² computed here
    edge by edge."""
    rng = np.random.default_rng(5)
    for _trial in range(4):
        d = random_design(rng, n_mov=60, n_fix=6, n_nets=120)
        fp = d.initial.copy()
        fp.orient[:60] = rng.integers(0, 8, 60)
        qs = QuadraticSystem(d, fp.status == MOVABLE)
        cx, _ = fp.centres()
        ox, _ = qs.pin_offsets(fp.orient)
        pos = cx[qs.topo.block] + ox
        A, diag, rhs = assemble_axis(pos, ox, qs.pin_var, qs.nv, qs.topo, qs.eps)
        A = (A + sp.diags_array(diag)).tocsc()
        ref = spsolve(A, rhs)
        for method in ("pcg", "scipy"):
            x, info = solve_spd(A, rhs, cx[qs.blocks], rtol=1e-12, maxiter=10000, direct_max=0,
                                method=method)
            assert info == 0
            np.testing.assert_allclose(x, ref, rtol=1e-7, atol=1e-7)
        x, info = solve_spd(A, rhs, direct_max=10**6)  # the direct (LU) path
        np.testing.assert_allclose(x, ref, rtol=1e-9, atol=1e-9)
        # gradient of the energy at the solution, from the edge list directly
        a, b, w = b2b_edges(pos, qs.topo, qs.eps)
        xs = cx.copy()
        xs[qs.blocks] = ref
        p = xs[qs.topo.block] + ox
        r = w * (p[a] - p[b])
        grad = np.zeros(d.num_blocks)
        np.add.at(grad, qs.topo.block[a], 2 * r)
        np.add.at(grad, qs.topo.block[b], -2 * r)
        assert np.abs(grad[qs.blocks]).max() < 1e-8 * max(1.0, np.abs(w).max() * 100)


def test_floating_group_is_pulled_not_singular():
    """Two movable cells joined to each other and to nothing fixed: the weak pull toward the
    core centre keeps the system positive definite and puts them near the centre."""
    d = make_design([1, 1, 0], [1, 1, 0], [CELL, CELL, TERMINAL],
                    [[(0, 0, 0), (1, 0, 0)]], x=[10, 80, 0], y=[10, 20, 0],
                    status=[MOVABLE, MOVABLE, FIXED])
    qs = QuadraticSystem(d, d.initial.status == MOVABLE)
    assert qs.floating.tolist() == [True, True]
    cx, cy = d.initial.centres()
    nx, ny, _ = qs.solve(cx, cy, d.initial.orient, rtol=1e-10, maxiter=1000)
    assert np.isfinite(nx).all() and np.isfinite(ny).all()
    np.testing.assert_allclose(nx.mean(), 50.0, atol=1.0)
    np.testing.assert_allclose(ny.mean(), 50.0, atol=1.0)


# --------------------------------------------------------------------------------------------
# spreading


def test_rasterize_matches_shapely_areas():
    """Exact bin areas against shapely polygon intersections."""
    shapely = pytest.importorskip("shapely")
    from shapely.geometry import box

    rng = np.random.default_rng(2)
    g = make_grid((0, 0, 50, 40), np.ones(1), np.ones(1), bin_size=7.0)
    r = np.c_[rng.uniform(-5, 45, 30), rng.uniform(-5, 35, 30)]
    r = np.c_[r, r + rng.uniform(0.1, 15, (30, 2))]
    got = rasterize(g, r[:, 0], r[:, 1], r[:, 2], r[:, 3])
    ref = np.zeros((g.nx, g.ny))
    for i in range(g.nx):
        for j in range(g.ny):
            b = box(g.xlo + i * g.bw, g.ylo + j * g.bh, g.xlo + (i + 1) * g.bw,
                    g.ylo + (j + 1) * g.bh)
            ref[i, j] = sum(b.intersection(box(*q)).area for q in r)
    np.testing.assert_allclose(got, ref, atol=1e-9)
    assert shapely is not None


def test_lookahead_respects_capacity_and_obstacles():
    """The look-ahead placement of a tight clump is density-feasible: no small object ends in a
    bin without capacity (under an obstacle), and the overflow is small."""
    rng = np.random.default_rng(4)
    n = 4000
    w = np.full(n, 0.5)
    h = np.full(n, 0.5)
    g = make_grid((0, 0, 100, 100), w, h, bin_size=5.0)
    obst = np.array([[20.0, 20.0, 60.0, 50.0]])
    cap = capacity_map(g, 0.8, obst)
    cx = 40 + rng.normal(0, 2, n)
    cy = 35 + rng.normal(0, 2, n)
    tx, ty = lookahead(g, cap, cx, cy, w, h)
    inside = (tx > 20.25) & (tx < 59.75) & (ty > 20.25) & (ty < 49.75)
    assert not inside.any()
    use = rasterize(g, tx - w / 2, ty - h / 2, tx + w / 2, ty + h / 2)
    assert np.maximum(use - cap, 0).sum() / (w * h).sum() < 0.05
    # order is kept along x: the look-ahead of the left half stays left of the right half
    left = cx < np.median(cx)
    assert np.median(tx[left]) < np.median(tx[~left])


# --------------------------------------------------------------------------------------------
# flow


def macro_chain_design():
    """Five movable macros joined by 4-bit buses, pads on the west and east edges."""
    die = (0.0, 0.0, 1200.0, 400.0)
    k = 5
    widths = [100.0] * k + [0.0] * 8
    heights = [80.0] * k + [0.0] * 8
    kinds = [MACRO] * k + [TERMINAL] * 8
    xs = [0.0] * k + [0.0] * 4 + [1199.0] * 4
    ys = [0.0] * k + [150.0, 180.0, 210.0, 240.0] * 2
    status = [MOVABLE] * k + [FIXED] * 8
    nets = []
    for b in range(4):
        nets.append([(k + b, 0, 0), (0, -50.0, -30.0 + 20 * b)])
        nets.append([(k + 4 + b, 0, 0), (k - 1, 50.0, -30.0 + 20 * b)])
        for m in range(k - 1):
            nets.append([(m, 50.0, -30.0 + 20 * b), (m + 1, -50.0, -30.0 + 20 * b)])
    return make_design(widths, heights, kinds, nets, die=die, x=xs, y=ys, status=status,
                       halo=2.0)


def test_macro_chain_ends_in_chain_order():
    d = macro_chain_design()
    fp = place(d, seed=1)
    cx, _ = fp.centres()
    assert np.all(np.diff(cx[:5]) > 0), cx[:5]
    if fp.info["legalized"]:
        assert metrics.legality(d, fp)["macro_overlaps"] == 0


@pytest.fixture(scope="module")
def demo_placed(demo_design):
    return place(demo_design, seed=0)


def _demo_with_pins(demo_design, placed):
    fp2 = placed.copy()
    mac = np.flatnonzero(demo_design.kind == MACRO)
    pinned = mac[[0, 5, 12]]
    fp2.status[pinned] = PINNED
    return fp2, pinned


def test_place_demo_overflow_and_legal(demo_design, demo_placed):
    fp = demo_placed
    assert fp.info["overflow"] <= 0.10
    assert fp.info["iterations"] > 0
    assert set(fp.info["stage_seconds"]) >= {"global"}
    assert fp.info["legalized"]
    assert metrics.evaluate(demo_design, fp)["legal"]


def test_place_is_deterministic(demo_design, demo_placed):
    a = place(demo_design, seed=0)
    assert a.identical(demo_placed)
    assert a.info["overflow"] == demo_placed.info["overflow"]
    c = place(demo_design, seed=4, max_iterations=3)
    assert not np.array_equal(a.x, c.x)


def test_pinned_and_fixed_never_move(demo_design, demo_placed):
    fp, pinned = _demo_with_pins(demo_design, demo_placed)
    # pinned macros sit where the first placement put them: now push a movable macro on one
    keep = (fp.status != MOVABLE) | (demo_design.kind == TERMINAL)
    snap = (fp.x.copy(), fp.y.copy(), fp.orient.copy())
    outs = [place(demo_design, fp, seed=0), refine(demo_design, fp), legalize(demo_design, fp)]
    for out in outs:
        assert np.array_equal(out.x[keep], snap[0][keep])
        assert np.array_equal(out.y[keep], snap[1][keep])
        assert np.array_equal(out.orient[keep], snap[2][keep])
        assert np.array_equal(out.status, fp.status)


def test_input_floorplan_unchanged(demo_design, demo_placed):
    fp, _ = _demo_with_pins(demo_design, demo_placed)
    before = fp.copy()
    place(demo_design, fp, seed=0, max_iterations=5)
    refine(demo_design, fp)
    assert fp.identical(before)
    assert demo_design.initial.status.sum() > 0  # terminals are fixed in the demo input


def test_refine_after_macro_move_moves_little(demo_design, demo_placed):
    fp = demo_placed
    mac = np.flatnonzero((demo_design.kind == MACRO) & (fp.status == MOVABLE))
    moved = fp.copy()
    i = mac[3]
    moved.x[i] += 150.0
    out = refine(demo_design, moved)
    assert metrics.evaluate(demo_design, out)["legal"]
    others = np.setdiff1d(mac, [i])
    disp = np.hypot(out.x[others] - moved.x[others], out.y[others] - moved.y[others])
    die_w = demo_design.die[2] - demo_design.die[0]
    # most macros stay essentially where they were
    assert np.median(disp) < 0.01 * die_w
    soft = demo_design.kind == CLUSTER
    sd = np.hypot(out.x[soft] - moved.x[soft], out.y[soft] - moved.y[soft])
    assert np.median(sd) < 0.05 * die_w


def test_infeasible_area_raises_and_leaves_input():
    # 2 x 80 x 80 µm² of clusters in a 100 x 100 µm core: 128 % utilisation
    d = make_design([80, 80, 0], [80, 80, 0], [CLUSTER, CLUSTER, TERMINAL],
                    [[(0, 0, 0), (1, 0, 0), (2, 0, 0)]], x=[0, 0, 0], y=[0, 0, 0],
                    status=[MOVABLE, MOVABLE, FIXED])
    before = d.initial.copy()
    with pytest.raises(PlacementError, match="cannot fit even at target density 1.0"):
        place(d, target_density=0.5)
    assert d.initial.identical(before)


def test_target_density_below_utilisation_is_raised_with_a_warning():
    # 2 x 60 x 60 µm² in 100 x 100 µm: utilisation 0.72 (worked by hand); the placer uses
    # 0.72 + the margin, warns, and the report carries the value used
    d = make_design([60, 60, 0], [60, 60, 0], [CLUSTER, CLUSTER, TERMINAL],
                    [[(0, 0, 0), (1, 0, 0), (2, 0, 0)]], x=[0, 0, 0], y=[0, 0, 0],
                    status=[MOVABLE, MOVABLE, FIXED])
    with pytest.warns(PlacementWarning, match="utilisation 0.720 exceeds"):
        fp = place(d, target_density=0.5)
    used = 0.72 + TARGET_MARGIN
    assert fp.info["target_density"] == pytest.approx(used)
    assert metrics.evaluate(d, fp)["target_density"] == pytest.approx(used)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert place(d, target_density=0.8).info["target_density"] == 0.8


def test_options_are_validated():
    with pytest.raises(ValueError, match="max_iteration'"):
        make_options(max_iteration=3)
    with pytest.raises(ValueError, match="overflow_target"):
        make_options(overflow_target=2.0)
    with pytest.raises(ValueError, match="unknown placer option 'bogus'"):
        place(macro_chain_design(), bogus=1)
    with pytest.raises(ValueError, match="target_density"):
        place(macro_chain_design(), target_density=0.0)
    with pytest.raises(ValueError, match="no block matches 'nothing\\*'"):
        place(macro_chain_design(), net_weight_scale={"nothing*": 2.0})
    with pytest.raises(ValueError, match="unknown placer option 'speed'"):
        refine(macro_chain_design(), macro_chain_design().initial, speed=3)


def test_net_weight_scale_pulls_blocks_together():
    """Raising the weight of one block's nets shortens them (common practice: net weighting)."""
    d = macro_chain_design()
    opts = dict(legalize_macros=False)
    base = place(d, seed=0, **opts)
    heavy = place(d, seed=0, net_weight_scale={"b0": 20.0}, **opts)
    nets0 = d.nets_of([0])
    assert metrics.net_hpwl(d, heavy)[nets0].sum() < metrics.net_hpwl(d, base)[nets0].sum()


def test_progress_is_reported():
    seen = []
    place(macro_chain_design(), progress=lambda s, f, i: seen.append((s, f)))
    assert seen and all(0.0 <= f <= 1.0 for _, f in seen)
    assert seen[0][0] == "global"


def test_floorplan_type_checks():
    d = macro_chain_design()
    with pytest.raises(TypeError):
        place(d, floorplan="nope")
    assert isinstance(place(d), Floorplan)


def test_place_without_nets_on_movable_blocks_does_not_crash():
    # issue 12: a design whose movable blocks are on no net used to fail in the solve
    d = Design("nonets", (0, 0, 100, 100), ["a", "b"], [CLUSTER, MACRO], [10, 20], [10, 20],
               [0], [], [], [], grid_pitch=(1, 1))
    fp = place(d)
    assert metrics.evaluate(d, fp)["legal"]
    assert refine(d, fp).identical(refine(d, fp))


def test_pinned_macro_on_a_blockage_is_reported_not_silently_accepted():
    # issue 12: legalize/refine cannot move a pinned macro; they must say it keeps the
    # floorplan illegal (warning and report entry naming it)
    d = make_design([10, 10, 0], [10, 10, 0], [MACRO, MACRO, TERMINAL],
                    [[(0, 0, 0), (1, 0, 0), (2, 0, 0)]], x=[40, 0, 0], y=[40, 0, 0],
                    status=[PINNED, MOVABLE, FIXED], blockages=np.array([[35, 35, 60, 60]]))
    with pytest.warns(PlacementWarning, match="'b0'"):
        out = legalize(d, d.initial)
    assert out.info["pinned_illegal"] == ["b0"]
    rep = metrics.evaluate(d, out)
    assert not rep["legal"] and rep["pinned_illegal"] == "b0"
    with pytest.warns(PlacementWarning, match="'b0'"):
        refine(d, d.initial)
