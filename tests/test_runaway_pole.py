"""The critical current of a positive-TCR resistor on a current source, against its closed form.

Closed form (derived here, linear model R(T) = R0 (1 + tc1 (T - tref)), current I, thermal
resistance Rth to the ambient Ta): the dissipation P = I^2 R(T) and the balance
T - Ta = Rth P give

    theta = T - Ta = Rth I^2 R(Ta) / (1 - g),   g = Rth dP/dT = I^2 R0 Rth tc1.

The loop gain g does not depend on the temperature, so no fold appears: the steady state runs
off to infinity as g approaches 1 (a pole, not a saddle-node), and none with R > 0 exists
beyond.  The critical current is Icrit = 1 / sqrt(R0 Rth tc1), R0 the deck's value (at tref).
The continuation must find it however fast the temperature grows before it, from an
operating point and from a transient that starts steady (README, ``start = "steady"``).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from heatweave.errors import ThermalRunawayError
from heatweave.run import runner
from heatweave.run.diagnosis import RunawayError
from heatweave.run.runaway import DRIVE_TOL

DECK = "positive tcr on a current source\nI1 0 top DC {i!r}\nRS top 0 {r0!r}\n{analysis}\n.end\n"
NOTE = (
    'schema = 1\n{start}[ambient]\ntemperature = 25.0\n[part.RS]\nmodel = "linear"\n'
    "tc1 = {tc1!r}\ntref = {tref!r}\nrth = {rth!r}\ncth = 0.01\n"
)

# (R0 ohm, Rth K/W, tc1 1/K, tref degC, loop gain at the deck's current): copper-like and
# film-like TCRs of common practice, small and large parts, gains from just past 1 to 200.
CASES = [
    (100.0, 500.0, 0.004, 25.0, 8.0),
    (100.0, 500.0, 0.004, 25.0, 200.0),
    (10.0, 50.0, 0.0039, 25.0, 1.5),
    (1000.0, 20.0, 0.001, 0.0, 3.0),
    (0.5, 120.0, 0.0068, 25.0, 30.0),
    (47.0, 250.0, 0.0002, 60.0, 12.0),
]
STARTS = {
    "op": ("", ".op"),
    "steady": ('start = "steady"\n', ".tran 1u 10u"),
}


def i_crit(r0: float, rth: float, tc1: float) -> float:
    """Closed form above: loop gain I^2 R0 Rth tc1 = 1."""
    return 1.0 / math.sqrt(r0 * rth * tc1)


@pytest.mark.parametrize("start", sorted(STARTS))
@pytest.mark.parametrize(("r0", "rth", "tc1", "tref", "gain"), CASES)
def test_critical_current_is_the_closed_form(
    tmp_path: Path, start: str, r0: float, rth: float, tc1: float, tref: float, gain: float
) -> None:
    critical = i_crit(r0, rth, tc1)
    line, analysis = STARTS[start]
    deck, note = tmp_path / "d.cir", tmp_path / "d.thermal.toml"
    deck.write_text(DECK.format(i=critical * math.sqrt(gain), r0=r0, analysis=analysis))
    note.write_text(NOTE.format(start=line, tc1=tc1, tref=tref, rth=rth))
    with pytest.raises(ThermalRunawayError) as caught:
        runner.run(str(deck), str(note), runner.RunOptions())
    err = caught.value
    assert isinstance(err, RunawayError) and err.diagnosis is not None
    assert err.diagnosis.source is not None
    # The drive is located to DRIVE_TOL of itself, the current (its square root) to half.
    assert err.diagnosis.drive == pytest.approx(1.0 / gain, rel=DRIVE_TOL)
    assert err.diagnosis.source[1] == pytest.approx(critical, rel=DRIVE_TOL / 2)
    assert err.diagnosis.loop_gain == pytest.approx(1.0, abs=DRIVE_TOL)


def steady_rise(i: float, r0: float, rth: float, tc1: float) -> float:
    """Closed form above: theta = Rth I^2 R0 / (1 - I^2 R0 Rth tc1), tref at the ambient."""
    return rth * i * i * r0 / (1.0 - i * i * r0 * rth * tc1)


# (R0, Rth, tc1, loop gain below 1): the steady state exists, but beyond 1000 degC
# (heatweave.run.results.IMPLAUSIBLE_TEMPERATURE) for the first three, just below it last.
BEYOND = [
    (100.0, 50.0, 0.004, 0.9946),  # 4.59e4 degC
    (100.0, 50.0, 0.004, 0.85),  # 1.44e3 degC
    (10.0, 200.0, 0.0039, 0.9),
]


@pytest.mark.parametrize("start", sorted(STARTS))
@pytest.mark.parametrize(("r0", "rth", "tc1", "gain"), BEYOND)
def test_a_steady_state_beyond_1000_degc_is_refused(
    tmp_path: Path, start: str, r0: float, rth: float, tc1: float, gain: float
) -> None:
    """An operating point whose steady state lies beyond 1000 degC is refused as the same
    deck's transient is (exit 7), with the closed-form temperature, not reported with exit 0."""
    current = i_crit(r0, rth, tc1) * math.sqrt(gain)
    hot = 25.0 + steady_rise(current, r0, rth, tc1)
    assert hot > 1000.0
    line, analysis = STARTS[start]
    deck, note = tmp_path / "d.cir", tmp_path / "d.thermal.toml"
    deck.write_text(DECK.format(i=current, r0=r0, analysis=analysis))
    note.write_text(NOTE.format(start=line, tc1=tc1, tref=25.0, rth=rth))
    with pytest.raises(ThermalRunawayError) as caught:
        runner.run(str(deck), str(note), runner.RunOptions())
    text = str(caught.value)
    assert "RS" in text and "1000 degC" in text
    assert f"{hot:.4g} degC" in text


def test_a_steady_state_below_1000_degc_stands(tmp_path: Path) -> None:
    """Just below the bound the operating point is the closed form (and no error)."""
    r0, rth, tc1 = 100.0, 50.0, 0.004
    current = 0.1988  # theta = 943 K (closed form above)
    deck, note = tmp_path / "d.cir", tmp_path / "d.thermal.toml"
    deck.write_text(DECK.format(i=current, r0=r0, analysis=".op"))
    note.write_text(NOTE.format(start="", tc1=tc1, tref=25.0, rth=rth))
    outcome = runner.run(str(deck), str(note), runner.RunOptions())
    hot = 25.0 + steady_rise(current, r0, rth, tc1)
    assert outcome.results.part("RS").temperature == pytest.approx(hot, rel=1e-4)


def test_past_every_resolvable_drive_no_critical_value_is_made_up(tmp_path: Path) -> None:
    """Loop gain I^2 R0 Rth tc1 = 3.9e22: the critical share of the dissipation (2.6e-23)
    is below the finest the continuation follows; the message says so instead of "0 % of
    the dissipation, I1 = 0 A" (it did)."""
    deck, note = tmp_path / "d.cir", tmp_path / "d.thermal.toml"
    deck.write_text(DECK.format(i=1e9, r0=10.0, analysis=".op"))
    note.write_text(NOTE.format(start="", tc1=0.0039, tref=25.0, rth=1e12))
    with pytest.raises(RunawayError) as caught:
        runner.run(str(deck), str(note), runner.RunOptions())
    text = str(caught.value)
    assert "no steady state even at the smallest share" in text
    assert " 0 A" not in text and "at 0 %" not in text
