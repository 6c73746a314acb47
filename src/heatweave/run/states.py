"""Every stable steady state of a verified operating point, and what the reader is told.

A part whose resistance depends on its temperature can have more than one stable steady
state wherever its dissipation P(T) crosses the heat its path removes, (T - Ta) / Rth, more
than once with the right slopes: a PTC below its trip drive (cold and tripped), an NTC in
series with a load on a stiff supply (cold and hot), a table model with a step, even a
linear part with a negative tc1 behind a series resistance.  Which model can do so depends
on the circuit, so every such part is scanned, not a list of models.  A crossing where the
heat balance rises through zero (a linear negative tc1 straight across a supply has one
below its stable one's partner) is unstable and never a state.

First :func:`heatweave.run.unique.prove` tries to show that the operating point is the only
steady state (a bound, any number of parts, no simulation); where it does, nothing is
scanned and nothing said.  Otherwise the scans below run.

The scan holds parts at fixed temperatures with sources on their hot nodes; the current a
holding source takes is the heat surplus at that node (heat in minus heat out, with every
other part free), so its zeros are steady states and its slopes say which are stable:

* one part whose resistance depends on temperature (:func:`scan`): held at temperatures
  at most :data:`SCAN_STEP` apart (closer where its resistance changes fast, :func:`axis`)
  from the ambient up to :data:`SCAN_TOP` (or its model's range); with it held the rest of
  the thermal network is linear and the circuit electrical only, so the scan finds every
  state to within its step;
* two (:func:`joint`): held together on a grid of at most :data:`JOINT_POINTS` steps a
  side, every grid region where both surpluses change sign held again on a finer grid;
  with both held the rest is linear, so the scan finds every state to within its grid (two
  states closer than a coarse grid step to each other can merge); a state is stable when
  the Jacobian of the surpluses has negative diagonal and positive determinant;
* three or more (at most :data:`MAX_SCANNED`): each is held alone with the others free.
  That cannot decide: states the others reach only together are not seen.  A warning says
  so when a scan finds more than one state or a stretch where the surplus rises with the
  temperature (a loop gain above 1, the feedback several states need).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import numpy.typing as npt
from scipy import ndimage

from heatweave.emit.names import HELD_AT_ONCE, hold
from heatweave.errors import Finding, SimulatorError
from heatweave.run.diagnosis_decks import TIGHT, simulate_deck
from heatweave.run.unique import Bound, prove
from heatweave.spice.transform import insert_before_end, new_cards
from heatweave.thermal.balance import thermal_nodes

if TYPE_CHECKING:
    from heatweave.run.prepare import Prepared, RunOptions
    from heatweave.run.results import RunResults
    from heatweave.run.runaway import FloatArray
    from heatweave.simulators import Plot
    from heatweave.spice.hierarchy import DeckIndex
    from heatweave.thermal.circuit import PartPlan, ThermalCircuit

SCAN_STEP = 0.5  # K between held temperatures
SCAN_TOP = 1000.0  # degC: heatweave.run.runner.IMPLAUSIBLE_TEMPERATURE
LN_STEP = 0.02  # most change of ln R between held temperatures of a scan
FINEST = 0.01  # K: held temperatures are never closer
JOINT_POINTS = 60  # at most this many steps of the range per part on the joint grid
JOINT_LN = 0.15  # and at most this change of ln R between its temperatures
JOINT_FINE = 30  # steps per part of each finer grid (ln R changes four times less)
MAX_SCANNED = 6  # parts held one at a time, at most
_RISE = 1e-9  # W: a surplus rising by less is solver noise

BoolArray = npt.NDArray[np.bool_]


@dataclass(frozen=True, slots=True)
class State:
    """A steady state found by a scan: the held parts' temperatures, every thermal node's,
    and whether it is stable (whatever the heat capacities)."""

    held: tuple[float, ...]
    temps: FloatArray
    stable: bool

    @property
    def temperature(self) -> float:
        """The (first) held part's temperature."""
        return self.held[0]


@dataclass(frozen=True, slots=True)
class Scan:
    """What holding one part found: its states, and whether its surplus rises anywhere."""

    states: tuple[State, ...]
    rising: bool = False

    @property
    def stable(self) -> tuple[State, ...]:
        return tuple(s for s in self.states if s.stable)


