"""Multilevel coarsening and the multilevel flow.

Outside checks:
* the clustered netlist is the quotient of the input netlist by the clustering — compared with
  ``networkx.quotient_graph`` (NetworkX reference library) on the clique expansion of the nets;
* coarsening keeps the total area, and every input block is in exactly one cluster of every
  level (the definition of a multilevel hierarchy: Karypis, Kumar, SIAM J. Sci. Comput. 1998);
* the multilevel and flat flows reach wirelengths within 10 % of each other on a small design
  (multilevel analytic placement loses little against flat placement: Chan, Cong, Sze, ISPD
  2005, measured there on larger suites; our tolerance is our own choice);
* pinned and fixed blocks never move (the project's placer contract).
"""

from __future__ import annotations

import itertools

import networkx as nx
import numpy as np
import pytest

from floorwidget import metrics
from floorwidget.design import CELL, CLUSTER, MACRO, MOVABLE, PINNED
from floorwidget.placer import place
from floorwidget.placer.coarsen import coarsen, coarsen_level
from floorwidget.synth import rent_design


@pytest.fixture(scope="module")
def small():
    return rent_design(3000, num_macros=4, seed=3)


def _clique_graph(design, nodes=None) -> nx.Graph:
    g = nx.Graph()
    g.add_nodes_from(range(design.num_blocks) if nodes is None else nodes)
    for k in range(design.num_nets):
        pins = set(design.pin_block[design.net_start[k]:design.net_start[k + 1]].tolist())
        g.add_edges_from(itertools.combinations(sorted(pins), 2))
    return g


def test_area_is_kept_and_every_block_is_in_one_cluster(small):
    cl = coarsen(small, target_blocks=500)
    assert cl.num_levels >= 3
    a0 = float(np.sum(small.width * small.height))
    for k, d in enumerate(cl.designs):
        assert np.sum(d.width * d.height) == pytest.approx(a0, rel=1e-12)
        start, block = cl.members(k)
        assert np.array_equal(np.sort(block), np.arange(small.num_blocks))
        assert start[-1] == small.num_blocks and np.all(np.diff(start) >= 1)
        # a cluster's area is its members' area
        sizes = np.add.reduceat((small.width * small.height)[block], start[:-1])
        assert np.allclose(sizes, d.width * d.height)
    assert cl.coarsest.num_blocks < small.num_blocks / 3
    # net weight is kept: a coarse net weighs what the fine nets it stands for weighed (nets
    # inside one cluster are gone, parallel two-pin nets are one net of their summed weight)
    c = cl.cluster_of(cl.num_levels - 1)
    k = c[small.pin_block]
    spans = np.minimum.reduceat(k, small.net_start[:-1]) != np.maximum.reduceat(
        k, small.net_start[:-1])
    assert cl.coarsest.net_weight.sum() == pytest.approx(small.net_weight[spans].sum())
    assert cl.coarsest.num_nets < int(spans.sum())          # some were merged


def test_coarse_netlist_is_the_networkx_quotient(small):
    cl = coarsen(small, target_blocks=1500)
    assert cl.num_levels >= 2
    coarse, parent = cl.designs[1], cl.parent[0]
    fine = _clique_graph(small)
    blocks = [set(np.flatnonzero(parent == c).tolist()) for c in range(coarse.num_blocks)]
    q = nx.quotient_graph(fine, blocks)
    # relabel the quotient's frozenset nodes by coarse index
    label = {frozenset(b): c for c, b in enumerate(blocks)}
    want = {tuple(sorted((label[u], label[v]))) for u, v in q.edges() if u != v}
    got = set(_clique_graph(coarse).edges())
    got = {tuple(sorted(e)) for e in got}
    assert got == want


