"""The windowed co-simulation against the full electrothermal deck and the power balance.

References: the emitted electrothermal deck simulated by ngspice (heatweave.run.runner.run,
the straightforward behavioural-source form), scipy.optimize.brentq on the steady power
balance T = T_amb + Rth V_rms^2 R(T) / (R(T) + R2)^2 of a divider (Joule heating of a
resistor, P = V^2/R; first-order thermal balance, Incropera ch. 5.1), and closed-form
integrals for the window power.  The fixtures' transients use a maximum step of 2 us:
at 10 us the full deck's own time discretisation shifts its temperatures by about 0.4 %
of the rise (measured against brentq; it converges as the step squared), which would
use up the 0.05 K budget by itself.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.optimize

from heatweave import cosim, tempmodels
from heatweave.cosim.bank import ModelBank
from heatweave.cosim.method import Transient, choose_method, source_time_scale
from heatweave.cosim.windows import window_power
from heatweave.errors import UsageError
from heatweave.networks import Foster, NetworkForm, Single
from heatweave.run.prepare import RunOptions
from heatweave.run.runner import run
from heatweave.spice.reader import read
from heatweave.thermal.circuit import AMBIENT_NODE, PartPlan, SharedNode, ThermalCircuit

FIXTURES = Path(__file__).parent / "fixtures" / "cosim"
#: The acceptance target of the fast run path (issue "Fast electrothermal simulation").
TARGET_K = 0.05


def fixture(name: str) -> tuple[str, str]:
    return str(FIXTURES / f"{name}.cir"), str(FIXTURES / f"{name}.thermal.toml")


def resistor(path: str, network: NetworkForm, to: str = AMBIENT_NODE) -> PartPlan:
    model = tempmodels.get("linear").from_params({"tc1": 0.004}, 100.0, None)
    label = "ambient" if to == AMBIENT_NODE else to
    return PartPlan(path, "linear", model, network, to, label, None, None, 70.0, None)


def heat_only(path: str) -> PartPlan:
    return PartPlan(
        path, None, None, Single(2.0, 0.5), AMBIENT_NODE, "ambient", None, None, 70.0, None
    )


def thermal(
    *parts: PartPlan, ambient: object = 25.0, start: str = "cold", nodes=()
) -> ThermalCircuit:
    return ThermalCircuit(ambient, tuple(nodes), parts, (), start)  # type: ignore[arg-type]


SEPARATED = thermal(resistor("R1", Single(50.0, 0.002)))  # tau 0.1 s
CLOSE = thermal(resistor("R1", Single(50.0, 2e-5)))  # tau 1 ms

# (circuit, analyses, slowest source period, expected method, words in the reason)
CHOICES = [
    (SEPARATED, ["tran 10u 1"], 1e-3, "cosim", "separate"),
    (CLOSE, ["tran 10u 1"], 1e-3, "full", "fastest thermal time constant"),
    (SEPARATED, ["tran 10u 1"], None, "cosim", "ten transient steps"),
    (thermal(resistor("R1", Single(50.0, 2e-4))), ["tran 100u 1"], None, "full", "only"),
    (SEPARATED, ["op"], 1e-3, "full", "not a transient"),
    (SEPARATED, ["tran 10u 1", "op"], 1e-3, "full", "2 analyses"),
    (SEPARATED, ["tran 10u 1 0.5"], 1e-3, "cosim", "separate"),  # reported from tstart
    (thermal(resistor("R1", Single(50.0, 0.002)), heat_only("Q1")), ["tran 10u 1"], 1e-3,
     "full", "heat-only"),
    (thermal(resistor("R1", Single(50.0, 0.002)), ambient=((0.0, 25.0), (1.0, 40.0))),
     ["tran 10u 1"], 1e-3, "full", "ambient profile"),
    (thermal(resistor("R1", Single(50.0, 0.002)), start="steady"), ["tran 10u 1"], 1e-3,
     "full", "start"),
    (thermal(resistor("R1", Single(50.0, 0.0))), ["tran 10u 1"], 1e-3, "full", "instantly"),
    (thermal(resistor("R1", Foster(((10.0, 0.1),)), "hw_n_board"),
             nodes=[SharedNode("board", 30.0, 0.0, AMBIENT_NODE, "ambient")]),
     ["tran 10u 1"], 1e-3, "full", "instantly"),
]  # fmt: skip


@pytest.mark.parametrize(("circuit", "analyses", "period", "method", "words"), CHOICES)
def test_choose_method(circuit, analyses, period, method, words) -> None:
    got, reason = choose_method(circuit, analyses, period)
    assert got == method
    assert words in reason


@pytest.mark.parametrize(
    ("text", "want"),
    [
        ("tran 10u 1", Transient(10e-6, 1.0)),
        (".tran 1n 2m 0 5n uic", Transient(1e-9, 2e-3, 0.0, 5e-9, True)),
        ("TRAN 10U 100M 1M", Transient(10e-6, 0.1, 1e-3)),
        ("op", None),
        ("tran 10u", None),
        ("tran 10u {tstop}", None),
    ],
)
def test_transient_parse(text: str, want: Transient | None) -> None:
    got = Transient.parse(text)
    if want is None:
        assert got is None
        return
    assert got is not None
    assert (got.tstep, got.tstop, got.tstart) == pytest.approx(
        (want.tstep, want.tstop, want.tstart)
    )
    assert (got.tmax is None) == (want.tmax is None)
    assert got.tmax == (pytest.approx(want.tmax) if want.tmax is not None else None)
    assert got.uic == want.uic


@pytest.mark.parametrize(
    ("cards", "want"),
    [
        (["V1 in 0 SIN(0 1 1k)"], 1e-3),
        (["V1 in 0 SIN(0 1 1k)", "I2 a b sin(0 1m 50)"], 0.02),
        (["V1 in 0 PULSE(0 5 0 1u 1u 10u 20u)"], 20e-6),
        (["V1 in 0 PULSE(0 5 0 1u 2u 10u)"], 13e-6),
        (["V1 in 0 DC 5", "R1 a b SIN(0 1 1)"], None),
    ],
)
def test_source_time_scale(cards: list[str], want: float | None) -> None:
    got = source_time_scale(cards)
    assert got == (pytest.approx(want) if want is not None else None)


def test_window_power_closed_forms() -> None:
    # Mean of (A sin wt)^2 / R over whole periods is A^2 / (2R); for a ramp v = sqrt(t)
    # (P = t/R) the mean over [0, h] is h / (2R).
    r = np.array([10.0, 20.0])
    t = np.linspace(0.0, 3e-3, 3001)
    sine = 5.0 * np.sin(2 * np.pi * 1e3 * t)
    mean = window_power(t, np.vstack([sine, sine]), r)
    np.testing.assert_allclose(mean, 25.0 / (2 * r), rtol=1e-9)
    h = 0.01
    t = np.linspace(0.0, h, 20001)
    mean = window_power(t, np.vstack([np.sqrt(t), np.sqrt(t)]), r)
    np.testing.assert_allclose(mean, h / 2 / r, rtol=1e-8)


def test_model_bank_matches_one_by_one() -> None:
    # The vectorised evaluation must equal each model's own (tested against standards
    # in test_tempmodels.py), including models that cannot be grouped.
    linear = tempmodels.get("linear")
    rtd = tempmodels.get("rtd")
    models = [linear.from_params({"tc1": 0.004 * k}, 10.0 * k, None) for k in range(1, 6)]
    models += [rtd.from_params({}, 100.0, None), rtd.from_params({}, 1000.0, None)]
    models += [
        tempmodels.get("table").from_params({"ratio": ((-40.0, 0.96), (125.0, 1.05))}, 50.0, None)
    ]
    bank = ModelBank(models)
    temps = np.linspace(-20.0, 140.0, len(models))
    want_r = [m.resistance(float(t)) for m, t in zip(models, temps, strict=True)]
    want_s = [m.slope(float(t)) for m, t in zip(models, temps, strict=True)]
    np.testing.assert_allclose(bank.resistance(temps), want_r, rtol=1e-13)
    np.testing.assert_allclose(bank.slope(temps), want_s, rtol=1e-13)


@pytest.mark.parametrize(
    ("text", "kept"),
    [
        ("t\nV1 a 0 1\nR1 a 0 1\n.save v(a)\n.tran 1u 1m\n.end\n", "t\nV1 a 0 1\nR1 a 0 1\n.end\n"),
        ("t\nR1 a 0 1\n.op\n.ic v(a)=1\n.end\n", "t\nR1 a 0 1\n.ic v(a)=1\n.end\n"),
    ],
)
def test_plain_deck_drops_analyses_and_saves(text: str, kept: str) -> None:
    assert cosim.plain_deck(read(text)).write() == kept


def _worst_difference(fast: cosim.FastOutcome, full) -> float:
    worst = 0.0
    for part in fast.results.parts:
        ref = full.results.part(part.path)
        at = np.interp(fast.results.time, full.results.time, ref.temperature_series)
        worst = max(worst, float(np.abs(at - part.temperature_series).max()))
    return worst


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize("name", ["divider", "coupled", "nested", "local"])
def test_cosim_agrees_with_full_deck(name: str) -> None:
    deck, annotation = fixture(name)
    fast = cosim.run_auto(deck, annotation)
    assert fast.method == "cosim", fast.reason
    assert fast.trace is not None and fast.trace.windows > 5
    full = run(deck, annotation)
    assert _worst_difference(fast, full) < TARGET_K
    assert fast.results.time[-1] == pytest.approx(full.results.time[-1], rel=1e-6)
    for part in fast.results.parts:
        assert part.temperature > fast.results.ambient + 1.0  # really heated


@pytest.mark.ngspice
@pytest.mark.slow
def test_divider_steady_state_against_brentq() -> None:
    deck, annotation = fixture("divider_steady")
    fast = cosim.run(deck, annotation)
    r1 = fast.results.part("R1")
    assert r1.plan is not None and r1.plan.model is not None
    model, rth, cth = r1.plan.model, 50.0, 0.001
    v_rms2 = 14.142136**2 / 2

    def balance(t: float) -> float:
        r = model.resistance(t)
        return t - 25.0 - rth * v_rms2 * r / (r + 100.0) ** 2

    want = scipy.optimize.brentq(balance, 25.0, 200.0, xtol=1e-12)
    # The hot spot ripples at twice the drive frequency by P/(2 w C) around its mean;
    # the co-simulation follows the energy, so it may sit anywhere within that ripple.
    ripple = (want - 25.0) / rth / (2 * 2 * np.pi * 1e3 * cth)
    assert r1.temperature == pytest.approx(want, abs=ripple + 0.005)
    assert r1.resistance == pytest.approx(model.resistance(want), rel=1e-4)


@pytest.mark.ngspice
def test_forced_cosim_where_it_does_not_apply_is_a_usage_error(tmp_path: Path) -> None:
    deck, annotation = fixture("divider")
    with pytest.raises(UsageError, match="does not apply"):
        cosim.run_auto(deck, annotation, RunOptions(analyses=("op",)), method="cosim")


@pytest.mark.ngspice
def test_auto_falls_back_to_full_for_an_operating_point() -> None:
    deck, annotation = fixture("divider")
    outcome = cosim.run_auto(deck, annotation, RunOptions(analyses=("op",)))
    assert outcome.method == "full"
    assert outcome.full is not None
    assert "not a transient" in outcome.reason


@pytest.mark.ngspice
def test_strong_feedback_falls_back_to_the_full_deck() -> None:
    # A 1 k NTC (beta 3435) dissipating ~0.08 W into 150 K/W plus the board: the loop gain
    # bound sum_j Z_ij P_j |d ln R_j/dT| passes 0.8 in the first windows (windows.py).
    deck, annotation = fixture("feedback")
    outcome = cosim.run_auto(deck, annotation)
    assert outcome.method == "full"
    assert "loop gain" in outcome.reason
    assert outcome.full is not None
    with pytest.raises(UsageError, match="loop gain"):
        cosim.run_auto(deck, annotation, method="cosim")


@pytest.mark.ngspice
def test_allow_control_runs_the_full_deck_with_the_block() -> None:
    # Thermal tau 0.1 s against a 1 ms drive: auto would co-simulate, which cannot keep
    # the deck's .control block, so --allow-control sends the run to the full deck.
    deck, annotation = fixture("control")
    kept = cosim.run_auto(deck, annotation, RunOptions(allow_control=True))
    assert kept.method == "full" and ".control" in kept.reason
    assert kept.full is not None and "hw-control-block-ran" in kept.full.sim.log
    assert not any("dropped" in finding.message for finding in kept.findings)
    dropped = cosim.run_auto(deck, annotation)
    assert dropped.method == "cosim", dropped.reason
    assert any("dropped a .control block" in finding.message for finding in dropped.findings)


def test_cosim_refuses_to_keep_control_blocks() -> None:
    deck, annotation = fixture("control")
    with pytest.raises(UsageError, match=r"\.control"):
        cosim.run(deck, annotation, RunOptions(allow_control=True))
    with pytest.raises(UsageError, match=r"does not apply: \.control"):
        cosim.run_auto(deck, annotation, RunOptions(allow_control=True), method="cosim")