def span(circuit: ThermalCircuit, part: PartPlan) -> tuple[float, float] | None:
    """The temperatures a part is held at: the ambient up to :data:`SCAN_TOP`, inside its
    model's range; ``None`` when that leaves nothing to scan."""
    assert part.model is not None
    low, high = float(circuit.ambient_at_start), SCAN_TOP
    found = part.model.valid_range
    if found is not None:
        low, high = max(low, found.low), min(high, found.high)
    return (low, high) if high > low + SCAN_STEP else None


def feedback_parts(circuit: ThermalCircuit) -> list[PartPlan]:
    """The parts whose resistance changes over the temperatures they would be held at."""
    found = []
    for part in circuit.parts:
        if part.model is None or (bounds := span(circuit, part)) is None:
            continue
        r = np.asarray(part.model.resistance(np.linspace(*bounds, 64)), dtype=float)
        if np.ptp(r) > 1e-12 * float(np.max(np.abs(r))):
            found.append(part)
    return found


def valid(circuit: ThermalCircuit, temps: FloatArray, *surplus: FloatArray) -> BoolArray:
    """Where every value is finite and every part's resistance positive (a mask)."""
    ok: BoolArray = np.all(np.isfinite(temps), axis=0)
    for values in surplus:
        ok &= np.isfinite(values)
    for i, part in enumerate(circuit.parts):
        if part.model is not None:
            ok &= np.asarray(part.model.resistance(temps[i]), dtype=float) > 0
    return ok


def axis(part: PartPlan, low: float, high: float, most: float, ln_step: float) -> FloatArray:
    """Temperatures to hold *part* at from *low* to *high*: at most *most* apart, and close
    enough that its resistance changes by at most *ln_step* (in ln R) between them, so a
    switching part's steep stretch is held densely; ends where the resistance does."""
    assert part.model is not None
    dense = np.linspace(low, high, max(int((high - low) / FINEST) + 1, 2))
    r = np.asarray(part.model.resistance(dense), dtype=float)
    bad = np.flatnonzero(~(np.isfinite(r) & (r > 0)))
    if bad.size:
        dense, r = dense[: max(int(bad[0]), 2)], r[: max(int(bad[0]), 2)]
    measure = np.maximum(np.abs(np.diff(np.log(np.abs(r) + 1e-300))) / ln_step,
                         np.diff(dense) / most)  # fmt: skip
    walked = np.concatenate(([0.0], np.cumsum(measure)))
    picks = np.searchsorted(walked, np.arange(0.0, walked[-1], 1.0))
    picks = np.unique(np.concatenate((picks, [len(dense) - 1])))
    return np.asarray(dense[picks], dtype=float)


def held_sweep(
    prepared: Prepared, options: RunOptions, parts: list[PartPlan], axes: list[FloatArray]
) -> tuple[FloatArray, FloatArray] | None:
    """ngspice with *parts* held at every combination of their *axes* (a nested DC sweep of
    an index each, the first innermost; a ``pwl`` of the index gives the temperature):
    every thermal node's temperature (nodes x points) and each held part's surplus (parts x
    points); ``None`` when ngspice fails."""
    circuit = prepared.emitted.circuit
    assert circuit is not None
    if len(parts) > HELD_AT_ONCE:  # their names are reserved for so many (emit.names)
        raise ValueError(f"at most {HELD_AT_ONCE} parts are held at once")
    cards, steps = [], []
    for k, (part, values) in enumerate(zip(parts, axes, strict=True)):
        pairs = [f"{i},{t:.12g}" for i, t in enumerate(values)]
        table = "".join(
            f"\n+ {', '.join(pairs[j : j + 8])}," for j in range(0, len(pairs), 8)
        ).rstrip(",")
        held = hold(k)
        cards += [
            f"{held.source} {part.node} {held.between} DC 0",
            f"{held.value} {held.between} 0 V = pwl(V({held.swept}),{table})",
            f"{held.index} {held.swept} 0 DC 0",
        ]
        steps.append(f"{held.index.lower()} 0 {len(values) - 1} 1")
    try:
        deck = insert_before_end(prepared.deck, new_cards([*cards, TIGHT]))
        sim = simulate_deck(prepared, options, deck, (f"dc {' '.join(steps)}",))
    except SimulatorError:
        return None
    plot: Plot = [p for p in sim.plots if p.kind == "dc"][-1]
    temps = np.array([np.real(np.asarray(plot[f"v({n})"])) for n in thermal_nodes(circuit)],
                     dtype=float)  # fmt: skip
    # Heat the holding source takes out of the node: the surplus there.
    surplus = np.array([np.real(np.asarray(plot[f"i({hold(k).source.lower()})"]))
                        for k in range(len(parts))], dtype=float)  # fmt: skip
    if temps.shape[1] != int(np.prod([len(a) for a in axes])):
        return None
    return temps, surplus


