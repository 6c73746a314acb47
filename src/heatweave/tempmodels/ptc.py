"""``ptc``: a switching PTC thermistor, smooth enough for Newton's method.

R(T) = r_cold (1 + F) / (1 + F r_cold / r_max),  F = 10^((T - t_switch) / decade).

Well below ``t_switch`` F vanishes and R = r_cold; above it R rises tenfold every ``decade``
kelvin (or by ``alpha_pct`` percent per kelvin) and levels off at ``r_max``.  At ``t_switch``
R is about twice r_cold, the usual way switch temperatures are stated (common practice).
The blend is smooth (no step), monotonic and bounded.  The exponent is clamped to +-200 in
Python and ngspice alike: ngspice 39.3's B-source ``exp`` saturates near 1e99 (argument ~228,
checked in the tests), and at +-200 the blend is already flat to double precision.

r_cold is ``r25`` if written, else chosen so that the deck's value holds at ``tref``: with
``r_max`` written that is R = r_c (1 + F) / (1 + F r_c / r_max) solved for r_c,
r_c = R / (1 + F (1 - R / r_max)); without it r_max = 10^4 r_c and r_c = R (1 + F q) / (1 + F)
with q = 10^-4.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import ClassVar, Self

import numpy as np

from heatweave.quantities import format_number as fmt
from heatweave.tempmodels.base import (
    FloatArray,
    NumberFormat,
    ParamSpec,
    ParamValue,
    ParamWarning,
    TempModel,
    ValidRange,
    paren,
    written,
)
from heatweave.tempmodels.registry import register

EXP_CLAMP = 200.0
DEFAULT_RATIO = 1e4


@register
@dataclass(frozen=True, slots=True)
class Ptc(TempModel):
    """Switching PTC: r_cold (1 + F) / (1 + F r_cold / r_max), F = exp(k (T - t_switch))."""

    name: ClassVar[str] = "ptc"
    summary: ClassVar[str] = "switching PTC thermistor, smooth exponential rise to r_max"
    valid_range: ClassVar[ValidRange | None] = None  # saturates at r_max: defined everywhere
    params: ClassVar[tuple[ParamSpec, ...]] = (
        ParamSpec(
            "r25",
            "ohm",
            "cold resistance (default: from the deck's value at tref)",
            positive=True,
            example="47.0",
        ),
        ParamSpec(
            "t_switch",
            "degC",
            "switch temperature, where R is about 2 r25",
            required=True,
            example="120.0",
        ),
        ParamSpec(
            "decade",
            "K",
            "kelvin per tenfold rise above t_switch",
            example="5.0",
            group="rise",
            required=True,
            positive=True,
        ),
        ParamSpec(
            "alpha_pct",
            "%/K",
            "rise above t_switch in percent per kelvin",
            example="50",
            group="rise",
            required=True,
            positive=True,
        ),
        ParamSpec(
            "r_max",
            "ohm",
            f"resistance the rise levels off at (default {DEFAULT_RATIO:g} r25)",
            positive=True,
        ),
    )

    r_cold: float
    t_switch: float
    k: float  # natural-log rise per kelvin
    r_max: float
    tref: float = 25.0  # degC where the nominal belongs: r25's 25, or tref for the deck's value

    @classmethod
    def from_params(
        cls, params: Mapping[str, ParamValue], r_nominal: float, tref: float | None = None
    ) -> Self:
        t_switch = written(params, "t_switch")
        assert t_switch is not None
        decade = written(params, "decade")
        alpha = written(params, "alpha_pct")
        if decade is not None:
            k = math.log(10.0) / decade
        else:
            assert alpha is not None
            k = math.log1p(alpha / 100.0)
        r25 = written(params, "r25")
        r_max = written(params, "r_max")
        at = 25.0
        if r25 is None:
            at = cls.reference(tref)
            r25 = cold_resistance(r_nominal, at, t_switch, k, r_max)
        if r_max is None:
            r_max = DEFAULT_RATIO * r25
        if r_max <= r25:
            raise ValueError(f"r_max ({fmt(r_max)} ohm) must exceed the cold resistance")
        return cls(r25, t_switch, k, r_max, at)

    @property
    def reference_temperature(self) -> float:
        return self.tref

    def _rise(self, t_c: FloatArray) -> FloatArray:
        return np.exp(np.clip(self.k * (t_c - self.t_switch), -EXP_CLAMP, EXP_CLAMP))

    def _resistance(self, t_c: FloatArray) -> FloatArray:
        f = self._rise(t_c)
        return self.r_cold * (1.0 + f) / (1.0 + f * (self.r_cold / self.r_max))

    def _slope(self, t_c: FloatArray) -> FloatArray:
        f = self._rise(t_c)
        q = self.r_cold / self.r_max
        inside = np.abs(self.k * (t_c - self.t_switch)) < EXP_CLAMP
        df = np.where(inside, self.k * f, 0.0)
        return self.r_cold * (1.0 - q) * df / (1.0 + f * q) ** 2

    def expression(self, temp: str, number: NumberFormat = fmt) -> str:
        arg = f"{paren(number(self.k))}*({paren(temp)}-{paren(number(self.t_switch))})"
        f = f"exp(min(max({arg},{number(-EXP_CLAMP)}),{number(EXP_CLAMP)}))"
        q = self.r_cold / self.r_max
        return f"{paren(number(self.r_cold))}*(1+{f})/(1+{f}*{paren(number(q))})"

    @classmethod
    def warnings(cls, params: Mapping[str, ParamValue]) -> tuple[ParamWarning, ...]:
        found: list[ParamWarning] = []
        decade = written(params, "decade")
        if decade is not None and decade < 0.2:
            found.append(
                ParamWarning(
                    "decade",
                    f"decade = {fmt(decade)} K is a near-step rise that Newton may not follow",
                    "a real PTC rises tenfold over a few kelvin, e.g. decade = 5",
                )
            )
        alpha = written(params, "alpha_pct")
        if alpha is not None and alpha < 1:
            found.append(
                ParamWarning(
                    "alpha_pct",
                    f"alpha_pct = {fmt(alpha)} %/K is a very slow rise for a switching PTC",
                    "alpha_pct is in percent per kelvin, e.g. alpha_pct = 50",
                )
            )
        return tuple(found)


def cold_resistance(
    r_nominal: float, tref: float, t_switch: float, k: float, r_max: float | None
) -> float:
    """The cold resistance that makes R(tref) the deck's value *r_nominal* (module docstring)."""
    f = math.exp(min(max(k * (tref - t_switch), -EXP_CLAMP), EXP_CLAMP))
    if r_max is None:
        return r_nominal * (1.0 + f / DEFAULT_RATIO) / (1.0 + f)
    if r_nominal >= r_max:
        raise ValueError(
            f"the deck's value ({fmt(r_nominal)} ohm) must lie below r_max ({fmt(r_max)} ohm)"
        )
    return r_nominal / (1.0 + f * (1.0 - r_nominal / r_max))
