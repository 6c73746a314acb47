"""The drive period of a deck, read from its independent sources (``settle``, ``check``).

A periodic steady state exists only for a period with which every source repeats.  Each
``V``/``I`` source's transient function is read by the grammar
(:meth:`heatweave.spice.syntax.ElementSyntax.source`, the one reader of source functions:
the co-simulation's time scale and the corners of :mod:`heatweave.run.edges` use it too)
and taken as ngspice 39 takes it (manual 4.1; defaults there: a parameter omitted or zero
takes its default):

* ``PULSE(V1 V2 TD TR TF PW PER NP)``: period ``PER``; ``PER`` omitted or zero defaults to
  the transient's stop time, so the source gives one pulse and is not periodic; ``NP`` > 0
  stops after that many pulses, then holds ``V1``;
* ``SIN(VO VA FREQ TD THETA PHASE)``: period ``1/FREQ``; ``FREQ`` omitted or zero defaults
  to ``1/TSTOP`` (not periodic), a damping ``THETA`` makes it decay (not periodic);
* ``PWL(T1 V1 ...) r=R td=TD``: with ``r`` >= 0 the points from ``R`` to the last time
  repeat for ever (period ``Tn - R``); without ``r`` (or ``r = -1``) the source holds its
  last value after ``Tn``;
* ``SFFM(VO VA FC MDI FS ...)`` and ``AM(VA VO MF FC TD ...)``: the least common period of
  ``1/FC`` and ``1/FS`` (``1/MF``); an omitted carrier frequency defaults to ``1/TSTOP``;
* ``EXP``, ``TRNOISE``, ``TRRANDOM`` and ``EXTERNAL`` do not repeat.

Periods are exact fractions of the decimal values as written (``199.9u`` is 1999/10^7 s),
so the least common period of a 50 us PULSE and a 20 kHz SIN is exactly 50 us, and
``--period 40u`` is refused for the first as 4/5 of its period, not as a rounding error.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass
from fractions import Fraction

from heatweave.errors import HeatweaveError, Location, UsageError
from heatweave.spice.deck import Card
from heatweave.spice.grammar import CardSyntaxError, parse_card
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.netlist import evaluate, scope_params, top_params
from heatweave.spice.syntax import ElementSyntax, Token

#: The least common period may be at most this many times the shortest source period;
#: beyond, the sources are taken as incommensurate (each period would hold too many).
MAX_RATIO = 1000
#: A --period whose ratio to a source period is an integer within this (relative) is a
#: multiple of it: the command line's decimal went through a float.
RATIO_TOL = 1e-9

#: Element letters that can carry a transient function (or ``time``): V, I, A, B, E, F, G, H.
_DRIVEN = frozenset("VIABEFGH")
_TIME = re.compile(r"(?<![\w.])time(?![\w(])", re.IGNORECASE)
_EXACT = re.compile(r"^\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)([A-Za-z_]\w*)?\s*$")
_SCALES = (
    ("meg", Fraction(10**6)), ("mil", Fraction("25.4e-6")), ("t", Fraction(10**12)),
    ("g", Fraction(10**9)), ("k", Fraction(1000)), ("m", Fraction(1, 1000)),
    ("u", Fraction(1, 10**6)), ("n", Fraction(1, 10**9)), ("p", Fraction(1, 10**12)),
    ("f", Fraction(1, 10**15)),
)  # fmt: skip


@dataclass(frozen=True, slots=True)
class Wave:
    """What one element's drive does over time.

    ``period`` is ``None`` for a constant drive; ``start`` the time from which it repeats
    (delays, a finished pulse train); ``problem`` why it cannot be periodic, ``unknown``
    why heatweave cannot tell (a ``B`` source using ``time``, an ``A`` code model).
    """

    path: str
    kind: str
    location: Location | None
    period: Fraction | None = None
    start: float = 0.0
    problem: str | None = None
    unknown: str | None = None

    def describe(self) -> str:
        """``VGATE's PULSE (heater.cir:6)``."""
        where = f" ({self.location.file}:{self.location.line})" if self.location else ""
        return f"{self.path}'s {self.kind}{where}"


