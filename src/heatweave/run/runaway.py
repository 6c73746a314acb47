"""Thermal runaway: explain why an electrothermal run has no (physical) answer.

Self-heating is a feedback loop: dissipation heats a part, its resistance changes, and so
does its dissipation.  With loop gain ``g = Rth * dP/dT`` below one the loop settles; where
``g`` reaches one the steady state folds over (a saddle-node) and beyond it no nearby steady
state exists: an NTC across a stiff voltage source, a PTC fed by a current source.

Method (continuation in a drive parameter):

1. Every part's injected dissipation is scaled by a drive ``lambda``: in the emitted deck
   each ``Bhw_p_<name> 0 <hot node> I = <expr>`` becomes ``I = V(hw_drive)*(<expr>)``, with
   ``Vhw_drive hw_drive 0 DC 0``.  ngspice sweeps it (``dc Vhw_drive 0 1 0.01``); a DC sweep
   starts each point from the previous solution, so it follows the stable branch.
2. The branch is lost where the sweep stops converging, gives non-finite values, or jumps:
   a temperature step more than :data:`JUMP_RATIO` times the previous one (and above
   :data:`JUMP_FLOOR`).  Near a fold steps grow like ``1/sqrt(lambda* - lambda)``, a factor
   of about 2.4 between the last two points at most; a jump to a far branch is far larger.
3. The last interval is swept again in :data:`FINE_STEPS` steps, starting on the branch
   (``.nodeset`` of the thermal nodes at the last good point), and again around the last
   point on the branch, until the drive is known to :data:`DRIVE_TOL` of itself.  Before
   a pole (a loop gain that stays up as the part heats: a positive TCR on a current source)
   the temperature grows like ``1/(lambda* - lambda)``, so fast that a coarse point still on
   the branch looks like a jump; where the fine sweep passes it, the branch goes on.
4. At the last good point each part's loop gain is ``lambda * Z_ii * dP_i/dT_i``: ``Z`` the
   driving-point thermal resistances of the steady-state thermal network (own path, shared
   nodes, couplings), ``dP/dT`` by central differences of two ngspice solutions with the
   part temperatures held fixed (sources on the hot nodes) at +-:data:`FD_STEP` K.  The part
   with the largest gain is named; the largest eigenvalue of ``lambda Z J`` is the loop gain
   of the whole circuit.
   Where one resistor part folds over, the fold's drive is placed again from held part
   temperatures (:mod:`heatweave.run.fold`, :func:`polished`): the sweep can stall just past
   a flat fold on points that pass the heat balance.
5. For a deck of linear elements with one independent source, dissipation scales with the
   square of the source, so the critical source value is ``sqrt(lambda*)`` times the deck's.
6. A model defined over a limited range (the RTD's Callendar-Van Dusen polynomial, IEC
   60751: -200 to 850 degC) also ends the branch where a part leaves that range: beyond it
   the formula is an extrapolation, and the polynomial even bends back, giving ngspice a
   spurious far root to land on.  The drive at which the part reaches the range's end is
   interpolated between the sweep points on either side; the loop gain reported is the
   one at full dissipation with the part at that end, the last temperature where the
   model means something.  At or above 1 the heating still outruns the thermal path where
   the model stops: a runaway out of the model's range.  Below 1 the part just runs hot;
   the run stands, with the warning of :func:`heatweave.run.results.range_findings`.

A transient whose temperatures pass :data:`heatweave.run.runner.IMPLAUSIBLE_TEMPERATURE` or
turn non-finite is reported with the part and the time it passed that (and its ``tmax``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
import numpy.typing as npt

from heatweave.emit.names import DRIVE_SOURCE as DRIVE_SOURCE_CARD
from heatweave.emit.names import fix_source, power_source
from heatweave.errors import SimulatorError, ThermalRunawayError
from heatweave.run.diagnosis import HINT, Diagnosis, RunawayError, beyond_bound
from heatweave.run.diagnosis_decks import TIGHT as TIGHT  # kept here for its callers
from heatweave.run.diagnosis_decks import driven_deck as driven_deck
from heatweave.run.diagnosis_decks import simulate_deck
from heatweave.run.fold import driving_point as driving_point  # kept here for its callers
from heatweave.run.fold import fold_drive, terminals
from heatweave.run.fold import voltage as _voltage
from heatweave.run.results import IMPLAUSIBLE_TEMPERATURE, growth
from heatweave.run.sources import single_source
from heatweave.spice.deck import Deck
from heatweave.spice.transform import insert_before_end, new_cards
from heatweave.thermal.balance import check_state, thermal_nodes
from heatweave.thermal.circuit import ThermalCircuit

if TYPE_CHECKING:
    from heatweave.emit.emitter import Inputs
    from heatweave.run.prepare import Prepared, RunOptions
    from heatweave.run.results import RunResults
    from heatweave.simulators import Plot
    from heatweave.spice.hierarchy import DeckIndex

FloatArray = npt.NDArray[np.float64]

DRIVE_SOURCE = DRIVE_SOURCE_CARD.lower()
COARSE_STEPS = 100
FINE_STEPS = 100
JUMP_RATIO = 4.0
JUMP_FLOOR = 0.25  # K: smaller steps are never taken for a jump
FD_STEP = 0.1  # K
# The branch end (a fold, a pole) is located to this share of its drive: refinement goes
# on, FINE_STEPS at a time, at most MAX_LEVELS deep.
DRIVE_TOL = 1e-3
MAX_LEVELS = 6
# A fold placed from held temperatures (run/fold.py) replaces the continuation's end when it
# lies within this share of it and a verified state exists POLISH_CHECK below it.
POLISH_SPAN = 0.25
POLISH_CHECK = 1e-4


class Continuation:
    """Sweeps of the drive on one prepared deck."""

    def __init__(
        self, prepared: Prepared, options: RunOptions, index: DeckIndex | None = None
    ) -> None:
        assert prepared.emitted.circuit is not None
        self.index = index  # with it, every sweep point is held to the heat balance
        self.prepared = prepared
        self.options = options
        self.circuit = prepared.emitted.circuit
        self.deck = driven_deck(prepared.deck, map(power_source, self.circuit.parts))
        self.nodes = thermal_nodes(self.circuit)

    def run(self, deck: Deck, analyses: tuple[str, ...]) -> tuple[Plot, ...]:
        """The DC sweeps of ngspice on *deck* with *analyses*."""
        sim = simulate_deck(self.prepared, self.options, deck, analyses)
        return tuple(p for p in sim.plots if p.kind == "dc")

    def sweep(self, lo: float, step: float, count: int, start: FloatArray | None) -> Plot:
        """Drive from *lo* in *count* steps of *step*, from thermal temperatures *start*."""
        deck = self.deck
        if start is not None:
            sets = " ".join(f"V({n})={t:.12g}" for n, t in zip(self.nodes, start, strict=True))
            deck = insert_before_end(deck, new_cards([f".nodeset {sets}"]))
        hi = lo + count * step
        return self.run(deck, (f"dc {DRIVE_SOURCE} {lo:.12g} {hi:.12g} {step:.12g}",))[-1]

    def converged(
        self, lo: float, step: float, count: int, start: FloatArray | None
    ) -> Plot | None:
        """The longest sweep from *lo* that ngspice finishes (bisection on its length)."""
        try:
            return self.sweep(lo, step, count, start)
        except SimulatorError:
            pass
        good, bad, plot = -1, count, None
        while bad - good > 1:
            middle = (good + bad) // 2
            try:
                plot, good = self.sweep(lo, step, middle, start), middle
            except SimulatorError:
                bad = middle
        return plot

    def temperatures(self, plot: Plot) -> FloatArray:
        """Thermal node temperatures, one row per node, one column per sweep point."""
        return np.array([np.real(np.asarray(plot[f"v({n})"])) for n in self.nodes], dtype=float)


def first_off(cont: Continuation, plot: Plot, temps: FloatArray) -> int | None:
    """Index of the first sweep point off the physical branch: a jump (:func:`first_jump`),
    or a point that fails :func:`~heatweave.thermal.balance.check_state` with the drive's
    share of each dissipation (a resistance at or below zero, where ngspice happily settles
    on a negative resistance; a point past a fold that ngspice accepts although its heat
    does not balance)."""
    jump = first_jump(temps)
    drive = np.real(np.asarray(plot.scale_values)).astype(float)
    powers = sweep_powers(cont, plot, temps)
    ambient = cont.circuit.ambient_at_start
    for k in range(temps.shape[1] if jump is None else jump):
        for i, part in enumerate(cont.circuit.parts):
            if part.model is not None and not float(part.model.resistance(temps[i, k])) > 0:
                return k
        if powers is not None:
            verdict = check_state(cont.circuit, temps[:, k], drive[k] * powers[:, k], ambient)
            if not verdict.ok:
                return k
    return jump


def sweep_powers(cont: Continuation, plot: Plot, temps: FloatArray) -> FloatArray | None:
    """Each part's full dissipation V^2/R(T) at every sweep point (parts x points);
    ``None`` with a heat-only part or without the deck's index."""
    if cont.index is None or any(p.model is None for p in cont.circuit.parts):
        return None
    rows = []
    for i, part in enumerate(cont.circuit.parts):
        assert part.model is not None
        a, b = terminals(part, cont.index)
        drop = _voltage(plot, a) - _voltage(plot, b)
        rows.append(drop * drop / part.model.resistance(temps[i]))
    return np.array(rows, dtype=float)