def test_only_movable_cells_merge_and_area_bound_holds(small):
    fp = small.initial.copy()
    rng = np.random.default_rng(0)
    cells = np.flatnonzero(small.kind != MACRO)
    pinned = rng.choice(cells, 40, replace=False)
    fp.status[pinned] = PINNED
    amax = 6 * float(np.median(small.width * small.height))
    leader = coarsen_level(small, fp, amax)
    groups = np.bincount(leader, minlength=small.num_blocks)
    area = np.bincount(leader, weights=small.width * small.height, minlength=small.num_blocks)
    assert np.all(area[groups > 1] <= amax * (1 + 1e-12))
    fixed_like = (fp.status != MOVABLE) | (small.kind == MACRO)
    assert np.all(leader[fixed_like] == np.flatnonzero(fixed_like))   # lead themselves
    assert np.all(groups[fixed_like] == 1)                             # and nobody joins them
    # the coarse design keeps them as they are, clusters are soft
    cl = coarsen(small, fp, target_blocks=500)
    for k in range(1, cl.num_levels):
        d = cl.designs[k]
        c = cl.cluster_of(k)
        start, _ = cl.members(k)
        assert np.all(np.diff(start)[c[pinned]] == 1)
        assert all(d.names[c[i]] == small.names[i] for i in pinned)
        assert np.all(d.kind[np.diff(start) > 1] == CLUSTER)


def test_projection_gives_every_member_its_cluster_neighbourhood(small):
    cl = coarsen(small, target_blocks=800)
    top = cl.num_levels - 1
    fp = cl.coarsest.initial.copy()
    rng = np.random.default_rng(1)
    fp.x[:] = rng.uniform(0, 100, len(fp.x))
    fp.y[:] = rng.uniform(0, 100, len(fp.y))
    fine = cl.project(top, fp)
    par = cl.parent[top - 1]
    cx, cy = fp.centres()
    fx, fy = fine.centres()
    side = np.sqrt(cl.coarsest.width * cl.coarsest.height)[par]
    assert np.all(np.abs(fx - cx[par]) <= side / 4 + 1e-9)
    assert np.all(np.abs(fy - cy[par]) <= side / 4 + 1e-9)


def test_multilevel_and_flat_flows_agree(small):
    flat = place(small, seed=0, multilevel="off")
    ml = place(small, seed=0, multilevel="on")
    assert ml.info["levels"][0] == small.num_blocks and len(ml.info["levels"]) >= 2
    r = metrics.hpwl(small, ml) / metrics.hpwl(small, flat)
    assert 0.9 < r < 1.1
    rep = metrics.evaluate(small, ml)
    assert rep["legal"]


def test_multilevel_never_moves_pinned_blocks(small):
    fp = small.initial.copy()
    rng = np.random.default_rng(2)
    c = small.core
    pick = rng.choice(np.flatnonzero(small.kind != MACRO), 30, replace=False)
    fp.x[pick] = rng.uniform(c[0], c[2] - 20, 30)
    fp.y[pick] = c[1] + small.row_height[0] * rng.integers(0, 10, 30)
    fp.status[pick] = PINNED
    mac = np.flatnonzero(small.kind == MACRO)[0]
    fp.x[mac], fp.y[mac] = c[0], c[1]
    fp.status[mac] = PINNED
    out = place(small, fp, seed=0, multilevel="on", cells="global")
    pinned = fp.status != MOVABLE
    assert np.array_equal(out.x[pinned], fp.x[pinned])
    assert np.array_equal(out.y[pinned], fp.y[pinned])
    assert np.array_equal(out.orient[pinned], fp.orient[pinned])


# --- a session on the clustered design ------------------------------------------------------


@pytest.fixture(scope="module")
def clustered_session(small, tmp_path_factory):
    import floorwidget as fw
    from floorwidget.session import Session

    path = tmp_path_factory.mktemp("ml") / "small.json"
    fw.save(small, None, path)
    design = fw.load(path)
    s = Session(design, clustered=True)
    s.place(seed=0)
    return s


def test_clustered_session_edits_the_clusters_and_expands(clustered_session):
    s = clustered_session
    full = s.full_design
    assert s.clustered and s.design is s.clustering.coarsest
    assert s.design.num_blocks < full.num_blocks
    assert set(full.macros) == set(s.design.macros)         # macros are never merged
    m = s.design.macros[0]
    i = s.design.block(m)
    s.move(m, s.floorplan.x[i] + 17.0, s.floorplan.y[i] + 9.0)
    s.pin(m)
    assert s.expanded is None
    fut = s.expand(wait=False)                                # background: a Future at once
    out = fut.result(timeout=300)
    assert s.expanded is out
    j = full.block(m)
    assert (out.x[j], out.y[j], out.orient[j]) == (s.floorplan.x[i], s.floorplan.y[i],
                                                   s.floorplan.orient[i])
    rep = metrics.evaluate(full, out)
    assert rep["legal"], {k: rep[k] for k in ("macro_overlaps", "cell_overlaps",
                                             "cells_off_row")}
    s.undo()                       # another state: the expansion is no longer current
    assert s.expanded is None


