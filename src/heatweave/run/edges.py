"""The corners of a deck's PULSE and PWL sources: the instants a transient must land on.

ngspice places a time point on every corner of a ``PULSE`` or ``PWL`` source (the start
and end of each rise and fall, each PWL point) through its breakpoint table.  ngspice 39
sets a source's next corner only when a time point lands on the one before, so a corner it
misses once is never set again, and every later edge is then stepped straight across (the
co-simulation's pause and resume can make it miss one: :mod:`heatweave.cosim.engine`).
:func:`deck_corners` lists each source's corners as a pattern (an offset within a period,
repeated), so that the corners inside any stretch of time can be listed without listing
them all (a 100 kHz PWM over 10 s has four million).

Defaults as ngspice 39 reads them (manual 4.1.1, 4.1.4): a ``PULSE`` rise or fall time
omitted or zero is the transient's ``TSTEP``, a width or period omitted or zero its
``TSTOP`` (a single pulse), ``NP`` > 0 stops after that many pulses; a ``PWL`` with
``r=R`` repeats its points from ``R`` to the last one, ``td=TD`` delays it.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from heatweave.errors import HeatweaveError, Location
from heatweave.run.waves import exact_value, transient_function
from heatweave.spice.deck import Card
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.netlist import scope_params, top_params

FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True, slots=True)
class Corners:
    """One source's corners: ``start + k period + offset`` for each offset and
    ``k = 0 .. count - 1`` (``count`` ``None``: for ever; ``period`` ``None``: once)."""

    source: str
    offsets: tuple[float, ...]
    start: float
    period: float | None = None
    count: int | None = None

    def between(self, low: float, high: float) -> FloatArray:
        """The corners in ``(low, high]``, sorted."""
        offsets = np.asarray(self.offsets, dtype=np.float64)
        if self.period is None or self.period <= 0:
            times = self.start + offsets
        else:
            first = max(math.floor((low - self.start - offsets.max()) / self.period), 0)
            last = math.floor((high - self.start - offsets.min()) / self.period)
            if self.count is not None:
                last = min(last, self.count - 1)
            if last < first:
                return np.zeros(0)
            k = np.arange(first, last + 1, dtype=np.float64)
            times = (self.start + k[:, None] * self.period + offsets[None, :]).ravel()
        return np.sort(times[(times > low) & (times <= high)])

    def first(self, low: float, count: int) -> FloatArray:
        """The first *count* corners after *low* (fewer where the source has no more)."""
        if self.period is None or self.period <= 0:
            return self.between(low, math.inf)[:count]
        periods = count // len(self.offsets) + 2
        return self.between(low, max(low, self.start) + periods * self.period)[:count]


@dataclass(frozen=True, slots=True)
class SourceCorners:
    """Every readable source's corners, and the ``PULSE``/``PWL`` sources whose numbers
    heatweave cannot read (``V1's PULSE (deck.cir:4)``: why)."""

    corners: tuple[Corners, ...]
    unreadable: tuple[str, ...] = ()

    def first(self, low: float, count: int) -> FloatArray:
        """The first *count* corners after *low* of all sources together, sorted."""
        found = [item.first(low, count) for item in self.corners]
        return np.sort(np.concatenate(found))[:count] if found else np.zeros(0)

    def between(self, low: float, high: float) -> tuple[FloatArray, tuple[str, ...]]:
        """The corners in ``(low, high]``, sorted, and the source of each."""
        times: list[FloatArray] = []
        owners: list[str] = []
        for item in self.corners:
            found = item.between(low, high)
            times.append(found)
            owners += [item.source] * found.shape[0]
        if not times:
            return np.zeros(0), ()
        merged = np.concatenate(times)
        order = np.argsort(merged, kind="stable")
        return merged[order], tuple(owners[k] for k in order.tolist())


def card_corners(
    path: str, card: Card, params: Mapping[str, float], tstep: float, tstop: float
) -> list[Corners]:
    """The corners of one ``V``/``I`` card's ``PULSE`` or ``PWL`` (none for others).
    Raises :class:`HeatweaveError` when a number cannot be read."""
    function = transient_function(card)
    if function is None or function.kind not in ("PULSE", "PWL"):
        return []
    kind, args, options = function.kind, function.args, function.options

    def value(k: int) -> float | None:
        if k >= len(args):
            return None
        return float(exact_value(args[k][0], params, card, args[k][1]))

    name = f"{path}'s {kind}"
    if kind == "PULSE":
        v1, v2, td, rise, fall, width, period, count = (value(k) for k in range(8))
        if v1 == v2:
            return []
        rise = rise if rise else tstep
        fall = fall if fall else tstep
        width = width if width else tstop
        offsets = (0.0, rise, rise + width, rise + width + fall)
        pulses = int(count) if count and count > 0 else None
        return [Corners(name, offsets, td or 0.0, period if period else None, pulses)]
    times = [float(exact_value(w, params, card, at)) for w, at in args[0::2]]
    if not times:
        return []
    delay = 0.0
    if "td" in options:
        delay = float(exact_value(options["td"][0], params, card, options["td"][1]))
    found = [Corners(name, tuple(times), delay)]
    if "r" in options:
        repeat = float(exact_value(options["r"][0], params, card, options["r"][1]))
        last = times[-1]
        if 0 <= repeat < last:
            again = tuple(t - repeat for t in times if repeat < t <= last)
            found.append(Corners(name, again, delay + last, last - repeat))
    return found


def deck_corners(index: DeckIndex, tstep: float, tstop: float) -> SourceCorners:
    """:func:`card_corners` of every ``V``/``I`` source of the deck (subcircuits expanded,
    includes too); a source whose numbers cannot be read is listed, with why."""
    top = top_params(index)
    corners: list[Corners] = []
    unreadable: list[str] = []
    for path in index.element_paths():
        if path.rsplit(".", 1)[-1][:1].upper() not in "VI":
            continue
        resolved = index.resolve(path)
        if resolved is None or resolved.card.letter.upper() not in "VI":
            continue
        params = scope_params(top, resolved) if resolved.instances else top
        try:
            corners += card_corners(path, resolved.card, params, tstep, tstop)
        except HeatweaveError as err:
            kind, where = _kind(resolved.card)
            at = f" ({where.file}:{where.line})" if where else ""
            unreadable.append(f"{path}'s {kind}{at}: {err.message}")
    return SourceCorners(tuple(corners), tuple(unreadable))


def _kind(card: Card) -> tuple[str, Location | None]:
    """The kind of *card*'s function (``PULSE``) and where its keyword is; ``source``
    where it cannot be read."""
    try:
        function = transient_function(card)
    except HeatweaveError:
        return "source", None
    return (function.kind, function.location) if function is not None else ("source", None)
