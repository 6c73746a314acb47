"""A PWM deck gated in its periodic steady state, by ``check`` and by ``settle --check``.

The deck (tests/fixtures/settle_check/pwm_load.cir) drives a 48 ohm load without TCR
straight from a 24 V PULSE source, so its mean dissipation has a closed form (hand
calculation from the PULSE definition of the ngspice manual, 4.1.1): the source is V for
PW and ramps linearly over TR and TF, and the integral of (V t / TR)^2 over a ramp is
V^2 TR / 3, so

    P_mean = (V^2 / R) (PW + (TR + TF) / 3) / PER.

ngspice's waveform is read at its time points and integrated by the trapezoidal rule; on a
ramp sampled only at its ends that overstates the integral of v^2 by at most V^2 TR / 6,
which bounds the difference allowed below (it is 2e-4 of the mean here).  With no TCR the
cycle-mean temperature is Ta + Rth P_mean.  The rating is derated by IEC 60115-1: full up to
the knee (70 degC), linear to zero at tmax (155 degC).
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from click.testing import CliRunner
from scipy.optimize import brentq

from heatweave.annotation.ratings import derated_power
from heatweave.cli import main
from heatweave.errors import EXIT_BAD_INPUT, EXIT_CHECK_FAILED

FIXTURES = Path(__file__).parent / "fixtures" / "settle_check"
DECK = str(FIXTURES / "pwm_load.cir")
pytestmark = [
    pytest.mark.ngspice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice"),
]

# The fixture's values (pwm_load.cir, pwm_load.thermal.toml).
V, R, TR, TF, PW, PER = 24.0, 48.0, 10e-9, 10e-9, 14.99e-6, 50e-6
RTH, RATING, KNEE, TMAX = 10.0, 5.0, 70.0, 155.0

#: Closed form of the mean dissipation (see the module docstring).
P_MEAN = V * V / R * (PW + (TR + TF) / 3.0) / PER
#: The trapezoidal rule's largest excess on the two ramps (see the module docstring).
P_SAMPLING = V * V / R * (TR + TF) / 6.0 / PER


def printed(output: str, subject: str, limit: str) -> tuple[float, float]:
    """The value and bound printed on one limit's line."""
    found = re.search(
        rf"{re.escape(subject)} {limit}: ([-+0-9.e]+) \S+, at (?:most|least) ([-+0-9.e]+)", output
    )
    assert found, output
    return float(found[1]), float(found[2])


# Ambient (degC), whether the derated rating holds: at 85 degC 5 W x 70/85 = 4.12 W allowed,
# at 100 degC 5 W x 55/85 = 3.24 W, below the 3.60 W mean.
AMBIENTS = [
    pytest.param(85.0, True, id="85degC-passes"),
    pytest.param(100.0, False, id="100degC-fails"),
]


@pytest.mark.parametrize(("ambient", "passes"), AMBIENTS)
def test_check_holds_the_pwm_deck_in_its_periodic_steady_state(
    ambient: float, passes: bool
) -> None:
    result = CliRunner().invoke(main, ["check", DECK, "--ambient", f"{ambient:g}"])
    assert "Traceback" not in result.output
    assert result.exit_code == (0 if passes else EXIT_CHECK_FAILED), result.output
    assert result.output.startswith("method: periodic steady state")
    assert f"VPWM's PULSE ({DECK}:4)" in result.output
    power, allowed = printed(result.output, "RLOAD", "power_rating")
    # Five printed digits: within half a unit of the last one, plus the sampling bound.
    assert abs(power - P_MEAN) <= P_SAMPLING + 5e-5 * P_MEAN
    assert allowed == pytest.approx(derated_power(RATING, ambient, KNEE, TMAX), rel=5e-5)
    assert allowed == pytest.approx(RATING * (TMAX - ambient) / (TMAX - KNEE), rel=5e-5)
    peak, _ = printed(result.output, "RLOAD", "tmax")
    # The peak lies a few mK above the mean: 12 W for 15 us into 50 mJ/K is 3.6 mK.
    rise = peak - ambient
    assert RTH * P_MEAN <= rise + 5e-3 <= RTH * (P_MEAN + P_SAMPLING) + 5e-3 + 3.6e-3
    assert ("FAIL RLOAD power_rating" in result.output) != passes


