"""The keys an annotation file may hold, declared once, and the checks of their values.

The validator (:mod:`heatweave.annotation`) and the JSON Schema
(:mod:`heatweave.annotation.schema`) are both generated from these declarations and from the
temperature models' own :class:`~heatweave.tempmodels.base.ParamSpec` rows.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, replace
from typing import Literal

import numpy as np

from heatweave.errors import AnnotationError, Location
from heatweave.quantities import format_number, parse_number
from heatweave.tempmodels import REGISTRY, ParamSpec

Kind = Literal[
    "integer", "number", "positive", "nonnegative", "string", "choice", "points", "stages", "pair"
]


@dataclass(frozen=True, slots=True)
class Field:
    """One key of one table: its kind of value, unit, meaning and an example for hints."""

    key: str
    kind: Kind
    unit: str = ""
    meaning: str = ""
    example: str = "1.0"
    required: bool = False
    tolerance: bool = False  # may be written as {nominal = ..., sigma = ...} etc.
    choices: tuple[str, ...] = ()
    # (low, high, why): the span outside which the physics heatweave computes means nothing.
    limits: tuple[float, float, str] | None = None
    default: str | float | None = None  # the value an absent key has (the schema's default)


#: Above this a thermal resistance's conductance (K/W -> W/K) is below ngspice's default gmin
#: (1e-12 S, manual 15.1.2), the conductance ngspice itself adds to keep nodes solvable: the
#: node's temperature would be set by that, not by the path written.
RTH_LIMIT = 1e12
RTH_LIMITS = (
    0.0,
    RTH_LIMIT,
    f"above {RTH_LIMIT:g} K/W its conductance is below ngspice's gmin (1e-12 S), which "
    "would set the temperature instead of the path written",
)
#: heatweave.run.results' implausible temperature: a reference past it is no measurement.
TREF_LIMITS = (
    -273.15,
    1000.0,
    "a reference temperature lies between absolute zero and 1000 degC, where a resistor's "
    "value can have been measured",
)


START_CHOICES = ("cold", "steady")
DEFAULT_DERATING_KNEE = 70.0  # degC, IEC 60115-1 convention

#: The top-level key that tells editors where this file's JSON Schema is (heatweave reads
#: nothing from it); TOML writes it quoted: ``"$schema" = "thermal.schema.json"``.
SCHEMA_POINTER = "$schema"
TOP_FIELDS = (
    Field("schema", "integer", "", "version of this file's layout", "1", required=True),
    Field(
        "start",
        "choice",
        "",
        "initial temperatures: cold (ambient) or steady",
        '"cold"',
        choices=START_CHOICES,
        default="cold",
    ),
    Field(
        SCHEMA_POINTER,
        "string",
        "",
        "where editors find this file's JSON Schema (heatweave schema -o FILE); not read",
        '"thermal.schema.json"',
    ),
)
AMBIENT_FIELDS = (
    Field("temperature", "number", "degC", "fixed ambient temperature", "25.0"),
    Field(
        "profile",
        "points",
        "[s, degC]",
        "ambient against time, piecewise linear",
        "[[0, 25], [600, 40]]",
    ),
)
RTH = Field(
    "rth",
    "positive",
    "K/W",
    "thermal resistance to `to`",
    "30.0",
    tolerance=True,
    limits=RTH_LIMITS,
)
CTH = Field(
    "cth",
    "nonnegative",
    "J/K",
    "heat capacity (0 or absent: steady state only)",
    "5.0",
    tolerance=True,
    default=0.0,
)
TO = Field(
    "to", "string", "", "a thermal node, or ambient (the default)", '"board"', default="ambient"
)
NODE_FIELDS = (replace(RTH, required=True), CTH, TO)
PART_FIELDS = (
    Field(
        "model",
        "choice",
        "",
        "temperature model of a resistor",
        '"linear"',
        choices=tuple(sorted(REGISTRY)),
    ),
    Field(
        "tref",
        "number",
        "degC",
        "temperature at which the deck's value holds",
        "25.0",
        limits=TREF_LIMITS,
    ),
    RTH,
    CTH,
    Field("foster", "stages", "[K/W, s]", "Foster stages (rth, tau)", "[[12.0, 0.01]]"),
    Field("cauer", "stages", "[K/W, J/K]", "Cauer stages (rth, cth)", "[[12.0, 0.05]]"),
    TO,
    Field("power_rating", "positive", "W", "rated power at the derating knee", "0.25"),
    Field("tmax", "number", "degC", "upper category temperature", "155.0"),
    Field(
        "derating_knee",
        "number",
        "degC",
        "full power up to here, linear to zero at tmax (IEC 60115-1)",
        "70.0",
        default=DEFAULT_DERATING_KNEE,
    ),
)
PATH_FIELDS = (
    Field(
        "between", "pair", "", "the two thermal nodes coupled", '["board", "sink"]', required=True
    ),
    replace(RTH, required=True, meaning="thermal resistance between the two nodes"),
)
LIMIT_FIELDS = (
    Field("max_drift_ppm", "positive", "ppm", "largest allowed drift from the cold value", "100"),
    Field("min", "number", "", "smallest allowed value", "0.0"),
    Field("max", "number", "", "largest allowed value", "5.0"),
)

#: The ``[review]`` table: thresholds of ``heatweave compare``'s gate.
REVIEW_FIELDS = (
    Field("max_rise_growth", "nonnegative", "K", "most a part's rise above ambient may grow", "2"),
    Field("max_drift_growth_ppm", "nonnegative", "ppm", "most a part's drift may grow", "50"),
    Field(
        "max_margin_loss_percent",
        "nonnegative",
        "%",
        "most a limit's margin may shrink, in percent of the old margin",
        "25",
    ),
)


def model_fields(specs: Iterable[ParamSpec]) -> tuple[Field, ...]:
    """A temperature model's keys as fields (numbers may carry a tolerance)."""
    fields: list[Field] = []
    for spec in specs:
        if spec.kind == "points":
            example = spec.example or "[[0, 1], [100, 2]]"
            fields.append(Field(spec.key, "points", spec.unit, spec.meaning, example))
        else:
            example = spec.example or (
                format_number(spec.default) if spec.default is not None else "1.0"
            )
            kind: Kind = "positive" if spec.positive else "number"
            # a group's default is in the group's unit: the key written in that unit has it
            default = spec.default if spec.scale == 1 else None
            fields.append(
                Field(spec.key, kind, spec.unit, spec.meaning, example, tolerance=True,
                      default=default)
            )  # fmt: skip
    return tuple(fields)