def first_jump(temps: FloatArray) -> int | None:
    """Index of the first sweep point that is off the branch (see the module docstring)."""
    if not np.isfinite(temps[:, 0]).all():
        return 0
    previous = 0.0
    for k in range(1, temps.shape[1]):
        column = temps[:, k]
        if not np.isfinite(column).all():
            return k
        step = float(np.max(np.abs(column - temps[:, k - 1])))
        if k > 1 and step > JUMP_RATIO * max(previous, JUMP_FLOOR):
            return k
        previous = step
    return None


@dataclass(frozen=True, slots=True)
class BranchEnd:
    """The last steady state found on the branch, and whether the branch ran out."""

    drive: float
    temps: FloatArray  # thermal node temperatures there
    lost: bool
    full: FloatArray | None  # temperatures at full drive when the branch reached it
    edge: int | None = None  # the part (index) whose model range ended the branch


def first_outside(circuit: ThermalCircuit, temps: FloatArray) -> tuple[int, int] | None:
    """``(sweep point, part)`` of the first point where a part's temperature lies outside
    its model's range; ``None`` when none does, or when the sweep starts outside (the
    ambient itself is then out of range: nothing to follow)."""
    for k in range(temps.shape[1]):
        for i, part in enumerate(circuit.parts):
            found = part.model.valid_range if part.model is not None else None
            if found is not None and float(temps[i, k]) not in found:
                return None if k == 0 else (k, i)
    return None


