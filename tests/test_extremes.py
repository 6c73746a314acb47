"""Ambients where a model leaves every float: never a number with exit 0 (issue 12).

The NTC's Beta equation, R = R25 exp(B (1/T - 1/T25)) with T in kelvin, diverges as T goes
to 0 K (closed form): at an ambient of -273 degC (0.15 K) it is past every float, so the
run is refused at the part's table; at -200 degC it is finite but huge, and the table
prints it in e-notation rather than a string of meaningless fixed-point digits.
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main

DECK = Path(__file__).parent / "fixtures" / "extremes" / "ntc.cir"
BETA = 3000.0  # the fixture's value


@pytest.mark.ngspice
@pytest.mark.parametrize("command", [["run"], ["run", "--tran", "1m", "1"], ["check"]])
def test_an_ambient_where_the_model_has_no_value_is_refused_at_the_part(
    command: list[str],
) -> None:
    result = CliRunner().invoke(main, [*command, str(DECK), "--ambient=-273"])
    assert result.exit_code == 2, result.output
    assert "ntc.thermal.toml:2:" in result.output
    assert "gives inf ohm at the ambient (-273 degC)" in result.output
    assert "RuntimeWarning" not in result.output


@pytest.mark.ngspice
def test_a_huge_finite_drift_prints_in_e_notation() -> None:
    result = CliRunner().invoke(main, ["run", str(DECK), "--ambient=-200"])
    assert result.exit_code == 0, result.output
    row = next(line for line in result.output.splitlines() if line.startswith("RNTC"))
    percent = (math.exp(BETA * (1 / 73.15 - 1 / 298.15)) - 1) * 100  # closed form above
    assert f"{percent:+.4g}" in row.split()  # the part's own heating is ~1e-13 W: none
    assert "RuntimeWarning" not in result.output
