"""A proof that an operating point is the circuit's only steady state, for any number of parts.

A steady state solves ``T = Ta + Z P(R(T))`` over the parts' temperatures: ``Z`` the
steady-state transfer matrix of the thermal network (W -> K, non-negative: the inverse of
the conductance matrix, an M-matrix, restricted to the parts), ``P`` the parts'
dissipations as the circuit sets them from all their resistances ``R``.  Two steady
states ``T1``, ``T2`` give ``T1 - T2 = Z (P(R1) - P(R2))``; a bound on how fast ``P`` can
change with ``ln R`` and ``ln R`` with ``T`` then shows ``T1 = T2``.

The electrical half holds for every circuit of resistors (any positive values), inductors,
capacitors and independent sources (at DC: shorts and opens), whatever its topology:

* ``M = dP/d(ln R)`` is ``diag(P) - 2 diag(V) Y diag(V)`` (compensation theorem: a change
  ``dR_j`` acts as a source ``I_j dR_j`` in series with part ``j``), with ``V`` the parts'
  voltages and ``Y`` the currents in the parts per volt inserted in series with each, the
  independent sources zeroed.  Such a network is reciprocal (``Y`` symmetric) and passive:
  the power inserted, ``e.Y e``, is what its resistors dissipate, at least the parts'
  ``sum R_k i_k^2``, so ``0 <= Y <= diag(1/R)`` and ``-diag(P) <= M <= diag(P)`` (Loewner
  order).  Hence ``|x.M y| <= |sqrt(P) x| |sqrt(P) y|`` for all ``x, y``.
* Along a straight path in ``ln R`` from the reported state (powers ``P*``), with every
  ``|d ln R_j| <= L``: ``d(sum P)/ds <= L sum P`` and ``d sqrt(P_i)/ds <= L sqrt(sum P)/2``,
  so over the whole box ``sum P <= sum P* e^L`` and
  ``sqrt(P_i) <= sqrt(P*_i) + sqrt(sum P*) (e^(L/2) - 1)``: the bound ``Pmax``.

The thermal half: the box of temperatures is from the ambient (every dissipation is at
least 0, every entry of ``Z`` too, so no steady state is colder) up to each part's top (1000
degC, its model's range, or where its resistance stops being positive); any steady state
in it lies below ``Ta + Z Pmax``, so the box is shrunk until that stops changing.  With
``lambda_j`` the largest ``|dR/dT| / R`` of part ``j`` over the box and ``s = sqrt(Pmax)``,
``T1 - T2 = Z M' E Lambda (T1 - T2)`` (``M'`` the mean of ``M`` along the path, ``|E| <= 1``
diagonal), so there is one steady state in the box when the *gain bound*

    g = min( |diag(s lambda) Z diag(s)|_2 ,  (lambda s).Z s )  <  1

(the spectral norm bounded by sqrt(|.|_1 |.|_inf), or computed where the parts are few; the
second form from ``|M'_ij| <= s_i s_j``).  For one part it is ``Rth Pmax max|dR/dT|/R``.

What is read, not proven: ``lambda_j``, the Lipschitz constant of ``ln R_j``, is read off
the model on a grid from the ambient up (at most :data:`GRID` K apart, coarser where a deck
has many distinct models, never fewer than :data:`LEAST_POINTS` points): each cell's
greatest of its ends' ``|dR/dT| / R`` and its secant, enlarged by :data:`SLOPE_MARGIN`.  That
is exact where ``|dR/dT| / R`` is monotone between grid points (a first-order TCR, a Beta
curve, an exponential are everywhere) and close to it for a smooth peak (a tc2 term, a
PTC's switch, where such a part's gain bound far exceeds 1 anyway); a table's knot between
grid points is seen through the cell's secant.  Given ``lambda``, ln R between grid points
is bounded by it.  The reported powers are taken as exact to :data:`POWER_MARGIN` and the
temperatures to ngspice's tolerance.  A circuit with any other element (a diode, a
controlled or behavioural source, a resistance that follows the circuit) is not covered:
the scans of :mod:`heatweave.run.states` decide there.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import numpy.typing as npt
from scipy.sparse import diags
from scipy.sparse.linalg import splu

from heatweave.errors import HeatweaveError
from heatweave.spice.cardparts import x_card_parts
from heatweave.spice.deck import Block, Card
from heatweave.spice.hierarchy import Resolved
from heatweave.spice.netlist import resistor_value, scope_params, top_funcs, top_params
from heatweave.thermal.balance import conductances

if TYPE_CHECKING:
    from scipy.sparse.linalg import SuperLU

    from heatweave.run.results import RunResults
    from heatweave.spice.hierarchy import DeckIndex, Scope
    from heatweave.tempmodels.base import TempModel
    from heatweave.thermal.circuit import ThermalCircuit

TOP = 1000.0  # degC: heatweave.run.states.SCAN_TOP (the scans' top, the same claim)
GRID = 0.01  # K between the temperatures a model is read at (at most)
MOST_POINTS = 100_001  # per model: 0.01 K apart over the widest range
LEAST_POINTS = 2_001  # per model, however many there are
BUDGET = 4_000_000  # temperatures read in all models together (then coarser, to LEAST)
MOST_MODELS = 5_000  # distinct models read, at most
ROUNDS = 100  # times the box is shrunk, at most (every box on the way is a valid one)
SLOPE_MARGIN = 1.05  # lambda read off the grid, enlarged by this
POWER_MARGIN = 0.01  # the reported powers' relative uncertainty (10x ngspice's reltol)
DENSE = 300  # parts up to which the spectral norm is computed exactly
#: Elements a circuit may hold for the proof: resistors, capacitors, inductors, their
#: couplings, independent sources (X instances are looked into).
LINEAR_PASSIVE = frozenset("RCLKVI")
FloatArray = npt.NDArray[np.float64]
SolvePower = Callable[[FloatArray], FloatArray]  # P -> Z P, see thermal_solver


@dataclass(frozen=True, slots=True)
class Bound:
    """What :func:`prove` found: whether the operating point is the only steady state, the
    gain bound (``inf`` where none was computed) and, when not proven, why, in words."""

    proven: bool
    gain: float = math.inf
    why: str = ""


def elements(index: DeckIndex) -> Iterator[tuple[str, Card, Resolved]]:
    """Every element of the circuit (inside subcircuit instances too): its path, card and
    where it stands; an ``X`` card whose definition is unknown is yielded as itself."""

    def walk(scope: Scope, prefix: str, chain: tuple[Card, ...], defs: tuple[Block, ...],
             seen: tuple[str, ...]) -> Iterator[tuple[str, Card, Resolved]]:  # fmt: skip
        for card, head in zip(scope.cards, scope.heads, strict=True):
            path = prefix + head
            if head[:1] not in "xX":
                yield path, card, Resolved(path, card, chain, defs)
                continue
            found = index.lookup_subckt(x_card_parts(card)[1], scope)
            if found is None or found[1].name in seen:
                yield path, card, Resolved(path, card, chain, defs)
                continue
            yield from walk(found[1], path + ".", (*chain, card), (*defs, found[0]),
                            (*seen, found[1].name))  # fmt: skip

    yield from walk(index.top, "", (), (), ())


def not_resistive(index: DeckIndex, circuit: ThermalCircuit) -> str | None:
    """``None`` when the circuit holds only resistors of fixed positive value, capacitors,
    inductors and independent sources, and every part is a resistor; else the first
    element that is not, in words."""
    if index.places:
        return "the deck has .if blocks heatweave cannot decide"
    for part in circuit.parts:
        if index.element_kind(part.path) != "R":
            return f"{part.path} is not a resistor"
    params, funcs = top_params(index), top_funcs(index)
    scoped: dict[tuple[int, ...], dict[str, float]] = {}
    for path, card, found in elements(index):
        letter = card.letter
        if letter not in LINEAR_PASSIVE:
            return f"{path} is not a resistor, capacitor, inductor or independent source"
        if letter != "R":
            continue
        seen = params
        if found.instances:
            key = tuple(map(id, found.instances))
            if key not in scoped:
                scoped[key] = scope_params(params, found, funcs)
            seen = scoped[key]
        try:
            ohms = resistor_value(card, seen, None, funcs).ohms
        except HeatweaveError:
            return f"{path}'s resistance is not a fixed value heatweave can read"
        if not ohms > 0:
            return f"{path}'s resistance is not positive"
    return None


@dataclass(frozen=True, slots=True)
class Curve:
    """A model read on a grid from the ambient up: cumulative least and greatest ln R and
    greatest |dR/dT| / R (the Lipschitz constant of ln R) from the grid's start to each
    point, and the grid's spacing."""

    t: FloatArray
    low: FloatArray
    high: FloatArray
    steep: FloatArray
    step: float


