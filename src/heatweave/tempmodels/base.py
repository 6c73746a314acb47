"""The one interface every temperature model implements, and the key declarations.

A model is a frozen dataclass built from annotation keys.  Each model declares the keys it
accepts as :class:`ParamSpec` rows; the annotation validator and the JSON Schema are both
generated from these rows, so a key documented in one place is checked in the other.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import ClassVar, Self, overload

import numpy as np
import numpy.typing as npt

from heatweave.quantities import format_number

FloatArray = npt.NDArray[np.float64]
# A validated annotation value: a number, or a list of (x, y) points for table-like keys.
ParamValue = float | tuple[tuple[float, float], ...]

# Writes a constant into an expression.  The default writes the number itself; ngspice 39.3
# rounds numbers written inside B-source expressions to 11 significant digits (a `.param`
# value keeps full double precision), so an emitter that needs more can pass a function
# that declares `.param NAME = VALUE` and returns NAME.
NumberFormat = Callable[[float], str]

KELVIN_OFFSET = 273.15


@dataclass(frozen=True, slots=True)
class ParamSpec:
    """One annotation key a model accepts.

    ``group`` names the quantity; several keys of one group are aliases in different units
    (``tc1`` in 1/K, ``tc1_ppm`` in ppm/K) and at most one of them may be written.  ``scale``
    turns the key's unit into the group's unit.  ``required`` applies to the group.
    """

    key: str
    unit: str
    meaning: str
    group: str = ""
    scale: float = 1.0
    required: bool = False
    default: float | None = None
    positive: bool = False
    kind: str = "number"  # "number" | "points"
    example: str = ""  # a typical value, for hints

    @property
    def group_name(self) -> str:
        return self.group or self.key


@dataclass(frozen=True, slots=True)
class ValidRange:
    """The temperatures (degC) over which a model's formula is defined, and who says so.

    Outside it the formula is an extrapolation: a polynomial such as Callendar-Van Dusen
    bends back, so a solution found there is not a physical answer.
    """

    low: float
    high: float
    source: str  # the standard or data sheet that defines the range

    def __contains__(self, t_c: object) -> bool:
        return isinstance(t_c, int | float) and self.low <= t_c <= self.high

    def describe(self) -> str:
        """``-200 to 850 degC (IEC 60751)``."""
        return f"{self.low:g} to {self.high:g} degC ({self.source})"


@dataclass(frozen=True, slots=True)
class ParamWarning:
    """A likely unit slip or implausible value: which key, what looks wrong, what to try."""

    key: str
    message: str
    hint: str | None = None


def pick(
    params: Mapping[str, ParamValue], specs: tuple[ParamSpec, ...], group: str
) -> float | None:
    """*group*'s value in the group's unit, from whichever alias was written, else the default."""
    default: float | None = None
    for spec in specs:
        if spec.group_name != group:
            continue
        if spec.default is not None:
            default = spec.default
        value = params.get(spec.key)
        if isinstance(value, int | float):
            return in_group_unit(float(value), spec.scale)
    return default


def in_group_unit(value: float, scale: float) -> float:
    """*value* times *scale*, dividing by the reciprocal for sub-unit scales so that
    ``tc1_ppm = 20`` becomes exactly the float nearest 2e-05 (not 1.9999999999999998e-05)."""
    if 0 < scale < 1:
        reciprocal = round(1.0 / scale)
        if abs(reciprocal * scale - 1.0) < 1e-12:
            return value / reciprocal
    return value * scale


def written(params: Mapping[str, ParamValue], key: str) -> float | None:
    """The number written under *key*, or ``None``."""
    value = params.get(key)
    return float(value) if isinstance(value, int | float) else None


class TempModel(ABC):
    """R as a function of the part's own temperature (degC), for Python and for ngspice."""

    __slots__ = ()

    name: ClassVar[str]
    summary: ClassVar[str]
    params: ClassVar[tuple[ParamSpec, ...]]
    # The temperature at which the deck's value holds when the annotation gives no ``tref``.
    default_tref: ClassVar[float] = 25.0
    # Where the formula is defined, ``None`` when no published range applies to the model
    # as such.  Every registered model declares it in its own class body (see ``register``).
    valid_range: ClassVar[ValidRange | None] = None

    @classmethod
    @abstractmethod
    def from_params(
        cls, params: Mapping[str, ParamValue], r_nominal: float, tref: float | None = None
    ) -> Self:
        """Build from validated key values; *r_nominal* (ohm) holds at *tref* (degC)."""

    @classmethod
    def reference(cls, tref: float | None) -> float:
        """The temperature (degC) at which the deck's value holds: *tref*, else the default."""
        return cls.default_tref if tref is None else tref

    @property
    def reference_temperature(self) -> float:
        """The temperature (degC) the model's nominal value belongs to: ``tref`` where the
        deck's value holds there, else the one the model's own nominal key names (``r0`` of
        ``rtd``: 0 degC, ``r25``: 25 degC).  Every model answers here, whatever it calls it."""
        return self.default_tref

    @property
    def nominal_resistance(self) -> float:
        """R (ohm) at :attr:`reference_temperature`: the ``nominal_resistance`` every method
        reports, and what a resistance change is measured against."""
        return float(self.resistance(self.reference_temperature))

    @abstractmethod
    def _resistance(self, t_c: FloatArray) -> FloatArray: ...

    @abstractmethod
    def _slope(self, t_c: FloatArray) -> FloatArray: ...

    @abstractmethod
    def expression(self, temp: str, number: NumberFormat = format_number) -> str:
        """An ngspice B-source expression for R in ohms; *temp* is the temperature in degC.

        Every constant goes through *number* (see :data:`NumberFormat`).
        """

    @classmethod
    def warnings(cls, params: Mapping[str, ParamValue]) -> tuple[ParamWarning, ...]:
        """Likely unit slips in the written keys; none by default."""
        return ()

    @overload
    def resistance(self, t_c: float) -> float: ...
    @overload
    def resistance(self, t_c: FloatArray) -> FloatArray: ...
    def resistance(self, t_c: float | FloatArray) -> float | FloatArray:
        """R in ohms at part temperature *t_c* (degC)."""
        return _apply(self._resistance, t_c)

    @overload
    def slope(self, t_c: float) -> float: ...
    @overload
    def slope(self, t_c: FloatArray) -> FloatArray: ...
    def slope(self, t_c: float | FloatArray) -> float | FloatArray:
        """dR/dT in ohm/K at *t_c* (degC)."""
        return _apply(self._slope, t_c)


def _apply(func: object, t_c: float | FloatArray) -> float | FloatArray:
    """*func* at *t_c*; past a float's range it gives inf or nan, which the caller judges
    (a state with such a value is never reported), so numpy is not let to print about it."""
    assert callable(func)
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        result: FloatArray = func(np.asarray(t_c, dtype=np.float64))
    if np.ndim(t_c) == 0:
        return float(result)
    return result


def paren(expr: str) -> str:
    """*expr* in parentheses, so it can be used as an operand."""
    return f"({expr})"
