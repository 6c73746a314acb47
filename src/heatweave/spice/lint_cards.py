"""Card rules lint adds to the grammar: cards that parse but that ngspice 39 rejects, never
finishes, runs with no points, or quietly replaces by a default.

Analysis cards (manual 15.3): ``.tran``, ``.ac``, ``.dc`` and ``.noise`` need their sweep
values, and some of those must be positive.  Resistors (3.3.1): a card without a value, or
with the value 0, becomes 1 mOhm.  Each rule names what ngspice 39.3 itself does with such a
card; values written as expressions (``{tend}``) are not evaluated here.  ``lint`` runs
these rules; the simulating commands refuse an analysis ngspice would run to no points
(:func:`empty_analyses`, through :func:`heatweave.spice.acceptance.refuse_rejected`).
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass

from heatweave.errors import DeckSyntaxError, Finding
from heatweave.spice.deck import Card
from heatweave.spice.element_syntax import FORMS as ELEMENT_FORMS
from heatweave.spice.grammar import CardSyntaxError, parse_card, syntax_of
from heatweave.spice.syntax import (
    Call,
    CardSyntax,
    DotSyntax,
    ElementSyntax,
    Field,
    ModelSyntax,
    Value,
    ValueKind,
)


@dataclass(frozen=True, slots=True)
class Problem:
    """One finding of a card rule, at ``offset`` in the card's logical text."""

    offset: int
    severity: str
    message: str
    hint: str
    #: ngspice 39 loads and runs the analysis but computes no points: lint warns (issue 17:
    #: plain lint passes a deck ngspice runs), the simulating commands refuse it.
    empty: bool = False


# General forms, after the manual's sections (15.3.10, 15.3.1, 15.3.2, 15.3.4).
FORMS: dict[str, str] = {
    "tran": ".tran <tstep> <tstop> [<tstart> [<tmax>]] [uic]",
    "ac": ".ac dec|oct|lin <points> <fstart> <fstop>",
    "dc": ".dc <source> <vstart> <vstop> <vincr> [<source2> <start2> <stop2> <incr2>]",
    "noise": ".noise v(<out>[,<ref>]) <source> dec|oct|lin <points> <fstart> <fstop>",
}
_SWEEP_TYPES = ("dec", "oct", "lin")


class _Reader:
    """The positional fields of one analysis card, read slot by slot.

    Only the first missing slot is reported (the rest are missing for the same reason).
    """

    def __init__(self, syntax: DotSyntax, args: Sequence[Field], text: str) -> None:
        self.card = f".{syntax.name}"
        self.args = args
        self.source = text
        self.end = len(text.rstrip())
        self.hint = f"write {FORMS[syntax.name]}"
        self.problems: list[Problem] = []
        self.complete = True

    def add(self, offset: int, message: str, severity: str = "error", hint: str = "") -> None:
        self.problems.append(Problem(offset, severity, message, hint or self.hint))

    def empty(self, offset: int, message: str, hint: str = "") -> None:
        """An analysis ngspice 39 runs to no points (a warning; see :attr:`Problem.empty`)."""
        self.problems.append(Problem(offset, "warning", message, hint or self.hint, True))

    def field(self, i: int, what: str) -> Field | None:
        """Slot *i*, or ``None`` (reported once) when the card ends before it."""
        if i < len(self.args):
            return self.args[i]
        if self.complete:
            self.add(self.end, f"{self.card} is missing {what}")
            self.complete = False
        return None

    def number(self, i: int, name: str, what: str) -> float | None:
        """Slot *i* as a number; ``None`` when missing or an expression (not evaluated)."""
        field = self.field(i, f"{name}, {what}")
        if isinstance(field, Value) and field.kind is ValueKind.NUMBER:
            return field.number
        if isinstance(field, Value) and field.kind is ValueKind.NAME:
            self.add(field.offset, f"{self.card} {name} must be a number, not {field.text!r}")
        return None

    def offset(self, i: int) -> int:
        return self.args[i].offset

    def text(self, i: int) -> str:
        return self.source[self.args[i].offset : self.args[i].end]

    def positive(self, i: int, name: str, value: float | None) -> None:
        if value is not None and value <= 0:
            message = f"{self.card} {name} must be greater than zero, not {self.text(i)}"
            self.add(self.offset(i), message)

    def sweep_type(self, i: int) -> str | None:
        """``dec``, ``oct`` or ``lin`` in slot *i* (lower case), else reported and ``None``."""
        field = self.field(i, "the sweep type (dec, oct or lin)")
        if field is None:
            return None
        if isinstance(field, Value) and field.key in _SWEEP_TYPES:
            return field.key
        text = self.source[field.offset : field.end]
        self.add(field.offset, f"{self.card} expects dec, oct or lin, not {text!r}")
        return None


