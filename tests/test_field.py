"""The electrostatic spreading stage (floorwidget.placer.field) against closed forms:

* the weighted-average wirelength gradient against central differences of the WA formula
  written out here, and the WA length approaching the HPWL from below as gamma shrinks (Hsu,
  Chang, Balabanov, DAC 2011, from memory: the WA model underestimates the span and converges
  to it);
* the Poisson solve against a cosine mode, whose potential under Neumann boundaries is known in
  closed form (psi = rho / k^2 for rho = cos(k x), k = pi m / L);
* the cloud-in-cell charge keeps the total charge (conservation);
* the whole stage: after it the cells' density overflow over the spread density is lower than
  before and the placement is legal after the rows stage.
"""

from __future__ import annotations

import numpy as np
import pytest

from floorwidget.design import CELL, MOVABLE
from floorwidget.metrics import evaluate
from floorwidget.metrics.density import density_overflow
from floorwidget.placer import place
from floorwidget.placer.field import _cic, _Field, _wa, field_spread, usable
from floorwidget.synth import rent_design


def _wa_length(px, start, gamma):
    total = 0.0
    for e in range(len(start) - 1):
        x = px[start[e]:start[e + 1]]
        a = np.exp((x - x.max()) / gamma)
        b = np.exp((x.min() - x) / gamma)
        total += (x * a).sum() / a.sum() - (x * b).sum() / b.sum()
    return total


def test_wa_gradient_matches_central_differences():
    rng = np.random.default_rng(3)
    start = np.array([0, 2, 5, 9, 12])
    px = rng.uniform(0, 10, start[-1])
    slot = np.arange(len(px))
    slot[[1, 7]] = -1  # fixed pins get no gradient
    gamma = 0.7
    g = np.zeros(len(px))
    _wa(px, start, slot, gamma, np.ones(len(start) - 1), g)
    h = 1e-6
    for k in np.flatnonzero(slot >= 0):
        e = np.zeros(len(px))
        e[k] = h
        num = (_wa_length(px + e, start, gamma) - _wa_length(px - e, start, gamma)) / (2 * h)
        assert g[slot[k]] == pytest.approx(num, abs=1e-6)
    assert (g[[1, 7]] == 0).all()  # no pin maps to the objects 1 and 7


def test_wa_length_tends_to_the_span_from_below():
    rng = np.random.default_rng(4)
    start = np.array([0, 3, 7, 8 + 2])
    px = rng.uniform(0, 20, start[-1])
    span = sum(np.ptp(px[start[e]:start[e + 1]]) for e in range(len(start) - 1))
    last = -np.inf
    for gamma in (4.0, 1.0, 0.25, 0.01):
        wa = _wa_length(px, start, gamma)
        assert wa <= span + 1e-9
        assert wa >= last - 1e-12  # monotone in gamma
        last = wa
    assert last == pytest.approx(span, rel=1e-6)


def test_poisson_solve_matches_the_cosine_mode():
    d = rent_design(400, seed=1)
    fp = place(d, cells="global", spreading="lookahead")
    mask = (fp.status == MOVABLE) & (d.kind == CELL)
    fld = _Field(d, fp, mask, int(mask.sum()))
    fld.settle(0.6)
    g = fld.g
    fld.fixed[:] = 0.0
    L = g.nx * g.bw
    m = 2
    k = np.pi * m / L
    xc = g.xlo + (np.arange(g.nx) + 0.5) * g.bw
    rho = np.repeat((np.cos(k * (xc - g.xlo)) * g.bin_area)[:, None], g.ny, axis=1)
    # force on a unit charge at each bin centre along x: E = -dpsi/dx = -sin(k x) / k ...
    yc = np.full(g.nx, g.ylo + 0.5 * g.bh)
    fx, fy = fld.force(rho, xc, yc, np.ones(g.nx))
    # ... and the gradient of the energy is -q E = -sin(k x) / k (psi = cos(k x) / k^2)
    want = -np.sin(k * (xc - g.xlo)) / k
    inner = slice(1, g.nx - 1)  # one-sided differences at the two ends
    assert np.allclose(fx[inner], want[inner], atol=0.02 * np.abs(want).max())
    assert np.abs(fy).max() < 1e-9 * np.abs(want).max()


def test_cloud_in_cell_keeps_the_charge():
    rng = np.random.default_rng(5)
    x, y = rng.uniform(0, 10, 500), rng.uniform(0, 5, 500)
    q = rng.uniform(0.1, 2.0, 500)
    rho = np.zeros((20, 10))
    _cic(x, y, q, 0.0, 0.0, 0.5, 0.5, 20, 10, rho)
    assert rho.sum() == pytest.approx(q.sum(), rel=1e-12)
    assert (rho >= 0).all()


def test_field_lowers_the_overflow_and_the_result_is_legal():
    d = rent_design(2000, seed=7, utilisation=0.5)
    before = place(d, cells="global", spreading="lookahead", target_density=0.8)
    mask = (before.status == MOVABLE) & (d.kind == CELL)
    assert usable(d, before, mask)
    after = before.copy()
    facts = field_spread(d, after, mask, 0.6)
    assert facts["fillers"] > 0
    assert density_overflow(d, after, 0.6) < density_overflow(d, before, 0.6)
    full = place(d, spread_density=0.6)
    assert full.info["stage_iterations"]["field"] > 0
    assert evaluate(d, full)["legal"]


def test_inflation_opens_the_hot_spots():
    """Cell inflation from routing demand (Kim, Hu, Lee, Markov, ICCAD 2011, from memory):
    cells in the bins of highest demand take more room, so the demand peak drops; the
    inflated area stays within the cap."""
    from floorwidget.metrics import bin_grid, congestion_map
    from floorwidget.metrics.congestion import congestion_stats

    d = rent_design(3000, seed=5, utilisation=0.5)
    before = place(d, cells="global", spreading="lookahead", target_density=0.8)
    mask = (before.status == MOVABLE) & (d.kind == CELL)
    plain, grown = before.copy(), before.copy()
    f0 = field_spread(d, plain, mask, 0.6)
    f1 = field_spread(d, grown, mask, 0.6, inflate=(0.7, 2.0))
    assert f0["inflation_rounds"] == 0 and f0["inflated"] == 0.0
    assert f1["inflation_rounds"] >= 1
    assert 0.0 < f1["inflated"] <= 1.0  # at most max_inflation - 1 of the cell area
    g = bin_grid(d)
    p99_plain = congestion_stats(congestion_map(d, plain, g))[1]
    p99_grown = congestion_stats(congestion_map(d, grown, g))[1]
    assert p99_grown < p99_plain