@dataclass(frozen=True, slots=True)
class DrivePeriod:
    """The period to settle with, the sources it comes from, and from when it holds."""

    period: float
    exact: Fraction | None
    sources: tuple[Wave, ...]
    start: float
    shortest: float | None
    given: bool
    unknown: tuple[Wave, ...] = ()

    def describe(self) -> str:
        """Where the period comes from, for the report's heading."""
        if self.given:
            told = "given with --period"
            if self.unknown:
                told += f"; {self.unknown[0].path} is judged only by its waveform repeating"
            return told
        names = ", ".join(w.describe() for w in self.sources[:3])
        more = f" and {len(self.sources) - 3} more" if len(self.sources) > 3 else ""
        if len(self.sources) > 1:
            return f"the least common period of {names}{more}"
        return f"taken from {names}"


def exact_value(text: str, params: Mapping[str, float], card: Card, at: int) -> Fraction:
    """A SPICE value as an exact fraction of its decimal digits (``199.9u`` = 1999e-7);
    an expression through its float value to 15 significant digits."""
    found = _EXACT.match(text)
    if found is not None:
        scale = Fraction(1)
        low = (found[2] or "").lower()
        for name, factor in _SCALES:
            if low.startswith(name):
                scale = factor
                break
        return Fraction(found[1]) * scale
    # 15 significant digits: the decimal a .param was written as (25u is 2.4999...e-05
    # as the float product 25 * 1e-6).
    return Fraction(f"{evaluate(text, params, card, at):.15g}")


def lcm(a: Fraction, b: Fraction) -> Fraction:
    """The least common multiple of two positive fractions."""
    return Fraction(math.lcm(a.numerator, b.numerator), math.gcd(a.denominator, b.denominator))


@dataclass(frozen=True, slots=True)
class SourceFunction:
    """A ``V``/``I`` card's transient function as the grammar reads it
    (:meth:`heatweave.spice.syntax.ElementSyntax.source`): its kind (``PULSE``), where its
    keyword is, its arguments and a ``PWL``'s ``r=`` and ``td=``, each with the offset in
    the card's logical text it is read at."""

    kind: str
    location: Location | None
    args: tuple[tuple[str, int], ...]
    options: dict[str, tuple[str, int]]


def transient_function(card: Card) -> SourceFunction | None:
    """A ``V``/``I`` card's transient function; ``None`` for a DC source.  Raises
    :class:`UsageError` (at the card) for a card the grammar cannot read."""
    text = card.logical().text
    try:
        syntax = parse_card(text)
    except CardSyntaxError as err:
        raise UsageError(f"cannot read the source: {err.message}", card.location(err.offset),
                         err.hint) from None  # fmt: skip
    if not isinstance(syntax, ElementSyntax):
        return None
    function = syntax.source(text).function
    if function is None:
        return None
    args = tuple((arg.text, arg.offset) for arg in function.args if isinstance(arg, Token))
    # r= and td= after the parentheses or inside them; a later one wins, as in ngspice.
    options = {p.key.key: (p.value.text, p.value.offset)
               for p in (*function.params, *syntax.params)
               if p.key.key in ("r", "td") and isinstance(p.value, Token)}  # fmt: skip
    where = card.location(function.offset)
    return SourceFunction(function.name.text.upper(), where, args, options)


