"""The whole thermal network of a deck as one linear system, and its exact solution.

Every part's network enters through its two-port model (:meth:`NetworkForm.port_model`,
inputs ``(P, T_cold)``, outputs ``(T_hot, Q_cold)``); shared nodes add their heat capacity
and their resistance to their ``to`` node; ``[[path]]`` couplings add resistances.  The
result, for inputs ``u = (P_1 .. P_n, T_amb)`` (part dissipations in W in the order of
:attr:`ThermalCircuit.parts`, then the ambient temperature in degC), is::

    dz/dt = A z + B u          (states: network states, then shared nodes with cth > 0)
    T     = C z + D u          (outputs: every part's hot spot, then every shared node)

Shared nodes without heat capacity are algebraic; they are eliminated (Kron reduction of
the node equations), which may leave a direct term ``D`` from power to temperature.

:class:`Propagator` advances the state over a time step with the input held constant,
exactly (``z(t+h) = e^{Ah} z + h phi1(Ah) B u``), through the eigen-decomposition of ``A``
(real and negative for a passive RC network) or, when that is ill-conditioned, through the
matrix exponential of the augmented matrix.  Steady states come from one linear solve.
This module knows nothing about ngspice: the co-simulation and ``settle`` both build on it.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import numpy.typing as npt
import scipy.linalg
from scipy.sparse import csc_matrix, csr_matrix
from scipy.sparse.csgraph import connected_components
from scipy.sparse.linalg import splu

from heatweave.errors import InputError
from heatweave.thermal.circuit import AMBIENT_NODE, ThermalCircuit

FloatArray = npt.NDArray[np.float64]

#: Above this condition number of the eigenvector matrix the matrix exponential is used.
MAX_MODAL_CONDITION = 1e8


class ThermalAssemblyError(InputError):
    """The thermal network cannot be assembled into one well-posed linear system."""


@dataclass(frozen=True, slots=True)
class ThermalSystem:
    """``dz/dt = A z + B u``, ``T = C z + D u`` for ``u = (P_1 .. P_n, T_amb)``.

    ``parts`` are the part paths (one power input each, in order), ``outputs`` the names of
    the temperatures in ``T``: the part paths, then the shared-node labels.
    """

    a: FloatArray
    b: FloatArray
    c: FloatArray
    d: FloatArray
    states: tuple[str, ...]
    parts: tuple[str, ...]
    outputs: tuple[str, ...]

    @property
    def size(self) -> int:
        """Number of states."""
        return int(self.a.shape[0])

    def inputs(self, power: npt.ArrayLike, ambient: float) -> FloatArray:
        """The input vector ``u`` for part powers *power* (W) and *ambient* (degC)."""
        p = np.asarray(power, dtype=float).reshape(-1)
        if p.shape[0] != len(self.parts):
            raise ValueError(f"need {len(self.parts)} powers, got {p.shape[0]}")
        return np.concatenate([p, [float(ambient)]])

    def derivative(self, z: FloatArray, u: FloatArray) -> FloatArray:
        """``dz/dt`` at state *z* under input *u*."""
        return np.asarray(self.a @ z + self.b @ u)

    def temperatures(self, z: FloatArray, u: FloatArray) -> FloatArray:
        """Output temperatures (degC): part hot spots, then shared nodes."""
        return np.asarray(self.c @ z + self.d @ u)

    def steady_state(self, power: npt.ArrayLike, ambient: float) -> FloatArray:
        """The state at rest under constant power and ambient: ``z = -A^-1 B u``."""
        u = self.inputs(power, ambient)
        if self.size == 0:
            return np.zeros(0)
        return np.asarray(-solve(self.a, self.b @ u))

    def rest_state(self, ambient: float) -> FloatArray:
        """Every node at *ambient* with no power: the cold start."""
        return self.steady_state(np.zeros(len(self.parts)), ambient)

    @property
    def dc_gain(self) -> FloatArray:
        """Steady temperature rise of each output per watt of each part (K/W)."""
        bp = self.b[:, : len(self.parts)]
        dp = self.d[:, : len(self.parts)]
        if self.size == 0:
            return np.asarray(dp)
        return np.asarray(dp - self.c @ solve(self.a, bp))

    @property
    def time_constants(self) -> FloatArray:
        """Time constants of the network's modes (s), shortest first."""
        if self.size == 0:
            return np.zeros(0)
        rates = np.concatenate(
            [-np.real(np.linalg.eigvals(self.a[np.ix_(k, k)])) for k in components(self.a)]
        )
        return np.asarray(np.sort(1.0 / rates))

    @property
    def has_feedthrough(self) -> bool:
        """True when some temperature follows some power instantly (``D`` has a power term):
        a part, or the node it sits on, without heat capacity."""
        return bool(np.any(self.d[:, : len(self.parts)] != 0.0))

    def part_index(self, path: str) -> int:
        """Position of part *path* in the inputs and outputs (case-insensitive)."""
        lower = [p.lower() for p in self.parts]
        return lower.index(path.lower())


