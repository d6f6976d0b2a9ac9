"""Parameter sweeps of the placer on any :class:`concurrent.futures.Executor`, and Pareto fronts.

A sweep runs :func:`floorwidget.place` (then :func:`floorwidget.evaluate`) once for every point
of the cartesian product of a parameter grid.  By default the runs go to a local
:class:`~concurrent.futures.ProcessPoolExecutor` sized to the machine; any executor works, e.g.
a Dask cluster's ``distributed.Client(...).get_executor()`` when one machine is not enough, or
:class:`SerialExecutor` to run in the calling process.

The figures in each report are early-floorplanning estimates; timing, power and physical
sign-off belong to the full implementation flow.

Shipping the design
-------------------
The design is pickled **once** per sweep (without its name-index cache, see
:func:`dumps_design`).  The default process pool receives it once per worker through the pool
initializer; other executors (a Dask ``Client.get_executor()`` among them) receive the bytes
with each task, and every worker process unpickles them only once (a per-process cache keyed
by a token of the sweep).  Results travel
back as bare arrays (x, y, orientation, status, info) and are rebuilt into
:class:`~floorwidget.design.Floorplan` objects on the caller's own design, so a result never
drags a copy of the design back.

This module is core: it never imports ipywidgets or bqplot (the Pareto view lives in
:mod:`floorwidget.widget.pareto`), and it imports Dask nowhere.
"""

from __future__ import annotations

import concurrent.futures as cf
import itertools
import multiprocessing
import os
import pickle
import sys
import threading
import time
import uuid
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, TextIO

import numpy as np

from .design import FIXED, MACRO, MOVABLE, PINNED, Design, DesignError, Floorplan

__all__ = [
    "SerialExecutor",
    "SweepResult",
    "candidates",
    "dumps_design",
    "expand_grid",
    "format_params",
    "loads_design",
    "net_weight_factors",
    "pareto_front",
    "pool_context",
    "process_pool",
    "result_points",
    "sweep",
    "text_progress",
    "to_session",
]

#: Grid keys handled by the sweep itself rather than passed to the placer as options.
SPECIAL_KEYS = ("weight_scale", "pinned")


# ---------------------------------------------------------------------------------------------
# results


@dataclass
class SweepResult:
    """One run of a sweep.

    Attributes
    ----------
    params : dict
        The grid point of this run (only the swept names; fixed options are not repeated).
    floorplan : Floorplan or None
        The placement, on the caller's design; ``None`` when the run failed.
    report : dict or None
        :func:`floorwidget.evaluate` of the placement (at the run's target density).
    seconds : float
        Wall time of the run in its worker (placement plus evaluation), s.
    error : str or None
        One line ``ExceptionType: message`` when the run failed, else ``None``.
    index : int
        Position in grid order.
    fixed : dict
        The options given to every run of the sweep (``sweep(**fixed_options)``).
    """

    params: dict
    floorplan: Floorplan | None = None
    report: dict | None = None
    seconds: float = 0.0
    error: str | None = None
    index: int = 0
    fixed: dict = field(default_factory=dict, repr=False)
    _label: str | None = field(default=None, repr=False)

    @property
    def target_density(self) -> float:
        """The target density of this run (the report's overflow is measured against it)."""
        return float(self.params.get("target_density", self.fixed.get("target_density", 0.8)))

    @property
    def ok(self) -> bool:
        """True when the run produced a floorplan."""
        return self.error is None

    @property
    def label(self) -> str:
        """A short readable name of the parameters, e.g. ``"target_density=0.7 seed=1"``."""
        if self._label is None:
            self._label = format_params(self.params)
        return self._label

    def __repr__(self) -> str:
        what = f"error={self.error!r}" if self.error else (
            f"hpwl={self.report['hpwl']:.6g}" if self.report and "hpwl" in self.report else "ok")
        return f"<SweepResult #{self.index} {self.label}: {what}, {self.seconds:.2f} s>"


