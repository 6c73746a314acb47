"""The assembled thermal network and its exact advance, against independent references.

References: scipy.integrate.solve_ivp on the same ODE and on ODEs written out by hand from
the nodal heat balance (C dT/dt = P - sum (T - T_k)/R_k, every textbook of heat transfer
by lumped capacitances, e.g. Incropera, Fundamentals of Heat and Mass Transfer, ch. 5.1-5.2),
numpy.linalg.solve of a conductance matrix written by hand, and the first-order step
response T = T_amb + P R (1 - exp(-t/RC)) (same chapter).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.integrate

from heatweave.networks import Cauer, Foster, NetworkForm, Single
from heatweave.thermal.circuit import (
    AMBIENT_NODE,
    Coupling,
    PartPlan,
    SharedNode,
    ThermalCircuit,
    shared_node,
)
from heatweave.thermal.solver import Propagator, ThermalAssemblyError, assemble

AMBIENT = 25.0


def part(path: str, network: NetworkForm, to: str = "ambient") -> PartPlan:
    """A heat-only part plan on *network* (the solver does not look at the model)."""
    node = AMBIENT_NODE if to == "ambient" else shared_node(to)
    return PartPlan(path, None, None, network, node, to, None, None, 70.0, None)


def board(label: str = "board", rth: float = 30.0, cth: float = 5.0) -> SharedNode:
    return SharedNode(label, rth, cth, AMBIENT_NODE, "ambient")


def circuit(parts: list[PartPlan], nodes: list[SharedNode], couplings=()) -> ThermalCircuit:
    return ThermalCircuit(AMBIENT, tuple(nodes), tuple(parts), tuple(couplings), "cold")


MIXED = circuit(
    [
        part("R1", Cauer(((5.0, 0.02), (15.0, 0.3))), "board"),
        part("R2", Foster(((12.0, 0.01), (40.0, 0.4))), "sink"),
        part("R3", Single(80.0, 0.004)),
    ],
    [board(), SharedNode("sink", 8.0, 40.0, shared_node("board"), "board")],
    [Coupling(shared_node("board"), AMBIENT_NODE, 100.0, ("board", "ambient"))],
)


def ivp(a, b, z0, u, t):
    """solve_ivp of dz/dt = A z + B u(t) to time *t* (tight tolerances)."""
    sol = scipy.integrate.solve_ivp(
        lambda s, z: a @ z + b @ u(s), (0.0, t), z0, method="Radau", rtol=1e-11, atol=1e-12
    )
    return sol.y[:, -1]


@pytest.mark.parametrize("use_modal", [True, False])
@pytest.mark.parametrize("h", [1e-4, 0.01, 0.3, 5.0, 200.0])
def test_advance_matches_solve_ivp(use_modal: bool, h: float) -> None:
    # Reference: scipy.integrate.solve_ivp (Radau) on the assembled ODE.
    system = assemble(MIXED)
    prop = Propagator(system, use_modal=use_modal)
    assert prop.modal == use_modal
    z0 = system.rest_state(AMBIENT) + np.linspace(0.5, 3.0, system.size)
    u = system.inputs([0.3, 1.2, 0.05], AMBIENT)
    got = prop.advance(z0, u, h)
    want = ivp(system.a, system.b, z0, lambda s: u, h)
    np.testing.assert_allclose(got, want, rtol=1e-8, atol=1e-8)


def test_steady_state_against_hand_conductance_matrix() -> None:
    # Two single-stage parts on a board node: nodal analysis written out by hand,
    # G T = P + G_amb T_amb, solved with numpy.linalg.solve.
    r1, r2, rb = 50.0, 80.0, 30.0
    net = circuit(
        [part("R1", Single(r1, 0.01), "board"), part("R2", Single(r2, 0.02), "board")],
        [board(rth=rb)],
    )
    system = assemble(net)
    p1, p2 = 0.4, 0.25
    g = np.array(
        [
            [1 / r1, 0.0, -1 / r1],
            [0.0, 1 / r2, -1 / r2],
            [-1 / r1, -1 / r2, 1 / r1 + 1 / r2 + 1 / rb],
        ]
    )
    want = np.linalg.solve(g, np.array([p1, p2, AMBIENT / rb]))
    z = system.steady_state([p1, p2], AMBIENT)
    got = system.temperatures(z, system.inputs([p1, p2], AMBIENT))
    np.testing.assert_allclose(got, want, rtol=1e-12)
    np.testing.assert_allclose(system.dc_gain[:, :2] @ [p1, p2] + AMBIENT, want, rtol=1e-12)


@pytest.mark.parametrize(("rth", "cth", "power"), [(50.0, 0.01, 0.25), (200.0, 2e-3, 0.05)])
def test_single_rc_step_response(rth: float, cth: float, power: float) -> None:
    # Standard first-order response: T = T_amb + P R (1 - exp(-t / (R C))).
    system = assemble(circuit([part("R1", Single(rth, cth))], []))
    prop = Propagator(system)
    tau = rth * cth
    times = np.array([0.0, 0.1, 0.5, 1.0, 3.0, 10.0]) * tau
    states = prop.response(system.rest_state(AMBIENT), system.inputs([power], AMBIENT), times)
    got = states[:, 0]
    want = AMBIENT + power * rth * (1.0 - np.exp(-times / tau))
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12)
    assert system.time_constants[0] == pytest.approx(tau, rel=1e-12)


@pytest.mark.parametrize("second", ["single", "cauer"])
def test_two_parts_on_one_shared_node_against_hand_ode(second: str) -> None:
    # Hand-built nodal ODE: C1 T1' = P1 - (T1 - Tb)/R1; part 2 either one stage or a
    # two-stage Cauer ladder (C2a, R2a, C2b, R2b); Cb Tb' = flows in - (Tb - Ta)/Rb.
    r1, c1, rb, cb = 40.0, 0.01, 20.0, 1.0
    r2a, c2a, r2b, c2b = 10.0, 0.002, 30.0, 0.05
    net2: NetworkForm = Single(r2a, c2a) if second == "single" else Cauer(((r2a, c2a), (r2b, c2b)))
    net = circuit(
        [part("R1", Single(r1, c1), "board"), part("R2", net2, "board")], [board(rth=rb, cth=cb)]
    )
    system = assemble(net)
    p = np.array([0.5, 0.8])
    ta = AMBIENT

    def hand(t: float, y: np.ndarray) -> np.ndarray:
        if second == "single":
            t1, t2, tb = y
            return np.array(
                [
                    (p[0] - (t1 - tb) / r1) / c1,
                    (p[1] - (t2 - tb) / r2a) / c2a,
                    ((t1 - tb) / r1 + (t2 - tb) / r2a - (tb - ta) / rb) / cb,
                ]
            )
        t1, t2, t3, tb = y
        return np.array(
            [
                (p[0] - (t1 - tb) / r1) / c1,
                (p[1] - (t2 - t3) / r2a) / c2a,
                ((t2 - t3) / r2a - (t3 - tb) / r2b) / c2b,
                ((t1 - tb) / r1 + (t3 - tb) / r2b - (tb - ta) / rb) / cb,
            ]
        )

    y0 = np.full(3 if second == "single" else 4, ta)
    t_end = 0.7
    sol = scipy.integrate.solve_ivp(hand, (0, t_end), y0, method="Radau", rtol=1e-11, atol=1e-12)
    want = sol.y[:, -1]
    prop = Propagator(system)
    u = system.inputs(p, ta)
    temps = system.temperatures(prop.advance(system.rest_state(ta), u, t_end), u)
    # outputs: T_hot of R1, R2, then the board; the Cauer inner node is a state only.
    np.testing.assert_allclose(temps, [want[0], want[1], want[-1]], rtol=1e-9)


def test_node_without_capacity_is_eliminated_and_gives_feedthrough() -> None:
    # A Foster part on a node with cth = 0: the node follows the power at once,
    # T_node = T_amb + Rb P (steady algebra), so the system has a direct term.
    net = circuit([part("R1", Foster(((10.0, 0.1),)), "board")], [board(rth=30.0, cth=0.0)])
    system = assemble(net)
    assert system.has_feedthrough
    assert system.d[1, 0] == pytest.approx(30.0)
    assert not assemble(MIXED).has_feedthrough


def test_unknown_cold_node_is_an_error() -> None:
    bad = circuit([part("R1", Single(10.0, 1.0), "nowhere")], [])
    with pytest.raises(ThermalAssemblyError, match="nowhere"):
        assemble(bad)