def assemble(circuit: ThermalCircuit) -> ThermalSystem:
    """The linear system of *circuit*'s whole thermal network (see the module docstring).

    Raises :class:`ThermalAssemblyError` when a network's cold end is an unknown node or
    some nodes have no resistive path to ambient (no unique steady state).
    """
    labels = [n.label for n in circuit.nodes]
    node_index = {n.node: k for k, n in enumerate(circuit.nodes)}
    n_parts = len(circuit.parts)
    n_nodes = len(circuit.nodes)
    ports = [part.network.port_model() for part in circuit.parts]
    offsets = np.cumsum([0] + [p.a.shape[0] for p in ports])
    n_x = int(offsets[-1])
    n_y = n_x + n_nodes
    amb = n_parts  # column of T_amb in u

    def where(node: str, what: str) -> int | None:
        if node == AMBIENT_NODE:
            return None
        if node not in node_index:
            raise ThermalAssemblyError(
                f"{what} connects to {node!r}, which is neither a shared node nor ambient",
                hint="point `to` at a [node.NAME] of the annotation, or at ambient",
            )
        return n_x + node_index[node]

    # E y' = F y + G u, y = (x, theta); E is 1 for network states, cth for shared nodes.
    e = np.ones(n_y)
    f = np.zeros((n_y, n_y))
    g = np.zeros((n_y, n_parts + 1))
    # Outputs as H y + K u before the algebraic nodes are eliminated.
    h = np.zeros((n_parts + n_nodes, n_y))
    k = np.zeros((n_parts + n_nodes, n_parts + 1))

    def add_cold(row_f: FloatArray, row_g: FloatArray, cold: int | None, gain: float) -> None:
        if cold is None:
            row_g[amb] += gain
        else:
            row_f[cold] += gain

    for i, (part, port) in enumerate(zip(circuit.parts, ports, strict=True)):
        cold = where(part.to, part.path)
        s = slice(int(offsets[i]), int(offsets[i + 1]))
        f[s, s] = port.a
        g[s, i] = port.b[:, 0]
        for r in range(s.start, s.stop):
            add_cold(f[r], g[r], cold, float(port.b[r - s.start, 1]))
        h[i, s] = port.c[0]
        k[i, i] = port.d[0, 0]
        add_cold(h[i], k[i], cold, float(port.d[0, 1]))
        if cold is not None:  # Q_cold feeds the shared node's heat balance
            f[cold, s] += port.c[1]
            g[cold, i] += port.d[1, 0]
            f[cold, cold] += port.d[1, 1]

    def conductance(a: int | None, b: int | None, rth: float) -> None:
        for one, other in ((a, b), (b, a)):
            if one is None:
                continue
            f[one, one] -= 1.0 / rth
            add_cold(f[one], g[one], other, 1.0 / rth)

    for j, shared in enumerate(circuit.nodes):
        e[n_x + j] = shared.cth
        conductance(n_x + j, where(shared.to, f"node {shared.label}"), shared.rth)
        h[n_parts + j, n_x + j] = 1.0
    for coupling in circuit.couplings:
        what = f"path {coupling.labels[0]} - {coupling.labels[1]}"
        conductance(where(coupling.a, what), where(coupling.b, what), coupling.rth)

    dyn = np.flatnonzero(e > 0)
    alg = np.flatnonzero(e <= 0)
    a_mat, b_mat, c_mat, d_mat = f[np.ix_(dyn, dyn)], g[dyn], h[:, dyn], k.copy()
    if alg.size:
        f_aa = f[np.ix_(alg, alg)]
        # y_alg = -F_aa^-1 (F_ad y_dyn + G_a u)
        try:
            solve_d = solve(f_aa, f[np.ix_(alg, dyn)])
            solve_u = solve(f_aa, g[alg])
        except np.linalg.LinAlgError:
            raise _floating(circuit, alg - n_x) from None
        a_mat = a_mat - f[np.ix_(dyn, alg)] @ solve_d
        b_mat = b_mat - f[np.ix_(dyn, alg)] @ solve_u
        c_mat = c_mat - h[:, alg] @ solve_d
        d_mat = d_mat - h[:, alg] @ solve_u
    scale = e[dyn][:, None]
    a_mat, b_mat = a_mat / scale, b_mat / scale
    if a_mat.size:
        try:
            solve(a_mat, np.ones(a_mat.shape[0]))
        except np.linalg.LinAlgError:
            raise _floating(circuit, np.arange(n_nodes)) from None
    names = [f"{part.path}:{s}" for part, port in zip(circuit.parts, ports, strict=True)
             for s in port.states]  # fmt: skip
    names += [f"node {label}" for label in labels]
    return ThermalSystem(
        np.ascontiguousarray(a_mat),
        np.ascontiguousarray(b_mat),
        np.ascontiguousarray(c_mat),
        np.ascontiguousarray(d_mat),
        tuple(names[int(i)] for i in dyn),
        tuple(p.path for p in circuit.parts),
        tuple(p.path for p in circuit.parts) + tuple(labels),
    )