def _fmt_value(v: Any) -> str:
    if isinstance(v, Mapping):
        return "{" + ",".join(f"{k}:{_fmt_value(x)}" for k, x in v.items()) + "}"
    if isinstance(v, (set, frozenset)):
        return "{" + ",".join(sorted(map(str, v))) + "}"
    if isinstance(v, (list, tuple)):
        return "[" + ",".join(map(_fmt_value, v)) + "]"
    if isinstance(v, float):
        return f"{v:g}"
    return str(v)


def format_params(params: Mapping[str, Any]) -> str:
    """``name=value`` pairs joined by spaces, values written compactly."""
    return " ".join(f"{k}={_fmt_value(v)}" for k, v in params.items())


# ---------------------------------------------------------------------------------------------
# executors


class SerialExecutor(cf.Executor):
    """An executor that runs each call at once, in the calling thread.

    Useful as the serial reference of a sweep (``sweep(..., executor=SerialExecutor())``) and
    in debuggers.

    Examples
    --------
    >>> with SerialExecutor() as ex:
    ...     ex.submit(pow, 2, 10).result()
    1024
    """

    def __init__(self) -> None:
        self._shutdown = False
        self._lock = threading.Lock()

    def submit(self, fn, /, *args, **kwargs) -> cf.Future:
        with self._lock:
            if self._shutdown:
                raise RuntimeError("cannot schedule new futures after shutdown")
        fut: cf.Future = cf.Future()
        fut.set_running_or_notify_cancel()
        try:
            fut.set_result(fn(*args, **kwargs))
        except BaseException as exc:  # noqa: BLE001 - handed to the caller through the future
            fut.set_exception(exc)
        return fut

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        with self._lock:
            self._shutdown = True


_PRELOAD = ["floorwidget.explore", "floorwidget.placer", "floorwidget.metrics"]


def pool_context():
    """The multiprocessing context of the sweep's process pools.

    ``forkserver`` where the platform has it, else ``spawn``; both start workers that share
    nothing with the caller but what is pickled to them (safe from a notebook kernel's
    threads).  The fork server is told to preload numpy, scipy and the placer once, so a
    pool after the first starts in a fraction of a second instead of importing everything
    again in every worker (the benchmark prints both).  Its preload list is set to those
    modules only -- not the caller's ``__main__``, so a script needs no
    ``if __name__ == "__main__"`` guard.
    """
    if "forkserver" in multiprocessing.get_all_start_methods():
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(list(_PRELOAD))
        return ctx
    return multiprocessing.get_context("spawn")


def process_pool(max_workers: int | None = None) -> cf.ProcessPoolExecutor:
    """A local process pool with ``os.cpu_count()`` workers, to reuse over sweeps.

    ``sweep(executor=None)`` makes one like it for the sweep (and ships the design once per
    worker through the pool initializer); pass your own to keep the workers warm between
    sweeps (the design then travels with each task and is unpickled once per worker).
    """
    n = max_workers or os.cpu_count() or 1
    return cf.ProcessPoolExecutor(max_workers=n, mp_context=pool_context())


# ---------------------------------------------------------------------------------------------
# cheap, correct pickling of a Design

_PICKLE_PROTOCOL = pickle.HIGHEST_PROTOCOL


def dumps_design(design: Design) -> bytes:
    """Pickle ``design`` without its name-index cache, its initial floorplan as bare arrays.

    ``pickle.dumps(design)`` works too, but carries ``Design._index`` (a dict of every block
    name, rebuilt on demand anyway) once it has been used.

    Examples
    --------
    >>> import floorwidget as fw                               # doctest: +SKIP
    >>> d = fw.load("demo_data/heron_dsp.json")                # doctest: +SKIP
    >>> loads_design(dumps_design(d)).names == d.names         # doctest: +SKIP
    True
    """
    state = dict(design.__dict__)
    state["_index"] = None
    ini = state.pop("initial")
    init = (ini.x, ini.y, ini.orient, ini.status, ini.info)
    return pickle.dumps((state, init), protocol=_PICKLE_PROTOCOL)


def loads_design(data: bytes) -> Design:
    """Inverse of :func:`dumps_design`."""
    state, (x, y, orient, status, info) = pickle.loads(data)
    design = Design.__new__(Design)
    design.__dict__.update(state)
    design.initial = Floorplan(design, x, y, orient, status, info)
    return design


