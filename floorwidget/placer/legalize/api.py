"""The legaliser's entry points: :func:`legalize_macros` and :func:`is_legal` (the method is
described in the package docstring)."""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable

import numpy as np

from ...design import MACRO, MOVABLE, Design, Floorplan
from ...kernels import rects
from .._select import movable_macros
from ..errors import PlacementError
from ..straps import clear_strap_channels
from .packer import _Packer
from .problem import _Problem

# ---------------------------------------------------------------------------------------------
# public API




def _check_obstacles(design: Design, fp: Floorplan) -> None:
    stay = np.flatnonzero((design.kind == MACRO) & (fp.status != MOVABLE))
    if len(stay) < 2:
        return
    i, j = rects.halo_conflicts(fp.rects()[stay], fp.rects(halo=True)[stay])[:2]
    if len(i):
        a, b = stay[i[0]], stay[j[0]]
        st = ("movable", "pinned", "fixed")
        more = f" (and {len(i) - 1} more pair(s))" if len(i) > 1 else ""
        raise PlacementError(
            f"{st[fp.status[a]]} macro {design.names[a]!r} and {st[fp.status[b]]} macro "
            f"{design.names[b]!r} overlap (a footprint inside the other's halo box){more}; "
            "move or unpin one of them")


def _check_capacity(prob: _Problem) -> None:
    names = prob.design.names
    bad = (prob.kx0 > prob.kx1) | (prob.ky0 > prob.ky1)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        c, d = prob.core, prob.die
        halo = (prob.l[i], prob.b[i], prob.r[i], prob.t[i])
        if prob.w[i] <= c[2] - c[0] and prob.h[i] <= c[3] - c[1] and any(halo):
            raise PlacementError(  # the footprint fits: the halo is what does not
                f"macro {names[prob.idx[i]]!r} ({prob.w[i]:g} x {prob.h[i]:g} µm in its "
                "orientation) with its halo (left, bottom, right, top "
                f"{', '.join(f'{v:g}' for v in halo)} µm) does not fit: its footprint must lie "
                f"in the core {c.tolist()} and its halo in the die {d.tolist()}; shrink the halo")
        raise PlacementError(
            f"macro {names[prob.idx[i]]!r} ({prob.w[i]:g} x {prob.h[i]:g} µm in its orientation) "
            f"does not fit inside the core {prob.core.tolist()} on the placement grid")
    c = prob.core
    core_area = (c[2] - c[0]) * (c[3] - c[1])
    blocked = np.concatenate([prob.blk, rects.grow(prob.obst, prob.obst_halo)])
    free = core_area - rects.union_area(blocked, c)
    need = float((prob.w * prob.h).sum())
    if need > free * (1 + 1e-12):
        raise PlacementError(
            f"impossible by area: movable macros need {need:.6g} µm² but only {free:.6g} µm² "
            "of the core is free of blockages and of other macros with their halos")


def is_legal(design: Design, fp: Floorplan, macros=None) -> bool:
    """Whether the movable macros (or the subset ``macros``) of ``fp`` are legal in the sense
    of this module (the halo rule, footprint in core, halo in die, off blockages, on grid).
    """
    move = movable_macros(design, fp, macros)
    prob = _Problem(design, fp, move)
    bad, i, _ = prob.violations(prob.x0, prob.y0)
    return not bad.any() and not len(i)


