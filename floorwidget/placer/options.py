"""Placer options: one dataclass, validated in one place.

Every entry point of the placer (:func:`~floorwidget.placer.place`,
:func:`~floorwidget.placer.refine`, :func:`~floorwidget.placer.legalize`) turns its ``**options``
into a :class:`PlacerOptions` through :func:`make_options`, so an unknown or out-of-range option
fails the same way everywhere: a ``ValueError`` naming the option.
"""

from __future__ import annotations

import fnmatch
import numbers
from collections.abc import Mapping
from dataclasses import dataclass, fields
from typing import Any

import numpy as np

__all__ = ["PlacerOptions", "make_options", "net_multipliers", "check_range", "check_int",
           "anchor_growth_for"]


def check_range(name: str, value: Any, lo: float, hi: float, *, lo_open: bool = False,
                hi_open: bool = False) -> float:
    """Return ``value`` as a float if it lies in the interval, else raise ``ValueError``.

    Examples
    --------
    >>> check_range("target_density", 0.8, 0.0, 1.0, lo_open=True)
    0.8
    """
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise ValueError(f"option {name!r} must be a number, got {value!r}")
    v = float(value)
    bad = not np.isfinite(v) or (v <= lo if lo_open else v < lo) or (v >= hi if hi_open else v > hi)
    if bad:
        lb = "(" if lo_open else "["
        rb = ")" if hi_open else "]"
        raise ValueError(f"option {name!r} must lie in {lb}{lo:g}, {hi:g}{rb}, got {value!r}")
    return v


def check_int(name: str, value: Any, lo: int, hi: int | None = None) -> int:
    """Return ``value`` as an int if it is an integer in ``[lo, hi]``, else raise ``ValueError``."""
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise ValueError(f"option {name!r} must be an integer, got {value!r}")
    v = int(value)
    if v < lo or (hi is not None and v > hi):
        rng = f"[{lo}, {hi}]" if hi is not None else f">= {lo}"
        raise ValueError(f"option {name!r} must be {rng}, got {value!r}")
    return v