_WORKER_DESIGNS: dict[str, Design] = {}
_WORKER_LOCK = threading.Lock()


def _prime_worker(token: str, payload: bytes) -> None:
    """Pool initializer: unpickle the design once in this worker."""
    _WORKER_DESIGNS.clear()
    _WORKER_DESIGNS[token] = loads_design(payload)


def _resolve_design(token: str, payload: bytes | None) -> Design:
    """Worker side: the design of sweep ``token``, unpickled at most once per process."""
    with _WORKER_LOCK:
        d = _WORKER_DESIGNS.get(token)
        if d is None:
            if payload is None:
                raise RuntimeError("design was not shipped to this worker")
            if len(_WORKER_DESIGNS) >= 4:  # a long-lived worker serves many sweeps
                _WORKER_DESIGNS.pop(next(iter(_WORKER_DESIGNS)))
            d = _WORKER_DESIGNS[token] = loads_design(payload)
        return d


class _DesignRef:
    """Hands a design to a task: by reference in-process, by cached bytes when pickled.

    ``ship=False`` pickles the token only (the pool initializer already delivered the design).
    """

    def __init__(self, design: Design, token: str | None = None, ship: bool = True):
        self.design = design
        self.token = token or uuid.uuid4().hex
        self.ship = ship
        self._payload: bytes | None = None

    @property
    def payload(self) -> bytes:
        if self._payload is None:
            self._payload = dumps_design(self.design)
        return self._payload

    def light(self) -> _DesignRef:
        r = _DesignRef(self.design, self.token, ship=False)
        r._payload = self._payload
        return r

    def __reduce__(self):
        return _Shipped, (self.token, self.payload if self.ship else None)

    def __dask_tokenize__(self):
        return ("floorwidget-design", self.token)


class _Shipped:
    """What a :class:`_DesignRef` becomes once pickled: the token and the bytes, still opaque.

    It resolves to a :class:`Design` only when the task runs (:meth:`get`, cached per
    process).  Staying opaque matters on Dask, whose scheduler unpickles and re-pickles task
    arguments on the way to a worker: a Design resolved there would reach the worker as a
    fresh full pickle with every task.
    """

    __slots__ = ("token", "payload")

    def __init__(self, token: str, payload: bytes | None):
        self.token = token
        self.payload = payload

    def __reduce__(self):
        return _Shipped, (self.token, self.payload)

    def __dask_tokenize__(self):
        return ("floorwidget-design", self.token)

    def get(self) -> Design:
        return _resolve_design(self.token, self.payload)


# ---------------------------------------------------------------------------------------------
# the grid


def expand_grid(grid: Mapping[str, Sequence] | Sequence[Mapping[str, Any]]) -> list[dict]:
    """Parameter sets of a grid, in grid order.

    Parameters
    ----------
    grid : dict of name -> list of values, or a list of dicts
        A dict gives the cartesian product, the last name varying fastest (like
        :func:`itertools.product`); a list of dicts is taken as the explicit parameter sets.

    Returns
    -------
    list of dict

    Examples
    --------
    >>> expand_grid({"target_density": [0.7, 0.8], "seed": [0, 1]})
    ... # doctest: +NORMALIZE_WHITESPACE
    [{'target_density': 0.7, 'seed': 0}, {'target_density': 0.7, 'seed': 1},
     {'target_density': 0.8, 'seed': 0}, {'target_density': 0.8, 'seed': 1}]
    """
    if isinstance(grid, Mapping):
        names = list(grid)
        values = []
        for k in names:
            v = grid[k]
            if isinstance(v, (str, bytes)) or not isinstance(v, Iterable) or isinstance(v, Mapping):
                raise ValueError(f"sweep grid: {k!r} must map to a list of values, got {v!r}")
            v = list(v)
            if not v:
                raise ValueError(f"sweep grid: {k!r} has no values")
            values.append(v)
        return [dict(zip(names, combo)) for combo in itertools.product(*values)]
    sets = [dict(p) for p in grid]
    for p in sets:
        if not isinstance(p, dict):
            raise ValueError("sweep grid: a list grid must hold dicts of parameters")
    return sets


