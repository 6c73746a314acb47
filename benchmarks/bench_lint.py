"""lint on one long card: a 4 MB card against a 1 MB one, side by side (issue 14).

Generates decks whose one long card is ``a=1`` pairs (a ``.param`` card, an element card,
a ``.model`` card in parentheses, ``+`` continuation lines of ten pairs) at 1 MB and 4 MB,
then runs ``heatweave lint`` on each as a separate process, in interleaved rounds, and
prints CPU seconds (user + system, best round) and peak resident memory.

Target: linear time, the 4 MB card at most 5 times the 1 MB one (CPU), for every shape.

    python benchmarks/bench_lint.py [--rounds 3] [--keep DIR]
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
from pathlib import Path

from bench_reader import measure_time

MB = 1_000_000


def _pairs(size: int) -> str:
    return " ".join(["a=1"] * (size // 4))


def _continued(size: int) -> str:
    line = "+ " + " ".join(["a=1"] * 10) + "\n"
    return "R1 a 0 1k\n" + line * (size // len(line))


SHAPES = {
    ".param": lambda size: f".param {_pairs(size)}\n",
    "element": lambda size: f"R1 a 0 1k {_pairs(size)}\n",
    ".model (...)": lambda size: f"R1 a 0 m\n.model m r({_pairs(size)})\n",
    "continuation": _continued,
}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=3, help="interleaved rounds, best kept")
    parser.add_argument("--keep", type=Path, default=None, help="keep the decks here")
    args = parser.parse_args()
    folder = args.keep or Path(tempfile.mkdtemp(prefix="hw-bench-lint-"))
    folder.mkdir(parents=True, exist_ok=True)
    heatweave = str(Path(sys.executable).with_name("heatweave"))
    runs: list[tuple[str, int, Path]] = []
    for k, (shape, card) in enumerate(SHAPES.items()):
        for size in (MB, 4 * MB):
            deck = folder / f"long{k}-{size // MB}mb.cir"
            deck.write_text(f"* one long card\nV1 a 0 1\n{card(size)}.end\n")
            runs.append((shape, size, deck))
    best: dict[Path, tuple[float, float]] = {}
    for _round in range(args.rounds):
        for _shape, _size, deck in runs:
            _wall, cpu, mem = measure_time([heatweave, "lint", str(deck)])
            old = best.get(deck)
            best[deck] = (min(cpu, old[0]), max(mem, old[1])) if old else (cpu, mem)
    print(f"best of {args.rounds} interleaved rounds; load average {os.getloadavg()[0]:.1f}")
    ok = True
    for shape in SHAPES:
        small, large = (best[deck] for s, _z, deck in runs if s == shape)
        ratio = large[0] / small[0]
        ok = ok and ratio <= 5
        print(
            f"  {shape:<14} 1 MB {small[0]:6.2f} s CPU {small[1]:5.0f} MiB;"
            f"  4 MB {large[0]:6.2f} s CPU {large[1]:5.0f} MiB;  ratio {ratio:.2f} (target <= 5)"
        )
    if args.keep is None:
        shutil.rmtree(folder, ignore_errors=True)
    sys.exit(0 if ok else 1)


if __name__ == "__main__":
    os.environ.setdefault("PYTHONDONTWRITEBYTECODE", "1")
    main()
