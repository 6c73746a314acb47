"""``exponential``: R = R0 * 1.01^(tce (T - tref)), ngspice's resistor ``tce`` model.

ngspice manual 3.3.1, eq. 12 (checked against ngspice 39.3: tce = 0.5 over +20 K gives
1.01^10).  ``tce`` is thus roughly "percent per kelvin".
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

_LN101 = math.log(1.01)


@register
@dataclass(frozen=True, slots=True)
class Exponential(TempModel):
    """R = R0 1.01^(tce (T - tref)) (ngspice manual 3.3.1, eq. 12)."""

    name: ClassVar[str] = "exponential"
    summary: ClassVar[str] = "ngspice's tce model: R0 1.01^(tce dT)"
    valid_range: ClassVar[ValidRange | None] = None  # a coefficient fit: no published range
    params: ClassVar[tuple[ParamSpec, ...]] = (
        ParamSpec(
            "tce",
            "%/K",
            "exponent of 1.01 per kelvin (about percent per kelvin)",
            required=True,
            example="0.5",
        ),
    )

    r0: float
    tref: float
    tce: float

    @classmethod
    def from_params(
        cls, params: Mapping[str, ParamValue], r_nominal: float, tref: float | None = None
    ) -> Self:
        tce = written(params, "tce")
        assert tce is not None
        return cls(r0=r_nominal, tref=cls.reference(tref), tce=tce)

    @property
    def _k(self) -> float:
        return self.tce * _LN101

    @property
    def reference_temperature(self) -> float:
        return self.tref

    def _resistance(self, t_c: FloatArray) -> FloatArray:
        return self.r0 * np.exp(self._k * (t_c - self.tref))

    def _slope(self, t_c: FloatArray) -> FloatArray:
        return self._k * self._resistance(t_c)

    def expression(self, temp: str, number: NumberFormat = fmt) -> str:
        return (
            f"{paren(number(self.r0))}*exp({paren(number(self._k))}*"
            f"({paren(temp)}-{paren(number(self.tref))}))"
        )

    @classmethod
    def warnings(cls, params: Mapping[str, ParamValue]) -> tuple[ParamWarning, ...]:
        tce = written(params, "tce")
        if tce is not None and abs(tce) > 10:
            return (
                ParamWarning(
                    "tce",
                    f"tce = {fmt(tce)} means about {fmt(tce)} % per kelvin, which is implausible",
                    f"tce is in %/K; {fmt(tce)} ppm/K would be tce = {fmt(tce * 1e-4)}",
                ),
            )
        return ()
