"""How long parse_card takes per typical card (CPU time, best of several runs).

Run: .venv/bin/python benchmarks/bench_grammar.py
The memo in front of parse_card is bypassed, so every call really parses.
"""

from __future__ import annotations

import time
import timeit

from heatweave.spice.grammar import parse_card, parser

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
    import lark  # noqa: F401  (imported on first use by heatweave.spice.grammar)

    imported = time.perf_counter()
    parser()
    built = time.perf_counter()
    print(
        f"import lark: {(imported - start) * 1e3:.1f} ms; parser build (cached tables): "
        f"{(built - imported) * 1e3:.1f} ms; both once per process"
    )
    parse = parse_card.__wrapped__
    total = 0.0
    for card in CARDS:
        timer = timeit.Timer(lambda c=card: parse(c), timer=time.process_time)
        best = min(timer.repeat(number=300, repeat=9)) / 300
        total += best
        print(f"{best * 1e6:8.1f} us  {card}")
    print(f"{total / len(CARDS) * 1e6:8.1f} us  mean per card")


if __name__ == "__main__":
    main()