def range_end(cont: Continuation, drive: FloatArray, temps: FloatArray, k: int,
              part: int) -> BranchEnd:  # fmt: skip
    """The branch end where *part* leaves its model's range between sweep points ``k - 1``
    and ``k``: swept again finely, then interpolated linearly to the range's end."""
    plan = cont.circuit.parts[part]
    assert plan.model is not None and plan.model.valid_range is not None
    found = plan.model.valid_range
    lo = float(drive[k - 1])
    fine = float(drive[k] - drive[k - 1]) / FINE_STEPS
    refined = cont.converged(lo, fine, FINE_STEPS, temps[:, k - 1])
    if refined is not None:
        ftemps = cont.temperatures(refined)
        fdrive = np.real(np.asarray(refined.scale_values)).astype(float)
        hit = first_outside(cont.circuit, ftemps)
        if hit is not None and hit[1] == part and first_jump(ftemps[:, : hit[0] + 1]) is None:
            drive, temps, k = fdrive, ftemps, hit[0]
    a, b = temps[:, k - 1], temps[:, k]
    bound = found.high if b[part] > found.high else found.low
    share = (bound - a[part]) / (b[part] - a[part])
    at = a + share * (b - a)
    at[part] = bound
    lam = float(drive[k - 1] + share * (drive[k] - drive[k - 1]))
    return BranchEnd(lam, at, True, None, part)


