"""The heat balance every reported steady state is held to (heatweave.thermal.balance).

References: a conductance network solved by hand (nodal heat balance, sum (T_i - T_j)/R_ij
= P_i, as in any text on lumped thermal networks, e.g. Incropera, Fundamentals of Heat and
Mass Transfer, ch. 3.1, from memory), the assembled state-space solver of
heatweave.thermal.solver (an independent code path: port models, Kron reduction), and, in
the property test, stock ngspice through heatweave run on random small circuits.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from heatweave.errors import ThermalRunawayError
from heatweave.networks import Cauer, Foster, NetworkForm, Single
from heatweave.run import runner
from heatweave.tempmodels import get
from heatweave.thermal.balance import check_state
from heatweave.thermal.circuit import (
    AMBIENT_NODE,
    Coupling,
    PartPlan,
    SharedNode,
    ThermalCircuit,
    shared_node,
)
from heatweave.thermal.solver import assemble

AMBIENT = 25.0


def part(path: str, network: NetworkForm, to: str = "ambient", model: str | None = None,
         params: dict[str, float] | None = None) -> PartPlan:  # fmt: skip
    node = AMBIENT_NODE if to == "ambient" else shared_node(to)
    temp = get(model).from_params(params or {}, 100.0, None) if model else None
    return PartPlan(path, model, temp, network, node, to, None, None, 70.0, None, 100.0)


# Part A 10 K/W to the board, part C 20 K/W to the sink, board 5 K/W and sink 8 K/W to
# ambient, a path of 40 K/W between board and sink; P_A = 1 W, P_C = 2 W.  By hand:
#   board: b/5 + (b - s)/40 = 1,  sink: s/8 + (s - b)/40 = 2  =>  9b - s = 40, 6s - b = 80
#   => b = 320/53 K, s = 9b - 40, a = b + 10 K, c = s + 40 K.
HAND = ThermalCircuit(
    AMBIENT,
    (
        SharedNode("board", 5.0, 1.0, AMBIENT_NODE, "ambient"),
        SharedNode("sink", 8.0, 0.0, AMBIENT_NODE, "ambient"),
    ),
    (
        part("A", Cauer(((4.0, 0.1), (6.0, 1.0))), "board"),
        part("C", Foster(((20.0, 3.0),)), "sink"),
    ),
    (Coupling(shared_node("board"), shared_node("sink"), 40.0, ("board", "sink")),),
    "cold",
)
_B = 320.0 / 53.0
HAND_TEMPS = [AMBIENT + _B + 10.0, AMBIENT + 9 * _B, AMBIENT + _B, AMBIENT + 9 * _B - 40.0]


def test_hand_network_balances() -> None:
    verdict = check_state(HAND, HAND_TEMPS, [1.0, 2.0], AMBIENT)
    assert verdict.ok, verdict.reason()
    assert np.max(np.abs(verdict.residual)) < 1e-12


def test_hand_network_agrees_with_the_assembled_solver() -> None:
    system = assemble(HAND)
    state = system.steady_state([1.0, 2.0], AMBIENT)
    temps = system.temperatures(state, system.inputs([1.0, 2.0], AMBIENT))
    assert temps == pytest.approx(HAND_TEMPS, abs=1e-9)


@pytest.mark.parametrize("node", [0, 1, 2, 3])
@pytest.mark.parametrize("off", [-0.5, 0.5])
def test_a_state_half_a_kelvin_off_fails(node: int, off: float) -> None:
    temps = list(HAND_TEMPS)
    temps[node] += off
    verdict = check_state(HAND, temps, [1.0, 2.0], AMBIENT)
    assert not verdict.ok and "heat balance fails" in verdict.reason()


def test_ngspice_accuracy_passes() -> None:
    # Every temperature off by ngspice's reltol (1e-3 relative) at most still passes.
    temps = [t * (1 + 0.9e-3 * s) for t, s in zip(HAND_TEMPS, (1, -1, 1, -1), strict=True)]
    assert check_state(HAND, temps, [1.0, 2.0], AMBIENT).ok


def test_non_positive_resistance_is_never_a_result() -> None:
    # A linear part at R0 (1 + tc1 dT) with tc1 = 0.004 at -250 degC: R = 100 (1 - 1.1) < 0.
    circuit = ThermalCircuit(
        -300.0, (), (part("R", Single(10.0, 1.0), model="linear", params={"tc1": 0.004}),),
        (), "cold",
    )  # fmt: skip
    verdict = check_state(circuit, [-250.0], [5.0], -300.0)
    assert not verdict.ok and "resistance" in verdict.reason()


def test_colder_than_ambient_with_positive_power_is_refused() -> None:
    # Balanced by construction (rise = Rth P with P < 0 is impossible here): T below the sink
    # while every dissipation is positive.
    circuit = ThermalCircuit(AMBIENT, (), (part("H", Single(10.0, 1.0)),), (), "cold")
    verdict = check_state(circuit, [AMBIENT - 5.0], [0.0], AMBIENT)
    assert not verdict.ok and "colder than the ambient" in verdict.reason()


def test_heat_only_part_with_negative_dissipation_is_warned_of() -> None:
    circuit = ThermalCircuit(AMBIENT, (), (part("Q", Single(10.0, 1.0)),), (), "cold")
    verdict = check_state(circuit, [AMBIENT - 10.0], [-1.0], AMBIENT)
    assert verdict.ok
    assert verdict.warnings and "negative dissipation" in verdict.warnings[0].message


# ------------------------------------------------------------------ property: random circuits

MODELS = {
    "linear": "tc1 = {tc:.6g}",
    "quadratic": "tc1 = {tc:.6g}\ntc2 = -1e-6",
    "exponential": "tce = {tce:.6g}",
    "ntc-beta": "beta = 3500",
}


@st.composite
def circuits(draw: st.DrawFn) -> tuple[str, str]:
    """A deck of 1 to 3 annotated resistors on one supply (series or to ground), some on a
    shared board node, some coupled, with a drive kept below runaway."""
    count = draw(st.integers(1, 3))
    volts = draw(st.floats(0.5, 5.0))
    lines = ["random electrothermal circuit", f"V1 n0 0 DC {volts:.6g}"]
    note = ["schema = 1", "[ambient]", f"temperature = {draw(st.floats(-20.0, 60.0)):.6g}"]
    board = draw(st.booleans())
    if board:
        note += ["[node.board]", f"rth = {draw(st.floats(2.0, 30.0)):.6g}", "cth = 2.0"]
    for k in range(count):
        ohms = draw(st.floats(50.0, 2000.0))
        series = draw(st.booleans()) and k + 1 < count
        a, b = f"n{k}", (f"n{k + 1}" if series else "0")
        lines.append(f"R{k} {a} {b} {ohms:.6g}")
        if series:
            lines.append(f"RL{k} n{k + 1} 0 {draw(st.floats(50.0, 500.0)):.6g}")
        model = draw(st.sampled_from(sorted(MODELS)))
        keys = MODELS[model].format(tc=draw(st.floats(-2e-3, 4e-3)), tce=draw(st.floats(-0.3, 0.5)))
        note += [f"[part.R{k}]", f'model = "{model}"', keys,
                 f"rth = {draw(st.floats(5.0, 80.0)):.6g}", "cth = 0.1"]  # fmt: skip
        if board and draw(st.booleans()):
            note.append('to = "board"')
    if board and draw(st.booleans()):
        note += ["[[path]]", 'between = ["board", "ambient"]',
                 f"rth = {draw(st.floats(10.0, 200.0)):.6g}"]  # fmt: skip
    lines += [".op", ".end"]
    return "\n".join(lines) + "\n", "\n".join(note) + "\n"


@settings(
    max_examples=12, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(case=circuits())
def test_every_reported_steady_state_balances(tmp_path: Path, case: tuple[str, str]) -> None:
    deck_text, note_text = case
    deck, note = tmp_path / "r.cir", tmp_path / "r.thermal.toml"
    deck.write_text(deck_text)
    note.write_text(note_text)
    try:
        outcome = runner.run(str(deck), str(note), runner.RunOptions())
    except ThermalRunawayError:
        return  # a refusal in words is an allowed answer; a wrong number is not
    circuit = outcome.prepared.emitted.circuit
    assert circuit is not None
    results = outcome.results
    powers = [results.part(p.path).power for p in circuit.parts]
    # Independent of check_state: the assembled solver's steady state at the reported powers.
    system = assemble(circuit)
    state = system.steady_state(powers, results.ambient)
    expected = system.temperatures(state, system.inputs(powers, results.ambient))
    reported = [results.part(p.path).temperature for p in circuit.parts]
    reported += [results.nodes[n.label] for n in circuit.nodes]
    tolerance = [1e-3 * abs(t) + 0.02 for t in expected]
    assert np.all(np.abs(np.array(reported) - expected) <= tolerance), (deck_text, note_text)