def net_weight_factors(design: Design, weight_scale: Mapping[str, float]) -> np.ndarray:
    """Per-net multiplier for ``weight_scale`` = {group name or block-name prefix: factor}.

    A key selects every block whose name starts with it (so ``"dsp0"`` selects the soft
    clusters ``dsp0/u*`` of that group, ``"sram_sp4k"`` the macros ``sram_sp4k_*``); a block
    selected by several keys takes the longest (most specific) one.  A net's multiplier is the
    factor furthest from 1 among its blocks (the largest when any boosts), the rule the placer
    applies to its own ``net_weight_scale`` mapping, so that the two agree.

    Returns
    -------
    (num_nets,) float array
        To be passed as the placer option ``net_weight_scale``.

    Raises
    ------
    ValueError
        When a key selects no block, or a factor is not a finite positive number.

    Examples
    --------
    >>> import floorwidget as fw                                          # doctest: +SKIP
    >>> f = net_weight_factors(design, {"sram_dp": 2.0, "lnk": 0.5})      # doctest: +SKIP
    """
    block_f = np.ones(design.num_blocks)
    if design.num_nets == 0:
        return np.ones(0)
    names = np.asarray(design.names, dtype=str)
    for key in sorted(weight_scale, key=lambda k: len(str(k))):  # longer prefixes win
        f = weight_scale[key]
        if isinstance(f, bool) or not isinstance(f, (int, float, np.number)) \
                or not np.isfinite(f) or f <= 0:
            raise ValueError(f"weight_scale {key!r}: factor {f!r} must be a finite number > 0")
        sel = np.char.startswith(names, str(key))
        if not sel.any():
            raise ValueError(f"weight_scale: no block name starts with {key!r}")
        block_f[sel] = float(f)
    from .placer.options import net_factors  # noqa: PLC0415

    return net_factors(design, block_f)


def _pin_names(design: Design, fp: Floorplan, names) -> None:
    if isinstance(names, str):
        names = [names]
    idx = []
    for nm in names:
        i = design.block(nm)
        if design.kind[i] != MACRO:
            raise ValueError(f"pinned: {nm!r} is not a macro")
        idx.append(i)
    idx = np.asarray(idx, dtype=np.intp)
    keep_fixed = fp.status[idx] == FIXED
    fp.status[idx[~keep_fixed]] = PINNED


# ---------------------------------------------------------------------------------------------
# the worker


def _one_line(exc: BaseException) -> str:
    msg = str(exc).strip().splitlines()
    text = msg[0] if msg else ""
    if isinstance(exc, KeyError) and text.startswith(("'", '"')) and text[0] == text[-1]:
        text = text[1:-1]
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


def _run_one(design_ref, base: tuple, params: dict, fixed: dict) -> dict:
    """Run one grid point (module level so that spawned workers can import it).

    Returns plain data: arrays of the floorplan, the report, seconds, or an error line.
    """
    t0 = time.perf_counter()
    try:
        if isinstance(design_ref, _DesignRef):  # in-process executor: the caller's design
            design = design_ref.design
        elif isinstance(design_ref, _Shipped):
            design = design_ref.get()
        else:
            design = design_ref
        from .metrics import evaluate
        from .placer import place

        opts = dict(fixed)
        opts.update({k: v for k, v in params.items() if k not in SPECIAL_KEYS})
        ws = params.get("weight_scale", fixed.get("weight_scale"))
        opts.pop("weight_scale", None)
        pins = params.get("pinned", fixed.get("pinned"))
        opts.pop("pinned", None)
        if ws:
            f = net_weight_factors(design, ws)
            if opts.get("net_weight_scale") is not None:
                from .placer.options import net_multipliers

                f = f * net_multipliers(design, opts["net_weight_scale"])
            opts["net_weight_scale"] = f
        x, y, orient, status = base
        fp0 = Floorplan(design, x, y, orient, status)
        if pins:
            _pin_names(design, fp0, pins)
        fp = place(design, fp0, **opts)
        out = Floorplan(design, fp.x, fp.y, fp.orient, fp.status, fp.info)
        td = opts.get("target_density", 0.8)
        report = dict(evaluate(design, out, target_density=td))
        return {"x": out.x, "y": out.y, "orient": out.orient, "status": out.status,
                "info": out.info, "report": report, "seconds": time.perf_counter() - t0,
                "error": None}
    except Exception as exc:  # noqa: BLE001 - one failing run never loses the others
        return {"error": _one_line(exc), "seconds": time.perf_counter() - t0}


