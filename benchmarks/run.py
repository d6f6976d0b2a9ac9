"""Run every ``benchmarks/bench_*.py`` in turn; each prints its own table.

``python benchmarks/run.py [--quick] [NAME ...]`` -- NAME filters by file name
(``parse`` runs ``bench_parse.py``).  ``--quick`` is passed on: smaller sizes, for a smoke run.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main(argv: list[str]) -> int:
    flags = [a for a in argv if a.startswith("-")]
    names = [a for a in argv if not a.startswith("-")]
    status = 0
    for script in sorted(HERE.glob("bench_*.py")):
        if names and not any(n in script.stem for n in names):
            continue
        print(f"\n## {script.stem}\n", flush=True)
        status |= subprocess.call([sys.executable, str(script), *flags])
    return status


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