def curve(model: TempModel, ambient: float, points: int = MOST_POINTS) -> Curve | None:
    """*model* read from *ambient* up to its top at *points* temperatures at most, no closer
    than :data:`GRID` (see the module docstring); ``None`` when its resistance is not
    positive and finite at the ambient.  Each cell's |dR/dT| / R is the greatest of its
    ends' and of its secant, enlarged by :data:`SLOPE_MARGIN`."""
    top = TOP
    if model.valid_range is not None:
        top = min(top, model.valid_range.high)
    count = int(min(max((top - ambient) / GRID, 1.0), points - 1)) + 1
    t = np.linspace(ambient, max(top, ambient + GRID), count)
    r = np.asarray(model.resistance(t), dtype=float)
    slope = np.asarray(model.slope(t), dtype=float)
    good = np.isfinite(r) & (r > 0) & np.isfinite(slope)
    end = len(t) if good.all() else int(np.argmin(good))
    if end < 2:
        return None
    t, ln = t[:end], np.log(r[:end])
    step = float(t[1] - t[0])
    ends = np.abs(slope[:end] / r[:end])
    cells = np.maximum(np.maximum(ends[:-1], ends[1:]), np.abs(np.diff(ln)) / step)
    steep = np.concatenate(([ends[0]], cells)) * SLOPE_MARGIN
    return Curve(t, np.minimum.accumulate(ln), np.maximum.accumulate(ln),
                 np.maximum.accumulate(steep), step)  # fmt: skip


