"""SPICE numbers: scale factors exactly as ngspice 39 reads them.

ngspice (manual 2.1.4.2/2.1.4.3, checked against 39.3 in ``shared/reference``):
scale factors ``T G Meg K mil m u n p f`` are case-insensitive, ``M`` is milli (mega is
``meg``), there is no atto, letters after a number or after a scale factor are ignored
(``10kOhm`` = 1e4, ``3.3MOhm`` = 3.3e-3, ``1k5`` = 1e3).  Inside ``{...}`` expressions
``mil`` is not recognised; that is the expression evaluator's business, not this module's.
"""

from __future__ import annotations

import functools
import math
import re

import click

_NUMBER = re.compile(
    r"\s*(?P<num>[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)(?P<suffix>[A-Za-z_]\w*)?\s*$"
)

# Longest first: "meg" and "mil" before "m".
_SCALES: tuple[tuple[str, float], ...] = (
    ("meg", 1e6),
    ("mil", 25.4e-6),
    ("t", 1e12),
    ("g", 1e9),
    ("k", 1e3),
    ("m", 1e-3),
    ("u", 1e-6),
    ("n", 1e-9),
    ("p", 1e-12),
    ("f", 1e-15),
)


def scale_of(suffix: str) -> float:
    """The multiplier a suffix stands for; unknown letters (units) give 1."""
    low = suffix.lower()
    for name, factor in _SCALES:
        if low.startswith(name):
            return factor
    return 1.0


@functools.lru_cache(maxsize=4096)  # a large deck repeats its values many times over
def parse_number(text: str) -> float | None:
    """Read a SPICE number such as ``4.7k``, ``10kOhm``, ``1e-3`` or ``2MEG``.

    Returns ``None`` when *text* is not a number (an expression, a parameter name).
    Trailing digits after the scale factor (``1k5``) are ignored as ngspice does.
    """
    m = _NUMBER.match(text)
    if m is None:
        return None
    return float(m.group("num")) * scale_of(m.group("suffix") or "")


_INPEVAL = re.compile(
    r"\s*(?P<sign>[+-]?)(?P<whole>\d*)(?:\.(?P<frac>\d*))?(?:[eE](?P<exp>[+-]?\d+))?"
    r"(?P<suffix>(?:[A-Za-z]\w*)?)"
)
_EXPONENTS: dict[str, int] = {"t": 12, "g": 9, "k": 3, "m": -3, "u": -6, "n": -9, "p": -12,
                              "f": -15}  # fmt: skip


def ngspice_double(text: str) -> float | None:
    """The double ngspice 39 reads from a plain number, bit for bit: its reader adds up the
    digits as ``mantissa = 10 * mantissa + digit`` and multiplies by ``pow(10, exponent)``
    (decimals, ``e``, scale factor), which is not always the nearest double to the
    decimal: ``0.3m`` and ``300u`` differ by an ulp, and ngspice compares them so (a PWL's
    ``r=`` must equal one of its times).  ``None`` when *text* is not a plain number."""
    m = _INPEVAL.fullmatch(text)
    if m is None or not (m.group("whole") or m.group("frac")):
        return None
    mantissa, exponent = 0.0, 0
    for digit in m.group("whole"):
        mantissa = 10 * mantissa + int(digit)
    for digit in m.group("frac") or "":
        mantissa = 10 * mantissa + int(digit)
        exponent -= 1
    exponent += int(m.group("exp") or 0)
    low = m.group("suffix").lower()
    if low.startswith("meg"):
        exponent += 6
    elif low.startswith("mil"):
        mantissa, exponent = mantissa * 25.4, exponent - 6
    elif low[:1] in _EXPONENTS:
        exponent += _EXPONENTS[low[:1]]
    sign = -1.0 if m.group("sign") == "-" else 1.0
    try:
        return sign * mantissa * math.pow(10.0, exponent)
    except OverflowError:
        return None


def parse_quantity(text: str, unit: str = "") -> tuple[float | None, str | None]:
    """A quantity typed on the command line: ``(value, None)``, or ``(None, why not)``.

    Stricter than a deck (:func:`parse_number`, where ngspice ignores trailing letters): a
    number, an optional scale factor, then at most *unit* (``5ms``, ``100ppm``), each
    case-insensitive.  ``5x`` or ``1k5`` is a typo here, not 5 or 1000; ``mil`` is a length
    and is taken only where the option has no unit; where the unit is kelvin, a ``K`` is
    refused, since SPICE reads it as kilo."""
    if unit and not unit[0].isalpha() and text.rstrip().endswith(unit):  # 5%
        text, unit = text.rstrip()[: -len(unit)], ""
    m = _NUMBER.match(text)
    if m is None:
        return None, f"{text!r} is not a number"
    number, suffix = float(m.group("num")), m.group("suffix") or ""
    low, own = suffix.lower(), unit.lower()
    if unit.upper() == "K" and low.startswith("k"):
        return None, (
            f"{text!r}: SPICE reads {suffix[0]!r} as kilo, while the unit here is kelvin; "
            f"write a plain number of K, e.g. {m.group('num')}"
        )
    if low in ("", own):
        return number, None
    for name, factor in _SCALES:
        if low.startswith(name) and low[len(name) :] in ("", own):
            if name == "mil" and own:
                break
            return number * factor, None
    what = f"nor {unit} (the unit here)" if unit else "and this value has no unit"
    return None, (f"{text!r}: {suffix!r} is neither a scale factor (T G Meg K m u n p f) {what}")


