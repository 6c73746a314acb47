"""Every reported steady state is the circuit's, or a refusal: issue 12, section 1.

Each case is reproduced with a deck of our own and held to independent references: scipy's
brentq on the same power balance (T - Ta = Rth P(T)), closed forms of the fold
(Vcrit = sqrt(R0 / (4 |tc1| Rth)) for a linear part with negative tc1 across a stiff source;
Icrit = 1 / sqrt(R0 Rth tc1) for a positive TCR on a current source, where the loop gain
I^2 R0 Rth tc1 reaches 1), and stock ngspice run on the emitted deck.
"""

from __future__ import annotations

import math
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.optimize import brentq

from heatweave.cli import main
from heatweave.emit.emitter import load_inputs
from heatweave.errors import EXIT_THERMAL_RUNAWAY, ThermalRunawayError
from heatweave.run import runner
from heatweave.run.diagnosis import RunawayError
from heatweave.run.prepare import RunOptions, prepare
from heatweave.run.runaway import DRIVE_TOL, Continuation, power_jacobian
from heatweave.run.states import SCAN_STEP
from heatweave.run.verify import fell_back, solver_tolerances

BACKENDS = ["shared", "batch"]


def write(tmp_path: Path, deck: str, note: str, name: str = "d") -> tuple[str, str]:
    (tmp_path / f"{name}.cir").write_text(deck)
    (tmp_path / f"{name}.thermal.toml").write_text(note)
    return str(tmp_path / f"{name}.cir"), str(tmp_path / f"{name}.thermal.toml")


def ptc_r(t_c: float, r_cold: float, t_switch: float, decade: float, r_max: float) -> float:
    """The ptc model's published form (tempmodels/ptc.py docstring)."""
    f = 10.0 ** min(max((t_c - t_switch) / decade, -86.0), 86.0)
    return r_cold * (1 + f) / (1 + f * r_cold / r_max)


def roots(balance: object, low: float, high: float, step: float = 0.01) -> list[float]:
    """Every root of *balance* on [low, high] by brentq between sign changes on a grid."""
    assert callable(balance)
    grid = np.arange(low, high, step)
    values = np.array([balance(t) for t in grid])
    found = []
    for k in np.flatnonzero(np.sign(values[:-1]) != np.sign(values[1:])):
        found.append(float(brentq(balance, grid[k], grid[k + 1], xtol=1e-12)))
    return found


# A switching PTC (10 ohm cold, switch 120 degC, tenfold per kelvin, Rth 100 K/W) in series
# with a 100 ohm load on 60 V: cold it would dissipate 3 W and rise 300 K, so only the
# tripped state exists.  ngspice's operating point fails gmin and source stepping here and
# falls back to its transient op, which stops near the switch temperature.
PTC_DECK = "ptc in series with a load\nV1 rail 0 DC {v}\nRP rail mid 10\nRL mid 0 100\n.op\n.end\n"
PTC_NOTE = (
    'schema = 1\n[ambient]\ntemperature = 25.0\n[part.RP]\nmodel = "ptc"\n'
    "t_switch = 120.0\ndecade = 1.0\nrth = 100.0\ncth = 0.5\n"
)


def ptc_balance(volts: float) -> object:
    r_cold = 10.0 * (1 + 10 ** ((25 - 120) / 1.0) / 1e4) / (1 + 10 ** ((25 - 120) / 1.0))

    def balance(t: float) -> float:
        r = ptc_r(t, r_cold, 120.0, 1.0, 1e4 * r_cold)
        return t - 25.0 - 100.0 * volts**2 * r / (r + 100.0) ** 2

    return balance


@pytest.mark.parametrize("backend", BACKENDS)
def test_tripped_ptc_reports_the_only_steady_state(tmp_path: Path, backend: str) -> None:
    deck, note = write(tmp_path, PTC_DECK.format(v=60), PTC_NOTE)
    (expected,) = roots(ptc_balance(60.0), 25.0, 400.0)  # scipy: the one state there is
    outcome = runner.run(deck, note, runner.RunOptions(backend=backend))
    part = outcome.results.part("RP")
    assert part.temperature == pytest.approx(expected, abs=0.05)
    assert 25.0 + 100.0 * part.power == pytest.approx(part.temperature, abs=0.05)
    # The reader is told that ngspice's own answer was replaced, and why.
    assert any("transient op" in f.message for f in outcome.prepared.findings)


NGSPICE = shutil.which("ngspice")


@pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed")
def test_stock_ngspice_falls_back_to_transient_op_on_that_deck(tmp_path: Path) -> None:
    # The case is real: stock ngspice, on the emitted deck, prints its fall-back and
    # returns a temperature far from the balance (the state heatweave printed before).
    deck, _ = write(tmp_path, PTC_DECK.format(v=60), PTC_NOTE)
    emitted = tmp_path / "e.cir"
    CliRunner().invoke(main, ["emit", deck, "-o", str(emitted)])
    text = emitted.read_text().replace(".op\n", ".op\n.print dc v(hw_t_rp)\n")
    emitted.write_text(text)
    out = subprocess.run(
        [str(NGSPICE), "-b", str(emitted)], capture_output=True, text=True, timeout=60
    )
    log = out.stdout + out.stderr
    assert fell_back(log)
    (expected,) = roots(ptc_balance(60.0), 25.0, 400.0)
    shown = [line for line in log.splitlines() if "hw_t_rp" in line.lower() and "=" in line]
    if shown:  # ngspice prints "v(hw_t_rp) = 1.17...e+02"
        assert abs(float(shown[-1].split("=")[-1]) - expected) > 5.0


def test_ptc_below_trip_reports_cold_state_and_names_both(tmp_path: Path) -> None:
    # 30 V: the cold state (about 25 + 100 * 0.74 W) and a tripped one both exist (scipy).
    deck, note = write(tmp_path, PTC_DECK.format(v=30), PTC_NOTE)
    found = roots(ptc_balance(30.0), 25.0, 400.0)
    stable = found[0::2]  # alternating stable / unstable, starting stable from ambient
    assert len(stable) == 2
    outcome = runner.run(deck, note, runner.RunOptions())
    assert outcome.results.part("RP").temperature == pytest.approx(stable[0], abs=0.05)
    warning = next(f for f in outcome.prepared.findings if "stable steady states" in f.message)
    assert f"{stable[0]:.4g}" in warning.message and "switched on from cold" in warning.message
    # The second one is located by the scan (held temperatures SCAN_STEP apart, linear
    # interpolation between them): to that step.
    listed = warning.message.split("(")[1].split(")")[0].split(", ")
    assert [float(x.split()[0]) for x in listed] == pytest.approx(stable, abs=SCAN_STEP)


NEG_DECK = "negative tc1 across a supply\nV1 rail 0 DC {v!r}\nRN rail 0 100\n.op\n.end\n"
NEG_NOTE = (
    'schema = 1\n[ambient]\ntemperature = 25.0\n[part.RN]\nmodel = "linear"\n'
    "tc1 = -0.004\nrth = 100.0\ncth = 0.1\n"
)
V_CRIT = math.sqrt(100.0 / (4 * 0.004 * 100.0))  # closed form: 7.906 V


@pytest.mark.parametrize("backend", BACKENDS)
@pytest.mark.parametrize("share", [0.5, 0.9, 0.99])
def test_negative_tc1_below_vcrit_is_exact(tmp_path: Path, backend: str, share: float) -> None:
    volts = share * V_CRIT
    deck, note = write(tmp_path, NEG_DECK.format(v=volts), NEG_NOTE)
    c = 100.0 * volts**2 / 100.0  # Rth V^2 / R0; theta (1 - |tc1| theta) = c
    theta = (1 - math.sqrt(1 - 4 * 0.004 * c)) / (2 * 0.004)  # the low (stable) root
    outcome = runner.run(deck, note, runner.RunOptions(backend=backend))
    assert outcome.results.part("RN").temperature == pytest.approx(25.0 + theta, abs=0.02)


@pytest.mark.parametrize("backend", BACKENDS)
@pytest.mark.parametrize("over", [1.05, 1.5, 12.0 / V_CRIT])
def test_negative_tc1_above_vcrit_runs_away(tmp_path: Path, backend: str, over: float) -> None:
    deck, note = write(tmp_path, NEG_DECK.format(v=over * V_CRIT), NEG_NOTE)
    with pytest.raises(ThermalRunawayError) as caught:
        runner.run(deck, note, runner.RunOptions(backend=backend))
    err = caught.value
    assert err.exit_code == EXIT_THERMAL_RUNAWAY
    assert isinstance(err, RunawayError) and err.diagnosis is not None
    assert err.diagnosis.source is not None
    assert err.diagnosis.source[1] == pytest.approx(V_CRIT, rel=2e-3)
    assert "loop gain" in err.message


CUR_DECK = "positive tcr on a current source\nI1 0 top DC {i!r}\nRS top 0 100\n.op\n.end\n"
CUR_NOTE = (
    'schema = 1\n[ambient]\ntemperature = 25.0\n[part.RS]\nmodel = "linear"\n'
    "tc1 = 0.004\nrth = 500.0\ncth = 0.1\npower_rating = 0.25\ntmax = 155\n"
)
I_CRIT = 1.0 / math.sqrt(100.0 * 500.0 * 0.004)  # loop gain I^2 R0 Rth tc1 = 1


