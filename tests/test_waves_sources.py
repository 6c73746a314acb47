"""settle's drive period read through the grammar's source syntax (run/waves.py via
spice/syntax.py SourceParts), the one reader of source functions, in the layouts ngspice 39
accepts for a V or I card.

Periods as the ngspice manual defines them: 4.1.1 PULSE (PER), 4.1.2 SIN (1/FREQ), 4.1.4
PWL (``r=`` repeats the points from that time to the last, ``td=`` delays them).  The
layouts without parentheses were run with stock ngspice 39.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from fractions import Fraction
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.checks.lint import lint_file
from heatweave.cli import main
from heatweave.run.waves import read_wave
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


# An unclosed parenthesis after a source function: stock ngspice 39 runs the card as if the
# parenthesis closed before the next keyword (AC, DC, DISTOF) or at the card's end (run in
# the test: its mean power matches the closed one's).  Closed forms into 100 ohm (manual
# 4.1.1, 4.1.2, 4.1.4): PULSE 10 V, 1 us edges, 5 us flat, 10 us period: (5u * 1 W + 2 *
# 1u * 1 W / 3) / 10u; SIN 10 V amplitude: 10^2 / 2 / 100; PWL r=0 with 1 us edges, 1 us
# at 10 V, 1 us at 0 over 4 us: (1u + 2u / 3) * 1 W / 4u.
UNCLOSED = [
    ("V1 a 0 PULSE(0 10 0 1u 1u 5u 10u", Fraction(10, 10**6), (5 + 2 / 3) / 10),
    ("V1 a 0 SIN(0 10 100k", Fraction(10, 10**6), 0.5),
    ("V1 a 0 PWL(0 0 1u 10 2u 10 3u 0 4u 0 r=0", Fraction(4, 10**6), (1 + 2 / 3) / 4),
    ("V1 a 0 PULSE(0 10 0 1u 1u 5u 10u AC 1", Fraction(10, 10**6), (5 + 2 / 3) / 10),
    ("V1 a 0 DC 1 pulse (0 10 0 1u 1u 5u 10u", Fraction(10, 10**6), (5 + 2 / 3) / 10),
    ("V1 a 0 PULSE(0 10 0 1u 1u 5u 10u DC 3", Fraction(10, 10**6), (5 + 2 / 3) / 10),
]


@pytest.mark.ngspice
@pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")
@pytest.mark.parametrize(("line", "period", "watts"), UNCLOSED)
def test_an_unclosed_function_is_read_as_ngspice_reads_it(
    tmp_path: Path, line: str, period: Fraction, watts: float
) -> None:
    deck = tmp_path / "u.cir"
    deck.write_text(
        f"unclosed\n{line}\nR1 a 0 100\n.tran 0.05u 40u\n"
        ".meas tran pavg avg par('v(a)*v(a)/100') from=20u to=40u\n.end\n"
    )
    done = subprocess.run(
        ["ngspice", "-b", deck.name], capture_output=True, text=True, cwd=tmp_path, timeout=60
    )
    found = re.search(r"pavg\s*=\s*(\S+)", done.stdout)
    assert found, done.stdout + done.stderr
    assert float(found[1]) == pytest.approx(watts, rel=2e-3)
    wave = read_wave("V1", card_of(line), {})
    assert wave.unknown is None and wave.period == period
    findings = lint_file(str(deck))
    assert [f.severity for f in findings] == ["warning"], [f.render() for f in findings]
    assert findings[0].location is not None
    assert findings[0].location.column == line.index("(") + 1  # at the '(' never closed


@pytest.mark.ngspice
def test_run_and_settle_take_an_unclosed_pulses_period(tmp_path: Path) -> None:
    # The unclosed PULSE in a transient: ngspice runs it with period 1 ms, and so does
    # heatweave: power is the mean over a period, (499u * 1 W + 2 * 1u * 1 W / 3) / 1m into
    # a 100 ohm resistor with tc1 = 0 (its resistance stays 100 ohm: the closed form holds).
    (tmp_path / "u.cir").write_text(
        "unclosed\nV1 a 0 PULSE(0 10 0 1u 1u 499u 1m\nR1 a 0 100\n.tran 1u 3m\n.end\n"
    )
    (tmp_path / "u.thermal.toml").write_text(
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = 50.0\ncth = 0.5\n'
    )
    args = [str(tmp_path / "u.cir"), "-a", str(tmp_path / "u.thermal.toml")]
    out = tmp_path / "u.json"
    result = CliRunner().invoke(main, ["run", *args, "--method", "full", "--json", str(out)])
    assert result.exit_code == 0, result.output
    assert "cannot tell" not in result.output and "final value" not in result.output
    power = json.loads(out.read_text())["parts"]["R1"]["power"]
    assert power == pytest.approx((499 + 2 / 3) / 1000, rel=1e-3)
    settled = CliRunner().invoke(main, ["settle", *args])
    assert settled.exit_code == 0, settled.output
    assert "periodic steady state, period 1 ms" in settled.output


@pytest.mark.ngspice
def test_a_run_says_when_power_is_not_a_periods_mean(tmp_path: Path) -> None:
    # A drive heatweave cannot read (an expression of time): ngspice runs it; power is the
    # final value, and the run says so (it said nothing when no source at all could be read).
    (tmp_path / "u.cir").write_text(
        "time\nB1 a 0 V=10*u(sin(6283.2*time))\nR1 a 0 100\n.tran 1u 3m\n.end\n"
    )
    (tmp_path / "u.thermal.toml").write_text(
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0.004\nrth = 50.0\ncth = 0.5\n'
    )
    args = ["run", str(tmp_path / "u.cir"), "-a", str(tmp_path / "u.thermal.toml")]
    result = CliRunner().invoke(main, [*args, "--method", "full"])
    assert result.exit_code == 0, result.output
    assert f"cannot tell whether B1's expression of time ({tmp_path / 'u.cir'}:2)" in result.output
    assert "power is the final value" in result.output
