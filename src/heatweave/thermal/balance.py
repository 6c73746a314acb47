"""Is a steady state the circuit's?  The heat balance of the whole thermal network.

In a steady state no heat is stored: at every thermal node (each part's hot spot, each
shared node) the heat leaving through the conductances equals the heat injected there::

    sum_j G_ij (T_i - T_j) = P_i       (P_i: the part's dissipation, 0 at a shared node)

with ``G`` the steady conductances (a part's network counts with its total Rth, shared
nodes and ``[[path]]`` couplings with theirs) and the ambient a fixed temperature.
:func:`check_state` holds a reported state to that, with the reported powers, to the
accuracy ngspice solves to: every temperature is known to ``eps = RELTOL |T| + ABSTOL_T``
(ngspice's default ``reltol`` and ``vntol``, 1 V = 1 degC), every electrical power to
``2 RELTOL |P|``, and a resistor's power moves with its temperature by at most
``P |dR/dT| / R`` (at a fixed voltage or current; any circuit around it lies in between).
The residual at node ``i`` may therefore be::

    |r_i| <= sum_j |G_ij| eps_j + P_i |dR/dT|_i / R_i eps_i + 2 RELTOL |P_i| + ABSTOL_P

Beside the balance, a state is refused when it cannot be physical: a resistance at or below
zero, a non-finite value, or a node colder than the ambient while no dissipation is
negative (heat flows only downhill, so with every source of heat positive no node can be
colder than the sink).  A heat-only part with a negative dissipation gets a warning.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy.sparse import csc_matrix, csr_matrix
from scipy.sparse.linalg import splu

from heatweave.errors import Finding
from heatweave.tempmodels.base import TempModel
from heatweave.thermal.circuit import ThermalCircuit

FloatArray = npt.NDArray[np.float64]

RELTOL = 1e-3  # ngspice's default reltol
ABSTOL_T = 1e-6  # K: ngspice's default vntol, in degC
ABSTOL_P = 1e-12  # W


def thermal_nodes(circuit: ThermalCircuit) -> list[str]:
    """Hot-spot nodes of the parts, then shared nodes (the order of every array here)."""
    return [p.node for p in circuit.parts] + [n.node for n in circuit.nodes]


def conductances(circuit: ThermalCircuit) -> csr_matrix:
    """The steady conductance matrix (W/K) over :func:`thermal_nodes`, ambient as ground
    (sparse: a deck may annotate a hundred thousand parts)."""
    nodes = thermal_nodes(circuit)
    where = {n: i for i, n in enumerate(nodes)}
    entries: list[tuple[int, int, float]] = []

    def branch(a: str, b: str, rth: float) -> None:
        for x, y in ((a, b), (b, a)):
            if x in where:
                entries.append((where[x], where[x], 1.0 / rth))
                if y in where:
                    entries.append((where[x], where[y], -1.0 / rth))

    for part in circuit.parts:
        branch(part.node, part.to, part.network.total_rth)
    for shared in circuit.nodes:
        branch(shared.node, shared.to, shared.rth)
    for coupling in circuit.couplings:
        branch(coupling.a, coupling.b, coupling.rth)
    size = len(nodes)
    rows, cols, values = zip(*entries, strict=True) if entries else ((), (), ())
    return csr_matrix((values, (rows, cols)), shape=(size, size))  # duplicates are summed


@dataclass(frozen=True, slots=True)
class Verdict:
    """What :func:`check_state` found: the balance residuals, what is wrong, warnings."""

    labels: tuple[str, ...]
    residual: FloatArray  # W at each thermal node: heat out minus heat in
    tolerance: FloatArray  # W allowed there
    error: FloatArray  # K: reported temperature minus the one the powers give
    problems: tuple[str, ...]
    warnings: tuple[Finding, ...] = ()

    @property
    def ok(self) -> bool:
        """True when the state balances and nothing in it is unphysical."""
        return not self.problems

    def reason(self) -> str:
        """Everything wrong with the state, in words."""
        return "; ".join(self.problems)


def check_state(
    circuit: ThermalCircuit,
    temps: Sequence[float] | FloatArray,
    powers: Sequence[float] | FloatArray,
    ambient: float,
    *,
    accuracy: float = 0.0,
    reltol: float = RELTOL,
) -> Verdict:
    """Hold one steady state to the heat balance and to physics (module docstring).

    *temps* are in :func:`thermal_nodes` order (degC), *powers* per part (W), *ambient* the
    sink's temperature (degC); *accuracy* (K) widens every temperature's uncertainty when the
    state comes from an iteration stopped at that tolerance (``settle``'s ``--tol``) or a
    deck that loosens ngspice's ``vntol``; *reltol* is the deck's ``reltol`` when looser.
    """
    labels = tuple(p.path for p in circuit.parts) + tuple(n.label for n in circuit.nodes)
    t = np.asarray(temps, dtype=float)
    p_parts = np.asarray(powers, dtype=float)
    n_parts = len(circuit.parts)
    injected = np.concatenate([p_parts, np.zeros(len(circuit.nodes))])
    problems: list[str] = []
    warnings: list[Finding] = []
    if not (np.all(np.isfinite(t)) and np.all(np.isfinite(p_parts)) and math.isfinite(ambient)):
        bad = [labels[i] for i in range(len(t)) if not math.isfinite(float(t[i]))]
        bad += [labels[i] for i in range(n_parts) if not math.isfinite(float(p_parts[i]))]
        problems.append(f"non-finite temperature or dissipation ({', '.join(bad) or 'ambient'})")
        empty = np.full(len(labels), np.nan)
        return Verdict(labels, empty, empty, empty, tuple(problems))
    g = conductances(circuit)
    theta = t - ambient
    residual = g @ theta - injected
    eps = reltol * np.abs(t) + ABSTOL_T + accuracy
    slope = np.zeros(len(labels))
    groups: dict[TempModel, list[int]] = {}  # parts with equal models, evaluated together
    for i, part in enumerate(circuit.parts):
        if part.model is not None:
            groups.setdefault(part.model, []).append(i)
    for members in groups.values():
        model = circuit.parts[members[0]].model
        assert model is not None
        at = t[members]
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            ohms = np.asarray(model.resistance(at), dtype=float)
        # not above zero, or past every float (an NTC near absolute zero): no physical value
        negative = [members[k] for k in np.flatnonzero(~((ohms > 0) & np.isfinite(ohms)))]
        for i in negative[:3]:
            part = circuit.parts[i]
            problems.append(
                f"{part.path}'s resistance at {t[i]:.4g} degC is "
                f"{float(model.resistance(float(t[i]))):.4g} ohm: its {part.model_name} "
                "model has no physical value there"
            )
        safe = np.where(ohms > 0, ohms, np.inf)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            slope[members] = np.abs(p_parts[members] * np.asarray(model.slope(at))) / safe
    tolerance = abs(g) @ eps + slope * eps + 2 * reltol * np.abs(injected) + ABSTOL_P
    try:
        error = np.asarray(splu(csc_matrix(g)).solve(residual)) if len(labels) else residual
    except RuntimeError:  # singular: some node has no path to ambient
        error = np.full(len(labels), np.nan)
    worst = int(np.argmax(np.abs(residual) / tolerance)) if len(labels) else 0
    if len(labels) and abs(residual[worst]) > tolerance[worst]:
        problems.append(
            f"the heat balance fails at {labels[worst]}: {abs(residual[worst]):.4g} W "
            f"{'more' if residual[worst] > 0 else 'less'} leaves than is dissipated there "
            f"(allowed {tolerance[worst]:.2g} W); the reported temperature is "
            f"{abs(error[worst]):.4g} K {'above' if error[worst] > 0 else 'below'} the one "
            "its reported powers give"
        )
    warnings.extend(negative_heat(circuit, p_parts))
    if np.all(p_parts >= -ABSTOL_P) and len(labels):
        coldest = int(np.argmin(theta + eps))
        if theta[coldest] + eps[coldest] < 0:
            problems.append(
                f"{labels[coldest]} at {t[coldest]:.4g} degC is colder than the ambient "
                f"({ambient:.4g} degC) although no part dissipates a negative power"
            )
    return Verdict(labels, residual, tolerance, error, tuple(problems), tuple(warnings))


def negative_heat(circuit: ThermalCircuit, powers: Sequence[float] | FloatArray) -> list[Finding]:
    """A warning for each heat-only part whose dissipation (W, per part) is negative."""
    found = []
    for part, power in zip(circuit.parts, powers, strict=True):
        if part.model is None and power < -ABSTOL_P:
            found.append(
                Finding(
                    "warning",
                    f"{part.path} is a heat-only part with a negative dissipation "
                    f"({power:.4g} W): it delivers power to the circuit, so heatweave "
                    "cools it by that much",
                    part.location,
                    "check the orientation of its terminals (power is V*I into the part), "
                    "or leave a source out of the annotation",
                )
            )
    return found
