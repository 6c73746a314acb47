"""``check --method auto|full|cosim|settle``: the user forces what ``check`` runs (issue 15).

The deck is tests/fixtures/settle_check/pwm_load.cir (24 V PWM, 30 % duty, into 48 ohm without
TCR, Rth 10 K/W, Cth 50 mJ/K, ambient 85 degC); test_settle_check.py derives its mean
dissipation in closed form from the manual's PULSE definition (4.1.1):
P_mean = (V^2 / R) (PW + (TR + TF) / 3) / PER.  Without TCR the dissipation does not depend
on the temperature, so every method must report that mean.  The deck's own transient is
200 us from cold: the load gains at most the energy of its on-times over Cth
(12 W x 60 us / 50 mJ/K = 14.4 mK), while its periodic steady state sits Rth P_mean = 36 K up.
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main
from heatweave.errors import EXIT_BAD_INPUT

FIXTURES = Path(__file__).parent / "fixtures"
DECK = str(FIXTURES / "settle_check" / "pwm_load.cir")
DIVIDER = str(FIXTURES / "check" / "divider.cir")
DIVIDER_NOTES = str(FIXTURES / "check" / "board.thermal.toml")
pytestmark = [
    pytest.mark.ngspice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice"),
]

V, R, TR, TF, PW, PER = 24.0, 48.0, 10e-9, 10e-9, 14.99e-6, 50e-6
RTH, CTH, AMBIENT = 10.0, 0.05, 85.0
P_MEAN = V * V / R * (PW + (TR + TF) / 3.0) / PER
P_SAMPLING = V * V / R * (TR + TF) / 6.0 / PER  # the trapezoidal rule's excess on the ramps
COLD_RISE = V * V / R * 4 * PW / CTH  # four on-times of energy into the heat capacity


def check(*args: str) -> tuple[int, str]:
    result = CliRunner().invoke(main, ["check", *args])
    assert "Traceback" not in result.output, result.output
    return result.exit_code, result.output


def value(output: str, subject: str, limit: str) -> float:
    found = re.search(rf"{re.escape(subject)} {limit}: ([-+0-9.e]+) ", output)
    assert found, output
    return float(found[1])


def test_auto_is_the_default() -> None:
    default, forced = check(DECK), check(DECK, "--method", "auto")
    assert default == forced
    assert forced[1].startswith("method: periodic steady state")


def without_signal_limits(tmp_path: Path) -> str:
    """The fixture's annotation file without its [limit."V(drive)"] table."""
    text = (FIXTURES / "settle_check" / "pwm_load.thermal.toml").read_text()
    path = tmp_path / "parts_only.thermal.toml"
    path.write_text(text.split('[limit."V(drive)"]')[0])
    return str(path)


@pytest.mark.parametrize(
    ("method", "line", "settled"),
    [("auto", "method: periodic steady state", True),
     ("settle", "method: periodic steady state", True),
     ("full", "method: the run itself (full electrothermal deck)", False),
     ("cosim", "method: co-simulation of the run itself", False)],
)  # fmt: skip
def test_each_method_runs_what_it_says(
    tmp_path: Path, method: str, line: str, settled: bool
) -> None:
    code, output = check(DECK, "-a", without_signal_limits(tmp_path), "--method", method)
    assert code == 0, output
    assert output.splitlines()[0].startswith(line), output
    power = value(output, "RLOAD", "power_rating")
    assert abs(power - P_MEAN) <= P_SAMPLING + 5e-5 * P_MEAN  # five printed digits
    rise = value(output, "RLOAD", "tmax") - AMBIENT
    if settled:  # cycle peak a few mK above Ta + Rth P_mean
        assert RTH * P_MEAN - 5e-3 <= rise <= RTH * (P_MEAN + P_SAMPLING) + 1e-2
    else:  # the deck's own 200 us from cold
        assert 0.0 <= rise <= COLD_RISE + 5e-3


def test_cosim_refuses_node_limits_it_cannot_see() -> None:
    """The co-simulation keeps node voltages at its window ends only: here one window of
    200 us, where the PWM is off, so V(drive) max would read 0 V against the 24 V pulses."""
    code, output = check(DECK, "--method", "cosim")
    assert code == EXIT_BAD_INPUT, output
    assert 'V(drive)' in output and "--method full" in output


def test_cosim_refuses_what_run_refuses(tmp_path: Path) -> None:
    code, output = check(DECK, "-a", without_signal_limits(tmp_path), "--method", "cosim", "--op")
    run = CliRunner().invoke(main, ["run", DECK, "--method", "cosim", "--op"])
    assert code == run.exit_code == EXIT_BAD_INPUT
    assert "the co-simulation does not apply" in output
    assert output.strip().splitlines()[-2:] == run.output.strip().splitlines()[-2:]


def test_settle_refuses_a_deck_that_does_not_repeat() -> None:
    code, output = check(DIVIDER, "-a", DIVIDER_NOTES, "--method", "settle")
    assert code == EXIT_BAD_INPUT
    assert "no periodic source" in output
    assert "--period" not in output  # check has no such option to suggest
    assert "check its own run with --method full" in output


def test_settle_refuses_an_analysis_given() -> None:
    code, output = check(DECK, "--method", "settle", "--tran", "10n", "200u")
    assert code == EXIT_BAD_INPUT
    assert "--method settle" in output and "--tran" in output


def test_full_on_a_deck_auto_settles_keeps_its_limits_lines() -> None:
    """The V(drive) limits read the same waveform (0 V to 24 V) whatever ran."""
    for method in ("auto", "full", "settle"):
        code, output = check(DECK, "--method", method)
        assert code == 0
        assert value(output, "V(drive)", "max") == pytest.approx(V, rel=1e-4)
        assert value(output, "V(drive)", "min") == pytest.approx(0.0, abs=1e-6)
