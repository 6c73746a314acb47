"""settle's fixed-resistor deck (settle/electrical.py): a transform of the deck tree.

Each row is a no-heating deck of our own as text (the lines the reference form writes for
a part, ``Bhw_<name> a b I = ...``), read into the tree, transformed and written; the whole
output is compared, so every card the transform does not touch (unknown cards, a user's
card whose name merely looks like heatweave's, comments, continuation lines, CRLF) is
held to pass through byte for byte.  ngspice 39 then runs an emitted divider both ways.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from heatweave import tempmodels
from heatweave.emit.emitter import load_inputs
from heatweave.errors import EmitError
from heatweave.networks import Single
from heatweave.run.prepare import RunOptions, prepare
from heatweave.settle.electrical import fixed_resistor_deck
from heatweave.simulators import get_simulator
from heatweave.spice.reader import read
from heatweave.thermal.circuit import AMBIENT_NODE, PartPlan


def resistor(path: str) -> PartPlan:
    # R(T) = 100 (1 + 0.004 (T - 25)): at 75 degC 120 ohm, at -25 degC 80 ohm (linear TCR).
    model = tempmodels.get("linear").from_params({"tc1": 0.004}, 100.0, None)
    return PartPlan(path, "linear", model, Single(10.0, 1.0), AMBIENT_NODE, "ambient", None,
                    None, 70.0, None)  # fmt: skip


SOURCE = "Bhw_r1 a b I = V(a,b)/(100*(1+0.004*(V(hw_t_r1)-25)))"
OTHERS = (
    "* a comment; with $ marks\n"
    ".weird_card a=1 {b*2}\n"
    "A1 [%vd(a b)] %id(0 c) mystery ; inline\n"
    "Bhw_r1x a 0 I = 1m\n"  # the user's own card of a like name (the name check allows it)
    "R9 a b\n+ 1k\n*  between\n+ tc1=0.01\n"
    ".control\nshell echo kept\n.endc\n"
)


@pytest.mark.parametrize(
    ("text", "temps", "want"),
    [
        # the plain case: R(75 degC) = 120 ohm
        (f"t\n{SOURCE}\n.end\n", [75.0], "t\nRhw_fix_r1 a b 120\n.end\n"),
        # the comment lines above the card stay; unknown cards pass untouched
        (f"t\n{OTHERS}* above\n{SOURCE}\n.end\n", [-25.0],
         f"t\n{OTHERS}* above\nRhw_fix_r1 a b 80\n.end\n"),
        # an inline comment and a continuation line are read as ngspice reads them
        ("t\nBhw_r1 a b ; the part\n+ I = V(a,b)/100\n.end\n", [25.0],
         "t\nRhw_fix_r1 a b 100\n.end\n"),
        # CRLF line ends kept
        (f"t\r\n{SOURCE}\r\nR2 b 0 1\r\n.end\r\n", [75.0],
         "t\r\nRhw_fix_r1 a b 120\r\nR2 b 0 1\r\n.end\r\n"),
        # inside a subcircuit copy, any case
        (".title t\n.subckt c__hw_x1 p q\nBHW_X1_R1 p q I = V(p,q)/100\n.ends\n.end\n", [75.0],
         ".title t\n.subckt c__hw_x1 p q\nRhw_fix_x1_r1 p q 120\n.ends\n.end\n"),
    ],
)  # fmt: skip
def test_fixed_resistor_deck(text: str, temps: list[float], want: str) -> None:
    deck = read(text, "d.cir")
    path = "X1.R1" if "X1" in text else "R1"
    assert fixed_resistor_deck(deck, [resistor(path)], temps).write() == want
    assert deck.write() == text  # the base deck is not changed


@pytest.mark.parametrize(
    "text",
    [
        "t\nR1 a b 100\n.end\n",  # no source of the part
        f"t\n{SOURCE}\n{SOURCE}\n.end\n",  # two: which one to hold is not clear
    ],
)
def test_a_missing_or_doubled_source_is_an_error(text: str) -> None:
    with pytest.raises(EmitError, match="behavioural source of R1"):
        fixed_resistor_deck(read(text), [resistor("R1")], [25.0])


DIVIDER = (
    "fixed divider\nV1 in 0 DC 10\nR1 in mid 100\nR2 mid 0 80\n"
    "X1 in mid2 half\n.subckt half p q\nRA p q 100\nRB q 0 80\n.ends half\n.op\n.end\n"
)
NOTE = (
    'schema = 1\n[ambient]\ntemperature = 25.0\n[part.R1]\nmodel = "linear"\ntc1 = 0.004\n'
    'rth = 30.0\n[part."X1.RA"]\nmodel = "linear"\ntc1 = 0.004\nrth = 30.0\n'
)


@pytest.mark.ngspice
def test_the_fixed_deck_is_the_divider_at_those_temperatures(tmp_path: Path) -> None:
    """Stock ngspice on the emitted no-heating deck, before and after: the divider
    10 V * 80 / (R(T) + 80) by hand (Ohm's law), R(T) = 100 (1 + 0.004 (T - 25)).  Before,
    the behavioural sources hold the parts at the ambient (100 ohm: 4.444 V); after, R1 at
    75 degC (120 ohm: 4 V) and X1.RA at 50 degC (110 ohm: 4.2105 V)."""
    (tmp_path / "d.cir").write_text(DIVIDER)
    (tmp_path / "d.thermal.toml").write_text(NOTE)
    inputs = load_inputs(str(tmp_path / "d.cir"), str(tmp_path / "d.thermal.toml"))
    base = prepare(inputs, RunOptions(analyses=("op",)), heating=False)
    assert base.emitted.circuit is not None
    parts = [p for p in base.emitted.circuit.parts if p.is_resistor]
    fixed = fixed_resistor_deck(base.deck, parts, [75.0 if p.path == "R1" else 50.0 for p in parts])
    for deck, r1, ra in ((base.deck, 100.0, 100.0), (fixed, 120.0, 110.0)):
        sim = get_simulator("batch").run(deck.write(), analyses=("op",), deck_analyses=False)
        plot = sim.plots[-1]
        assert float(np.real(plot["v(mid)"][0])) == pytest.approx(10 * 80 / (r1 + 80), rel=1e-9)
        assert float(np.real(plot["v(mid2)"][0])) == pytest.approx(10 * 80 / (ra + 80), rel=1e-9)
    assert base.deck.write() == base.text  # the base deck's text is what ngspice got before