def scan(prepared: Prepared, options: RunOptions, part: PartPlan) -> Scan:
    """The steady states with *part* held at each temperature of :func:`span`, every other
    part free (exact to the step when no other part's resistance depends on temperature)."""
    circuit = prepared.emitted.circuit
    assert circuit is not None and part.model is not None
    bounds = span(circuit, part)
    if bounds is None:
        return Scan(())
    held = axis(part, *bounds, SCAN_STEP, LN_STEP)
    found = held_sweep(prepared, options, [part], [held])
    if found is None:
        return Scan(())
    temps, (surplus,) = found
    ok = valid(circuit, temps, surplus)
    end = int(np.argmin(ok)) if not ok.all() else len(ok)
    at_part = circuit.parts.index(part)
    states = []
    for k in range(1, end):
        a, b = surplus[k - 1], surplus[k]
        if a == 0 or np.sign(a) == np.sign(b):
            continue
        share = a / (a - b)
        at = temps[:, k - 1] + share * (temps[:, k] - temps[:, k - 1])
        states.append(State((float(at[at_part]),), at, bool(a > 0)))
    steps = np.diff(surplus[:end])
    rising = bool(np.any(steps > _RISE + 1e-6 * np.abs(surplus[1:end])))
    return Scan(tuple(states), rising)


def joint(prepared: Prepared, options: RunOptions, parts: list[PartPlan]) -> list[State] | None:
    """Every steady state of two parts held together (see the module docstring); ``None``
    when the scan cannot run."""
    circuit = prepared.emitted.circuit
    assert circuit is not None and len(parts) == 2
    bounds = [b for p in parts if (b := span(circuit, p)) is not None]
    if len(bounds) != 2:
        return None
    axes = [axis(p, lo, hi, (hi - lo) / JOINT_POINTS, JOINT_LN)
            for p, (lo, hi) in zip(parts, bounds, strict=True)]  # fmt: skip
    coarse = grid(prepared, options, parts, axes)
    if coarse is None:
        return None
    _, surplus, ok = coarse
    cells = mixed(surplus[0], ok) & mixed(surplus[1], ok)
    grown = ndimage.binary_dilation(cells, structure=np.ones((3, 3), dtype=bool))
    labels, count = ndimage.label(grown)
    states: list[State] = []
    rows = [circuit.parts.index(p) for p in parts]
    for box in ndimage.find_objects(labels)[:count]:
        assert box is not None
        rs, cs = box
        ends = [(axes[0][cs.start], axes[0][min(cs.stop, len(axes[0]) - 1)]),
                (axes[1][rs.start], axes[1][min(rs.stop, len(axes[1]) - 1)])]  # fmt: skip
        fine = [axis(p, lo, hi, (hi - lo) / JOINT_FINE, JOINT_LN / 4)
                for p, (lo, hi) in zip(parts, ends, strict=True)]  # fmt: skip
        local = grid(prepared, options, parts, fine)
        if local is None:
            continue
        apart = [float(np.max(np.diff(f))) for f in fine]
        for state in roots(*local, rows):
            if not any(close(state, s, apart) for s in states):
                states.append(state)
    return states


def grid(
    prepared: Prepared, options: RunOptions, parts: list[PartPlan], axes: list[FloatArray]
) -> tuple[FloatArray, FloatArray, BoolArray] | None:
    """:func:`held_sweep` of two parts as grids (second part's temperature along rows):
    temperatures (nodes x rows x columns), surpluses (2 x rows x columns), valid mask."""
    circuit = prepared.emitted.circuit
    assert circuit is not None
    if min(len(a) for a in axes) < 2:
        return None
    found = held_sweep(prepared, options, parts, axes)
    if found is None:
        return None
    shape = (len(axes[1]), len(axes[0]))
    temps = found[0].reshape((found[0].shape[0], *shape))
    surplus = found[1].reshape((2, *shape))
    return temps, surplus, valid(circuit, temps, *surplus)