@pytest.mark.parametrize("gain", [1.5, 3.0, 10.0, 50.0, 100.0, 200.0])
def test_positive_tcr_on_current_source_runs_away(tmp_path: Path, gain: float) -> None:
    # Loop gains 1.5 to 100 raised a numpy broadcasting ValueError (issue 14); at 200 the
    # run reported -75 degC and a negative power with exit 0.
    deck, note = write(tmp_path, CUR_DECK.format(i=I_CRIT * math.sqrt(gain)), CUR_NOTE)
    with pytest.raises(ThermalRunawayError) as caught:
        runner.run(deck, note, runner.RunOptions())
    err = caught.value
    assert isinstance(err, RunawayError) and err.diagnosis is not None
    assert err.diagnosis.source is not None
    assert err.diagnosis.source[1] == pytest.approx(I_CRIT, rel=DRIVE_TOL / 2)


@pytest.mark.parametrize("command", [["run"], ["check"], ["sweep", "--check", "--ambient", "25"]])
def test_runaway_exits_7_in_every_command(tmp_path: Path, command: list[str]) -> None:
    deck, note = write(tmp_path, CUR_DECK.format(i=I_CRIT * math.sqrt(200.0)), CUR_NOTE)
    result = CliRunner().invoke(main, [*command, deck, "-a", note])
    assert result.exit_code == EXIT_THERMAL_RUNAWAY, result.output
    assert "-75" not in result.output


def test_stable_current_source_matches_closed_form(tmp_path: Path) -> None:
    # Below the critical current: theta = c / (1 - tc1 c), c = Rth I^2 R0 (closed form).
    current = 0.5 * I_CRIT
    deck, note = write(tmp_path, CUR_DECK.format(i=current), CUR_NOTE)
    c = 500.0 * current**2 * 100.0
    theta = c / (1 - 0.004 * c)
    outcome = runner.run(deck, note, runner.RunOptions())
    assert outcome.results.part("RS").temperature == pytest.approx(25.0 + theta, abs=0.02)


def test_steady_start_is_verified_at_time_zero(tmp_path: Path) -> None:
    # start = "steady": the transient's first point is the operating point of the tripped
    # PTC above; it must be the balanced state (scipy), not the fall-back.
    deck = PTC_DECK.format(v=60).replace(".op", ".tran 0.1 1")
    note = PTC_NOTE.replace("schema = 1\n", 'schema = 1\nstart = "steady"\n')
    deck_path, note_path = write(tmp_path, deck, note)
    (expected,) = roots(ptc_balance(60.0), 25.0, 400.0)
    outcome = runner.run(deck_path, note_path, runner.RunOptions())
    series = outcome.results.part("RP").temperature_series
    assert series is not None
    assert float(series[0]) == pytest.approx(expected, abs=0.05)


BAD_VALUES = [
    ("rth = 30.0", "rth = 1e300", "rth = 1e+300 is outside"),
    ("rth = 30.0", "foster = [[1e300, 1.0]]", "too large"),
    ("tc1 = 0.004", "tc1 = 0.004\ntref = 1e6", "tref = 1000000 is outside"),
    ("tc1 = 0.004", "tc1 = 0.004\ntref = 300", "-10 ohm at the ambient"),
    ('model = "linear"\ntc1 = 0.004', 'model = "rtd"\ntref = 900', "outside the rtd model's range"),
]


@pytest.mark.parametrize(("old", "new", "said"), BAD_VALUES)
def test_meaningless_values_are_located_errors(
    tmp_path: Path, old: str, new: str, said: str
) -> None:
    # rth = 1e300 reported 0.00 degC, tref = 1e6 a negative resistance (issue 12).
    note = 'schema = 1\n[part.RB]\nmodel = "linear"\ntc1 = 0.004\nrth = 30.0\n'
    deck, note_path = write(
        tmp_path, "d\nV1 a 0 DC 5\nRB a 0 100\n.op\n.end\n", note.replace(old, new)
    )
    result = CliRunner().invoke(main, ["run", deck, "-a", note_path, "-q"])
    assert result.exit_code == 2, result.output
    assert said in result.output and "d.thermal.toml:" in result.output


