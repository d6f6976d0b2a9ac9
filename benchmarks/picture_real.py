"""The README's before/after picture: ariane136 with its SRAMs movable, the design's own
placement beside ours (``place`` at its defaults), both with the congestion heat.

``python benchmarks/picture_real.py [--data ../shared/realdata] [-o benchmarks/pictures/x.png]``

The SRAMs are made movable as ``bench_real.py`` does (``+ FIXED`` → ``+ PLACED``); the left
panel is the DEF's own placement read as it is. Early-floorplanning estimates; sign-off
belongs to the implementation flow.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))


def main(argv: list[str]) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--data", default=str(ROOT.parent / "shared" / "realdata"))
    ap.add_argument("-o", "--out", default=str(ROOT / "benchmarks" / "pictures"
                                              / "ariane136_own_vs_ours.png"))
    a = ap.parse_args(argv)
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from bench_real import load_design

    import floorwidget as fw

    d = load_design("ariane-movable", Path(a.data))
    t = time.perf_counter()
    fp = fw.place(d)
    secs = time.perf_counter() - t
    own, ours = fw.evaluate(d, d.initial), fw.evaluate(d, fp)
    fig, axes = plt.subplots(1, 2, figsize=(16, 8.2))
    for ax, f, who in ((axes[0], d.initial, "the design's own placement"),
                       (axes[1], fp, f"floorwidget place, defaults ({secs:.0f} s)")):
        fw.render(d, f, ax=ax, heat="congestion", show_labels=False, power=False,
                  title=f"ariane136, SRAMs movable: {who}")
    out = Path(a.out)
    out.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(out, dpi=80, bbox_inches="tight")
    print(f"{out}: HPWL {ours['hpwl'] / own['hpwl']:.3f} × own, congestion p99 "
          f"{ours['congestion_p99'] / own['congestion_p99']:.3f} × own, {secs:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
