"""Property (issue 12, "Done when"): on random small networks of annotated parts, ``full``
and ``cosim`` agree on every key of every part.

The circuits are test_balance's (1 to 3 parts of four models, series or to ground, a shared
board node, a coupling path) with the supply made a 1 kHz sine and a transient long enough
for the warm-up to show (time constants made milliseconds).  Tolerances are the README's:
the co-simulation within 0.05 K of the network's exact response, ``full`` verified to
reltol |T| + 2 reltol of the rise ("How a result is verified"); powers and resistances to
2 reltol of each other.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings

from heatweave import cosim
from heatweave.errors import HeatweaveError
from heatweave.run.runner import RunOptions
from test_balance import circuits

RELTOL = 1e-3  # ngspice's default, which the README's tolerances are stated in
KEYS_T = ("temperature", "peak_temperature")
KEYS_P = ("power", "peak_power", "resistance", "nominal_resistance")


def transient(deck: str) -> str:
    """*deck* with its DC supply made a sine of the same amplitude and a transient to 100 ms."""
    lines = deck.splitlines()
    supply = lines[1].split()
    lines[1] = f"V1 n0 0 SIN(0 {supply[-1]} 1k)"
    return "\n".join(line if line != ".op" else ".tran 5u 100m" for line in lines) + "\n"


def quick(note: str) -> str:
    """*note* with thermal time constants of milliseconds, so that 100 ms shows the warm-up."""
    return note.replace("cth = 0.1", "cth = 0.001").replace("cth = 2.0", "cth = 0.02")


@pytest.mark.ngspice
@pytest.mark.slow
@settings(
    max_examples=8, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(case=circuits())
def test_full_and_cosim_agree_on_every_key(tmp_path: Path, case: tuple[str, str]) -> None:
    deck_text, note_text = case
    deck, note = tmp_path / "r.cir", tmp_path / "r.thermal.toml"
    deck.write_text(transient(deck_text))
    note.write_text(quick(note_text))
    got = {}
    for method in ("full", "cosim"):
        try:
            outcome = cosim.run_auto(str(deck), str(note), RunOptions(), method=method)
        except HeatweaveError:
            return  # a refusal in words (runaway, a method that cannot run) is an answer
        got[method] = outcome.results
    full, co = got["full"], got["cosim"]
    assert [p.path for p in full.parts] == [p.path for p in co.parts]
    for a, b in zip(full.parts, co.parts, strict=True):
        for key in KEYS_T:
            x, y = getattr(a, key), getattr(b, key)
            rise = abs(x - full.ambient)
            assert abs(x - y) <= RELTOL * abs(x) + 2 * RELTOL * rise + 0.05, (key, a.path, x, y)
        for key in KEYS_P:
            x, y = getattr(a, key), getattr(b, key)
            if x is None or y is None:
                assert x is y, (key, a.path)
                continue
            assert abs(x - y) <= 2 * RELTOL * abs(x) + 1e-12, (key, a.path, x, y)