def read_wave(path: str, card: Card, params: Mapping[str, float]) -> Wave:
    """The drive of one element (see the module docstring)."""
    text = card.logical().text
    letter = card.letter.upper()
    if letter == "A":
        return Wave(path, "code model", card.location(0),
                    unknown="heatweave does not read waveforms of XSPICE code models")  # fmt: skip
    if letter in "BEFGH":
        hit = _TIME.search(text)
        if hit is None:
            return Wave(path, "dependent source", None)
        return Wave(path, "expression of time", card.location(hit.start()),
                    unknown="its value is an expression of time")  # fmt: skip
    if letter not in "VI":
        return Wave(path, "element", None)
    try:
        function = transient_function(card)
    except UsageError as err:  # lint reports the card; a run takes it as unreadable
        return Wave(path, "source", err.location, unknown=err.message)
    if function is None:
        return Wave(path, "DC", None)
    kind, where, args = function.kind, function.location, function.args

    def value(k: int) -> Fraction | None:
        if k >= len(args):
            return None
        word, at = args[k]
        return exact_value(word, params, card, at)

    def nonzero(k: int) -> Fraction | None:
        found = value(k)
        return found if found else None

    wave = Wave(path, kind, where)
    if kind == "PULSE":
        return _pulse(wave, [value(k) for k in range(8)])
    if kind == "SIN":
        freq, delay, theta = nonzero(2), value(3) or Fraction(0), nonzero(4)
        if value(1) == 0:
            return Wave(path, kind, where, start=float(delay))
        if freq is None:
            return _problem(wave, "has no frequency, so ngspice uses 1/TSTOP: it does not repeat")
        if theta is not None:
            return _problem(wave, "is damped (THETA is not 0), so it does not repeat")
        return Wave(path, kind, where, 1 / freq, float(delay))
    if kind == "PWL":
        return _pwl(wave, args, function.options, params, card)
    if kind in ("SFFM", "AM"):
        # SFFM(VO VA FC MDI FS ...), AM(VA VO MF FC TD ...): carrier, then modulation.
        carrier, modulation = (
            (nonzero(2), nonzero(4)) if kind == "SFFM" else (nonzero(3), nonzero(2))
        )
        if carrier is None:
            return _problem(wave, "has no carrier frequency, so ngspice uses 1/TSTOP")
        period = 1 / carrier if modulation is None else lcm(1 / carrier, 1 / modulation)
        delay = (value(4) if kind == "AM" else None) or Fraction(0)
        return Wave(path, kind, where, period, float(delay))
    return _problem(wave, "does not repeat")


def _problem(wave: Wave, why: str) -> Wave:
    return Wave(wave.path, wave.kind, wave.location, problem=f"{wave.describe()} {why}")


def _pulse(wave: Wave, values: list[Fraction | None]) -> Wave:
    v1, v2, td, _rise, _fall, _width, per, count = values
    delay = float(td or 0)
    if v1 == v2:
        return Wave(wave.path, wave.kind, wave.location, start=delay)
    if not per:
        return _problem(
            wave, "gives no period (PER), so ngspice uses the transient's stop time: one pulse "
            "that does not repeat",
        )  # fmt: skip
    if count:
        end = delay + float(count * per)
        return Wave(wave.path, wave.kind, wave.location, start=end)
    return Wave(wave.path, wave.kind, wave.location, per, delay)


def _pwl(wave: Wave, args: tuple[tuple[str, int], ...], options: dict[str, tuple[str, int]],
         params: Mapping[str, float], card: Card) -> Wave:  # fmt: skip
    """``PWL(...) r=R td=TD`` (manual 4.1.4)."""
    times = [exact_value(w, params, card, at) for w, at in args[0::2]]
    if not times:
        return _problem(wave, "has no points")
    delay, repeat = Fraction(0), Fraction(-1)
    if "td" in options:
        delay = exact_value(options["td"][0], params, card, options["td"][1])
    if "r" in options:
        repeat = exact_value(options["r"][0], params, card, options["r"][1])
    last = times[-1]
    if repeat < 0:  # held at its last value after the last point
        return Wave(wave.path, wave.kind, wave.location, start=float(last + delay))
    if repeat not in times or repeat >= last:
        return _problem(wave, "repeats from r, which must be one of its times before the last")
    return Wave(wave.path, wave.kind, wave.location, last - repeat, float(delay + repeat))


