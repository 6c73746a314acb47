"""Every steady state a run reports is verified; one that fails is replaced or refused.

A steady state comes back from ngspice as an operating point (``.op``), the last point of
a ``.dc`` sweep, or the first point of a transient that starts steady.  It is held to the
heat balance of :func:`heatweave.thermal.balance.check_state`, and ngspice's fall-backs are
recognised: when gmin and source stepping fail, ngspice 39 runs a short pseudo-transient
("Transient op started", 10 us by default) and returns wherever that stopped; the thermal
capacitors have barely charged, so the state is not a steady one.

A state that fails is never the answer.  :func:`recover` looks for the circuit's own state:

1. continuation from cold (:func:`heatweave.run.runaway.follow`): every dissipation scaled from
   0 to full, each point starting from the last.  When that branch reaches full
   dissipation its state is the answer (the one a slow warm-up reaches);
2. when the branch ends (a fold, loop gain 1), the part with the highest loop gain is held
   at each temperature from the ambient up (:func:`scan`): the current the holding source
   takes is the heat balance at that node with every other part free, so its sign changes
   are the steady states.  The lowest stable one (heat surplus below it, deficit above) is
   where the part settles when switched on from cold: a PTC that trips lands there;
3. otherwise no steady state exists and the error says why, with the loop gain.

The state found is solved again by ngspice from that point (``.nodeset``) and verified once
more.  Every verified operating point is also proven the only steady state
(:mod:`heatweave.run.unique`) or scanned for other stable states (:mod:`heatweave.run.states`):
a warning names them and says which one is reported and why.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from heatweave.errors import Finding, SimulatorError, ThermalRunawayError
from heatweave.run.diagnosis import HINT, RunawayError
from heatweave.run.diagnosis_decks import TIGHT, simulate_deck
from heatweave.run.results import RunResults, extract
from heatweave.run.runaway import Continuation, diagnose, follow
from heatweave.run.states import HINT as STATES_HINT
from heatweave.run.states import scan, statement
from heatweave.spice.deck import Deck
from heatweave.spice.options import option_settings
from heatweave.spice.reader import read
from heatweave.spice.syntax import Value
from heatweave.spice.transform import insert_before_end, new_cards
from heatweave.thermal.balance import (
    ABSTOL_T,
    RELTOL,
    Verdict,
    check_state,
    negative_heat,
    thermal_nodes,
)
from heatweave.thermal.circuit import ThermalCircuit

if TYPE_CHECKING:
    from heatweave.emit.emitter import Inputs
    from heatweave.run.prepare import Prepared, RunOptions
    from heatweave.run.runaway import FloatArray
    from heatweave.simulators import SimResult

_FALLBACK = re.compile(r"transient op started", re.IGNORECASE)


class NoSteadyStateError(ThermalRunawayError):
    """No verified steady state: the one ngspice gave fails and none other was found."""


def fell_back(log: str) -> bool:
    """True when ngspice's operating point came from its pseudo-transient fall-back."""
    return _FALLBACK.search(log) is not None


def steady_index(results: RunResults, circuit: ThermalCircuit) -> int | None:
    """Which point of *results* is a steady state to verify: the last of an operating point
    or DC sweep, the first of a transient that starts steady; ``None`` for none."""
    if results.analysis in ("op", "dc"):
        return -1
    if results.analysis == "tran" and circuit.start == "steady" and results.time is not None:
        return 0
    return None


def solver_tolerances(deck: Deck | str | None) -> tuple[float, float]:
    """``(reltol, extra)`` for :func:`check_state`: the deck's ``reltol`` where it is looser
    than ngspice's default, and how far its ``vntol`` (V = K) exceeds the default.

    *deck* is the tree ngspice was given (includes inlined), or a deck's text; its options
    cards are read as ngspice reads them (:func:`heatweave.spice.options.option_settings`).
    A value that is not a plain number (``{expr}``) is not read: the balance then holds
    ngspice's default, the tighter one."""
    if isinstance(deck, str):
        deck = read(deck)
    reltol, vntol = RELTOL, ABSTOL_T
    for _card, setting in option_settings(deck) if deck is not None else ():
        key = setting.key.key
        number = setting.value.number if isinstance(setting.value, Value) else None
        if key not in ("reltol", "vntol") or number is None or not number > 0:
            continue
        if key == "reltol":
            reltol = max(reltol, number)
        else:
            vntol = max(vntol, number)
    return reltol, vntol - ABSTOL_T