@pytest.mark.parametrize(("ambient", "passes"), AMBIENTS)
def test_settle_check_gates_the_same_deck(tmp_path: Path, ambient: float, passes: bool) -> None:
    report, junit = tmp_path / "settle.json", tmp_path / "settle.xml"
    args = ["settle", DECK, "--check", "--ambient", f"{ambient:g}", "--json", str(report),
            "--junit", str(junit), "-q"]  # fmt: skip
    result = CliRunner().invoke(main, args)
    assert result.exit_code == (0 if passes else EXIT_CHECK_FAILED), result.output
    # -q as check's: nothing on stdout, only the violated limits on stderr, no summary
    assert result.stdout == ""
    assert [x[:4] for x in result.stderr.splitlines()] == ([] if passes else ["FAIL"])
    data = json.loads(report.read_text())
    limits = {(item["subject"], item["limit"]): item for item in data["limits"]}
    power = limits[("RLOAD", "power_rating")]
    assert abs(power["value"] - P_MEAN) <= P_SAMPLING
    assert power["value"] == data["parts"]["RLOAD"]["power"]  # the mean, not the peak
    assert power["bound"] == pytest.approx(RATING * (TMAX - ambient) / (TMAX - KNEE), rel=1e-12)
    assert power["passed"] is passes
    tmax = limits[("RLOAD", "tmax")]
    assert tmax["value"] == data["parts"]["RLOAD"]["peak_temperature"]
    assert data["parts"]["RLOAD"]["temperature"] == pytest.approx(
        ambient + RTH * power["value"], abs=1e-6
    )
    # The limit table on V(drive): 0 V and 24 V are the PULSE's two levels.
    assert limits[("V(drive)", "max")]["value"] == pytest.approx(V, rel=1e-9)
    assert limits[("V(drive)", "min")]["value"] == pytest.approx(0.0, abs=1e-9)
    suite = ET.parse(junit).getroot().find("testsuite")
    assert suite is not None
    assert suite.get("tests") == "4" and suite.get("failures") == ("0" if passes else "1")
    assert data["period"] == PER and data["period_from"].startswith("taken from VPWM's PULSE")


def test_sweep_check_refuses_to_gate_a_periodic_deck_on_its_cold_transient() -> None:
    """check holds this deck in its periodic steady state (RLOAD 36 K above ambient, the
    closed form above); each corner's own 200 us transient from cold is a few mK above it.
    sweep --check does not settle corners, so it refuses in words rather than pass a
    settled temperature past tmax; with --tran given it gates that transient, as check does.
    """
    result = CliRunner().invoke(main, ["sweep", DECK, "--ambient", "85", "--check"])
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert "periodic steady state" in result.output and "Traceback" not in result.output
    assert f"heatweave check {DECK} --ambient" in result.output
    asked = ["sweep", DECK, "--ambient", "85", "--check", "--tran", "10n", "200u", "-q"]
    result = CliRunner().invoke(main, asked)
    assert result.exit_code == 0, result.output


def test_compare_refuses_to_gate_a_periodic_deck_on_its_cold_transient(tmp_path: Path) -> None:
    """rth 10 -> 20 K/W moves the settled RLOAD by 36 K (the closed form above) but its
    200 us cold transient by a fraction of a mK: compare --against refuses in words, as
    sweep --check does, instead of showing a change of +0.000 K."""
    env = {**os.environ, "GIT_AUTHOR_NAME": "t", "GIT_AUTHOR_EMAIL": "t@example.invalid",
           "GIT_COMMITTER_NAME": "t", "GIT_COMMITTER_EMAIL": "t@example.invalid"}  # fmt: skip
    for name in ("pwm_load.cir", "pwm_load.thermal.toml"):
        shutil.copy(FIXTURES / name, tmp_path / name)
    for args in (["init", "-q"], ["add", "-A"], ["commit", "-qm", "first"]):
        subprocess.run(["git", *args], cwd=tmp_path, env=env, check=True, capture_output=True)
    notes = tmp_path / "pwm_load.thermal.toml"
    notes.write_text(notes.read_text().replace("rth = 10.0", "rth = 20.0"))
    deck = str(tmp_path / "pwm_load.cir")
    result = CliRunner().invoke(main, ["compare", deck, "--against", "HEAD"])
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert "periodic steady state" in result.output and "Traceback" not in result.output
    assert "settle" in result.output and "--json" in result.output
    asked = ["compare", deck, "--against", "HEAD", "--tran", "10n", "200u"]
    assert CliRunner().invoke(main, asked).exit_code == 0