def follow(cont: Continuation) -> BranchEnd | None:
    """Follow the steady state from no dissipation to full; ``None`` when even the
    unheated circuit has no solution (the failure is electrical, not thermal)."""
    lo: float = 0.0
    start: FloatArray | None = None
    while True:
        found = segment(cont, lo, start)
        if not isinstance(found, tuple):
            return found if found is None else polished(cont, found)
        lo, start = found  # a coarse step was taken for a jump but is on the branch


def polished(cont: Continuation, end: BranchEnd) -> BranchEnd:
    """*end* with a fold's drive placed by :func:`heatweave.run.fold.fold_drive` where that
    finds one near it (within :data:`POLISH_SPAN` of the drive) and a steady state that
    passes :func:`first_off` exists :data:`POLISH_CHECK` below it; *end* unchanged else."""
    if cont.index is None or not end.lost or end.edge is not None or not end.drive > 0:
        return end
    found = fold_drive(cont, cont.index, float(np.max(end.temps)))
    if found is None or abs(found[0] / end.drive - 1) > POLISH_SPAN:
        return end
    drive, temps = found
    below = drive * (1 - POLISH_CHECK)
    try:
        plot = cont.sweep(below * (1 - POLISH_CHECK), below * POLISH_CHECK, 1, temps)
    except SimulatorError:
        return end
    if first_off(cont, plot, cont.temperatures(plot)) is not None:
        return end
    return BranchEnd(drive, temps, True, None)


def segment(
    cont: Continuation, lo: float, start: FloatArray | None
) -> BranchEnd | tuple[float, FloatArray] | None:
    """Coarse sweep from drive *lo* (thermal temperatures *start*), then :func:`edge` where
    the branch is lost; ``(drive, temperatures)`` to go on from when that refinement finds
    the coarse point taken for a jump on the branch after all."""
    step = 1.0 / COARSE_STEPS
    plot = cont.converged(lo, step, max(round((1.0 - lo) / step), 1), start)
    if plot is None:
        return None if start is None else BranchEnd(lo, start, True, None)
    temps = cont.temperatures(plot)
    drive = np.real(np.asarray(plot.scale_values)).astype(float)
    k = first_off(cont, plot, temps)
    outside = first_outside(cont.circuit, temps[:, : (temps.shape[1] if k is None else k)])
    if outside is not None:
        return range_end(cont, drive, temps, *outside)
    reached = k is None and drive[-1] >= 1.0 - 1e-9
    if reached:
        if float(np.max(temps[:, -1])) <= IMPLAUSIBLE_TEMPERATURE:
            return BranchEnd(1.0, temps[:, -1], False, temps[:, -1])
        k = 1  # smooth but implausible: look for a fold inside the first step
    last = (k if k is not None else temps.shape[1]) - 1
    if last < 0:
        return None if start is None else BranchEnd(lo, start, True, None)
    # Start one coarse step early: the first fine step has no step before it to compare.
    back = max(last - 1, 0)
    found = edge(cont, float(drive[back]), temps[:, back], (last - back + 1) * step)
    if reached and (isinstance(found, tuple) or not found.lost):
        return BranchEnd(1.0, temps[:, -1], False, temps[:, -1])
    return found