# ---------------------------------------------------------------------------------------------
# the sweep


def sweep(design: Design, grid: Mapping[str, Sequence] | Sequence[Mapping[str, Any]],
          executor: cf.Executor | None = None, base: Floorplan | None = None, *,
          progress: Callable[[int, int, SweepResult], Any] | None = None,
          max_workers: int | None = None, **fixed_options) -> list[SweepResult]:
    """Place ``design`` once per point of a parameter grid, on any executor.

    Parameters
    ----------
    design : Design
    grid : dict of name -> list of values, or list of dicts
        The names are ``target_density``, ``seed``, any placer option, and two of the sweep's
        own:

        ``weight_scale``
            a dict {group name or block-name prefix: factor} multiplying the weights of the
            nets touching those blocks (see :func:`net_weight_factors`); sweep a list of such
            dicts.
        ``pinned``
            a set of macro names to pin at their position in ``base`` before placing; sweep a
            list of such sets.

        See :func:`expand_grid` for the order of the runs.
    executor : concurrent.futures.Executor, optional
        Where the runs go.  Default: a local process pool (:func:`pool_context`) with
        ``os.cpu_count()`` workers (fewer when the grid is smaller), shut down at the end.  A
        Dask ``distributed.Client(...).get_executor()`` or :class:`SerialExecutor` work too;
        an executor passed in is left running.
    base : Floorplan, optional
        Starting floorplan (its pinned and fixed blocks stay put).  Default ``design.initial``.
    progress : callable ``(done, total, result)``, optional
        Called in the calling thread as each run finishes (completion order); see
        :func:`text_progress` for a command-line bar.
    max_workers : int, optional
        Size of the default pool.
    **fixed_options
        Options given to every run (a grid name overrides nothing: naming an option in both
        is an error).

    Returns
    -------
    list of SweepResult
        One per parameter set, in grid order whatever the completion order.  A run that
        raised carries ``.error`` (one line) with ``.floorplan`` and ``.report`` ``None``; the
        other runs are unaffected.

    Raises
    ------
    ValueError
        For a malformed grid or an option named both in ``grid`` and ``fixed_options``.

    Examples
    --------
    >>> import floorwidget as fw                                          # doctest: +SKIP
    >>> d = fw.load("demo_data/heron_dsp.json")                           # doctest: +SKIP
    >>> res = fw.explore.sweep(d, {"target_density": [0.7, 0.9], "seed": [0, 1]})  # doctest: +SKIP
    >>> [round(r.report["hpwl"]) for r in res]                            # doctest: +SKIP

    On a Dask cluster::

        from distributed import Client
        with Client(n_workers=4) as client:
            res = fw.explore.sweep(d, grid, executor=client.get_executor())
    """
    if not isinstance(design, Design):
        raise TypeError(f"sweep: expected a Design, got {type(design).__name__}")
    sets = expand_grid(grid)
    clash = sorted({k for p in sets for k in p} & set(fixed_options))
    if clash:
        raise ValueError(f"sweep: {', '.join(map(repr, clash))} given both in the grid and as a "
                         f"fixed option")
    base = design.initial if base is None else base
    if base.design is not design and base.design.num_blocks != design.num_blocks:
        raise DesignError("sweep: base floorplan belongs to another design")
    base_arrays = (base.x.copy(), base.y.copy(), base.orient.copy(), base.status.copy())
    total = len(sets)
    results: list[SweepResult | None] = [None] * total
    if total == 0:
        return []

    ref = _DesignRef(design)
    own = executor is None
    if own:
        n = min(max_workers or os.cpu_count() or 1, total)
        executor = cf.ProcessPoolExecutor(
            max_workers=n, mp_context=pool_context(),
            initializer=_prime_worker, initargs=(ref.token, ref.payload))
        task_ref = ref.light()
    else:
        task_ref = ref
    try:
        futures = {executor.submit(_run_one, task_ref, base_arrays, p, fixed_options): i
                   for i, p in enumerate(sets)}
        done = 0
        for fut in cf.as_completed(futures):
            i = futures[fut]
            try:
                raw = fut.result()
            except Exception as exc:  # noqa: BLE001 - e.g. a worker process that died
                raw = {"error": _one_line(exc), "seconds": 0.0}
            results[i] = r = _build(design, sets[i], i, raw)
            r.fixed = dict(fixed_options)
            done += 1
            if progress is not None:
                progress(done, total, r)
    finally:
        if own:
            executor.shutdown(wait=True, cancel_futures=True)
    return results  # type: ignore[return-value]