def test_expansion_honours_a_blockage_drawn_on_the_clusters(clustered_session):
    import shapely

    s = clustered_session
    c = s.design.core
    w, h = c[2] - c[0], c[3] - c[1]
    rect = [c[0] + 0.4 * w, c[1] + 0.4 * h, c[0] + 0.6 * w, c[1] + 0.6 * h]
    s.add_blockage(rect)
    s.refine()
    out = s.expand()
    full = s.full_design
    cells = np.flatnonzero(full.kind == CELL)
    r = out.rects()[cells]
    box = shapely.box(*rect)
    hit = shapely.intersection(shapely.box(r[:, 0], r[:, 1], r[:, 2], r[:, 3]), box)
    assert float(shapely.area(hit).sum()) < 1e-6          # shapely: no cell area on it
    s.undo()
    s.undo()


def test_expand_that_cannot_fit_is_refused_with_the_figures(clustered_session, monkeypatch):
    from floorwidget.placer import PlacementError, multilevel

    s = clustered_session
    before = s.floorplan
    monkeypatch.setattr(multilevel, "available_memory", lambda: 1e6)   # 1 MB left
    with pytest.raises(PlacementError, match=r"needs about .* GB of memory .* available"):
        s.expand()
    assert s.floorplan is before


def test_flat_session_refuses_expand(small):
    from floorwidget.design import DesignError
    from floorwidget.session import Session

    s = Session(small)
    assert not s.clustered and s.design is small
    with pytest.raises(DesignError, match="not clustered"):
        s.expand()


def test_clustered_session_saves_loads_and_replays(clustered_session, tmp_path):
    from floorwidget.session import Session

    s = clustered_session
    s.shift(s.design.macros[:2], 3.0, 0.0)
    f = tmp_path / "s.fwsession"
    s.save(f)
    back = Session.load(f)
    assert back.clustered and back.design.num_blocks == s.design.num_blocks
    assert back.floorplan.identical(s.floorplan)
    ns: dict = {}
    exec(s.script(), ns)                                     # noqa: S102 - our own script
    assert ns["session"].clustered
    assert ns["session"].floorplan.identical(s.floorplan)


def test_algebraic_distance_separates_loosely_joined_groups():
    """Two 6-cliques joined by one edge: the algebraic distance across the bridge exceeds
    every distance inside a clique (the property algebraic distance is built on: Chen, Safro,
    SIAM J. Sci. Comput. 33(6), 2011)."""
    from floorwidget.design import CELL, Design
    from floorwidget.placer.coarsen import algebraic_coordinates

    nets = [(a, b) for g in (range(6), range(6, 12)) for a in g for b in g if a < b]
    nets.append((5, 6))
    d = Design("two", (0, 0, 100, 100), [f"c{i}" for i in range(12)], [CELL] * 12,
               np.ones(12), np.ones(12), np.arange(0, 2 * len(nets) + 1, 2),
               np.array(nets).ravel(), np.zeros(2 * len(nets)), np.zeros(2 * len(nets)))
    X = algebraic_coordinates(d, np.ones(12, bool), iterations=30, seed=4)
    dist = np.abs(X[:, None, :] - X[None, :, :]).max(axis=2)
    inside = max(dist[np.ix_(g, g)].max() for g in (range(6), range(6, 12)))
    assert dist[5, 6] > inside


def test_widget_expands_a_clustered_session_in_the_background(clustered_session):
    pytest.importorskip("bqplot")
    from floorwidget.widget import FloorplanWidget

    w = FloorplanWidget(None, session=clustered_session)
    assert "Expand cells" in w.buttons
    assert w.expand(wait=False)                 # returns at once, the bar runs
    assert w.wait(timeout=300)
    full = clustered_session.expanded
    assert full is not None and full.design.num_blocks == clustered_session.full_design.num_blocks
    assert "Expand done" in w.message.value
    assert "(clustered)" in w.readouts.html.value and "Expand cells)" in w.readouts.html.value


