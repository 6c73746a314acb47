"""settle's drive period read through the grammar's source syntax (run/waves.py via
spice/syntax.py SourceParts), the one reader of source functions, in the layouts ngspice 39
accepts for a V or I card.

Periods as the ngspice manual defines them: 4.1.1 PULSE (PER), 4.1.2 SIN (1/FREQ), 4.1.4
PWL (``r=`` repeats the points from that time to the last, ``td=`` delays them).  The
layouts without parentheses were run with stock ngspice 39.
"""

from __future__ import annotations

from fractions import Fraction
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main
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


def test_a_card_the_grammar_cannot_read_is_located_and_unknown() -> None:
    # An unclosed parenthesis: ngspice 39 runs it, the grammar (and lint) refuse it.  The
    # reader says so at the card; a run then takes the source as one it cannot read (its
    # power note says so), settle asks for --period.
    card = card_of("V1 a 0 PULSE(0 5 0 1u 1u 10u 20u")
    with pytest.raises(UsageError, match="cannot read the source") as caught:
        transient_function(card)
    assert caught.value.location is not None and caught.value.location.line == 2
    wave = read_wave("V1", card, {})
    assert wave.unknown is not None and "unbalanced" in wave.unknown
    assert wave.location is not None and wave.location.line == 2


@pytest.mark.ngspice
def test_a_run_says_when_power_is_not_a_periods_mean(tmp_path: Path) -> None:
    # The same card in a transient: ngspice runs it; heatweave cannot read its period, so
    # power is the final value, and the run says so (it said nothing when no source at all
    # could be read).
    (tmp_path / "u.cir").write_text(
        "unclosed\nV1 a 0 PULSE(0 10 0 1u 1u 499u 1m\nR1 a 0 100\n.tran 1u 3m\n.end\n"
    )
    (tmp_path / "u.thermal.toml").write_text(
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0.004\nrth = 50.0\ncth = 0.5\n'
    )
    args = ["run", str(tmp_path / "u.cir"), "-a", str(tmp_path / "u.thermal.toml")]
    result = CliRunner().invoke(main, [*args, "--method", "full"])
    assert result.exit_code == 0, result.output
    assert f"cannot tell whether V1's source ({tmp_path / 'u.cir'}:2) repeats" in result.output
    assert "power is the final value" in result.output
