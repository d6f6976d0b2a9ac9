"""The candidates view: wall time from "Find candidates" to the cards on screen (kernel side),
and from a click on a card to the updated canvas and readouts.

On the demo design after a first placement, K = 3: the placements on the sweeps' default
process pool (as the button runs them) and, for comparison, one after the other in the
kernel (``SerialExecutor``); the pictures and figures (``CandidatesPanel.show``) on their own;
and a click (``Session.restore`` with the marks and readouts that follow), then its undo.
No target: the placements are most of it and scale with the design.

``python benchmarks/bench_candidates.py [--quick]`` prints a table (medians; the machine is
noisy).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def main(argv: list[str]) -> int:
    import floorwidget as fw
    from floorwidget.explore import SerialExecutor
    from floorwidget.widget import FloorplanWidget

    repeats = 1 if "--quick" in argv else 3
    d = fw.load(ROOT / "demo_data" / "heron_dsp.json")
    s = fw.Session(d)
    s.place(seed=0)
    s.legalize()
    w = FloorplanWidget(d, session=s)
    panel = w.candidates
    rows: dict[str, list[float]] = {"find 3, process pool (s)": [], "find 3, serial (s)": [],
                                    "cards: pictures + figures (ms)": [],
                                    "click -> current, marks, readouts (ms)": [],
                                    "undo of the click (ms)": []}
    for _ in range(repeats):
        for key, ex in (("find 3, process pool (s)", None),
                        ("find 3, serial (s)", SerialExecutor())):
            panel.executor = ex
            t0 = time.perf_counter()
            if not w.find_candidates(3):
                raise RuntimeError(w.message.value)
            rows[key].append(time.perf_counter() - t0)
        t0 = time.perf_counter()
        panel.show(panel.labels)
        rows["cards: pictures + figures (ms)"].append((time.perf_counter() - t0) * 1e3)
        t0 = time.perf_counter()
        panel.choose(panel.labels[1])
        rows["click -> current, marks, readouts (ms)"].append((time.perf_counter() - t0) * 1e3)
        t0 = time.perf_counter()
        w.undo()
        rows["undo of the click (ms)"].append((time.perf_counter() - t0) * 1e3)
    print(f"{'measure (demo, K = 3, n=' + str(repeats) + ')':<44} {'median':>10} {'max':>10}")
    for key, v in rows.items():
        print(f"{key:<44} {np.median(v):>10.2f} {np.max(v):>10.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
