"""Run every benchmark in this folder, one after another, and say which met its targets.

    python benchmarks/run_all.py [NAME ...]     e.g. run_all.py bench_reader

Each benchmark measures its ratios side by side in one run and exits 0 when its targets
are met; the figures it prints are the ones the README quotes.
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def main() -> int:
    wanted = set(sys.argv[1:])
    scripts = sorted(p for p in HERE.glob("bench_*.py") if not wanted or p.stem in wanted)
    failed = []
    for script in scripts:
        print(f"== {script.stem}", flush=True)
        start = time.perf_counter()
        code = subprocess.call([sys.executable, str(script)])
        print(f"== {script.stem}: exit {code} after {time.perf_counter() - start:.0f} s\n")
        if code != 0:
            failed.append(script.stem)
    if failed:
        print("targets not met: " + ", ".join(failed))
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
