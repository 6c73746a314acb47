"""Reports less the signals named in an included file not proven SPICE
(:mod:`heatweave.spice.private`): node voltages and branch currents whose names are that
file's words, unless the user named them (a ``--probe``, a ``[limit]`` of the annotation)."""

from __future__ import annotations

from collections.abc import Collection, Iterable
from dataclasses import replace
from typing import TypeVar

from heatweave.emit.emitter import Inputs
from heatweave.errors import Finding
from heatweave.run.results import RunResults
from heatweave.settle.periodic import Settled
from heatweave.spice.private import is_private, left_out_note, private_words

T = TypeVar("T")


def private_names(inputs: Inputs, names: Iterable[str], kept: Collection[str]) -> set[str]:
    """The *names* to leave out of a report of *inputs* (those in *kept* stay)."""
    words = private_words(inputs.project)
    if not words:
        return set()
    return {n for n in names if n not in kept and is_private(n, words)}


def _keep(table: dict[str, T], gone: set[str]) -> dict[str, T]:
    return {name: value for name, value in table.items() if name not in gone}


def without_private(
    results: RunResults, inputs: Inputs, kept: Collection[str]
) -> tuple[RunResults, int]:
    """*results* less the private node voltages and branch currents, and how many went."""
    gone = private_names(inputs, (*results.voltages, *results.currents), kept)
    if not gone:
        return results, 0
    extremes = {k: v for k, v in results.extremes.items()
                if k[2:-1] not in gone}  # keys "v(name)" and "i(name)"  # fmt: skip
    return replace(
        results, voltages=_keep(results.voltages, gone), currents=_keep(results.currents, gone),
        voltage_series=_keep(results.voltage_series, gone),
        current_series=_keep(results.current_series, gone), extremes=extremes,
    ), len(gone)  # fmt: skip


def settled_without_private(settled: Settled, inputs: Inputs, kept: Collection[str]) -> Settled:
    """:func:`without_private` for ``settle``'s result, the note among its findings."""
    gone = private_names(inputs, settled.voltages, kept)
    if not gone:
        return settled
    baseline = settled.baseline
    if baseline is not None:
        baseline = (baseline[0], _keep(baseline[1], gone))
    note = Finding("note", left_out_note(inputs.project, len(gone)), None)
    return replace(
        settled, voltages=_keep(settled.voltages, gone), baseline=baseline,
        voltage_series=_keep(settled.voltage_series, gone), findings=(*settled.findings, note),
    )  # fmt: skip
