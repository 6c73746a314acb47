"""The warm-up of ``settle``: the thermal transient from cold under cycle-averaged powers.

Each step holds the cycle-averaged powers constant and advances the linear thermal
network exactly (:class:`~heatweave.thermal.solver.Propagator`); the powers follow the
temperatures (Heun's predictor-corrector).  The curve is the envelope of the cycle means:
the ripple within a period is not in it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import numpy.typing as npt

from heatweave.thermal.circuit import ThermalCircuit
from heatweave.thermal.solver import Propagator, ThermalSystem

FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True, slots=True)
class Envelope:
    """The warm-up from cold with cycle-averaged powers: temperatures against time."""

    time: FloatArray = field(repr=False)
    parts: dict[str, FloatArray] = field(repr=False)
    nodes: dict[str, FloatArray] = field(repr=False)


def envelope_times(system: ThermalSystem, stop: float, points: int) -> FloatArray:
    """Times for the warm-up curve: 0, then geometric from a fifth of the fastest
    thermal time constant (or stop/1e4) to *stop*."""
    first = stop / 1e4
    if system.size:
        first = min(max(first, float(system.time_constants[0]) / 5.0), stop / 2.0)
    return np.concatenate([[0.0], np.geomspace(first, stop, points)])


def warm_up(system: ThermalSystem, ambient: float, circuit: ThermalCircuit,
            powers_at: Callable[[FloatArray], FloatArray], stop: float,
            points: int) -> Envelope:  # fmt: skip
    """The thermal transient from cold, powers re-evaluated as the temperatures change.

    Each step holds the cycle-averaged powers constant and advances the network exactly;
    the powers are those at the step's start and at its predicted end, averaged (Heun's
    predictor-corrector, second order in the step), each from *powers_at* (the
    cycle-averaged powers at the temperatures of every output: an electrical simulation of
    the periods at those temperatures).
    """
    propagate = Propagator(system)
    times = envelope_times(system, stop, points)
    z = system.rest_state(ambient)
    n = len(circuit.parts)

    def temperatures(state: FloatArray, power: FloatArray) -> FloatArray:
        return system.temperatures(state, system.inputs(power, ambient))

    def powers(state: FloatArray, guess: FloatArray) -> FloatArray:
        return powers_at(temperatures(state, guess))

    def advance(state: FloatArray, power: FloatArray, h: float) -> FloatArray:
        return propagate.advance(state, system.inputs(power, ambient), h)

    p_now = powers(z, np.zeros(n))
    rows = [temperatures(z, p_now)]
    for h in np.diff(times):
        p_end = powers(advance(z, p_now, float(h)), p_now)
        z = advance(z, 0.5 * (p_now + p_end), float(h))
        p_now = powers(z, p_end)
        rows.append(temperatures(z, p_now))
    table = np.array(rows)
    return Envelope(
        times,
        {part.path: table[:, k] for k, part in enumerate(circuit.parts)},
        {node.label: table[:, n + j] for j, node in enumerate(circuit.nodes)},
    )