def _build(design: Design, params: dict, index: int, raw: dict) -> SweepResult:
    if raw.get("error"):
        return SweepResult(params=params, seconds=float(raw.get("seconds", 0.0)),
                           error=str(raw["error"]), index=index)
    fp = Floorplan(design, raw["x"], raw["y"], raw["orient"], raw["status"], raw.get("info"))
    return SweepResult(params=params, floorplan=fp, report=raw["report"],
                       seconds=float(raw["seconds"]), index=index)


# ---------------------------------------------------------------------------------------------
# progress on the command line


def text_progress(done: int, total: int, result: SweepResult | None = None, *,
                  stream: TextIO | None = None, width: int = 24) -> None:
    """A one-line progress bar on stderr for :func:`sweep` (``progress=text_progress``).

    Rewrites the line in place with ``\\r`` and ends it with a newline after the last run.

    Examples
    --------
    >>> import io
    >>> buf = io.StringIO()
    >>> text_progress(1, 4, stream=buf, width=8)
    >>> buf.getvalue()
    '\\rsweep [##......] 1/4'
    """
    stream = sys.stderr if stream is None else stream
    total = max(int(total), 1)
    filled = int(round(width * done / total))
    bar = "#" * filled + "." * (width - filled)
    digits = len(str(total))
    line = f"\rsweep [{bar}] {done:>{digits}}/{total}"
    if result is not None:
        line += f"  {result.label}"
        line += f"  FAILED {result.error}" if result.error else f"  {result.seconds:.1f} s"
    stream.write(line[:200])
    if done >= total:
        stream.write("\n")
    stream.flush()


# ---------------------------------------------------------------------------------------------
# into a Session


def to_session(session, results: Sequence[SweepResult], prefix: str = "sweep") -> list[str]:
    """Add every successful result to ``session`` as a named alternative.

    Each becomes ``Session.add_alternative(label, floorplan, note=..., params=...)`` with the
    label ``f"{prefix} {index}: {result.label}"``; failed runs are skipped.

    Returns
    -------
    list of str
        The labels added, in the order of ``results``.
    """
    labels = []
    for r in results:
        if not r.ok:
            continue
        label = f"{prefix} {r.index}: {r.label}"
        note = ""
        if r.report:
            note = ", ".join(f"{k} {r.report[k]:.4g}" for k in
                             ("hpwl", "congestion_p99", "logic_regions") if k in r.report)
        # hand the report over when it was computed at the session's own target density
        td = getattr(session, "target_density", None)
        same = td is not None and r.target_density == float(td)
        session.add_alternative(label, r.floorplan, note=note, params=dict(r.params),
                                report=r.report if same else None)
        labels.append(label)
    return labels


