"""A fold's critical drive, placed by the drive that makes each temperature a steady state.

The continuation (:mod:`heatweave.run.runaway`) brackets the fold by sweeping the drive
``lambda`` that scales every injected dissipation, but near a flat fold ngspice's sweep
stalls on points just past it that still pass the heat balance, so the branch's end lies
late by up to ngspice's own accuracy in the balance (README, runaway).

With one annotated part held at temperature ``T`` (a source on its thermal node; the drive
at 0, so nothing else heats), ngspice gives its full dissipation ``P(T)``.  ``T`` is a steady
state at drive ``lambda`` exactly when ``T - Ta = Z lambda P(T)``, ``Z`` the part's driving-
point thermal resistance, so ``lambda(T) = (T - Ta) / (Z P(T))``: no root find, whatever
the circuit.  Along the stable branch from cold ``lambda`` rises with ``T``; the fold is its
first maximum, found by sweeps of the held temperature, each zooming in on the last's
maximum.  ``lambda`` is flat there, so its value is known to ngspice's accuracy in ``P``
(reltol :data:`heatweave.run.diagnosis_decks.TIGHT`) however coarsely ``T`` is.
Where ``lambda(T)`` only rises (a pole, or a fold beyond the scan) there is no maximum here
and the continuation's value stands.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Protocol

import numpy as np
import numpy.typing as npt

from heatweave.emit.names import fix_source
from heatweave.errors import SimulatorError
from heatweave.spice.hierarchy import global_names, top_level_node
from heatweave.spice.netlist import card_nodes
from heatweave.spice.transform import insert_before_end, new_cards
from heatweave.thermal.balance import conductances, thermal_nodes
from heatweave.thermal.circuit import AMBIENT_NODE, PartPlan, ThermalCircuit

if TYPE_CHECKING:
    from heatweave.simulators import Plot
    from heatweave.spice.deck import Deck
    from heatweave.spice.hierarchy import DeckIndex

FloatArray = npt.NDArray[np.float64]

SCAN_POINTS = 200  # held temperatures from ambient to twice the continuation's rise
ZOOM_POINTS = 40
ZOOM_LEVELS = 5  # each narrows the bracket ZOOM_POINTS / 2 times: 20^5 ~ 3e6 in all


class Sweeps(Protocol):
    """What the search needs of :class:`heatweave.run.runaway.Continuation`."""

    circuit: ThermalCircuit
    deck: Deck

    def run(self, deck: Deck, analyses: tuple[str, ...]) -> tuple[Plot, ...]: ...


def terminals(part: PartPlan, index: DeckIndex) -> tuple[str, str]:
    """The two top-level node names of a resistor part, as ngspice names them."""
    resolved = index.resolve(part.path)
    assert resolved is not None
    found = card_nodes(resolved.card, index)
    globals_ = global_names(index) | {AMBIENT_NODE}
    a, b = (top_level_node(resolved, n, globals_) for n in found[:2])
    return a, b


def voltage(plot: Plot, node: str) -> FloatArray:
    """Node *node*'s voltage along *plot* (zeros for ground)."""
    if node in ("0", "gnd"):
        return np.zeros(len(np.asarray(plot.scale_values)))
    return np.real(np.asarray(plot[f"v({node})"])).astype(float)


def driving_point(circuit: ThermalCircuit) -> tuple[list[str], FloatArray]:
    """Steady-state thermal impedances between all thermal nodes (K/W), ambient as ground."""
    inverse: FloatArray = np.linalg.inv(conductances(circuit).toarray()).astype(np.float64)
    return thermal_nodes(circuit), inverse


def held_drives(
    sweeps: Sweeps, index: DeckIndex, lo: float, hi: float, count: int
) -> tuple[FloatArray, FloatArray]:
    """``(T, lambda(T))`` with the sole part held from *lo* to *hi* degC in *count* steps;
    ``lambda`` is NaN where the part's resistance or dissipation is not positive."""
    part = sweeps.circuit.parts[0]
    assert part.model is not None
    card = f"{fix_source(0)} {part.node} 0 DC {lo:.15g}"
    step = (hi - lo) / count
    analysis = f"dc {fix_source(0).lower()} {lo:.15g} {hi:.15g} {step:.15g}"
    plot = sweeps.run(insert_before_end(sweeps.deck, new_cards([card])), (analysis,))[-1]
    held = np.real(np.asarray(plot.scale_values)).astype(float)
    a, b = terminals(part, index)
    drop = voltage(plot, a) - voltage(plot, b)
    resistance = np.asarray(part.model.resistance(held), dtype=float)
    names, z = driving_point(sweeps.circuit)
    row = names.index(part.node)
    with np.errstate(divide="ignore", invalid="ignore"):
        power = drop * drop / resistance
        lam = (held - sweeps.circuit.ambient_at_start) / (z[row, row] * power)
    lam[~((resistance > 0) & (power > 0) & np.isfinite(lam))] = np.nan
    return held, lam


def first_peak(lam: FloatArray) -> int | None:
    """Index of the first local maximum of *lam* (rising before it), ``None`` without one
    or where a NaN comes first."""
    for k in range(1, len(lam) - 1):
        if not np.isfinite(lam[k + 1]):
            return None
        if lam[k + 1] < lam[k]:
            return k if lam[k] > lam[k - 1] else None
    return None


def fold_drive(sweeps: Sweeps, index: DeckIndex, hottest: float) -> tuple[float, FloatArray] | None:
    """``(lambda*, thermal node temperatures there)`` at the first maximum of ``lambda(T)``
    of a circuit with one resistor part, scanned from ambient to twice the rise to
    *hottest* (the continuation's last point); ``None`` with other parts, without a maximum
    there, or where ngspice fails on a held temperature."""
    parts = sweeps.circuit.parts
    if len(parts) != 1 or parts[0].model is None:
        return None
    ambient = sweeps.circuit.ambient_at_start
    rise = max(hottest - ambient, 1.0)
    try:
        held, lam = held_drives(sweeps, index, ambient, ambient + 2 * rise, SCAN_POINTS)
        k = first_peak(lam)
        for _ in range(ZOOM_LEVELS):
            if k is None:
                return None
            held, lam = held_drives(sweeps, index, held[k - 1], held[k + 1], ZOOM_POINTS)
            k = int(np.nanargmax(lam))
            k = min(max(k, 1), len(lam) - 2)
    except SimulatorError:
        return None
    top = int(np.nanargmax(lam))
    peak = float(lam[top])
    names, z = driving_point(sweeps.circuit)
    column = z[:, names.index(parts[0].node)]
    power = (held[top] - ambient) / (column[names.index(parts[0].node)] * peak)
    return peak, ambient + column * peak * power