def edge(
    cont: Continuation, lo: float, start: FloatArray, span: float
) -> BranchEnd | tuple[float, FloatArray]:
    """Where the branch is lost in the drive interval *span* from *lo*: swept again in
    :data:`FINE_STEPS` steps, and again around the last point on the branch, until the
    step is within :data:`DRIVE_TOL` of the drive there.

    Before a fold the temperature steps grow like ``1/sqrt(lambda* - lambda)``; before a
    pole (a loop gain that does not fall as the part heats, such as a positive TCR on a
    current source, where the temperature grows like ``1/(lambda* - lambda)``) they grow
    so fast that a coarse point still on the branch looks like a jump.  When the fine sweep
    passes the whole interval on the branch, the end of the interval is returned to go on
    from."""
    for _ in range(MAX_LEVELS):
        fine = span / FINE_STEPS
        refined = cont.converged(lo, fine, FINE_STEPS, start)
        if refined is None:
            return BranchEnd(lo, start, True, None)
        ftemps = cont.temperatures(refined)
        fdrive = np.real(np.asarray(refined.scale_values)).astype(float)
        j = first_off(cont, refined, ftemps)
        if j is None and fdrive[-1] >= lo + span * (1 - 1e-9):
            if fdrive[-1] >= 1.0 - 1e-9:
                return BranchEnd(1.0, ftemps[:, -1], False, ftemps[:, -1])
            return float(fdrive[-1]), ftemps[:, -1]
        end = last_on_branch(ftemps, max((j if j is not None else ftemps.shape[1]) - 1, 0))
        at = float(fdrive[end])
        if not at > 0 or 2 * fine <= DRIVE_TOL * at:
            return BranchEnd(at, ftemps[:, end], True, None)
        back = max(end - 1, 0)
        lo, start, span = float(fdrive[back]), ftemps[:, back], (end - back + 1) * fine
    return BranchEnd(lo, start, True, None)


def last_on_branch(temps: FloatArray, end: int) -> int:
    """The last sweep point up to *end* that is still on the branch.

    Approaching a fold the temperature steps grow without bound (T - T_fold goes as the
    square root of the drive left); where they shrink again the solver has stalled just
    past the fold, accepting points on the flat residual there.  The branch ends after its
    largest step."""
    if end < 2:
        return end
    steps = np.max(np.abs(np.diff(temps[:, : end + 1], axis=1)), axis=0)
    return int(np.argmax(steps)) + 1


def power_jacobian(cont: Continuation, index: DeckIndex, temps: FloatArray) -> FloatArray:
    """``dP_i/dT_j`` (W/K) of the resistor parts with all part temperatures held fixed."""
    parts = [p for p in cont.circuit.parts if p.model is not None]
    fixed = {p.node: float(t) for p, t in zip(cont.circuit.parts, temps, strict=False)}
    cards = [f"{fix_source(k)} {p.node} 0 DC {fixed[p.node]:.12g}" for k, p in enumerate(parts)]
    analyses = tuple(
        f"dc {fix_source(k).lower()} {fixed[p.node] - FD_STEP:.12g} {fixed[p.node] + FD_STEP:.12g} "
        f"{FD_STEP:.12g}"
        for k, p in enumerate(parts)
    )
    plots = cont.run(insert_before_end(cont.deck, new_cards(cards)), analyses)
    nodes = [terminals(p, index) for p in parts]
    jac = np.zeros((len(parts), len(parts)))
    for j, plot in enumerate(plots):
        # ngspice decides the number of sweep points from the rounded bounds (two to four
        # here): the ends of the sweep as it ran, not three points assumed.
        held = np.real(np.asarray(plot.scale_values)).astype(float)
        for i, part in enumerate(parts):
            assert part.model is not None
            t = held if i == j else np.full(len(held), fixed[part.node])
            drop = _voltage(plot, nodes[i][0]) - _voltage(plot, nodes[i][1])
            power = drop * drop / part.model.resistance(t)
            jac[i, j] = (power[-1] - power[0]) / (held[-1] - held[0])
    return jac


