"""The period of a deck's drive: what a result's ``power`` is averaged over.

``power`` means the same in every method: the mean dissipation over the last period of the
deck's periodic sources, or the final value when none repeats (all DC, a single pulse, a
finished pulse train).  The sources are read once, by :mod:`heatweave.run.waves` (the
reading ``settle`` and ``check`` take their period from); several periods share their least
common period, looked for up to :data:`~heatweave.run.waves.MAX_RATIO` times the
shortest.  Unlike ``settle``, a run never refuses a drive: without a common period the
slowest is used, and :func:`period_note` says so, as it does for a source heatweave cannot
read (a ``B`` source using ``time``) or a transient shorter than the period.
:func:`start_findings` says when the saved transient starts after t = 0, so its peaks miss
the start (``uic``, ``tstart``).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from fractions import Fraction

from heatweave.errors import Finding
from heatweave.quantities import format_number
from heatweave.run.waves import MAX_RATIO, Wave, deck_waves, lcm
from heatweave.spice.hierarchy import DeckIndex

#: Relative tolerance of "the transient holds one period".
SPAN_TOL = 1e-6


@dataclass(frozen=True, slots=True)
class Drive:
    """The periods of a deck's periodic sources and the one results average over."""

    periods: tuple[float, ...]
    period: float | None
    common: bool  # the period is a multiple of every source's period
    unknown: tuple[str, ...] = ()  # sources whose repetition heatweave cannot read


def drive(waves: list[Wave]) -> Drive:
    """The period results average over, from the sources' *waves*."""
    periods = sorted({w.period for w in waves if w.period is not None and w.problem is None})
    unknown = tuple(w.describe() for w in waves if w.unknown is not None)
    listed = tuple(float(p) for p in periods)
    if not periods:
        return Drive((), None, True, unknown)
    least = Fraction(0)
    for period in periods:
        least = period if not least else lcm(least, period)
        if least > MAX_RATIO * periods[0]:
            return Drive(listed, listed[-1], False, unknown)
    return Drive(listed, float(least), True, unknown)


def deck_drive(index: DeckIndex) -> Drive:
    """:func:`drive` of every source of the deck (subcircuits expanded, includes too)."""
    return drive(deck_waves(index))


def period_note(found: Drive, span: float | None) -> Finding | None:
    """A note when ``power`` cannot be the mean over one common period: no common multiple
    of the sources' periods, a source heatweave cannot read, or a transient shorter than
    the period (*span*, s)."""
    if found.unknown:
        what = "the mean over the last period" if found.period else "the final value"
        return Finding(
            "note",
            f"cannot tell whether {found.unknown[0]} repeats: power is {what} of the sources "
            "heatweave can read",
            None,
        )
    if found.period is None:
        return None
    if not found.common:
        listed = ", ".join(format_number(p) for p in found.periods)
        return Finding(
            "note",
            f"the deck's periodic sources (periods {listed} s) share no common period within "
            f"{MAX_RATIO} times the shortest: power is the mean over the slowest, "
            f"{format_number(found.period)} s",
            None,
        )
    if span is not None and span < found.period * (1 - SPAN_TOL):
        return Finding(
            "note",
            f"the transient saves {format_number(span)} s, less than the drive's period "
            f"{format_number(found.period)} s: power is the mean over the whole transient",
            None,
            "run the transient for at least one period",
        )
    return None


def start_findings(
    first: float | None, analyses: Sequence[str], index: DeckIndex
) -> tuple[Finding, ...]:
    """A warning when a transient's results start after t = 0 (*first*, s): its peaks miss
    what came before.  ngspice 39 leaves t = 0 out of a ``.tran ... uic`` run (it computes
    no operating point there); where the deck (*index*) has a capacitor, the instant left
    out is where an inrush into it, uncharged, is largest, and it cannot be computed from
    the first point.  A deck without one is told only what is left out."""
    if first is None or not first > 0.0:
        return ()
    at = f"the transient's first time point is {first:.4g} s, not 0"
    if any("uic" in text.lower().split() for text in analyses):
        why = f"{at} (ngspice 39 leaves t = 0 out of a `.tran ... uic` run)"
        if not has_capacitor(index):
            return (
                Finding(
                    "warning",
                    f"{why}: peak_power and peak_temperature are the peaks from {first:.4g} s "
                    "on; the sources' values at t = 0 are left out",
                    None,
                    "drop uic to have t = 0 in the results",
                ),
            )
        return (
            Finding(
                "warning",
                f"{why}: peak_power is "
                f"the largest dissipation from {first:.4g} s on and misses the initial "
                "instant, where an inrush into an uncharged capacitor is largest (V^2/R "
                "through the resistor); peak_temperature misses only the starting "
                "temperatures",
                None,
                "for the inrush peak, work out the initial instant by hand (with uic every "
                "capacitor starts at its IC, 0 V unless given), or drop uic where the "
                "operating point is the start wanted",
            ),
        )
    return (
        Finding(
            "warning",
            f"{at} (the transient saves its results from there): peak_power and "
            f"peak_temperature are the peaks from {first:.4g} s on, not over the whole run",
            None,
            "give the transient no tstart to see the whole run",
        ),
    )


def has_capacitor(index: DeckIndex) -> bool:
    """True when the circuit (subcircuits expanded, includes too) has a capacitor."""
    return any(path.rsplit(".", 1)[-1][:1] in "cC" for path in index.element_paths())