def mixed(values: FloatArray, ok: BoolArray) -> BoolArray:
    """Grid cells (rows-1 x columns-1) whose four valid corners hold both signs."""
    corners = [values[:-1, :-1], values[1:, :-1], values[:-1, 1:], values[1:, 1:]]
    good = ok[:-1, :-1] & ok[1:, :-1] & ok[:-1, 1:] & ok[1:, 1:]
    high = np.maximum.reduce(corners)
    low = np.minimum.reduce(corners)
    return np.asarray(good & (high >= 0) & (low <= 0), dtype=bool)


def roots(temps: FloatArray, surplus: FloatArray, ok: BoolArray, rows: list[int]) -> list[State]:
    """The common zeros of both surpluses on a fine grid, one per cell where both change
    sign: the cell's linearisation solved, kept where it lies in the cell."""
    found = []
    cells = mixed(surplus[0], ok) & mixed(surplus[1], ok)
    for r, c in zip(*np.nonzero(cells), strict=True):
        base = temps[:, r, c]
        d0 = temps[:, r, c + 1] - base  # along the first part
        d1 = temps[:, r + 1, c] - base  # along the second
        h0, h1 = d0[rows[0]], d1[rows[1]]
        s = surplus[:, r : r + 2, c : c + 2]
        # J[i, j] = d surplus_i / d T_j over the cell (edge means).
        jac = np.array([
            [(s[i, :, 1] - s[i, :, 0]).mean() / h0, (s[i, 1, :] - s[i, 0, :]).mean() / h1]
            for i in range(2)
        ])  # fmt: skip
        if not np.isfinite(jac).all() or abs(np.linalg.det(jac)) == 0:
            continue
        centre = s[:, :, :].mean(axis=(1, 2))
        x, y = 0.5 + np.linalg.solve(jac, -centre) / (h0, h1)
        if not (-0.5 <= x <= 1.5 and -0.5 <= y <= 1.5):
            continue
        at = base + x * d0 + y * d1
        det = float(np.linalg.det(jac))
        stable = bool(jac[0, 0] < 0 and jac[1, 1] < 0 and det > 0)
        found.append(State((float(at[rows[0]]), float(at[rows[1]])), at, stable))
    return found


def close(a: State, b: State, steps: list[float]) -> bool:
    """True when two states lie within two grid steps of each other in every held part."""
    return all(abs(x - y) <= 2 * h for x, y, h in zip(a.held, b.held, steps, strict=True))


@dataclass(frozen=True, slots=True)
class Statement:
    """What :func:`statement` found: warnings, and the state to report instead (with why)
    when ngspice's operating point is not the one heatweave reports."""

    findings: tuple[Finding, ...] = ()
    instead: FloatArray | None = None
    why: str = ""
    how: str = ""
    text: str = ""  # the states found, in words, when there is an instead


NGSPICE = "ngspice's operating point, verified"
# Cooperative systems (heating one part never cools another) rise monotonically from cold
# to their lowest steady state; two PTCs in series are not one.
FROM_COLD = "(where a start from cold settles whenever heating either part only warms the other)"
HINT = (
    "a transient from cold (--tran) shows which one the circuit reaches; a disturbance "
    "(a surge, a hot start) can move it to another"
)


def statement(
    options: RunOptions, prepared: Prepared, results: RunResults, index: DeckIndex,
    source: str = NGSPICE,
) -> Statement:  # fmt: skip
    """Which stable steady states the operating point *results* has besides the one
    reported, in words (see the module docstring); *source* says where that one came from.
    Where :func:`heatweave.run.unique.prove` shows it is the only one, nothing is scanned."""
    circuit = prepared.emitted.circuit
    assert circuit is not None
    if results.analysis != "op":
        return Statement()
    parts = feedback_parts(circuit)
    if not parts:
        return Statement()
    bound = prove(circuit, index, results)
    if bound.proven:  # the only steady state: nothing to scan for
        return Statement()
    if len(parts) == 1:
        return single(options, prepared, results, parts[0])
    if len(parts) == 2:
        found = joint(prepared, options, parts)
        if found is not None:
            return pair(results, parts, found, source)
    return several(options, prepared, results, parts, source, bound)