@dataclass(frozen=True, slots=True)
class Distribution:
    """A Monte Carlo tolerance: normal (``sigma``) or uniform (``low``..``high``)."""

    nominal: float
    sigma: float | None = None
    low: float | None = None
    high: float | None = None

    @property
    def kind(self) -> str:
        return "normal" if self.sigma is not None else "uniform"

    def draw(self, rng: np.random.Generator) -> float:
        """One random value (the caller redraws values outside the key's valid range)."""
        if self.sigma is not None:
            return float(rng.normal(self.nominal, self.sigma))
        assert self.low is not None and self.high is not None
        return float(rng.uniform(self.low, self.high))


def closest(word: str, known: Iterable[str]) -> str | None:
    """The known word most like *word*, for "did you mean" hints."""
    found = difflib.get_close_matches(word, list(known), n=1, cutoff=0.5)
    return found[0] if found else None


def shown(value: object) -> str:
    """A value as the user wrote it in TOML, for messages."""
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int | float):
        return format_number(float(value))
    if isinstance(value, list):
        if len(value) <= 4 and all(not isinstance(v, list | dict) for v in value):
            return "[" + ", ".join(shown(v) for v in value) + "]"
        return "an array"
    if isinstance(value, dict):
        return "a table"
    return type(value).__name__


def as_number(value: object) -> float | None:
    """A TOML number, or a string holding a SPICE number ("10k"); else ``None``."""
    if isinstance(value, bool):
        return None
    if isinstance(value, int | float):
        return float(value)
    if isinstance(value, str):
        return parse_number(value)
    return None


_NUMBER_WORDS = {
    "number": "a number",
    "positive": "a positive number",
    "nonnegative": "zero or a positive number",
    "integer": "an integer",
}


def fits(kind: Kind, number: float) -> bool:
    """Whether *number* is allowed for a numeric kind."""
    if not math.isfinite(number):
        return False
    if kind == "positive":
        return number > 0
    if kind == "nonnegative":
        return number >= 0
    return True


LocateFn = Callable[[], Location]


def _fail(field: Field, value: object, where: LocateFn, what: str | None = None) -> AnnotationError:
    unit = f" in {field.unit}" if field.unit and what is None else ""
    words = what or _NUMBER_WORDS.get(field.kind, "a value")
    return AnnotationError(
        f"{field.key} must be {words}{unit}, not {shown(value)}",
        where(),
        f"for example {field.key} = {field.example}",
    )