def test_a_pin_budget_coarsens_further(small):
    loose = coarsen(small, target_blocks=800)
    tight = coarsen(small, target_blocks=800, max_pins=loose.coarsest.num_pins // 2)
    assert tight.coarsest.num_pins < loose.coarsest.num_pins
    assert tight.coarsest.num_blocks < loose.coarsest.num_blocks
    a = small.width * small.height
    assert np.sum(tight.coarsest.width * tight.coarsest.height) == pytest.approx(a.sum())


# ---------------------------------------------------------------------------------------------
# tiny and net-less designs, and fences (issue 23)


def _cells(n: int, nets: str):
    """``n`` standard cells on ten rows: no nets, a chain of two-pin nets, or one net of all."""
    from floorwidget.design import Design

    if nets == "none":
        start, pins = [0], []
    elif nets == "one":
        start, pins = [0, n], list(range(n))
    else:
        start, pins = list(range(0, 2 * n - 1, 2)), [b for i in range(n - 1) for b in (i, i + 1)]
    rows = {"x": np.zeros(10), "y": np.arange(10) * 2.0, "height": np.full(10, 2.0),
            "site_width": np.full(10, 0.2), "num_sites": np.full(10, 500)}
    return Design(f"tiny{n}{nets}", (0, 0, 100, 20), [f"c{i}" for i in range(n)], [CELL] * n,
                  [0.4] * n, [2.0] * n, start, pins, np.zeros(len(pins)), np.zeros(len(pins)),
                  rows=rows)


@pytest.mark.parametrize("n, nets", [(1, "none"), (2, "chain"), (100, "none"), (500, "one")])
def test_tiny_and_netless_designs_place_multilevel_and_clustered(n, nets):
    from floorwidget.session import Session

    d = _cells(n, nets)
    flat = place(d, multilevel="off")
    on = place(d, multilevel="on")
    assert metrics.evaluate(d, flat)["legal"] and metrics.evaluate(d, on)["legal"]
    s = Session(d, clustered=True)
    s.place()
    assert s.report["legal"]
    assert s.design.num_blocks <= n


def test_multilevel_keeps_macros_off_a_fence_as_the_flat_flow_does():
    # the flat flow keeps macros off fences (DEVELOPERS.md); the coarse levels now carry the
    # fences with their clusters, so the macro legaliser there sees them too (shapely: the
    # GEOS reference geometry library, for the areas)
    import shapely

    from floorwidget.session import Session

    d0 = rent_design(3000, seed=3, num_macros=8, macro_area=0.35)
    c = d0.core
    w, h = c[2] - c[0], c[3] - c[1]
    s = Session(d0)
    s.add_region("f", [c[0] + 0.3 * w, c[1] + 0.3 * h, c[0] + 0.7 * w, c[1] + 0.7 * h])
    s.assign_group("f", [d0.names[i] for i in np.flatnonzero(d0.kind == CELL)[:300]])
    d = s.design
    fp = place(d, multilevel="on")
    assert len(fp.info["levels"]) > 1  # the multilevel flow ran
    fence = shapely.box(*d.regions.rects[0])
    r = fp.rects()
    boxes = shapely.box(r[:, 0], r[:, 1], r[:, 2], r[:, 3])
    mac = np.flatnonzero(d.kind == MACRO)
    assert float(shapely.area(shapely.intersection(boxes[mac], fence)).sum()) == 0.0
    mem = d.regions.members(0)
    assert shapely.within(boxes[mem], fence.buffer(1e-6)).all()
    others = np.flatnonzero((d.kind == CELL) & (d.regions.member < 0))
    assert float(shapely.area(shapely.intersection(boxes[others], fence)).max()) < 1e-6
    # no cluster of any level mixes members of the fence with other cells
    clus = coarsen(d, target_blocks=500)
    for k in range(1, clus.num_levels):
        c_of = clus.cluster_of(k)
        m = d.regions.member
        lo = np.full(clus.designs[k].num_blocks, 2)
        hi = np.full(clus.designs[k].num_blocks, -2)
        np.minimum.at(lo, c_of, m)
        np.maximum.at(hi, c_of, m)
        assert (lo == hi).all()
        assert np.array_equal(clus.designs[k].regions.member, lo.astype(np.int32))