def verdict_of(
    results: RunResults, circuit: ThermalCircuit, at: int, deck: Deck | None = None
) -> Verdict:
    """:func:`check_state` on point *at* of *results* (every path verifies through it), to
    the tolerances of the *deck* ngspice ran (ngspice's defaults without one)."""
    by_label = {p.path: p for p in results.parts}

    def pick(final: float, series: FloatArray | None) -> float:
        return float(series[at]) if series is not None and at != -1 else final

    temps = [pick(by_label[p.path].temperature, by_label[p.path].temperature_series)
             for p in circuit.parts]  # fmt: skip
    temps += [pick(results.nodes[n.label], results.node_series.get(n.label)) for n in circuit.nodes]
    powers = [pick(by_label[p.path].power, by_label[p.path].power_series) for p in circuit.parts]
    ambient = pick(results.ambient, results.ambient_series)
    reltol, extra = solver_tolerances(deck)
    return check_state(circuit, temps, powers, ambient, accuracy=extra, reltol=reltol)


def mean_powers(results: RunResults) -> list[float]:
    """Each part's dissipation averaged over the whole run (the value of an operating point)."""
    out = []
    for part in results.parts:
        series, time = part.power_series, results.time
        if series is None or time is None or len(time) < 2 or time[-1] <= time[0]:
            out.append(part.power)
        else:
            out.append(float(np.trapezoid(series, time) / (time[-1] - time[0])))
    return out


def unphysical_series(results: RunResults) -> str | None:
    """Where a transient passes through a resistance at or below zero, in words."""
    for part in results.parts:
        series = part.resistance_series
        if series is None or bool(np.all(series > 0)):
            continue
        k = int(np.argmin(series > 0))
        when = f" at t = {float(results.time[k]):.4g} s" if results.time is not None else ""
        hot = part.temperature_series
        where = f" ({float(hot[k]):.4g} degC)" if hot is not None else ""
        return (
            f"{part.path}'s resistance reaches {float(series[k]):.4g} ohm{when}{where}: its "
            f"{part.model} model has no physical value there"
        )
    return None


@dataclass(frozen=True, slots=True)
class Verified:
    """A run's results after verification, and what the reader must be told."""

    sim: SimResult
    results: RunResults
    findings: tuple[Finding, ...]


def verify_run(
    inputs: Inputs, options: RunOptions, prepared: Prepared, sim: SimResult, results: RunResults
) -> Verified:
    """The run's results if their steady state holds, else the circuit's own (see the module
    docstring); raises :class:`ThermalRunawayError` when there is none."""
    circuit = prepared.emitted.circuit
    assert circuit is not None
    negative = unphysical_series(results)
    if negative is not None:
        raise NoSteadyStateError(
            f"the simulation is not the circuit's: {negative}",
            hint="lower the drive or check the temperature coefficients and tref",
        )
    at = steady_index(results, circuit)
    if at is None or not circuit.parts:
        # No steady state to hold to the balance; a heat-only part that delivers power on
        # average is still worth a word.
        return Verified(sim, results, tuple(negative_heat(circuit, mean_powers(results))))
    verdict = verdict_of(results, circuit, at, prepared.deck)
    fallback = fell_back(sim.log)
    if verdict.ok and not fallback:
        said = statement(options, prepared, results, inputs.index)
        if said.instead is None:
            return Verified(sim, results, verdict.warnings + said.findings)
        return resolve(inputs, options, prepared, said.instead, said.why, said.how, True)
    why = verdict.reason() if not verdict.ok else ""
    if results.analysis == "dc" and not verdict.ok:
        # The continuation and the scan solve the deck at its sources' DC values, not at
        # the swept value of the last point: no replacement can be found that way.
        raise NoSteadyStateError(
            f"the last point of the DC sweep is not a steady state of the circuit: {why}",
            hint="stop the sweep below that drive, or run .op at the values of interest",
        )
    if fallback:
        lead = "ngspice's operating point failed gmin and source stepping and fell back to its "
        lead += 'short pseudo-transient ("transient op"), which leaves the thermal nodes short '
        lead += "of their steady state"
        why = f"{lead}: {why}" if why else lead
    return recover(inputs, options, prepared, results, why)


