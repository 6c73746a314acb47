"""Annotated resistor values: what heatweave reads from an ``R`` card, checked against what
ngspice 39 makes of the same card, and the messages for values it cannot take over.

The card forms are those of the ngspice manual, sections 3.3.1 (value, ``r=``, ``m=``,
``scale=``), 3.3.2 (model and geometry) and 3.3.4 (``R = 'expression'``: a resistance
that follows node voltages or currents, which has no fixed nominal value to annotate).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from heatweave.emit.emitter import emit_files
from heatweave.errors import EmitError
from heatweave.simulators import get_simulator

ANNOTATION = 'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0.004\nrth = 50.0\n'


def deck_with(card: str) -> str:
    """A 1 V source across R1 (line 3), with a parameter and a resistor model to use."""
    return (
        f"values\n.param rval=2k\n{card}\nV1 a 0 DC 1\n.model rmod r rsh=100\n"
        ".func half(x) {x/2}\n.func pick(c,a,b) {c ? a : b}\n.op\n.end\n"
    )


def emit_case(tmp_path: Path, card: str) -> tuple[Path, Path]:
    deck = tmp_path / "values.cir"
    deck.write_text(deck_with(card))
    annotation = tmp_path / "values.thermal.toml"
    annotation.write_text(ANNOTATION)
    return deck, annotation


GENERIC = "annotated resistors need a number or an expression of numeric .param values"
RUNTIME = (
    "give the resistor a fixed value (a number or an expression of .param values), "
    "or leave it out of the annotation file"
)

BAD_VALUES = [
    # (id, card on line 3, column, message, hint)
    (
        "model-and-geometry",
        "R1 a 0 rmod l=10u w=1u",
        8,
        "R1 has no resistance value heatweave can read",
        "write the value on the card (e.g. 10k or {rval}); geometry from a model "
        "(l, w, rsh) is not supported for annotated parts",
    ),
    (
        "runtime-r-key",
        "R1 a 0 r = V(a)*10+1k",
        12,
        "the value 'V(a)*10+1k' of R1 depends on node voltages or currents: "
        "such values cannot be annotated",
        RUNTIME,
    ),
    (
        "runtime-quoted",
        "R1 a 0 R = '1k+V(a)*10'",
        12,
        "the value \"'1k+V(a)*10'\" of R1 depends on node voltages or currents: "
        "such values cannot be annotated",
        RUNTIME,
    ),
    (
        "runtime-current",
        "R1 a 0 {rval + 10*i(V1)}",
        8,
        "the value '{rval + 10*i(V1)}' of R1 depends on node voltages or currents: "
        "such values cannot be annotated",
        RUNTIME,
    ),
    (
        "unknown-parameter",
        "R1 a 0 {rx*2}",
        8,
        "cannot evaluate the value '{rx*2}' of R1: 'rx' is not defined by a .param",
        "define it (.param rx = ...) or write a number",
    ),
    (  # ngspice draws a new value on every run: no single nominal (manual 2.9.5)
        "random-function",
        "R1 a 0 {agauss(rval, 0.1, 3)}",
        8,
        "cannot evaluate the value '{agauss(rval, 0.1, 3)}' of R1: agauss() draws a random "
        "value (manual 2.9.5)",
        "give the nominal value instead",
    ),
    (  # a function neither ngspice's brace functions nor a .func defines
        "unknown-function",
        "R1 a 0 {twice(rval)}",
        8,
        "cannot evaluate the value '{twice(rval)}' of R1: twice() is no function ngspice "
        "knows in braces, nor a .func",
        "define it with .func",
    ),
    (  # a time-dependent value inside a ternary: ngspice makes it a run-time resistor
        "runtime-in-ternary",
        "R1 a 0 {temper > 50 ? rval : 1k}",
        8,
        "cannot evaluate the value '{temper > 50 ? rval : 1k}' of R1: 'temper' changes "
        "during the simulation",
        RUNTIME,
    ),
    (
        "divides-by-zero",
        "R1 a 0 {rval/(rval-2k)}",
        8,
        "cannot evaluate the value '{rval/(rval-2k)}' of R1: it divides by zero",
        "check the .param values it uses",
    ),
    (
        "unbraced-expression",
        "R1 a 0 max(1k,2k)",
        8,
        "cannot evaluate the value 'max(1k,2k)' of R1: ngspice 39 reads an expression "
        "outside braces as a model name",
        "write it in braces: {max(1k,2k)}",
    ),
    (
        "multiplier-zero",
        "R1 a 0 1k m=0",
        1,
        "R1 has resistance inf ohm (value * scale / m)",
        "an annotated resistor needs a finite, nonzero resistance: check its value, m= and scale=",
    ),
]


@pytest.mark.parametrize(
    ("card", "column", "message", "hint"),
    [case[1:] for case in BAD_VALUES],
    ids=[case[0] for case in BAD_VALUES],
)
def test_values_heatweave_cannot_take_over(
    tmp_path: Path, card: str, column: int, message: str, hint: str
) -> None:
    deck, annotation = emit_case(tmp_path, card)
    with pytest.raises(EmitError) as caught:
        emit_files(str(deck), str(annotation))
    err = caught.value
    assert (err.message, err.hint) == (message, hint)
    assert err.location is not None
    assert (err.location.line, err.location.column, err.location.source_line) == (3, column, card)
    assert "Error" not in f"{err.message} {err.hint}"  # no Python exception names


GOOD_VALUES = [
    "R1 a 0 r = max(1k,2k)",  # an unbraced expression after r= is one value to ngspice
    "R1 a 0 resistance = {rval*2} m=2",
    "R1 a 0 rval",  # ngspice 39 warns "can't find model 'rval'", then uses the parameter
    "R1 a 0 {rval} scale=3",
    "R1 a 0 1.5k rmod",  # an explicit value overrides the model's (manual 3.3.2)
    "R1 a 0 {half(rval)*3}",  # .func (manual 2.10), issue 15
    "R1 a 0 {rval > 1k ? rval : 1k}",  # ?: in braces (manual 2.9.5), issue 15
    "R1 a 0 '2*pick(rval < 1k, 1k, half(rval))'",
    "R1 a 0 {sin(0.5)*rval + nint(2.5)}",
    # a .param that calls a .func inside ?:, defined below its use (ngspice hoists .param)
    "R1 a 0 {rdef}\n.param rdef={rval > 1k ? (half(rval)) : rval}",
]


@pytest.mark.ngspice
@pytest.mark.parametrize("card", GOOD_VALUES)
def test_nominal_value_is_what_ngspice_makes_of_the_card(tmp_path: Path, card: str) -> None:
    deck, annotation = emit_case(tmp_path, card)
    emitted = emit_files(str(deck), str(annotation))
    assert emitted.circuit is not None
    nominal = emitted.circuit.parts[0].nominal_resistance
    # The reference: ngspice 39's operating point of the unannotated deck, 1 V across R1.
    sim = get_simulator("batch").run(deck.read_text(), analyses=("op",), deck_analyses=False)
    current = abs(complex(sim.plots[-1]["i(v1)"][0]))
    assert nominal == pytest.approx(1.0 / current, rel=1e-9)