def diagnose(cont: Continuation, index: DeckIndex, end: BranchEnd) -> Diagnosis | None:
    """Loop gains at the branch end; ``None`` without a resistor part."""
    parts = [p for p in cont.circuit.parts if p.model is not None]
    if not parts:
        return None
    jac = power_jacobian(cont, index, end.temps)
    names, z = driving_point(cont.circuit)
    rows = [names.index(p.node) for p in parts]
    # At a model's range end the question is the full dissipation's gain there (item 6).
    share = 1.0 if end.edge is not None else end.drive
    loop = share * z[np.ix_(rows, rows)] @ jac
    own = np.diag(loop)
    top = int(np.argmax(own))
    model_range = None
    if end.edge is not None:
        edge = cont.circuit.parts[end.edge]
        top = parts.index(edge)
        assert edge.model is not None and edge.model.valid_range is not None
        model_range = f"{edge.model_name} model's range, {edge.model.valid_range.describe()}"
    circuit_gain = float(np.max(np.real(np.linalg.eigvals(loop))))
    temperature = float(end.temps[names.index(parts[top].node)])
    source = single_source(index)
    scaled = None
    if source is not None:
        scaled = (source[0], source[1] * math.sqrt(end.drive), source[1])
    return Diagnosis(parts[top].path, float(own[top]), circuit_gain, end.drive, temperature,
                     scaled, model_range)  # fmt: skip


def explain(
    inputs: Inputs,
    options: RunOptions,
    prepared: Prepared,
    failure: SimulatorError | None,
    results: RunResults | None,
) -> ThermalRunawayError | None:
    """The runaway behind a failed or implausible run, or ``None`` when the failure has
    another cause (the steady state exists all the way to full dissipation, or even the
    unheated circuit fails)."""
    if prepared.emitted.circuit is None or not prepared.emitted.circuit.parts:
        return None
    grew = growth(results) if results is not None else None
    cont = Continuation(prepared, options, inputs.index)
    try:
        end = follow(cont)
        diagnosis = diagnose(cont, inputs.index, end) if end is not None and end.lost else None
    except SimulatorError:
        end, diagnosis = None, None
    if diagnosis is not None and diagnosis.model_range is not None:
        if max(diagnosis.loop_gain, diagnosis.circuit_gain) < 1.0:
            return None  # hot beyond the model's range, but no runaway: the run stands
        plan = prepared.emitted.circuit.parts[end.edge] if end and end.edge is not None else None
        text = f"{diagnosis.part} runs away thermally: " + diagnosis.sentence()
        if grew:
            text = f"thermal runaway in the transient: {grew}; {text}"
        elif results is not None and plan is not None:
            found = results.part(plan.path).temperature
            text += (
                f". The solution ngspice found instead, {found:.4g} degC, lies where the "
                "formula does not hold"
            )
        return RunawayError(text, HINT, diagnosis, plan.location if plan else None)
    if diagnosis is not None:
        head = f"{diagnosis.part} runs away thermally: no steady state exists; "
        if grew:
            head = f"thermal runaway in the transient: {grew}; no steady state exists: "
        return RunawayError(head + diagnosis.sentence(), HINT, diagnosis)
    if grew:
        tail = ""
        if end is not None and end.full is not None:
            hottest = float(np.max(end.full))
            tail = (
                f"; with every source at its DC value (the operating point) the steady state "
                f"lies at {hottest:.4g} degC, so the heat that runs it away comes from the "
                "sources' time-varying drive, which that steady state leaves out"
            )
        return RunawayError(
            f"temperatures grow without a physical bound in the transient: {grew}{tail}",
            HINT,
            None,
        )
    if end is not None and end.full is not None and results is not None:
        return beyond_bound(prepared.emitted.circuit, end.full)
    return None