def test_cosim_runaway_exits_7(tmp_path: Path) -> None:
    # --method cosim stopped by the loop gain and exited 2; a runaway is exit 7 by any method.
    deck = CUR_DECK.format(i=0.2).replace(".op", ".tran 1 2000")
    deck_path, note = write(tmp_path, deck, CUR_NOTE.replace("cth = 0.1", "cth = 10"))
    result = CliRunner().invoke(main, ["run", deck_path, "-a", note, "--method", "cosim", "-q"])
    assert result.exit_code == EXIT_THERMAL_RUNAWAY, result.output
    assert "loop gain" in result.output


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("t\nR1 a 0 1\n.end\n", (1e-3, 0.0)),  # ngspice's defaults (manual 11.1.2)
        ("t\n.options reltol=1e-2\n.end\n", (1e-2, 0.0)),
        ("t\n.OPTION vntol=1m RELTOL=1e-4\n.end\n", (1e-3, 1e-3 - 1e-6)),
    ],
)
def test_the_balance_follows_the_decks_solver_tolerances(
    text: str, expected: tuple[float, float]
) -> None:
    # A deck that loosens reltol gets a looser balance, never a tighter one than ngspice's.
    reltol, extra = solver_tolerances(text)
    assert (reltol, extra) == pytest.approx(expected)


def test_a_transient_through_a_non_positive_resistance_is_refused(tmp_path: Path) -> None:
    # Negative tc1 across a stiff source far above Vcrit, as a transient from cold: the
    # resistance heads through zero; no number of that run is the circuit's.
    deck = NEG_DECK.format(v=3 * V_CRIT).replace(".op", ".tran 0.01 20")
    deck_path, note = write(tmp_path, deck, NEG_NOTE)
    result = CliRunner().invoke(main, ["run", deck_path, "-a", note, "--method", "full", "-q"])
    assert result.exit_code == EXIT_THERMAL_RUNAWAY, result.output


@pytest.mark.parametrize("held", [60.0, 4977.0, 2.355e5])
def test_runaway_jacobian_at_any_temperature(tmp_path: Path, held: float) -> None:
    # ngspice sweeps "dc v T-0.1 T+0.1 0.1" in 3 points at 60 degC but in 2 above about
    # 1000 degC (rounding of the bounds); the Jacobian assumed 3 and raised a numpy
    # broadcasting ValueError there (issue 14).  Closed form on a current source:
    # P = I^2 R0 (1 + tc1 (T - 25)), so dP/dT = I^2 R0 tc1.
    deck, note = write(tmp_path, CUR_DECK.format(i=0.5), CUR_NOTE)
    inputs = load_inputs(deck, note)
    options = RunOptions()
    cont = Continuation(prepare(inputs, options), options, inputs.index)
    jac = power_jacobian(cont, inputs.index, np.array([held]))
    assert jac[0, 0] == pytest.approx(0.5**2 * 100.0 * 0.004, rel=1e-6)


@pytest.mark.parametrize(("stop", "refused"), [(7.0, False), (12.0, True)])
def test_dc_sweep_last_point_is_verified(tmp_path: Path, stop: float, refused: bool) -> None:
    # A .dc sweep of the supply of the negative-tc1 part: up to 7 V (below Vcrit) its last
    # point is the closed-form state; past Vcrit ngspice's last point does not balance.
    deck = NEG_DECK.format(v=1.0).replace(".op", f".dc V1 1 {stop:g} 0.5")
    deck_path, note = write(tmp_path, deck, NEG_NOTE)
    if refused:
        with pytest.raises(ThermalRunawayError, match="DC sweep"):
            runner.run(deck_path, note, runner.RunOptions())
        return
    outcome = runner.run(deck_path, note, runner.RunOptions())
    c = 100.0 * stop**2 / 100.0
    theta = (1 - math.sqrt(1 - 4 * 0.004 * c)) / (2 * 0.004)
    assert outcome.results.part("RN").temperature == pytest.approx(25.0 + theta, abs=0.05)


@pytest.mark.parametrize("analysis", [".op", ".tran 1m 10m"])
def test_heat_only_part_delivering_power_is_warned_of(tmp_path: Path, analysis: str) -> None:
    # A supply annotated as a heat-only part: V*I into it is -25 V^2 / 100 ohm = -0.25 W.
    deck = f"heat-only source\nV1 a 0 DC 5\nR1 a 0 100\n{analysis}\n.end\n"
    deck_path, note = write(tmp_path, deck, "schema = 1\n[part.V1]\nrth = 10\ncth = 1\n")
    outcome = runner.run(deck_path, note, runner.RunOptions())
    found = [f for f in outcome.prepared.findings if "negative dissipation" in f.message]
    assert found and "-0.25 W" in found[0].message


def test_tripped_ptc_state_is_where_a_transient_from_cold_ends(tmp_path: Path) -> None:
    # A second reference for the recovered operating point: ngspice's own transient from
    # cold over twelve thermal time constants (Rth Cth = 50 s) of the same deck.
    deck, note = write(tmp_path, PTC_DECK.format(v=60), PTC_NOTE)
    steady = runner.run(deck, note, runner.RunOptions()).results.part("RP").temperature
    options = runner.RunOptions(analyses=("tran 0.5 600",))
    warm = runner.run(deck, note, options).results.part("RP").temperature
    assert steady == pytest.approx(warm, abs=0.05)
