"""settle's drive period read through the grammar's source syntax (run/waves.py via
spice/syntax.py SourceParts), the one reader of source functions, in the layouts ngspice 39
accepts for a V or I card.

Periods as the ngspice manual defines them: 4.1.1 PULSE (PER), 4.1.2 SIN (1/FREQ), 4.1.4
PWL (``r=`` repeats the points from that time to the last, ``td=`` delays them).  The
layouts without parentheses were run with stock ngspice 39.
"""

from __future__ import annotations

from fractions import Fraction

import pytest

from heatweave.errors import UsageError
from heatweave.run.waves import read_wave, transient_function
from heatweave.spice.deck import Card
from heatweave.spice.reader import read


def card_of(line: str) -> Card:
    return next(read(f"t\n{line}\n.end\n", "w.cir").cards())


@pytest.mark.parametrize(
    ("line", "period", "start"),
    [
        ("V1 a 0 PULSE(0 5 1u 1u 1u 10u 20u)", Fraction(20, 10**6), 1e-6),
        ("V1 a 0 PULSE 0 5 1u 1u 1u 10u 20u", Fraction(20, 10**6), 1e-6),  # no parentheses
        ("V1 a 0 pulse (0, 5, 0, 1u, 1u, 10u, 20u)", Fraction(20, 10**6), 0.0),
        ("V1 a 0 DC 0 AC 1 SIN(0 1 2k 3m)", Fraction(1, 2000), 3e-3),
        ("V1 a 0 SIN 0 1 2k ac 1", Fraction(1, 2000), 0.0),
        # PWL r= and td= after the points: period Tn - r, from td + r
        ("V1 a 0 PWL(0 0 1m 1 2m 0) r=0 td=5m", Fraction(2, 1000), 5e-3),
        ("V1 a 0 PWL(0 0 1m 1 2m 0) td=5m r=1m", Fraction(1, 1000), 6e-3),
        ("V1 a 0 PWL(0 0 1m 1 2m 0)\n+ r=0", Fraction(2, 1000), 0.0),  # continuation line
        ("V1 a 0 PWL(0 0 1m 1 2m 0 r=0)", Fraction(2, 1000), 0.0),  # inside: ngspice repeats
        ("V1 a 0 DC 3", None, 0.0),
    ],
)
def test_periods(line: str, period: Fraction | None, start: float) -> None:
    wave = read_wave("V1", card_of(line), {})
    assert wave.problem is None and wave.unknown is None
    assert (wave.period, wave.start) == (period, pytest.approx(start))


@pytest.mark.parametrize(
    ("line", "kind", "column"),
    [
        ("V1 a 0 EXTERNAL", "EXTERNAL", 8),  # set by the program driving ngspice
        ("V1 a 0 EXP(0 1 1u 1u 5u 1u)", "EXP", 8),
        ("V1 a 0 DC 0 PULSE(0 1 0 1u 1u 5u)", "PULSE", 13),  # no PER: one pulse
        ("V1 a 0 SIN 0 1 1k 0 10", "SIN", 8),  # damped
    ],
)
def test_sources_that_do_not_repeat_are_located(line: str, kind: str, column: int) -> None:
    wave = read_wave("V1", card_of(line), {})
    assert wave.kind == kind and wave.problem is not None
    assert wave.location is not None and (wave.location.line, wave.location.column) == (2, column)


def test_a_card_the_grammar_cannot_read_is_a_located_error() -> None:
    with pytest.raises(UsageError, match="cannot read the source") as caught:
        transient_function(card_of("V1 a 0 PULSE(0 5 0 1u 1u 10u 20u"))
    assert caught.value.location is not None and caught.value.location.line == 2