def prove(circuit: ThermalCircuit, index: DeckIndex, results: RunResults) -> Bound:
    """Whether the operating point *results* is the only steady state of the circuit with
    every part between the ambient and its top (see the module docstring)."""
    reason = not_resistive(index, circuit)
    if reason is not None:
        return Bound(False, why=f"the proof needs a circuit of resistors and independent "
                                f"sources only, and {reason}")  # fmt: skip
    parts = circuit.parts
    models = {id(p.model): p.model for p in parts if p.model is not None}
    if len(models) > MOST_MODELS:
        return Bound(False, why=f"its parts have {len(models)} different models, more than "
                                f"the {MOST_MODELS} it reads")  # fmt: skip
    ambient = float(results.ambient)
    points = int(min(max(BUDGET // max(len(models), 1), LEAST_POINTS), MOST_POINTS))
    curves = {key: curve(m, ambient, points) for key, m in models.items()}
    rows = [curves[id(p.model)] if p.model is not None else None for p in parts]
    if any(p.model is not None and c is None for p, c in zip(parts, rows, strict=True)):
        return Bound(False, why="a part's resistance is not positive at the ambient")
    by_path = {p.path.lower(): p for p in results.parts}
    found = [by_path[p.path.lower()] for p in parts]
    temps = np.array([p.temperature for p in found], dtype=float)
    powers = np.array([p.power for p in found], dtype=float)
    try:
        solve = thermal_solver(circuit)
    except (RuntimeError, ValueError):
        return Bound(False, why="the thermal network does not reach the ambient everywhere")
    return certify(solve, rows, [p.model for p in parts], temps, powers, ambient)


def certify(
    solve: SolvePower, rows: list[Curve | None], models: list[TempModel | None],
    temps: FloatArray, powers: FloatArray, ambient: float,
) -> Bound:  # fmt: skip
    """The proof itself (see the module docstring), on the thermal network *solve*, each
    part's model (*rows* read on a grid; ``None``: a fixed resistance) and the reported
    state: temperatures *temps*, dissipations *powers*."""
    if not (np.isfinite(temps).all() and np.isfinite(powers).all()):
        return Bound(False, why="the operating point has values that are not finite")
    with np.errstate(divide="ignore", invalid="ignore"):
        ln_star = np.array([math.log(m.resistance(float(t))) if m is not None else 0.0
                            for m, t in zip(models, temps, strict=True)])  # fmt: skip
    tops = np.array([c.t[-1] if c is not None else math.inf for c in rows])
    if np.any(temps > tops + 1e-6 * np.abs(tops)) or not np.isfinite(ln_star).all():
        return Bound(False, why="the operating point lies beyond a part's model")
    box = Box(rows, ln_star, 1e-3 * np.abs(temps) + 1e-3)
    up = np.maximum(powers, 0.0) * (1 + POWER_MARGIN) + 1e-15
    total = float(up.sum())
    high = tops.copy()
    for _ in range(ROUNDS):
        spread, _steep = box.ranges(high)
        most = power_bound(up, total, spread)
        if not np.isfinite(most).all():
            return Bound(False, why="a part's resistance may change past what a float "
                                    "holds within the bound")  # fmt: skip
        lowered = np.minimum(high, ambient + solve(most))
        if np.any(temps > lowered + 1e-6 * (1 + np.abs(lowered))):
            return Bound(False, why="the bound does not enclose the operating point")
        settled = bool(np.all(high - lowered <= 1e-6 * (1 + np.abs(high))))
        high = lowered
        if settled:
            break
    spread, steep = box.ranges(high)
    most = power_bound(up, total, spread)
    if not np.isfinite(most).all():
        return Bound(False, why="a part's resistance may change past what a float holds "
                                "within the bound")  # fmt: skip
    gain = gain_bound(solve, np.sqrt(most), steep, len(rows))
    if gain < 1.0:
        return Bound(True, gain)
    warmest = float(np.max(high))
    return Bound(False, gain, f"its bound on the loop gain up to {warmest:.4g} degC is "
                              f"{gain:.3g}, not below 1")  # fmt: skip


class Box:
    """The parts' ln R over a box of temperatures from the ambient up, part by part."""

    def __init__(self, rows: list[Curve | None], ln_star: FloatArray, slack: FloatArray) -> None:
        self.ln_star = ln_star
        # How far T* may be from the state ngspice solved (its tolerance) and how far ln R
        # may stray between grid points: both in kelvin, turned into ln R by the slope.
        self.slack = slack
        self.groups: dict[int, tuple[Curve, npt.NDArray[np.intp]]] = {}
        members: dict[int, list[int]] = {}
        for j, c in enumerate(rows):
            if c is not None:
                members.setdefault(id(c), []).append(j)
                self.groups[id(c)] = (c, np.array([], dtype=np.intp))
        for key, found in members.items():
            self.groups[key] = (self.groups[key][0], np.array(found, dtype=np.intp))

    def ranges(self, high: FloatArray) -> tuple[float, FloatArray]:
        """The greatest distance in ln R of any part from its reported value over the box up
        to *high*, and each part's greatest |dR/dT| / R there."""
        spread, steep = 0.0, np.zeros(len(high))
        for c, at in self.groups.values():
            k = np.minimum(np.searchsorted(c.t, high[at], side="left"), len(c.t) - 1)
            steep[at] = c.steep[k]
            star = self.ln_star[at]
            far = np.maximum(np.maximum(c.high[k] - star, star - c.low[k]), 0.0)
            spread = max(spread, float(np.max(far + steep[at] * (self.slack[at] + c.step))))
        return spread, steep


def power_bound(up: FloatArray, total: float, spread: float) -> FloatArray:
    """Each part's greatest dissipation anywhere in a box whose ln R lies within *spread*
    of the reported state (powers *up*, summing to *total*)."""
    if spread / 2 > _LARGEST_EXPONENT:  # beyond a float: no bound (a tc1 of 1e10 /K)
        return np.full(len(up), math.inf)
    root = np.sqrt(up) + math.sqrt(total) * math.expm1(spread / 2)
    with np.errstate(over="ignore"):
        return np.asarray(np.minimum(root**2, total * np.exp(spread)), dtype=float)


#: The greatest x whose exp(x) a float holds.
_LARGEST_EXPONENT = math.log(np.finfo(float).max)


def thermal_solver(circuit: ThermalCircuit) -> SolvePower:
    """``P -> Z P`` (the parts' rises from their dissipations), refusing a thermal network
    whose conductance matrix is not an M-matrix (then ``Z`` need not be positive)."""
    matrix = conductances(circuit).tocsc()
    off = matrix - diags(matrix.diagonal())
    if off.nnz and float(off.data.max()) > 0:
        raise ValueError("a conductance is negative")
    lu: SuperLU = splu(matrix)
    size, count = matrix.shape[0], len(circuit.parts)

    def apply(power: FloatArray) -> FloatArray:
        full = np.zeros(size)
        full[:count] = power
        rise = np.asarray(lu.solve(full), dtype=float)[:count]
        if not np.isfinite(rise).all():
            raise ValueError("singular")
        return rise

    apply(np.ones(count))  # a network with an island cut off from the ambient fails here
    return apply


def gain_bound(solve: SolvePower, s: FloatArray, steep: FloatArray, count: int) -> float:
    """The smaller of the two gain bounds of the module docstring."""
    v = steep * s
    u = solve(s)
    rank_one = float(v @ u)
    rows_max = float(np.max(v * u))  # |A|_inf of A = diag(v) Z diag(s): Z >= 0
    cols_max = float(np.max(s * solve(v)))  # |A|_1 (Z symmetric)
    gain = min(rank_one, math.sqrt(rows_max * cols_max))
    if count <= DENSE:
        z = np.column_stack([solve(e) for e in np.eye(count)])
        gain = min(gain, float(np.linalg.norm(v[:, None] * z * s[None, :], 2)) * (1 + 1e-9))
    return gain