def check_number(field: Field, value: object, where: LocateFn) -> float:
    """A numeric key's value as float, or an :class:`AnnotationError` at *where*."""
    if field.kind == "integer":
        if isinstance(value, bool) or not isinstance(value, int):
            raise _fail(field, value, where)
        return float(value)
    number = as_number(value)
    if number is None or not fits(field.kind, number):
        raise _fail(field, value, where)
    if field.limits is not None and not field.limits[0] <= number <= field.limits[1]:
        low, high, why = field.limits
        raise AnnotationError(
            f"{field.key} = {shown(value)} is outside {low:g} to {high:g} {field.unit}: {why}",
            where(),
            f"for example {field.key} = {field.example}",
        )
    return number


def check_pairs(field: Field, value: object, where: LocateFn) -> tuple[tuple[float, float], ...]:
    """``[[x, y], ...]`` for points and stages; stages need positive numbers."""
    words = "an array of [" + ", ".join(field.unit.strip("[]").split(", ")) + "] pairs"
    if not isinstance(value, list) or not value:
        raise _fail(field, value, where, words)
    pairs: list[tuple[float, float]] = []
    for item in value:
        if not isinstance(item, list) or len(item) != 2:
            raise _fail(field, item, where, words)
        x, y = as_number(item[0]), as_number(item[1])
        if x is None or y is None or not (math.isfinite(x) and math.isfinite(y)):
            raise _fail(field, item, where, words)
        if field.kind == "stages" and not (x > 0 and y > 0):
            raise _fail(field, item, where, "an array of positive [" + field.unit[1:-1] + "] pairs")
        if field.kind == "stages" and x > RTH_LIMIT:
            raise AnnotationError(
                f"{field.key}: a stage's rth of {format_number(x)} K/W is too large: "
                f"{RTH_LIMITS[2]}",
                where(),
                f"for example {field.key} = {field.example}",
            )
        pairs.append((x, y))
    return tuple(pairs)


def check_string(field: Field, value: object, where: LocateFn) -> str:
    """A string key, and for choices one of the allowed words."""
    if not isinstance(value, str):
        raise _fail(field, value, where, "a string")
    if field.choices and value not in field.choices:
        near = closest(value, field.choices)
        options = " | ".join(field.choices)
        hint = f'did you mean "{near}"? one of {options}' if near else f"one of {options}"
        raise AnnotationError(f"{field.key} = {shown(value)} is unknown", where(), hint)
    return value


_TOLERANCE_KEYS = ("nominal", "sigma", "min", "max")
_TOLERANCE_HINT = "write {nominal = 25, sigma = 5} (normal) or {nominal = 25, min = 20, max = 30}"


def check_tolerance(field: Field, value: Mapping[str, object], where: LocateFn) -> Distribution:
    """A ``{nominal = ..., sigma = ...}`` or ``{nominal, min, max}`` table for *field*."""
    for key in value:
        if key not in _TOLERANCE_KEYS:
            near = closest(key, _TOLERANCE_KEYS)
            raise AnnotationError(
                f'unknown key "{key}" in the tolerance of {field.key}',
                where(),
                f'did you mean "{near}"?' if near else _TOLERANCE_HINT,
            )
    if "nominal" not in value:
        raise AnnotationError(
            f"the tolerance of {field.key} needs a nominal value", where(), _TOLERANCE_HINT
        )
    nominal = check_number(field, value["nominal"], where)
    spread = replace(field, kind="nonnegative", key=f"{field.key}.sigma")
    if "sigma" in value and not ({"min", "max"} & value.keys()):
        return Distribution(nominal, sigma=check_number(spread, value["sigma"], where))
    if "sigma" not in value and {"min", "max"} <= value.keys():
        bound = replace(field, kind="number")
        low = check_number(replace(bound, key=f"{field.key}.min"), value["min"], where)
        high = check_number(replace(bound, key=f"{field.key}.max"), value["max"], where)
        if not low <= nominal <= high:
            raise AnnotationError(
                f"the tolerance of {field.key} needs min <= nominal <= max, not "
                f"{format_number(low)} .. {format_number(nominal)} .. {format_number(high)}",
                where(),
                _TOLERANCE_HINT,
            )
        return Distribution(nominal, low=low, high=high)
    raise AnnotationError(
        f"the tolerance of {field.key} needs either sigma or both min and max",
        where(),
        _TOLERANCE_HINT,
    )
