"""The critical drive of a fold placed by the drive-versus-temperature curve, against closed
forms and scipy.

One part with thermal resistance Rth to ambient Ta, held at temperature T, dissipates P(T, s)
at source value s.  T is a steady state at s exactly when T - Ta = Rth P(T, s).  For a
linear circuit P scales with s^2, so the drive that makes T a steady state is
s*(T) = sqrt((T - Ta) / (Rth P(T, 1))); along the stable branch s rises with T up to the
fold, so the critical drive is the maximum of s*(T) (a pole where s*(T) only approaches a
bound as T grows).

Linear part across a voltage source (closed form): R = R0 (1 + tc1 (T - Tref)), P = V^2 / R,
so T - Ta = Rth V^2 / (R0 (1 + tc1 (T - Tref))).  With x = T - Ta and c = 1 + tc1 (Ta - Tref),
V^2 = R0 c x (1 + (tc1 / c) x) / Rth; for tc1 < 0 that is largest at x = c / (2 |tc1|), so
Vcrit = c sqrt(R0 / (4 |tc1| Rth)) (c = 1 where Ta = Tref: Vcrit = sqrt(R0 / (4 |tc1| Rth))).

Linear part on a current source, tc1 > 0 (closed form): P = I^2 R0 (1 + tc1 (T - Tref)),
T - Ta = Rth I^2 R0 (c + tc1 x): a steady state exists while Rth I^2 R0 tc1 < 1, so
Icrit = 1 / sqrt(R0 Rth tc1) (a pole: the temperature grows without bound there).

NTC (Beta equation) across a voltage source: s*(T) = sqrt((T - Ta) R(T) / Rth), maximised
with scipy.optimize.minimize_scalar on the same model in the test.
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from scipy.optimize import minimize_scalar

from heatweave.errors import EXIT_THERMAL_RUNAWAY
from heatweave.run import runner
from heatweave.run.diagnosis import RunawayError
from test_runaway import beta_r, write_ntc

TREF = 25.0  # the linear model's default tref (src/heatweave/tempmodels/linear.py)


def critical(deck: str, note: str) -> tuple[str, float]:
    """(source name, critical value) from the runaway heatweave reports on *deck*."""
    with pytest.raises(RunawayError) as caught:
        runner.run(deck, note, runner.RunOptions())
    assert caught.value.exit_code == EXIT_THERMAL_RUNAWAY
    found = caught.value.diagnosis
    assert found is not None and found.source is not None
    return found.source[0], found.source[1]


def write_linear(tmp_path: Path, source: str, tc1: float, rth: float, ta: float) -> tuple[str, str]:
    deck = tmp_path / "lin.cir"
    deck.write_text(f"part on a source\n{source}\nRH a 0 100\n.op\n.end\n")
    note = tmp_path / "lin.thermal.toml"
    note.write_text(
        f'schema = 1\n[ambient]\ntemperature = {ta!r}\n[part.RH]\nmodel = "linear"\n'
        f"tc1 = {tc1!r}\nrth = {rth!r}\n"
    )
    return str(deck), str(note)


# (tc1 1/K, Rth K/W, ambient degC): R0 = 100 ohm.  At 500 degC the part is down to 5 ohm and
# moves 4 %/K there: the flat fold where ngspice's sweep stalls past it (README, runaway).
VOLTAGE_CASES = [(-2000e-6, 100.0, 25.0), (-2000e-6, 100.0, 500.0), (-500e-6, 40.0, 60.0)]


@pytest.mark.parametrize(("tc1", "rth", "ta"), VOLTAGE_CASES)
def test_linear_part_across_a_supply(tmp_path: Path, tc1: float, rth: float, ta: float) -> None:
    c = 1.0 + tc1 * (ta - TREF)
    v_crit = c * math.sqrt(100.0 / (4 * abs(tc1) * rth))
    deck, note = write_linear(tmp_path, f"V1 a 0 DC {1.5 * v_crit!r}", tc1, rth, ta)
    name, found = critical(deck, note)
    # ngspice solves the held part's .op to reltol 1e-6 (run/diagnosis_decks.py TIGHT);
    # s* is flat at its maximum, so the maximum's value is known far finer than that.
    assert name == "V1" and found == pytest.approx(v_crit, rel=1e-5)


def test_linear_part_on_a_current_source(tmp_path: Path) -> None:
    tc1, rth = 4000e-6, 100.0
    i_crit = 1.0 / math.sqrt(100.0 * rth * tc1)
    deck, note = write_linear(tmp_path, f"I1 0 a DC {1.5 * i_crit!r}", tc1, rth, TREF)
    name, found = critical(deck, note)
    # A pole, not a fold: no maximum of s*(T) to polish; the continuation places the
    # drive to 0.1 % of itself, its square root to 0.05 % (README, runaway).
    assert name == "I1" and found == pytest.approx(i_crit, rel=5e-4)


@pytest.mark.parametrize(("r25", "beta", "rth", "ta"), [(1000.0, 3500.0, 100.0, 25.0),
                                                        (220.0, 3000.0, 60.0, 0.0)])  # fmt: skip
def test_ntc_across_a_supply(tmp_path: Path, r25: float, beta: float, rth: float,
                             ta: float) -> None:  # fmt: skip
    def minus_drive(t: float) -> float:
        return -math.sqrt((t - ta) * beta_r(t, r25, beta) / rth)

    best = minimize_scalar(minus_drive, bounds=(ta + 1e-6, ta + 200.0), method="bounded",
                           options={"xatol": 1e-9})  # fmt: skip
    v_crit = -float(best.fun)
    deck, note = write_ntc(tmp_path, 1.3 * v_crit, r25, beta, rth, ta)
    name, found = critical(deck, note)
    assert name == "V1" and found == pytest.approx(v_crit, rel=1e-5)