def candidates(design: Design, k: int = 4, executor: cf.Executor | None = None,
               base: Floorplan | None = None, *,
               progress: Callable[[int, int, SweepResult], Any] | None = None,
               **fixed_options) -> list[SweepResult]:
    """``k`` diverse macro arrangements of ``design``, placed in parallel on ``executor`` (as
    :func:`sweep`), best first.

    Diversity comes from the method before the seed: the macro layouts that apply to the design
    (``"arrays"`` where most macros come in banks, ``"periphery"`` for up to 128 large ones,
    always ``"free"``) take turns, each with its own seed.  Runs are ranked legal first, then
    by the product of HPWL and congestion p99 (both matter: the one bought with the other is
    not better), then by logic regions.  :func:`to_session` turns them into alternatives of a
    session, where the widget shows them side by side.  ``progress`` is :func:`sweep`'s (called
    as each run finishes).

    Returns
    -------
    list of SweepResult
        Failed runs last, with their error.
    """
    from .placer.macro_arrays import macro_arrays  # noqa: PLC0415

    k = int(k)
    if k < 1:
        raise ValueError(f"candidates: k must be at least 1, got {k}")
    fp = design.initial if base is None else base
    mac = np.flatnonzero((design.kind == MACRO) & (fp.status == MOVABLE))
    layouts = []
    if len(mac) and sum(len(a) for a in macro_arrays(design, fp, mac) if len(a) > 1) \
            >= 0.5 * len(mac):
        layouts.append("arrays")
    if 0 < len(mac) <= 128:
        layouts.append("periphery")
    layouts.append("free")
    grid = [{"macro_layout": layouts[i % len(layouts)], "seed": i // len(layouts)}
            for i in range(k)]
    res = sweep(design, grid, executor, base, progress=progress, **fixed_options)

    def rank(r: SweepResult):
        if not r.ok:
            return (2, 0.0, 0)
        rep = r.report
        return (0 if rep["legal"] else 1, rep["hpwl"] * max(rep["congestion_p99"], 1e-12),
                rep["logic_regions"])

    return sorted(res, key=rank)


# ---------------------------------------------------------------------------------------------
# Pareto front


def pareto_front(points, minimise: Sequence[bool] | bool = True) -> np.ndarray:
    """Mask of the non-dominated rows of ``points``.

    Row ``j`` dominates row ``i`` when it is no worse in every objective and strictly better
    in at least one.  Rows containing NaN are never in the front and dominate nothing;
    identical rows do not dominate each other.

    Parameters
    ----------
    points : (n, k) array_like
    minimise : bool or sequence of k bools
        Per objective, True to minimise it, False to maximise.  Default: minimise all.

    Returns
    -------
    (n,) bool array

    Notes
    -----
    O(n² k) time, vectorised in blocks of rows (O(block · n · k) memory): instant for the
    hundreds of points of a sweep.

    References
    ----------
    Pareto dominance as defined e.g. in K. Deb, *Multi-Objective Optimization Using
    Evolutionary Algorithms*, Wiley, 2001 (from memory).

    Examples
    --------
    >>> pareto_front([[1, 3], [2, 2], [3, 1], [3, 3], [2, 2]])
    array([ True,  True,  True, False,  True])
    >>> pareto_front([[1, 3], [2, 2]], minimise=(True, False))
    array([ True, False])
    """
    p = np.asarray(points, dtype=np.float64)
    if p.ndim == 1:
        p = p[:, None]
    if p.ndim != 2:
        raise ValueError("pareto_front: points must be an (n, k) array")
    n, k = p.shape
    sign = np.where(np.broadcast_to(np.asarray(minimise, dtype=bool), (k,)), 1.0, -1.0)
    q = p * sign
    valid = ~np.isnan(q).any(axis=1)
    qv = q[valid]
    m = len(qv)
    dominated = np.zeros(m, dtype=bool)
    block = max(1, int(4_000_000 // max(1, m * k)))
    for s in range(0, m, block):
        a = qv[s:s + block, None, :]                      # candidates i
        le = (qv[None, :, :] <= a).all(axis=2)            # j no worse than i everywhere
        lt = (qv[None, :, :] < a).any(axis=2)             # j strictly better somewhere
        dominated[s:s + block] = (le & lt).any(axis=1)
    mask = np.zeros(n, dtype=bool)
    mask[np.flatnonzero(valid)] = ~dominated
    return mask


def result_points(results: Sequence[SweepResult],
                  keys: Sequence[str] = ("hpwl", "congestion_peak")) -> np.ndarray:
    """``(n, len(keys))`` array of report figures (NaN rows for failed runs)."""
    out = np.full((len(results), len(keys)), np.nan)
    for i, r in enumerate(results):
        if r.report:
            out[i] = [float(r.report.get(k, np.nan)) for k in keys]
    return out