def _tran(r: _Reader) -> None:
    """15.3.10; ngspice 39: "TSTEP/TSTOP is invalid, must be greater than zero", "TSTART is
    invalid, must be less than TSTOP"; a negative tmax stops with "Timestep too small"."""
    tstep = r.number(0, "tstep", "the time step")
    r.positive(0, "tstep", tstep)
    tstop = r.number(1, "tstop", "the stop time")
    r.positive(1, "tstop", tstop)
    if len(r.args) > 2:
        tstart = r.number(2, "tstart", "the time output starts")
        if tstart is not None and tstop is not None and tstop > 0 and tstart >= tstop:
            message = f".tran tstart must be less than tstop ({r.text(1)}), not {r.text(2)}"
            r.add(r.offset(2), message)
    if len(r.args) > 3:
        tmax = r.number(3, "tmax", "the largest time step")
        if tmax is not None and tmax < 0:
            r.add(
                r.offset(3), f".tran tmax must not be negative, not {r.text(3)}",
                hint="leave tmax out (or write 0) to let ngspice choose it",
            )  # fmt: skip


def _frequencies(r: _Reader, first: int, strict: bool) -> None:
    """``dec|oct|lin points fstart fstop`` from slot *first* (15.3.1, 15.3.4).

    *strict* (``.noise``) rejects what ``.ac`` only bends: ngspice 39 runs ``.ac`` with 0
    points as 1 point (per decade) and a lin sweep from 0 Hz, while ``.noise`` stops at both.
    """
    kind = r.sweep_type(first)
    if kind is None:
        return
    points = r.number(first + 1, "points", f"the number of points{_PER.get(kind, '')}")
    if points is not None and points < 1:
        if strict:
            r.positive(first + 1, "points", points)
        else:
            r.add(
                r.offset(first + 1),
                f"{r.card} points must be at least 1, not {r.text(first + 1)}",
                "warning", f"ngspice 39 computes 1 point{_PER.get(kind, '')} instead",
            )  # fmt: skip
    fstart = r.number(first + 2, "fstart", "the start frequency")
    if fstart is not None and fstart < 0:
        r.add(r.offset(first + 2), f"{r.card} fstart must not be negative, not {r.text(first + 2)}")
    elif fstart == 0 and (strict or kind != "lin"):
        sweep = "" if strict else f" for a {kind} sweep"
        r.add(r.offset(first + 2), f"{r.card} fstart must be greater than zero{sweep}, not 0")
    if not strict and len(r.args) == first + 3 and r.complete:
        r.empty(r.end, f"{r.card} is missing fstop, the stop frequency: ngspice 39 runs it "
                "and computes no points")  # fmt: skip
        return
    fstop = r.number(first + 3, "fstop", "the stop frequency")
    if fstop is None:
        return
    if fstop < 0 or (strict and fstop == 0):
        r.positive(first + 3, "fstop", fstop)
    elif fstart is not None and fstop < fstart:
        r.empty(
            r.offset(first + 3),
            f"{r.card} fstop {r.text(first + 3)} is below fstart {r.text(first + 2)}: "
            "ngspice 39 computes no points",
        )


_PER = {"dec": " per decade", "oct": " per octave"}


def _ac(r: _Reader) -> None:
    """15.3.1; ngspice 39: no fstop runs with no points; "AC startfreq <= 0" for a dec or
    oct sweep from 0 Hz; "Frequency of < 0 is invalid for AC start/stop"."""
    _frequencies(r, 0, strict=False)


def _noise(r: _Reader) -> None:
    """15.3.4; ngspice 39: "bad syntax [.noise v(OUT) SRC {DEC OCT LIN} NP FSTART FSTOP
    <PTSPRSUM>]" without ``v(...)``, "Frequency of 0 is invalid" for a missing or zero
    frequency, "Number of steps for noise measurement has to be larger than 0"."""
    output = r.field(0, "the output, v(<node>)")
    if output is None:
        return
    if not (isinstance(output, Call) and output.name.key == "v"):
        text = r.source[output.offset : output.end]
        r.add(output.offset, f".noise expects the output as v(<node>), not {text!r}")
        return
    if r.field(1, "the input source") is None:
        return
    _frequencies(r, 2, strict=True)


def _dc(r: _Reader) -> None:
    """15.3.2; ngspice 39: no vincr, or vincr 0, never finishes; a vincr that points away
    from vstop gives no points; no source at all is "no such device"."""
    for base, names in ((0, _DC_NAMES[0]), (4, _DC_NAMES[1]))[: 2 if len(r.args) > 4 else 1]:
        source, first, last, step = names
        if r.field(base, source) is None:
            return
        start = r.number(base + 1, first, "the first value")
        stop = r.number(base + 2, last, "the last value")
        incr = r.number(base + 3, step, "the step")
        if incr == 0:
            r.add(r.offset(base + 3), f".dc {step} must not be zero: ngspice 39 never finishes")
        elif incr is not None and _leads_away(start, stop, incr):
            r.empty(
                r.offset(base + 3),
                f".dc {step} {r.text(base + 3)} leads away from {last} {r.text(base + 2)}: "
                "ngspice 39 computes no points",
                hint=f"give {step} the sign of {last} - {first}",
            )


def _leads_away(start: float | None, stop: float | None, incr: float) -> bool:
    return start is not None and stop is not None and (stop - start) * incr < 0


