"""A Pt100 driven far past the range of its Callendar-Van Dusen model.

IEC 60751 defines R(t) = R0 (1 + A t + B t^2) above 0 degC (A = 3.9083e-3, B = -5.775e-7)
from -200 to 850 degC.  Fed by a constant current I with thermal resistance Rth to a bath
at Ta, the element's steady states solve t - Ta = Rth I^2 R(t).  At I = 1 A (the deck of
decks/rtd-excitation with its excitation raised) no solution lies inside the range; the
polynomial, used beyond it, bends back and gives a spurious root near 6948 degC, which
ngspice finds by source stepping.  heatweave must report a runaway out of the model's
range (exit 7) with the loop gain Rth I^2 dR/dt at 850 degC, not that root.  Every
expected number here comes from the polynomial and scipy, independently of heatweave.
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.optimize import brentq

from heatweave.cli import main
from heatweave.errors import EXIT_OK, EXIT_THERMAL_RUNAWAY

pytestmark = pytest.mark.ngspice
needs_ngspice = pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")

DECKS = Path(__file__).parents[1] / "decks" / "rtd-excitation"
A, B = 3.9083e-3, -5.775e-7  # IEC 60751
R0, RTH, TA = 100.0, 250.0, 0.0  # the deck's Pt100 and its annotation (250 K/W, bath 0 degC)
T_HIGH = 850.0  # IEC 60751: the upper end of the Callendar-Van Dusen range


def cvd(t: float) -> float:
    """IEC 60751 above 0 degC."""
    return R0 * (1.0 + A * t + B * t * t)


def balance(t: float, current: float) -> float:
    """Heat removed minus heat made, per Rth: t - Ta - Rth I^2 R(t)."""
    return t - TA - RTH * current**2 * cvd(t)


def excited(tmp_path: Path, current: str) -> tuple[str, str]:
    """The example deck with its excitation set to *current* (a copy; decks/ untouched)."""
    deck = tmp_path / "rtd.cir"
    text = (DECKS / "rtd.cir").read_text()
    deck.write_text(re.sub(r"(?m)^\.param iexc=\S+$", f".param iexc={current}", text))
    shutil.copy(DECKS / "rtd.thermal.toml", tmp_path / "rtd.thermal.toml")
    return str(deck), str(tmp_path / "rtd.thermal.toml")


def number(pattern: str, text: str) -> float:
    found = re.search(pattern, text)
    assert found is not None, text
    return float(found.group(1))


def spurious_root(current: float) -> float:
    """The root of the balance beyond the range, where the polynomial has bent back."""
    return float(brentq(balance, T_HIGH, 1e4, args=(current,), xtol=1e-9))


def test_one_ampere_has_no_steady_state_inside_the_range() -> None:
    # The balance is negative over the whole IEC 60751 span above the bath (more heat made
    # than removed everywhere); its root above the bath lies far outside the range, past
    # the polynomial's maximum at t = -A / (2 B) (about 3384 degC), where R(t) falls again.
    grid = np.linspace(TA, T_HIGH, 8501)
    assert max(balance(float(t), 1.0) for t in grid) < 0.0
    assert spurious_root(1.0) > -A / (2.0 * B) > T_HIGH


@needs_ngspice
def test_run_reports_runaway_out_of_the_model_range(tmp_path: Path) -> None:
    deck, annotation = excited(tmp_path, "1")
    result = CliRunner().invoke(main, ["run", deck, "-a", annotation])
    output = result.output
    assert result.exit_code == EXIT_THERMAL_RUNAWAY, output
    assert "RPT runs away thermally" in output and "IEC 60751" in output
    assert "out of range for" not in output and "Traceback" not in output
    assert "rtd.thermal.toml:" in output  # located at the part's annotation
    # Loop gain at full dissipation with the element at 850 degC: Rth I^2 dR/dt there.
    gain = RTH * R0 * (A + 2.0 * B * T_HIGH)
    assert number(r"loop gain Rth\*dP/dT is ([0-9.]+)", output) == pytest.approx(gain, rel=2e-3)
    # The share of the full dissipation at which the steady state reaches 850 degC, and
    # the excitation that gives it: brentq on the balance at 850 degC.
    critical = brentq(lambda i: balance(T_HIGH, i), 1e-3, 1.0, xtol=1e-12)
    share = number(r"at ([0-9.]+) % of the full dissipation", output) / 100.0
    assert share == pytest.approx(critical**2, rel=2e-3)
    assert number(r"IEXC = ([0-9.]+) A", output) == pytest.approx(critical, rel=2e-3)
    # The root ngspice landed on is named as what it is, not reported as a temperature;
    # ngspice accepts it within its default reltol of 1e-3 (ngspice manual, .options).
    found = number(r"found instead, ([0-9.]+) degC", output)
    assert found == pytest.approx(spurious_root(1.0), rel=1e-3)


@needs_ngspice
def test_settle_reports_the_gain_where_the_range_ends(tmp_path: Path) -> None:
    deck, annotation = excited(tmp_path, "1")
    result = CliRunner().invoke(main, ["settle", deck, "-a", annotation, "--period", "1m"])
    output = result.output
    assert result.exit_code == EXIT_THERMAL_RUNAWAY, output
    gain = RTH * R0 * (A + 2.0 * B * T_HIGH)  # as above; a 0.1 K backward difference
    assert number(r"loop gain ([0-9.]+)", output) == pytest.approx(gain, rel=2e-3)
    assert "(at 850.0 degC)" in output and "IEC 60751" in output


@needs_ngspice
def test_hot_but_stable_rtd_runs_with_a_range_warning(tmp_path: Path) -> None:
    """Across a stiff voltage source an RTD's dissipation V^2/R falls as it heats (loop
    gain below zero): no runaway, but a steady state beyond 850 degC is an extrapolation
    and must be flagged.  Expected temperature: brentq on t - Ta = Rth V^2 / R(t)."""
    volts = 40.0
    deck = tmp_path / "hot.cir"
    deck.write_text(f"RTD across a supply\nV1 a 0 DC {volts}\nRPT a 0 100\n.op\n.end\n")
    annotation = tmp_path / "hot.thermal.toml"
    annotation.write_text(
        'schema = 1\n[ambient]\ntemperature = 0.0\n[part.RPT]\nmodel = "rtd"\nrth = 250.0\n'
    )
    expected = brentq(lambda t: t - TA - RTH * volts**2 / cvd(t), TA, 3000.0, xtol=1e-9)
    assert expected > T_HIGH
    result = CliRunner().invoke(main, ["run", str(deck), "-a", str(annotation)])
    output = result.output
    assert result.exit_code == EXIT_OK, output
    assert "beyond 850 degC where its rtd model ends" in output
    assert number(r"RPT reaches ([0-9.]+) degC", output) == pytest.approx(expected, abs=0.1)


@needs_ngspice
def test_normal_excitation_gives_no_range_warning(tmp_path: Path) -> None:
    # 1 mA: the README's table, 0.025 K of rise, far inside the range.
    deck, annotation = excited(tmp_path, "1m")
    result = CliRunner().invoke(main, ["run", deck, "-a", annotation])
    assert result.exit_code == EXIT_OK, result.output
    assert "model ends" not in result.output


@needs_ngspice
def test_cosimulated_run_warns_of_the_range_too(tmp_path: Path) -> None:
    # The same hot RTD with a thermal capacitance (tau = Rth * Cth = 2.5 s), its supply
    # ramped up over 16 tau so that the loop gain stays below the co-simulation's limit
    # (near 0.64 at a steady 850 degC: (T - Ta) d ln R/dT), run by the co-simulation: the
    # warning comes from that path as well.
    deck = tmp_path / "hot.cir"
    deck.write_text("RTD across a ramp\nV1 a 0 PWL(0 0 40 40)\nRPT a 0 100\n.end\n")
    annotation = tmp_path / "hot.thermal.toml"
    annotation.write_text(
        'schema = 1\n[ambient]\ntemperature = 0.0\n[part.RPT]\nmodel = "rtd"\nrth = 250.0\n'
        "cth = 0.01\n"
    )
    args = ["run", str(deck), "-a", str(annotation), "--tran", "10m", "50", "--method", "cosim"]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == EXIT_OK, result.output
    assert "method: cosim" in result.output
    assert "beyond 850 degC where its rtd model ends" in result.output