def deck_waves(index: DeckIndex) -> list[Wave]:
    """The drive of every element in the circuit (instance paths, subcircuits expanded)."""
    top = top_params(index)
    waves = []
    for path in index.element_paths():
        if path.rsplit(".", 1)[-1][:1].upper() not in _DRIVEN:
            continue  # a resistor, a capacitor...: read without resolving it
        resolved = index.resolve(path)
        if resolved is None or resolved.card.letter.upper() not in _DRIVEN:
            continue
        params = scope_params(top, resolved) if resolved.instances else top
        waves.append(read_wave(path, resolved.card, params))
    return waves


def _refuse(wave: Wave, message: str, hint: str) -> HeatweaveError:
    return UsageError(message, wave.location, hint)


def drive_period(index: DeckIndex, given: float | None) -> DrivePeriod:
    """The period to settle with: *given* checked against every source, else the least
    common period of the periodic sources.  Raises :class:`UsageError` (located at the
    source card) for a source that does not repeat, a *given* period that is not a multiple
    of a source's, and, without *given*, a deck with no periodic source, incommensurate
    periods, or a drive heatweave cannot read."""
    waves = deck_waves(index)
    for wave in waves:
        if wave.problem is not None:
            raise _refuse(
                wave, f"{wave.problem}; settle needs every source periodic (or constant)",
                "give it a period, or hold it constant for the periodic steady state",
            )  # fmt: skip
    periodic = [w for w in waves if w.period is not None]
    unknown = tuple(w for w in waves if w.unknown is not None)
    start = max((w.start for w in waves), default=0.0)
    shortest = min((float(w.period) for w in periodic if w.period), default=None)
    if given is not None:
        for wave in periodic:
            assert wave.period is not None
            ratio = given / float(wave.period)
            if round(ratio) < 1 or abs(ratio - round(ratio)) > RATIO_TOL * ratio:
                raise _refuse(
                    wave, f"--period {seconds(given)} is not a period of {wave.describe()}, which "
                    f"repeats every {seconds(float(wave.period))} ({ratio:.4g} of its periods)",
                    "leave --period out to take the sources' common period, or give a "
                    "whole multiple of it",
                )  # fmt: skip
        return DrivePeriod(given, None, tuple(periodic), start, shortest, True, unknown)
    if unknown:
        wave = unknown[0]
        raise _refuse(
            wave, f"cannot take the period from {wave.describe()}: {wave.unknown}",
            "pass --period T; settle then checks that the waveforms repeat with it",
        )  # fmt: skip
    if not periodic:
        raise UsageError(
            "the deck has no periodic source (PULSE with a period, SIN, PWL with r=, SFFM, "
            "AM), so there is no period to settle with",
            hint="pass --period T if the circuit oscillates by itself",
        )
    least = Fraction(0)
    for wave in periodic:
        assert wave.period is not None
        least = wave.period if not least else lcm(least, wave.period)
        if shortest is not None and least > MAX_RATIO * Fraction(f"{shortest:.15g}"):
            listed = ", ".join(f"{w.describe()} {seconds(float(w.period or 0))}" for w in periodic)
            raise _refuse(
                wave, f"the sources' periods do not share a period within {MAX_RATIO} of the "
                f"shortest ({listed}): they are incommensurate for settle",
                "make the periods whole multiples of one period, or pass --period T "
                "for a period all of them repeat with",
            )  # fmt: skip
    return DrivePeriod(float(least), least, tuple(periodic), start, shortest, False)


def seconds(value: float) -> str:
    """A time for people: ``1 ms``, ``10 us``, ``2.5 s``."""
    for unit, scale in (("s", 1.0), ("ms", 1e-3), ("us", 1e-6), ("ns", 1e-9)):
        if abs(value) >= scale:
            return f"{value / scale:.4g} {unit}"
    return f"{value:.4g} s"