_DC_NAMES = (
    ("the source to sweep", "vstart", "vstop", "vincr"),
    ("source2", "start2", "stop2", "incr2"),
)


_ANALYSES: dict[str, Callable[[_Reader], None]] = {
    "tran": _tran, "ac": _ac, "dc": _dc, "noise": _noise,
}  # fmt: skip


def _analysis(syntax: DotSyntax, text: str) -> list[Problem]:
    rule = _ANALYSES.get(syntax.name)
    if rule is None:
        return []
    args = [a for a in syntax.args if not (isinstance(a, Value) and a.key == "uic")]
    reader = _Reader(syntax, args if syntax.name == "tran" else syntax.args, text)
    rule(reader)
    return reader.problems


ModelLookup = Callable[[str], Card | None]


def _resistor(syntax: ElementSyntax, end: int, model_of: ModelLookup) -> list[Problem]:
    """3.3.1; ngspice 39: no value (or a model with neither rsh nor r) gives "Warning: r3:
    resistance to low, set to 1 mOhm"; the value 0 becomes 1 mOhm with no word at all."""
    param = syntax.param("r") or syntax.param("resistance")
    words = [f for f in syntax.positional if isinstance(f, Value)]
    value = param.value if param else next((w for w in words if w.kind is not ValueKind.NAME), None)
    name = syntax.name.text
    if value is not None:
        if isinstance(value, Value) and value.number == 0:
            return [Problem(
                value.offset, "warning",
                f"{name} has resistance 0, which ngspice 39 silently replaces by 1 mOhm",
                "a resistance may be positive or negative but not zero (manual 3.3.1); "
                "for a short, use a 0 V voltage source",
            )]  # fmt: skip
        return []
    model = next((w for w in words if w.kind is ValueKind.NAME), None)
    where = syntax.nodes[-1].end if syntax.nodes else end
    example = f"e.g. {name} {' '.join(n.text for n in syntax.nodes)} 1k"
    if model is None:
        return [Problem(
            where, "warning", f"{name} has no resistance value; ngspice 39 uses 1 mOhm",
            f"write {ELEMENT_FORMS['r']}, {example}",
        )]  # fmt: skip
    if _model_sets_value(model_of(model.key)):
        return []
    return [Problem(
        model.offset, "warning",
        f"{name} has no resistance value and model {model.text} sets neither rsh nor r; "
        "ngspice 39 uses 1 mOhm",
        f"write the value on the card ({example}), or rsh= on the model",
    )]  # fmt: skip


def _model_sets_value(card: Card | None) -> bool:
    """True when *card* (a ``.model``) gives a resistance, or is unknown (not judged here)."""

    if card is None:
        return True
    try:
        model = parse_card(card.logical().text)
    except CardSyntaxError:
        return True  # the grammar check reports it
    if not isinstance(model, ModelSyntax):
        return True
    return any(model.param(key) for key in ("rsh", "r", "res"))


def card_problems(syntax: CardSyntax, text: str, model_of: ModelLookup) -> list[Problem]:
    """What lint says about one parsed card beyond its grammar (*text*: its logical text)."""
    if isinstance(syntax, DotSyntax):
        return _analysis(syntax, text)
    if isinstance(syntax, ElementSyntax) and syntax.letter == "r":
        return _resistor(syntax, len(text.rstrip()), model_of)
    if isinstance(syntax, ElementSyntax) and syntax.letter in ("v", "i"):
        return _pulse_width(syntax, text)
    return []


def _pulse_width(syntax: ElementSyntax, text: str) -> list[Problem]:
    """4.1.1: PW defaults to TSTOP, and ngspice 39 reads a PW of 0 as not given, so the
    source rises once and stays at V2: a triangle or a spike written with PW 0 is not one.
    *text* lets the grammar read a PULSE without parentheses too (ngspice 39 runs it)."""
    function = syntax.source(text).function
    if function is None or function.name.key != "pulse" or len(function.args) < 6:
        return []
    width = function.args[5]
    if not (isinstance(width, Value) and width.number == 0):
        return []
    return [Problem(
        width.offset, "warning",
        f"{syntax.name.text}'s PULSE has PW 0, which ngspice 39 reads as its default, TSTOP: "
        "the source rises once and stays at V2",
        "for a triangle or a spike write a tiny width, e.g. 1p (manual 4.1.1)",
    )]  # fmt: skip


def empty_analyses(cards: Iterable[Card]) -> Iterator[Finding]:
    """Each analysis card among *cards* that ngspice 39 runs to no points, as a located
    error: a command that would simulate it computes nothing, so it refuses the deck."""
    for card in cards:
        if card.name not in (".ac", ".dc", ".noise"):
            continue
        try:
            syntax = syntax_of(card)
        except DeckSyntaxError:
            continue  # the grammar's finding; lint reports it
        if not isinstance(syntax, DotSyntax):
            continue
        for problem in _analysis(syntax, card.logical().text):
            if problem.empty:
                yield Finding("error", problem.message, card.location(problem.offset),
                              problem.hint)  # fmt: skip
