"""Macro legalisation: from a global placement to an overlap-free, on-grid macro placement.

What "legal" means here (the contract checked by ``tests/test_legalize.py``):

* the **halo rule** (common practice): a halo is a keep-out around one macro, for standard
  cells and for the *footprints* of other macros, and halos may overlap each other.  So the
  footprint of a macro this function is responsible for has no overlap of positive area with
  the *halo box* (footprint grown by the halo, left/bottom/right/top) of any other macro, and
  no other macro's footprint overlaps its halo box (touching is allowed).  Facing footprints
  are kept apart by the larger of the two facing halos (along x or along y), which implies
  the rule;
* a macro's **footprint** lies inside the core (the bounding box of the rows); its halo may hang
  over the core edge into the die margin but never beyond the die;
* a macro's footprint has no overlap of positive area with a placement blockage (a halo may
  cover a blockage: both only keep standard cells out);
* its lower-left corner lies on the placement grid ``grid_origin + k * grid_pitch``.

Every comparison is made in floating point on exactly the coordinates
:meth:`Floorplan.rects` produces (``x - left``, ``(x + w) + right``), so an outside check with
those rectangles (e.g. shapely's intersection area) sees exactly zero overlap.

Method
------
1. *Checks.*  Pinned/fixed macros overlapping each other raise :class:`PlacementError` at once;
   a macro that does not fit in the core in its orientation, and more macro area than free core
   area, raise before a full pass.  The input floorplan is never written to.
2. *Early exit.*  An already-legal placement is returned unchanged (bit-exact).
3. *Local repair* (the common case after a hand move).  The macros in conflict are reduced to a
   small set that must move (every macro with a violation of its own, plus a greedy vertex cover
   of the overlap graph avoiding ``keep`` and preferring small macros); only those are moved,
   each to its nearest free grid spot with all others held still.
4. *Full legalisation.*  An ordered nearest-free-spot search: macros by decreasing halo area,
   each moved to the grid point nearest (Euclidean) to its global-placement position that is free
   of everything placed before it, of pinned/fixed macros and of blockages.  The candidate
   spots are the Cartesian product of the snapped target, the bounds and the grid lines just
   clear of each obstacle (the edges of its configuration-space rectangle), which contains the
   nearest free point (moving a coordinate towards the target is blocked only by an obstacle
   edge or a bound); the search runs over a window that grows until the nearest free candidate
   lies inside it (from thousands of obstacles on, on a map of the grid points, the
   blockages' part made once per macro size).  Largest-first greedy legalisation in the
   spirit of Hill's "Tetris" legaliser (D. Hill, US patent 6,370,673, 2002, from memory), with
   the exact nearest free spot in place of a row scan.
5. *LP improvement.*  Keeping the relative order found (for every pair of macros that could
   meet within a trust region, the horizontal or vertical separation they already satisfy,
   choosing the one least binding at the targets), minimise the total L1 displacement from the
   global placement with ``scipy.optimize.linprog(method="highs")``: two independent LPs over the
   horizontal and vertical constraint graphs, as in constraint-graph layout compaction (Liao,
   Wong, IEEE TCAD 2(2), 1983) and the white-space redistribution LP of Tang, Tian, Wong,
   ASP-DAC 2005 (both from memory).  The variables are *grid indices*: every separation and
   bound is rounded to a whole number of pitches in the safe direction and the targets to the
   grid, so the data are integral (an L1 problem over difference constraints, the dual of a
   min-cost flow, has integral optima); the solution is rounded anyway and checked exactly.
   Where two halo boxes end up abutting exactly, floating point can leave an overlap of a few
   ulps; such a macro is moved by those few ulps (it stays on the grid within far less than the
   1e-6 µm grid tolerance) and anything else left goes through the local repair.  A round is
   accepted only when it lowers the displacement.  Pairs farther apart than twice the trust
   radius cannot meet, so the trust region keeps each round's constraint set sparse and exact.

6. *Complete fallback.*  When the greedy search fails (retried with the failing macro first),
   a sequence pair taken from the input positions (Murata, Fujiyoshi, Nakatake, Kajitani,
   ICCAD 1995) is annealed to a legal fixed-outline packing, obstacles (pinned and fixed
   macros, blockages) taking part in the pair at their fixed places (:class:`_Packer`; the
   annealing and its slack-driven move follow Adya, Markov, IEEE TVLSI 2003; the packing is
   the longest-path evaluation of the constraint graphs: in O(n log n) by prefix maxima as in
   the LCS evaluation of Tang, Tian, Wong, DATE 2000, when the separations depend on one macro
   only (no halos, or equal ones), else in O(n²) with the pairwise halo separations).  More
   than a few hundred blockages take part as a cover of a few hundred rectangles containing
   them (:mod:`.coarse`), so that memory and the cost of a move stay bounded with 100,000
   blockages; the result is still checked against the blockages themselves.  The
   annealing is compiled with numba.  The moves are local
   and the cost carries a fading wirelength term (the HPWL of the nets touching the macros;
   their displacement when there are no nets), so the packing keeps the input's relative
   order where it can; a short annealing among legal packings then lowers that term.  One LP
   per axis over all relations of the pair minimises the displacement, and step 5 follows.

Notes
-----
Macro packing is NP-hard.  :class:`PlacementError` says which case it is: *impossible by
area* (more footprint area than free core), *impossible* (a macro fits nowhere even with no
other movable macro placed: a proof), or *search budget spent* (the sequence-pair search ran
out of moves; the input may still be feasible).
Orientation is kept: :func:`floorwidget.placer.orient.choose_orientations` chooses it.
The result is an early-floorplanning estimate; sign-off belongs to the full implementation flow.
"""

from __future__ import annotations

from .api import is_legal, legalize_macros

__all__ = ["legalize_macros", "is_legal"]