def counted(count: int, noun: str, plural: str | None = None) -> str:
    """``1 window``, ``3 windows``: a count with its noun in the right number."""
    return f"{count} {noun if count == 1 else plural or noun + 's'}"


def format_number(value: float) -> str:
    """A compact, exact (``repr``-precise) SPICE number for emitted decks."""
    if value == 0:
        return "0"
    text = repr(float(value))
    if text.endswith(".0"):
        text = text[:-2]
    return text


class SpiceQuantity(click.ParamType):  # type: ignore[type-arg]
    """A click option type taking plain numbers or SPICE scale factors (``1m``, ``10u``)."""

    name = "quantity"

    def __init__(self, unit: str = "", positive: bool = False) -> None:
        self.unit = unit
        self.positive = positive

    def convert(
        self, value: object, param: click.Parameter | None, ctx: click.Context | None
    ) -> float:
        problem = None
        if isinstance(value, int | float):
            number: float | None = float(value)
        else:
            number, problem = parse_quantity(str(value), self.unit)
        if number is None:
            self.fail(
                f"{problem}; write a number with a scale factor, e.g. 10m, 2.5u, 1e-3"
                + (f" ({self.unit})" if self.unit else ""),
                param,
                ctx,
            )
        if not math.isfinite(number):
            self.fail(f"{value!r} {NOT_FINITE}", param, ctx)
        if self.positive and number <= 0:
            self.fail(f"{value!r} must be greater than zero", param, ctx)
        return number


#: Why a value such as ``1e400`` is refused: it overflows a double to infinity.
NOT_FINITE = "is not a finite number (it overflows to infinity); write a value below 1e308"

#: 0 K in degC; no temperature lies below it.
ABSOLUTE_ZERO = -273.15
#: degC above which heatweave reports no state (``heatweave.run.results.IMPLAUSIBLE_TEMPERATURE``):
#: an ambient above it leaves no part a physical answer, so it is refused where written.
HOTTEST_AMBIENT = 1000.0
_PLAIN = re.compile(r"\s*[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?\s*$")


def temperature_problem(text: str, span: bool = True) -> str | None:
    """Why *text* is not a temperature in degC, or ``None`` when it is one.

    A temperature is a plain number: a letter after it is refused, since SPICE would read
    ``77F`` as 77 femto and ``300K`` as 300 kilo, while the writer meant Fahrenheit or
    kelvin; with *span* (not for a step in kelvin) a value below absolute zero or above
    :data:`HOTTEST_AMBIENT` is refused too."""
    if not _PLAIN.match(text):
        unit = _NUMBER.match(text)
        if unit is not None and unit.group("suffix"):
            return (
                f"{text!r} carries a unit or scale factor ({unit.group('suffix')!r}); "
                "temperatures are plain numbers in degC (SPICE would read F as femto and "
                "K as kilo), e.g. 25 or -40"
            )
        return f"{text!r} is not a temperature; write a number in degC, e.g. 25 or -40"
    value = float(text)
    if not math.isfinite(value):
        return f"{text!r} is not a finite temperature (it overflows to infinity)"
    return outside_ambient_range(value) if span else None


def outside_ambient_range(value: float) -> str | None:
    """A sentence saying *value* (degC) lies below absolute zero or above
    :data:`HOTTEST_AMBIENT`, or ``None``."""
    if value < ABSOLUTE_ZERO:
        return f"{value:g} degC lies below absolute zero ({ABSOLUTE_ZERO:g} degC)"
    if value > HOTTEST_AMBIENT:
        return (
            f"{value:g} degC lies above {HOTTEST_AMBIENT:g} degC, the hottest state heatweave "
            "reports (every part would be hotter still)"
        )
    return None


class Temperature(click.ParamType):  # type: ignore[type-arg]
    """A click option type for a temperature in degC: a plain number, at or above 0 K."""

    name = "temperature"

    def convert(
        self, value: object, param: click.Parameter | None, ctx: click.Context | None
    ) -> float:
        if isinstance(value, int | float):
            problem = outside_ambient_range(float(value))
            number = float(value)
        else:
            problem = temperature_problem(str(value))
            number = float(str(value)) if problem is None else 0.0
        if problem is not None:
            self.fail(problem, param, ctx)
        return number