@dataclass(frozen=True)
class PlacerOptions:
    """Tuning knobs of the quadratic placer.

    Parameters
    ----------
    overflow_target : float
        Stop spreading once the density overflow (Σ excess area ÷ movable area, on the placer's
        own bin grid) is at most this.  Default 0.10.
    max_iterations : int
        Cap on spreading iterations per stage.  Default 100.
    initial_iterations : int
        Wirelength-only Bound2Bound iterations before spreading starts.  Default 6.
    refine_iterations : int
        Spreading iterations of :func:`~floorwidget.placer.refine`.  Default 2.
    stall_iterations : int
        Stop when the overflow has not improved by 2 % (relative) over this many iterations.
    cg_tol : float
        Relative residual of the conjugate-gradient solves.  Default 1e-4.
    cg_maxiter : int
        Iteration cap of each conjugate-gradient solve during spreading (the wirelength-only
        solves before spreading get four times as many).  Default 150.
    anchor_weight : float
        Initial weight of the anchor pseudo-nets to the look-ahead placement, relative to the
        average net weight of an object; it grows linearly with the iteration count.
    anchor_growth : float or None
        Added to the anchor multiplier every iteration (``anchor_weight * (1 + growth * k)``).
        ``None`` (default): :func:`anchor_growth_for` the number of movable objects — slow
        (0.5) for small designs, where more iterations are cheap and buy wirelength, fast (2.0)
        from 10^5 objects on, so the flow time grows about linearly.
    bin_size : float or None
        Side of the placer's density bins (µm); ``None`` picks one from the design.
    net_weight_scale : float, mapping or array, optional
        Multiplier on net weights.  A float scales every net (wirelength against spreading), a
        mapping ``{block name or fnmatch pattern: factor}`` scales the nets touching those blocks
        (a net takes the largest factor above 1 among its blocks, else the smallest), an array
        gives one factor per net.
    orient : bool
        Choose orientations of movable macros before legalising them.  Default True.
    legalize_macros : bool
        Legalise movable macros (and fix them for the cell re-spread).  Default True.
    cells : {"legal", "global"}
        ``"legal"`` (default) puts the movable standard cells on rows and sites (Abacus) and
        runs the swap-based detailed placement; ``"global"`` leaves them where the global
        placement put them (faster; meant for live previews).  Soft clusters are never
        legalised.
    macro_layout : {"auto", "periphery", "free"}
        Where movable macros go after global placement.  ``"periphery"``: against the core
        boundary, or stacked against macros that are, each on the edge nearest its global
        position and in the order the global placement gives (common practice for hard
        macros: the logic stays one region).  ``"free"``: wherever the global placement put
        them, legalised with minimum displacement.  ``"auto"`` (default): see
        :func:`floorwidget.placer.flow.choose_layout`.
    channel : float or None
        Two facing macros are either abutted (halos only) or at least this far apart (µm);
        ``None`` (default): :func:`floorwidget.metrics.default_channel` (four row heights).
        0 turns the rule off.
    detail_passes : int or None
        Most passes of detailed placement after row legalisation (0: none); passes stop
        earlier once one saves less than 0.2 % of the HPWL.  ``None`` (default): 8, or 2 in
        the multilevel flow (at 10^6 cells the passes beyond two cost 15 s for 0.8 % of the
        wirelength; DEVELOPERS.md).
    congestion_target : float
        Routability-driven spreading: once the cells are nearly spread, a few times the cells
        in bins whose routing demand exceeds this share of the supply
        (:func:`floorwidget.metrics.congestion_map`) are inflated by the ratio, up to
        ``max_inflation`` in all, so the spreading moves them apart (cell inflation from
        routing demand: Kim, Hu, Lee, Markov, ICCAD 2011; Hsu, Chou, Lin, Chang, ICCAD 2011;
        both from memory).  Default 0.7 (RUDY reads low: detours and pin access take the
        rest, common practice).  The field (``spreading="field"``) also opens up the top
        5 % of the bins by demand where no bin reaches the target
        (:func:`floorwidget.placer.field._inflation`).
    max_inflation : float
        Largest factor a cell's area may be inflated by; 1 turns routability-driven spreading
        off.  Default 2.
    spreading : {"field", "lookahead"}
        How the standard cells are spread at the end of global placement.  ``"field"``
        (default): after the look-ahead spreading, the cells as charges of a Poisson field
        with filler charges, by Nesterov's method (:mod:`floorwidget.placer.field`), settling
        at ``spread_density``; used when the spread objects are standard cells and the design
        has no cell regions (else look-ahead alone).  ``"lookahead"``: look-ahead spreading
        alone, to ``target_density``.
    spread_density : float
        The density the field spreads the cells to, capped at ``target_density``.  Default
        0.6: room left for routing (on aes_cipher_top 0.6 matched its own placement's
        congestion at 1.03× its HPWL; 0.7 gave 0.98× HPWL and 1.08× congestion;
        DEVELOPERS.md).
    multilevel : {"auto", "on", "off"}
        ``"on"`` places a clustered version of the design first (see
        :mod:`floorwidget.placer.multilevel`) and refines it level by level down to the cells;
        ``"auto"`` (default) does so for designs of
        :data:`floorwidget.placer.flow.MULTILEVEL_MIN` movable cells or more.
    """

    overflow_target: float = 0.10
    max_iterations: int = 100
    initial_iterations: int = 6
    refine_iterations: int = 2
    stall_iterations: int = 6
    cg_tol: float = 1e-4
    cg_maxiter: int = 150
    anchor_weight: float = 0.1
    anchor_growth: float | None = None
    bin_size: float | None = None
    net_weight_scale: Any = None
    orient: bool = True
    legalize_macros: bool = True
    cells: str = "legal"
    macro_layout: str = "auto"
    channel: float | None = None
    detail_passes: int | None = None
    multilevel: str = "auto"
    congestion_target: float = 0.7
    max_inflation: float = 2.0
    spreading: str = "field"
    spread_density: float = 0.6

    def __post_init__(self):
        check_range("overflow_target", self.overflow_target, 0.0, 1.0)
        check_int("max_iterations", self.max_iterations, 0, 100000)
        check_int("initial_iterations", self.initial_iterations, 1, 1000)
        check_int("refine_iterations", self.refine_iterations, 0, 100000)
        check_int("stall_iterations", self.stall_iterations, 1, 100000)
        check_range("cg_tol", self.cg_tol, 0.0, 1.0, lo_open=True, hi_open=True)
        check_int("cg_maxiter", self.cg_maxiter, 1)
        if self.detail_passes is not None:
            check_int("detail_passes", self.detail_passes, 0, 100)
        if self.cells not in ("legal", "global"):
            raise ValueError(f"option 'cells' must be 'legal' or 'global', got {self.cells!r}")
        if self.multilevel not in ("auto", "on", "off"):
            raise ValueError("option 'multilevel' must be 'auto', 'on' or 'off', "
                             f"got {self.multilevel!r}")
        if self.macro_layout not in ("auto", "periphery", "free", "arrays"):
            raise ValueError("option 'macro_layout' must be 'auto', 'periphery', 'free' or "
                             f"'arrays', got {self.macro_layout!r}")
        check_range("congestion_target", self.congestion_target, 0.0, 1e3, lo_open=True)
        check_range("max_inflation", self.max_inflation, 1.0, 10.0)
        if self.spreading not in ("field", "lookahead"):
            raise ValueError("option 'spreading' must be 'field' or 'lookahead', "
                             f"got {self.spreading!r}")
        check_range("spread_density", self.spread_density, 0.0, 1.0, lo_open=True)
        if self.channel is not None:
            check_range("channel", self.channel, 0.0, 1e9)
        check_range("anchor_weight", self.anchor_weight, 0.0, 1e6, lo_open=True)
        if self.anchor_growth is not None:
            check_range("anchor_growth", self.anchor_growth, 0.0, 1e6)
        if self.bin_size is not None:
            check_range("bin_size", self.bin_size, 0.0, np.inf, lo_open=True, hi_open=True)
        for name in ("orient", "legalize_macros"):
            if not isinstance(getattr(self, name), (bool, np.bool_)):
                raise ValueError(f"option {name!r} must be True or False, "
                                 f"got {getattr(self, name)!r}")
        s = self.net_weight_scale
        if s is None:
            return
        if isinstance(s, Mapping):
            for k, v in s.items():
                if not isinstance(k, str):
                    raise ValueError(f"option 'net_weight_scale': keys must be block names or "
                                     f"patterns, got {k!r}")
                check_range(f"net_weight_scale[{k!r}]", v, 0.0, 1e9, lo_open=True)
        elif isinstance(s, numbers.Real) and not isinstance(s, bool):
            check_range("net_weight_scale", s, 0.0, 1e9, lo_open=True)
        else:
            a = np.asarray(s, dtype=np.float64)
            if a.ndim != 1 or not (np.isfinite(a).all() and (a > 0).all()):
                raise ValueError("option 'net_weight_scale' must be a positive number, a mapping "
                                 "{block pattern: factor} or a 1-D array of positive factors")


