"""``heatweave settle -``: the deck read from standard input, its includes found from the
current folder, the same periodic steady state as from the file.

Outside check: for one lumped stage the cycle-mean temperature is Ta + Rth * mean power
(the mean of a linear RC network's periodic response is its DC response to the mean
input), and the mean dissipation of a 50 % PWM drive is 0.5 V^2 / R(T).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner, Result

from heatweave.cli import main
from heatweave.errors import EXIT_OK

pytestmark = [
    pytest.mark.ngspice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice"),
]

FIXTURES = Path(__file__).parent / "fixtures" / "settle"
DECK = FIXTURES / "pwm_heater.cir"
ANNOTATION = str(FIXTURES / "pwm_heater.thermal.toml")
# pwm_heater: 10 V PULSE at 50 % duty into R1 = 50 ohm, tc1 0.004/K, Rth 50 K/W, Ta 25 degC
VOLTS, R0, TC1, RTH, TA, TOL = 10.0, 50.0, 0.004, 50.0, 25.0, 0.01
# the drive, which may live in an include (an annotated part may not)
DRIVE = "V1 drive 0 PULSE(0 10 0 1u 1u 499u 1m)\n"


def settle_json(deck: str, stdin: str | None = None) -> dict[str, Any]:
    args = ["settle", deck, "-a", ANNOTATION, "--period", "1m", "--tol", str(TOL)]
    result: Result = CliRunner().invoke(main, [*args, "-q", "--json", "-"], input=stdin)
    assert result.exit_code == EXIT_OK, result.output
    data: dict[str, Any] = json.loads(result.stdout)
    return data


@pytest.mark.parametrize("include", [False, True], ids=["plain", "include-from-cwd"])
def test_settle_reads_the_deck_from_stdin(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, include: bool
) -> None:
    text = DECK.read_text()
    assert DRIVE in text
    if include:
        (tmp_path / "drive.inc").write_text(DRIVE)
        text = text.replace(DRIVE, ".include drive.inc\n")
    from_file = settle_json(str(DECK))
    monkeypatch.chdir(tmp_path)
    piped = settle_json("-", stdin=text)
    assert piped["deck"] == "-"
    part = piped["parts"]["R1"]
    assert part == from_file["parts"]["R1"]
    t, power = part["temperature"], part["power"]
    # the iteration stops once no temperature moves by more than --tol
    assert t == pytest.approx(TA + RTH * power, abs=TOL)
    # edges of 1 us in a 1 ms period add 1e-3 to the duty (as in test_settle.py)
    assert power == pytest.approx(0.5 * VOLTS**2 / (R0 * (1 + TC1 * (t - TA))), rel=2e-3)
