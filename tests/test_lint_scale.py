"""lint on long cards: memory bounded by the input's size, verdicts as before (issue 14).

One card of 3.2 MB of ``a=1`` pairs took 1.46 GB and 29 s inside lark; 25,000 findings
on one 100 kB card took 2.4 GB (each finding kept its own copy of the line): findings may
add 1 kB each (message, hint, location), not a copy of the card.  The bound
here is on tracemalloc's peak (what Python allocates, the interpreter and its modules
aside) relative to the deck's bytes.  Time is not tested here: benchmarks/bench_lint.py
measures the ratio of a 4 MB card to a 1 MB one.

The bound, 100 bytes per input byte, is the typed syntax plus lint's own passes: a pair
``a=1`` is 4 bytes of input and three syntax objects (key, value, pair: about 230 bytes),
so the syntax alone is near 60 times these decks, the densest there are.
"""

from __future__ import annotations

import tracemalloc
from collections.abc import Callable
from pathlib import Path

import pytest

from heatweave.spice.grammar import parser
from heatweave.spice.lint import lint_project
from heatweave.spice.project import load_project

SIZE = 40_000  # bytes of the long card; the ratio does not depend on it
BOUND = 100  # peak bytes per input byte
PAIRS = " ".join(["a=1"] * (SIZE // 4))


def _continued() -> str:
    line = "+ " + " ".join(["a=1"] * 10) + "\n"
    return "R1 a 0 1k\n" + line * (SIZE // len(line))


DECKS: dict[str, Callable[[], str]] = {
    ".param card": lambda: f".param {PAIRS}\n",
    "element card": lambda: f"R1 a 0 1k {PAIRS}\n",
    ".model card in parentheses": lambda: f"R1 a 0 m\n.model m r({PAIRS})\n",
    "continuation lines": _continued,
    "plain words": lambda: "R1 a 0 1k " + " ".join(["abc"] * (SIZE // 4)) + "\n",
    # an error at every pair (b is not defined): one finding each, all on one line
    "a finding at every pair": lambda: ".param " + " ".join(["a=b"] * (SIZE // 4)) + "\n",
}


@pytest.mark.parametrize("shape", list(DECKS))
def test_lint_peak_memory_is_bounded_by_the_input_size(tmp_path: Path, shape: str) -> None:
    deck = tmp_path / "long.cir"
    deck.write_text(f"* long card\nV1 a 0 1\n{DECKS[shape]()}.end\n")
    size = deck.stat().st_size
    parser()  # built once per process, whatever the deck
    tracemalloc.start()
    try:
        findings = lint_project(load_project(str(deck)))
        _current, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    allowed = BOUND * size + 1000 * len(findings)
    assert peak < allowed, f"{peak / size:.0f} bytes per input byte, {len(findings)} findings"
    if shape == "a finding at every pair":  # and each where it stands: the last b's column
        count = SIZE // 4
        located = [f.location for f in findings if "'b' is not defined" in f.message]
        assert len(located) == count
        assert located[-1] is not None
        assert (located[-1].line, located[-1].column) == (3, len(".param ") + 4 * count - 1)