def _floating(circuit: ThermalCircuit, which: npt.NDArray[np.intp]) -> ThermalAssemblyError:
    labels = ", ".join(circuit.nodes[int(j)].label for j in which if 0 <= j < len(circuit.nodes))
    return ThermalAssemblyError(
        f"the thermal network has no unique steady state (check nodes: {labels or 'all'})",
        hint="every shared node needs a resistive path to ambient",
    )


def components(a: FloatArray) -> list[npt.NDArray[np.intp]]:
    """The states of each independent block of *a* (parts that share no heat path)."""
    if a.size == 0:
        return []
    count, labels = connected_components(csr_matrix(a != 0), directed=False)
    return [np.flatnonzero(labels == k) for k in range(count)]


def solve(a: FloatArray, rhs: FloatArray) -> FloatArray:
    """``a^-1 rhs`` by sparse LU (thermal networks are sparse); raises ``LinAlgError``
    when *a* is singular."""
    try:
        lu = splu(csc_matrix(a))
    except RuntimeError as exc:  # "Factor is exactly singular"
        raise np.linalg.LinAlgError(str(exc)) from exc
    out = lu.solve(np.asarray(rhs, dtype=float))
    if not np.all(np.isfinite(out)):
        raise np.linalg.LinAlgError("singular matrix")
    return np.asarray(out)


def phi1(x: FloatArray) -> FloatArray:
    """``(e^x - 1) / x``, accurate near 0 (1 at 0)."""
    out = np.ones_like(x)
    small = np.abs(x) < 1e-8
    out[~small] = np.expm1(x[~small]) / x[~small]
    out[small] = 1.0 + x[small] / 2.0
    return out


@dataclass(slots=True)
class Propagator:
    """Exact advance of a :class:`ThermalSystem` over steps with constant input.

    ``advance(z, u, h)`` returns ``z(t + h)`` for ``dz/dt = A z + B u`` with ``u`` held.
    ``use_modal=False`` always takes the matrix exponential.  An input varying inside a
    step: :class:`heatweave.thermal.sampled.SampledResponse` on :attr:`modes`.
    """

    system: ThermalSystem
    use_modal: bool = True
    _modal: tuple[FloatArray, FloatArray, FloatArray] | None = field(default=None, init=False)
    _cache: dict[float, tuple[FloatArray, FloatArray]] = field(default_factory=dict, init=False)

    def __post_init__(self) -> None:
        a = self.system.a
        if a.size == 0 or not self.use_modal:
            return
        n = a.shape[0]
        rates, vectors, inverse = np.zeros(n), np.zeros((n, n)), np.zeros((n, n))
        for block in components(a):
            values, vecs = np.linalg.eig(a[np.ix_(block, block)])
            if np.any(np.abs(np.imag(values)) > 1e-9 * np.abs(values).max()):
                return
            vecs = np.real(vecs)
            if np.linalg.cond(vecs) > MAX_MODAL_CONDITION:
                return
            rates[block] = np.real(values)
            vectors[np.ix_(block, block)] = vecs
            inverse[np.ix_(block, block)] = np.linalg.inv(vecs)
        self._modal = (rates, vectors, inverse)

    @property
    def modal(self) -> bool:
        """True when steps go through the eigen-decomposition."""
        return self._modal is not None

    @property
    def modes(self) -> tuple[FloatArray, FloatArray, FloatArray] | None:
        """``(rates, V, V^-1)`` with ``A = V diag(rates) V^-1``, or ``None`` when the
        decomposition is not used (complex or ill-conditioned)."""
        return self._modal

    def advance(self, z: FloatArray, u: FloatArray, h: float) -> FloatArray:
        """The state after *h* seconds with input *u* held (see the class docstring)."""
        system = self.system
        if system.size == 0:
            return z
        forcing = system.b @ u
        if self._modal is not None:
            rates, vectors, inverse = self._modal
            w = inverse @ z
            w = np.exp(rates * h) * w + h * phi1(rates * h) * (inverse @ forcing)
            return np.asarray(vectors @ w)
        step, gain = self._exact(h)
        return np.asarray(step @ z + gain @ forcing)

    def _exact(self, h: float) -> tuple[FloatArray, FloatArray]:
        """``(e^{Ah}, int_0^h e^{As} ds)`` through the augmented matrix exponential."""
        key = float(h)
        if key not in self._cache:
            n = self.system.size
            aug = np.zeros((2 * n, 2 * n))
            aug[:n, :n] = self.system.a * h
            aug[:n, n:] = np.eye(n) * h
            full = scipy.linalg.expm(aug)
            self._cache[key] = (full[:n, :n], full[:n, n:])
        return self._cache[key]

    def response(
        self, z0: FloatArray, u: FloatArray, times: Sequence[float] | FloatArray
    ) -> FloatArray:
        """States at *times* (s, from 0) under constant *u*, one row per time."""
        return np.array([self.advance(z0, u, float(t)) for t in times])