_NAMES = frozenset(f.name for f in fields(PlacerOptions))


def anchor_growth_for(num_objects: int) -> float:
    """Default anchor growth: ``2 × n / 10^5`` clipped to [0.5, 2].  Measured (legal HPWL,
    against growth 2.0): aes_cipher_top 1.091 -> 1.053 × its reference, ibm01-mixed 3.06e6 ->
    2.95e6–2.98e6, ibm05 1.070e7 -> 1.056e7, at 1.5–2.5 × the global iterations; at 10^5 cells
    and above the fast schedule stays (10^5: 16 s)."""
    return float(np.clip(2.0 * num_objects / 1e5, 0.5, 2.0))


def make_options(options: Mapping[str, Any] | PlacerOptions | None = None,
                 **kwargs: Any) -> PlacerOptions:
    """Build validated :class:`PlacerOptions` from keyword options.

    Raises
    ------
    ValueError
        Naming the first unknown option, or the option whose value is out of range.

    Examples
    --------
    >>> make_options(max_iterations=10).max_iterations
    10
    >>> make_options(max_iteration=10)
    Traceback (most recent call last):
    ...
    ValueError: unknown placer option 'max_iteration' (known: ...)
    """
    if isinstance(options, PlacerOptions):
        base = {f.name: getattr(options, f.name) for f in fields(PlacerOptions)}
    else:
        base = dict(options or {})
    base.update(kwargs)
    for k in base:
        if k not in _NAMES:
            raise ValueError(f"unknown placer option {k!r} (known: {', '.join(sorted(_NAMES))})")
    return PlacerOptions(**base)


def net_factors(design, block_factor: np.ndarray) -> np.ndarray:
    """Per-net multipliers from per-block ones: a net takes the largest factor above 1 among
    its blocks (boosting wins), else the smallest."""
    if design.num_nets == 0:
        return np.ones(0)
    pin_f = block_factor[design.pin_block]
    starts = design.net_start[:-1]
    hi = np.maximum.reduceat(pin_f, starts)
    lo = np.minimum.reduceat(pin_f, starts)
    return np.where(hi > 1.0, hi, lo)


def net_multipliers(design, scale) -> np.ndarray | float:
    """Per-net weight multipliers for ``net_weight_scale`` (see :class:`PlacerOptions`).

    Returns a float when the scale is uniform, else a ``(num_nets,)`` array.
    """
    if scale is None:
        return 1.0
    if isinstance(scale, numbers.Real) and not isinstance(scale, bool):
        return float(scale)
    if isinstance(scale, Mapping):
        block_f = np.ones(design.num_blocks)
        names = design.names
        index = design.index
        for pat, f in scale.items():
            if pat in index:
                block_f[index[pat]] = float(f)
                continue
            hits = [index[nm] for nm in fnmatch.filter(names, pat)]
            if not hits:
                raise ValueError(f"option 'net_weight_scale': no block matches {pat!r}")
            block_f[hits] = float(f)
        return net_factors(design, block_f)
    a = np.asarray(scale, dtype=np.float64)
    if a.shape != (design.num_nets,):
        raise ValueError(f"option 'net_weight_scale': array has {a.shape[0]} factors, the design "
                         f"has {design.num_nets} nets")
    return a