def recover(
    inputs: Inputs, options: RunOptions, prepared: Prepared, results: RunResults, why: str
) -> Verified:
    """The circuit's verified steady state in place of one that failed for reason *why*."""
    circuit = prepared.emitted.circuit
    assert circuit is not None
    cont = Continuation(prepared, options, inputs.index)
    try:
        end = follow(cont)
        diagnosis = diagnose(cont, inputs.index, end) if end is not None and end.lost else None
    except SimulatorError:
        end, diagnosis = None, None
    if end is not None and not end.lost and end.full is not None:
        how = "followed from cold by continuation (every dissipation raised from 0 to full)"
        return resolve(inputs, options, prepared, end.full, why, how)
    if diagnosis is not None:
        part = next(p for p in circuit.parts if p.path == diagnosis.part)
        stable = scan(prepared, options, part).stable
        if stable:
            how = (
                f"where {part.path} settles when switched on from cold: the branch from cold "
                f"folds at {100 * diagnosis.drive:.3g} % of the full dissipation (its loop "
                f"gain reaches 1 there), and {part.path} switches to its steady state at "
                f"{stable[0].temperature:.4g} degC"
            )
            return resolve(inputs, options, prepared, stable[0].temps, why, how)
        head = f"{diagnosis.part} runs away thermally: no steady state exists; "
        text = head + diagnosis.sentence() + f". The state ngspice returned does not hold: {why}"
        raise RunawayError(text, HINT, diagnosis)
    raise NoSteadyStateError(
        f"no verified steady state: {why}; continuation from cold found none either",
        hint="run a transient from cold (--tran) to see where the temperatures go, or lower "
        "the drive",
    )


def resolve(
    inputs: Inputs, options: RunOptions, prepared: Prepared, temps: FloatArray, why: str,
    how: str, chosen: bool = False,
) -> Verified:  # fmt: skip
    """ngspice's solution started from thermal temperatures *temps*, verified; *chosen*
    when it was picked among several stable states (the reason says so already)."""
    circuit = prepared.emitted.circuit
    assert circuit is not None
    sets = " ".join(f"V({n})={t:.12g}" for n, t in zip(thermal_nodes(circuit), temps, strict=True))
    deck = insert_before_end(prepared.deck, new_cards([f".nodeset {sets}", TIGHT]))
    sim = simulate_deck(prepared, options, deck)
    results = extract(sim, prepared.emitted, inputs.index)
    at = steady_index(results, circuit)
    verdict = verdict_of(results, circuit, at if at is not None else -1, prepared.deck)
    if not verdict.ok or fell_back(sim.log):
        raise NoSteadyStateError(
            f"no verified steady state: {why}; the state {how} does not hold either "
            f"({verdict.reason() or 'ngspice fell back to its transient op again'})",
            hint="run a transient from cold (--tran) to see where the temperatures go",
        )
    if chosen:
        # One of several stable states, picked for the reason *how*: *why* lists them.
        note = Finding("warning", f"{why}; heatweave reports instead {how}, which balances",
                       None, STATES_HINT)  # fmt: skip
        return Verified(sim, results, (note, *verdict.warnings))
    note = Finding(
        "warning",
        f"the steady state ngspice returned was not the circuit's ({why}); heatweave "
        f"reports instead the state {how}, which balances",
        None,
        "a transient from cold (--tran) shows how the circuit gets there",
    )
    # A state recovered otherwise may have others beside it: said as for any other.
    said = statement(options, prepared, results, inputs.index, f"the state {how}")
    notes = said.findings
    if said.instead is not None:
        notes += (Finding("warning", f"{said.text}; the one reported is the state {how}", None,
                          STATES_HINT),)  # fmt: skip
    return Verified(sim, results, (note, *verdict.warnings, *notes))