def test_check_keeps_the_transient_asked_for() -> None:
    """--tran asks for the cold four-period transient itself: checked as it is, and said."""
    result = CliRunner().invoke(main, ["check", DECK, "--tran", "10n", "200u"])
    assert "Traceback" not in result.output and "RLOAD tmax" in result.output
    assert result.output.startswith("method: the run itself, not its periodic steady state")


def test_settle_check_refuses_a_limit_on_a_missing_node_before_simulating(tmp_path: Path) -> None:
    annotation = tmp_path / "pwm_load.thermal.toml"
    text = (FIXTURES / "pwm_load.thermal.toml").read_text().replace('"V(drive)"', '"V(driv)"')
    annotation.write_text(text)
    junit = tmp_path / "report.xml"
    result = CliRunner().invoke(
        main, ["settle", DECK, "-a", str(annotation), "--junit", str(junit)]
    )
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert 'did you mean "V(drive)"?' in result.output
    case = ET.parse(junit).getroot().find("testsuite/testcase")
    assert case is not None and case.find("error") is not None


def test_settle_plot_and_deprecated_envelope(tmp_path: Path) -> None:
    plot = tmp_path / "settle.png"
    args = ["settle", DECK, "--envelope", "1", "--plot", str(plot), "-q"]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 0, result.output
    assert "--envelope is deprecated; use --warmup" in result.output
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


DIVIDER = """PWM into a load over a sense resistor: the sense voltage drifts as the load warms
VPWM drive 0 PULSE(0 24 0 10n 10n 14.99u 50u)
RLOAD drive out 40
RS out 0 8
.tran 10n 200u
.end
"""
DIVIDER_NOTES = """schema = 1
[ambient]
temperature = 25.0
[part.RLOAD]
model = "linear"
tc1 = 0.002
rth = 10.0
cth = 0.05
[limit."V(out)"]
max_drift_ppm = 1.0
"""


def test_settle_check_drift_against_the_same_period_without_heating(tmp_path: Path) -> None:
    """V(out) = V RS / (R(T) + RS) while the source is on (and 0 V while off, where drift is
    not defined and skipped).  settle holds R at the cycle-mean temperature, the root of
    T = Ta + Rth P(T) with P(T) = D_eff V^2 R(T) / (R(T) + RS)^2 (scipy brentq), so the drift
    is (R0 + RS) / (R(T) + RS) - 1 at every point of the on-time (linear TCR:
    R(T) = R0 (1 + tc1 (T - 25)))."""
    deck, notes = tmp_path / "divider.cir", tmp_path / "divider.thermal.toml"
    deck.write_text(DIVIDER)
    notes.write_text(DIVIDER_NOTES)
    r0, rs, tc1, ambient = 40.0, 8.0, 0.002, 25.0
    duty = (PW + (TR + TF) / 3.0) / PER

    def resistance(t_c: float) -> float:
        return r0 * (1.0 + tc1 * (t_c - 25.0))

    def balance(t_c: float) -> float:
        r = resistance(t_c)
        return ambient + RTH * duty * V * V * r / (r + rs) ** 2 - t_c

    hot = brentq(balance, ambient, ambient + 200.0, xtol=1e-12)
    drift = ((r0 + rs) / (resistance(hot) + rs) - 1.0) * 1e6
    report = tmp_path / "out.json"
    args = ["settle", str(deck), "--check", "--json", str(report), "-q", "--tol", "1e-4"]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == EXIT_CHECK_FAILED, result.output
    (limit,) = json.loads(report.read_text())["limits"]
    assert limit["limit"] == "max_drift_ppm" and not limit["passed"]
    # Allowed: settle's tolerance (1e-4 K) plus the trapezoidal rule's bound on the mean
    # power (module docstring) times Rth, in kelvin, times the drift's slope in ppm/K.
    r_hot = resistance(hot)
    slope = r0 * tc1 / (r_hot + rs) * 1e6
    sampling = V * V * r_hot / (r_hot + rs) ** 2 * (TR + TF) / 6.0 / PER
    assert abs(limit["value"] - abs(drift)) <= slope * (1e-4 + RTH * sampling)


def test_check_page_of_a_settled_deck_shows_its_limits(tmp_path: Path) -> None:
    page = tmp_path / "check.html"
    args = ["check", DECK, "--ambient", "100", "--html", str(page)]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == EXIT_CHECK_FAILED, result.output
    text = page.read_text()
    assert "Limits over the settled period" in text
    assert "4 limits checked, 1 violated" in text and "taken from VPWM" in text
