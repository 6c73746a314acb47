"""How long parse_card takes per typical card (best of several runs, so load noise drops out).

Run: .venv/bin/python benchmarks/bench_grammar.py
"""

from __future__ import annotations

import time
import timeit

from heatweave.grammar import parse_card, parser

CARDS = [
    "R1 a b 1k",
    "Rth n3 n5 {half} tc1=2m tc2=1.5u",
    "V1 n1 0 dc 0.5 ac 1 90 sin(0.5 0.2 1meg 0 0 0)",
    ".model dpwr d (is=1e-12 rth0=50 cth0=1m)",
    "Q4 vdd g e4 sub qn area=2",
    "X1 in out chain gain=2",
    "B1 b1 0 V = V(in) < {vlow} ? {vlow} : V(in) > {vhigh} ? {vhigh} : V(in)",
    ".tran 1n 20n",
]


def main() -> None:
    start = time.perf_counter()
    parser()
    print(f"parser build: {(time.perf_counter() - start) * 1e3:.1f} ms (once per process)")
    total = 0.0
    for card in CARDS:
        best = min(timeit.repeat(lambda c=card: parse_card(c), number=500, repeat=7)) / 500
        total += best
        print(f"{best * 1e6:8.1f} us  {card}")
    print(f"{total / len(CARDS) * 1e6:8.1f} us  mean per card")


if __name__ == "__main__":
    main()