def single(
    options: RunOptions, prepared: Prepared, results: RunResults, part: PartPlan
) -> Statement:
    """One part: its stable states; the lowest is the one reported (a start from cold
    settles there: the surplus is positive from the ambient up to it)."""
    stable = scan(prepared, options, part).stable
    if len(stable) < 2:
        return Statement()
    reported = results.part(part.path).temperature
    listed = ", ".join(f"{s.temperature:.4g} degC" for s in stable)
    text = f"{part.path} has {len(stable)} stable steady states ({listed})"
    nearest = min(stable, key=lambda s: abs(s.temperature - reported))
    if nearest is not stable[0]:
        why = f"ngspice's operating point landed on another of its stable states ({text})"
        how = "the lowest stable one, where it settles when switched on from cold"
        return Statement((), stable[0].temps, why, how, text)
    finding = Finding(
        "warning",
        f"{text}; the one reported, {reported:.4g} degC, is the lowest, where it settles "
        "when switched on from cold",
        part.location,
        HINT,
    )
    return Statement((finding,))


def pair(results: RunResults, parts: list[PartPlan], found: list[State], source: str) -> Statement:
    """Two parts: their stable states together; ngspice's verified operating point is
    reported, and the warning says whether it is the lowest in both."""
    stable = [s for s in found if s.stable]
    if len(stable) < 2:
        return Statement()
    names = [p.path for p in parts]
    listed = "; ".join(
        " with ".join(f"{n} {t:.4g} degC" for n, t in zip(names, s.held, strict=True))
        for s in stable
    )
    reported = tuple(results.part(n).temperature for n in names)
    lowest = [s for s in stable if all(s.held[i] <= o.held[i] for o in stable for i in (0, 1))]
    where = " and ".join(f"{n} at {t:.4g} degC" for n, t in zip(names, reported, strict=True))
    text = f"{names[0]} and {names[1]} have {len(stable)} stable steady states together ({listed})"
    nearest = min(stable, key=lambda s: float(np.max(np.abs(np.subtract(s.held, reported)))))
    if lowest and nearest is not lowest[0]:
        why = f"ngspice's operating point landed on another of their stable states ({text})"
        how = f"the lowest in both parts {FROM_COLD}"
        return Statement((), lowest[0].temps, why, how, text)
    if lowest:
        tail = f"is the lowest in both {FROM_COLD}"
    else:
        tail = (
            f"is {source}; none is the lowest in both parts, so which one a "
            "start from cold reaches depends on how fast each part heats"
        )
    finding = Finding("warning", f"{text}; the one reported, {where}, {tail}", parts[0].location,
                      HINT)  # fmt: skip
    return Statement((finding,))


def several(
    options: RunOptions, prepared: Prepared, results: RunResults, parts: list[PartPlan],
    source: str, bound: Bound,
) -> Statement:  # fmt: skip
    """Three or more parts (or two the joint scan could not hold): each held alone with
    the others free; a warning where that cannot decide (see the module docstring)."""
    count = len(parts)
    if count > MAX_SCANNED:
        text = (
            f"{count} annotated parts have resistances that depend on temperature: too many to "
            f"scan for other stable steady states, and the bound that proves a single one "
            f"does not hold here ({bound.why}), so the one reported ({source}) may not be "
            "the only one"
        )
        return Statement((Finding("warning", text, None, HINT),))
    findings = []
    doubtful = []
    for part in parts:
        found = scan(prepared, options, part)
        stable = found.stable
        if len(stable) >= 2:
            listed = ", ".join(f"{s.temperature:.4g} degC" for s in stable)
            reported = results.part(part.path).temperature
            findings.append(Finding(
                "warning",
                f"{part.path} has at least {len(stable)} stable steady states with the other "
                f"parts free ({listed}); the one reported, {reported:.4g} degC, is {source}",
                part.location,
                HINT,
            ))  # fmt: skip
        elif found.rising:
            doubtful.append(part.path)
    if findings or doubtful:
        if doubtful:
            one = len(doubtful) == 1
            reason = (
                f"the heat balance of {', '.join(doubtful)} rises with {'its' if one else 'their'}"
                " temperature somewhere (a loop gain above 1), the feedback such states need"
            )
        else:
            reason = "some have several even alone"
        findings.append(Finding(
            "warning",
            f"{count} annotated parts have resistances that depend on temperature; holding "
            "each alone with the others free cannot decide whether they have other stable "
            f"steady states together, and {reason}",
            None,
            HINT,
        ))  # fmt: skip
    return Statement(tuple(findings))
