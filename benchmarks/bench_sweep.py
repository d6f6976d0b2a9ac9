"""Sweep wall time on the demo design: serial, the default local process pool, a Dask cluster.

``python benchmarks/bench_sweep.py [--quick] [--repeats N] [--runs N]``

Eight runs (``target_density`` x ``seed``) of the real placer on ``demo_data/heron_dsp.json``:

* ``serial``        -- :class:`floorwidget.explore.SerialExecutor`, in this process;
* ``process pool (fresh)`` -- ``sweep(executor=None)``: a new pool of ``os.cpu_count()``
  workers per sweep (forkserver context, :func:`floorwidget.explore.pool_context`), so worker
  start-up and the one-off design shipping are included;
* ``warm pool``     -- one :func:`floorwidget.explore.process_pool` kept across repeats (the
  design then travels with every task and is unpickled once per worker);
* ``dask 2 workers``-- ``distributed.LocalCluster(n_workers=2, threads_per_worker=1)`` started
  once; its start-up time is printed separately.

Also the cost of shipping the design: pickled size and time of :func:`dumps_design` against
``pickle.dumps``.  Medians of ``--repeats`` (default 3; 1 with ``--quick``, which also runs 4
sweeps of fewer placer iterations).  The machine may be shared: compare rows of one table only.
"""

from __future__ import annotations

import argparse
import os
import pickle
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import floorwidget as fw  # noqa: E402
from floorwidget.explore import SerialExecutor, dumps_design, loads_design, process_pool, sweep  # noqa: E402


def timed(fn, repeats):
    times = []
    out = None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times), min(times), out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smoke-sized run")
    ap.add_argument("--repeats", type=int, default=None)
    ap.add_argument("--runs", type=int, default=None, help="sweep size (default 8; 4 quick)")
    ap.add_argument("--no-dask", action="store_true")
    args = ap.parse_args(argv)
    repeats = args.repeats or (1 if args.quick else 3)
    runs = args.runs or (4 if args.quick else 8)

    design = fw.load(ROOT / "demo_data" / "heron_dsp.json")
    dens = [0.65, 0.7, 0.75, 0.8, 0.85, 0.9, 0.95, 1.0]
    n_d = max(1, runs // 2)
    grid = {"target_density": dens[:n_d], "seed": list(range(max(1, runs // n_d)))}
    fixed = {"max_iterations": 20} if args.quick else {}
    n_runs = len(grid["target_density"]) * len(grid["seed"])

    # shipping cost (medians of 7)
    design.block(design.names[0])
    t_dump, _, blob = timed(lambda: dumps_design(design), 7)
    t_load, _, _ = timed(lambda: loads_design(blob), 7)
    t_plain, _, plain = timed(lambda: pickle.dumps(design, protocol=pickle.HIGHEST_PROTOCOL), 7)
    print(f"design {design.name}: {design.num_blocks} blocks, {design.num_nets} nets; "
          f"{n_runs} runs per sweep, {repeats} repeat(s), {os.cpu_count()} CPUs, "
          f"load average {os.getloadavg()[0]:.1f} at start")
    print(f"shipping: dumps_design {len(blob) / 1e3:.0f} kB in {t_dump * 1e3:.1f} ms "
          f"(load {t_load * 1e3:.1f} ms); pickle.dumps {len(plain) / 1e3:.0f} kB in "
          f"{t_plain * 1e3:.1f} ms\n")

    rows = []
    med, best, ref = timed(lambda: sweep(design, grid, executor=SerialExecutor(), **fixed),
                           repeats)
    bad = [r.error for r in ref if not r.ok]
    if bad:
        print("a run failed:", bad[0])
        return 1
    per_run = statistics.median(r.seconds for r in ref)
    rows.append(("serial", med, best))

    med, best, out = timed(lambda: sweep(design, grid, **fixed), repeats)
    same = all(a.floorplan.identical(b.floorplan) for a, b in zip(ref, out))
    rows.append(("process pool (fresh)", med, best))

    with process_pool() as pool:
        sweep(design, grid, executor=pool, **fixed)  # warm up: start workers, ship the design
        med, best, out = timed(lambda: sweep(design, grid, executor=pool, **fixed), repeats)
    same &= all(a.floorplan.identical(b.floorplan) for a, b in zip(ref, out))
    rows.append(("process pool (warm)", med, best))

    dask_start = None
    if not args.no_dask:
        try:
            import distributed
        except ImportError:
            distributed = None
        if distributed is not None:
            t = time.perf_counter()
            with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                          dashboard_address=None) as cluster, \
                    distributed.Client(cluster) as client:
                dask_start = time.perf_counter() - t
                ex = client.get_executor()
                med, best, out = timed(lambda: sweep(design, grid, executor=ex, **fixed),
                                       repeats)
            same &= all(a.floorplan.identical(b.floorplan) for a, b in zip(ref, out))
            rows.append(("dask LocalCluster, 2 workers", med, best))

    serial_med = rows[0][1]
    print(f"{'executor':<30} {'median s':>9} {'best s':>8} {'speed-up':>9}")
    print("-" * 59)
    for name, med, best in rows:
        print(f"{name:<30} {med:>9.2f} {best:>8.2f} {serial_med / med:>8.2f}x")
    print(f"\none placement + evaluation: median {per_run:.2f} s in the worker")
    if dask_start is not None:
        print(f"dask cluster start-up (not in the table): {dask_start:.2f} s")
    print(f"all executors gave bit-identical floorplans: {same}")
    print(f"load average {os.getloadavg()[0]:.1f} at the end (a speed-up needs idle cores)")
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())