def legalize_macros(design: Design, fp: Floorplan, *, macros: Iterable | None = None,
                    keep: Iterable | None = None, local: bool | None = None, lp: bool = True,
                    lp_rounds: int = 3, trust: float | None = None, retries: int = 3,
                    pack_moves: int | None = None,
                    progress: Callable[[str, float, dict], None] | None = None,
                    **options) -> Floorplan:
    """Legalise the movable macros of ``fp`` with minimum displacement; return a new floorplan.

    Parameters
    ----------
    design : Design
    fp : Floorplan
        Input (e.g. global-placement) positions and orientations; never modified.
    macros : names, indices or mask, optional
        Legalise only these (movable macros among them; pinned or fixed ones in the list are
        ignored).  Every other macro is an obstacle; obstacles that are movable are not checked
        against each other.
    keep : names, indices or mask, optional
        Macros to move only when nothing else resolves a conflict (e.g. the one just dragged).
    local : bool, optional
        Force (True) or forbid (False) the local repair; by default it is tried when the macros
        that must move are at most a quarter of them (or at most 3).  When it finds no spot for
        one of them, the full pass runs.
    lp : bool
        Improve the greedy result with the minimum-displacement LP.
    lp_rounds : int
        Maximum LP rounds (each re-derives the constraint graphs from the current order).
    trust : float, optional
        Trust radius in µm for one LP round (default: the median macro side).
    retries : int
        Greedy restarts with a macro that found no spot moved to the front of the order.
    pack_moves : int, optional
        Budget of the sequence-pair search that runs when the greedy search fails (default
        about 3e10 / n² moves for n macros, at most 10,000,000).
    progress : callable, optional
        ``progress(stage, fraction, info)``.
    **options
        ``seed`` seeds the sequence-pair search (the result is deterministic for a seed);
        ``target_density`` is accepted and ignored; anything else is a ``TypeError``.

    Returns
    -------
    Floorplan
        A copy with new ``x``, ``y`` for the macros that moved; ``info`` gains
        ``legalize_mode`` ("unchanged", "local" or "full"), ``legalize_moved``,
        ``legalize_displacement`` (total L1, µm), ``legalize_max_displacement`` (µm),
        ``legalize_lp_rounds`` and ``legalize_seconds``.

    Raises
    ------
    PlacementError
        Pinned/fixed macros in conflict with each other (the pair is named), a macro that
        does not fit in the core, "impossible by area" (more macro area than free core area),
        "impossible" (a macro fits nowhere among the obstacles alone), or "search budget
        spent" (the sequence-pair search found no legal packing in ``pack_moves``; not a
        proof).  The input floorplan is untouched.

    Examples
    --------
    >>> import floorwidget as fw                                    # doctest: +SKIP
    >>> d = fw.load("demo_data/heron_dsp.json")                     # doctest: +SKIP
    >>> legal = legalize_macros(d, d.initial)                       # doctest: +SKIP
    >>> is_legal(d, legal)                                          # doctest: +SKIP
    True

    References
    ----------
    D. Hill, US patent 6,370,673, 2002 (greedy "Tetris" legalisation, from memory).
    Y.-Z. Liao, C.-K. Wong, IEEE TCAD 2(2), 1983 (constraint-graph compaction, from memory).
    X. Tang, R. Tian, M. D. F. Wong, ASP-DAC 2005 (constraint-graph LP for white-space
    redistribution, from memory).
    """
    _check_options(options)
    t0 = time.perf_counter()
    report = progress or (lambda *a: None)
    move = movable_macros(design, fp, macros)
    _check_obstacles(design, fp)
    prob = _Problem(design, fp, move)
    n = len(prob.idx)
    keep_m = None
    if keep is not None:
        keep_m = movable_macros(design, fp, keep)[prob.idx]
    out = fp.copy()
    info = {"legalize_mode": "unchanged", "legalize_moved": 0, "legalize_displacement": 0.0,
            "legalize_max_displacement": 0.0, "legalize_lp_rounds": 0}
    if n:
        x, y = prob.x0, prob.y0
        bad, i, j = prob.violations(x, y)
        if bad.any() or len(i):
            report("legalize", 0.0, {"conflicts": int(bad.sum() + len(i))})
            nx_ = None
            movers = prob.cover(bad, i, j, keep_m)
            try_local = local if local is not None else len(movers) <= max(3, n // 4)
            if try_local:
                nx_, ny_ = prob.repair(x, y, bad, i, j, keep_m)
                if nx_ is not None:
                    info["legalize_mode"] = "local"
            if nx_ is None:
                _check_capacity(prob)  # (a legal or locally repaired placement proves room)
                nx_, ny_ = _full(prob, retries, report, pack_moves,
                                 int(options.get("seed", 0) or 0))
                info["legalize_mode"] = "full"
                if lp:
                    report("legalize", 0.6, {"stage": "lp"})
                    nx_, ny_, rounds = prob.lp_improve(nx_, ny_, lp_rounds, trust)
                    info["legalize_lp_rounds"] = rounds
            nx_, ny_ = _ensure_legal(prob, nx_, ny_, keep_m)
            out.x[prob.idx] = nx_
            out.y[prob.idx] = ny_
            dx = np.abs(nx_ - prob.x0) + np.abs(ny_ - prob.y0)
            info.update(legalize_moved=int(((nx_ != prob.x0) | (ny_ != prob.y0)).sum()),
                        legalize_displacement=float(dx.sum()),
                        legalize_max_displacement=float(dx.max()))
    if design.power is not None:  # channels for the power straps (placer.straps)
        out, info["straps_blocked"] = clear_strap_channels(design, out, prob.idx)
    info["legalize_seconds"] = time.perf_counter() - t0
    out.info.update(info)
    report("legalize", 1.0, dict(info))
    return out


def _check_options(options: dict) -> None:
    unknown = set(options) - {"seed", "target_density"}
    if unknown:
        raise TypeError(f"legalize_macros() got unexpected option(s): {', '.join(sorted(unknown))}")


def _ensure_legal(prob: _Problem, nx_: np.ndarray, ny_: np.ndarray, keep_m):
    """``(x, y)`` checked legal: a nudge and one more repair when not (not expected by
    construction); a PlacementError rather than ever an illegal placement."""
    bad, i, j = prob.violations(nx_, ny_)
    if bad.any() or len(i):
        nx_, ny_ = prob.nudge(nx_, ny_)
        bad, i, j = prob.violations(nx_, ny_)
        if bad.any() or len(i):
            rx, ry = prob.repair(nx_, ny_, bad, i, j, keep_m)
            if rx is not None:
                nx_, ny_ = rx, ry
                bad, i, j = prob.violations(nx_, ny_)
    if bad.any() or len(i):
        k = int(np.flatnonzero(bad)[0]) if bad.any() else int(i[0])
        raise PlacementError(f"macro {prob.design.names[prob.idx[k]]!r} could not be "
                             "legalised (internal check failed)")
    return nx_, ny_


def _full(prob: _Problem, retries: int, report, pack_moves: int | None,
          seed: int) -> tuple[np.ndarray, np.ndarray]:
    n = len(prob.idx)
    order = np.lexsort((np.arange(n), -prob.area))
    still = np.zeros(n, bool)
    for attempt in range(retries + 1):
        x, y, failed = prob.place_greedy(order, prob.x0, prob.y0, still, prob.x0, prob.y0)
        if failed is None:
            return x, y
        if failed == order[0]:  # placed first, it met only the obstacles: a proof
            raise PlacementError(
                f"impossible: macro {prob.design.names[prob.idx[failed]]!r} ({prob.w[failed]:g} "
                f"x {prob.h[failed]:g} µm plus halo) fits nowhere in the core among the "
                "blockages and pinned or fixed macros; free some room or enlarge the core")
        report("legalize", 0.3, {"retry": attempt + 1, "failed": prob.design.names[
            prob.idx[failed]]})
        order = np.concatenate([[failed], order[order != failed]])
    # the greedy search is incomplete: pack from a sequence pair instead
    packer = _Packer(prob)
    moves = packer.budget() if pack_moves is None else int(pack_moves)
    found = packer.search(moves, seed, report)
    if found is None:
        i = failed
        raise PlacementError(
            f"search budget spent: no legal macro placement found in {moves} sequence-pair "
            f"moves after the greedy search failed on macro {prob.design.names[prob.idx[i]]!r} "
            f"({prob.w[i]:g} x {prob.h[i]:g} µm plus halo); the macros fit by area, so this is "
            "not a proof of infeasibility: free some room (unpin macros, shrink halos or "
            "blockages), enlarge the core, or raise pack_moves" + (
                f" (this search saw the {len(prob.blk)} blockages as {packer.covered} covering "
                "rectangles, slightly larger)" if packer.covered else ""))
    return prob.gx(found[0]), prob.gy(found[1])
