"""The thermal network's own response to a transient's powers, to check the simulator's.

A transient's temperatures come from ngspice integrating the thermal capacitors fed by the
heat sources of the emitted deck.  The network is linear, so given the dissipation ngspice
computed at its own time points (straight lines between them) its temperatures follow
exactly (:class:`heatweave.thermal.sampled.SampledResponse`).  Where ngspice's temperatures
differ from these by more than its own tolerance, its integration of the thermal network is
not to be trusted at that step (see the README, "How exact ``--method full`` is").
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

from heatweave.thermal.circuit import ThermalCircuit
from heatweave.thermal.sampled import SampledResponse
from heatweave.thermal.solver import Propagator, ThermalAssemblyError, assemble

FloatArray = npt.NDArray[np.float64]


def network_response(
    circuit: ThermalCircuit, time: FloatArray, powers: FloatArray, ambient: FloatArray
) -> FloatArray | None:
    """Every output temperature (parts, then shared nodes; rows) at every *time*, for part
    *powers* (rows, in the circuit's order) and the *ambient* series, from the circuit's
    start (cold: at rest at the first ambient; steady: at rest under the first powers).
    ``None`` when the network has no well-conditioned modes to solve it with."""
    try:
        system = assemble(circuit)
        response = SampledResponse(Propagator(system))
    except (ValueError, ThermalAssemblyError):
        return None
    first = float(ambient[0])
    if circuit.start == "steady":
        z0 = system.steady_state(powers[:, 0], first)
    else:
        z0 = system.rest_state(first)
    inputs = np.vstack([powers, ambient[None, :]])
    _, outputs = response.run(np.asarray(z0, dtype=np.float64), time, inputs)
    return np.asarray(outputs, dtype=np.float64)
