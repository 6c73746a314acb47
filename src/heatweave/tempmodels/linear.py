"""``linear``: R = R0 (1 + tc1 dT), dT = T - tref, the SPICE resistor's first-order TCR.

The formula is ngspice's resistor temperature equation (manual 3.3.3, eq. 14) without tc2.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import ClassVar, Self

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
    pick,
    written,
)
from heatweave.tempmodels.registry import register

TC1 = (
    ParamSpec("tc1", "1/K", "first-order temperature coefficient", group="tc1", example="5e-5"),
    ParamSpec(
        "tc1_ppm",
        "ppm/K",
        "first-order temperature coefficient",
        group="tc1",
        scale=1e-6,
        example="50",
    ),
)
TC2 = (
    ParamSpec("tc2", "1/K^2", "second-order temperature coefficient", group="tc2", example="-6e-7"),
    ParamSpec(
        "tc2_ppm",
        "ppm/K^2",
        "second-order temperature coefficient",
        group="tc2",
        scale=1e-6,
        example="-0.6",
    ),
)

# Above this a metal or film resistor's TCR is implausible (copper is 0.0039 /K).
_TC1_MAX = 0.02


def tc_warnings(params: Mapping[str, ParamValue]) -> tuple[ParamWarning, ...]:
    """Unit slips for tc1/tc2: a per-kelvin key holding a ppm number, or a huge TCR."""
    found: list[ParamWarning] = []
    for key, limit, per in (("tc1", _TC1_MAX, "K"), ("tc2", 1e-3, "K^2")):
        value = written(params, key)
        if value is None:
            continue
        if abs(value) >= 1.0:
            found.append(
                ParamWarning(
                    key,
                    f"{key} = {fmt(value)} /{per} is surely meant in ppm/{per}",
                    f"write {key}_ppm = {fmt(value)}",
                )
            )
        elif abs(value) > limit:
            found.append(
                ParamWarning(
                    key,
                    f"{key} = {fmt(value)} /{per} is implausible for a metal or film resistor",
                    f"check the unit: {key} is in 1/{per}, {key}_ppm in ppm/{per}",
                )
            )
    for key in ("tc1_ppm", "tc2_ppm"):
        value = written(params, key)
        if value is not None and 0 < abs(value) < 1e-2:
            found.append(
                ParamWarning(
                    key,
                    f"{key} = {fmt(value)} ppm is tiny; it looks like a value in 1/K",
                    f"write {key[:3]} = {fmt(value)}",
                )
            )
    return tuple(found)


@dataclass(frozen=True, slots=True)
class Polynomial(TempModel):
    """R = r0 (1 + tc1 dT + tc2 dT^2), dT = T - tref (ngspice manual 3.3.3, eq. 14)."""

    name: ClassVar[str] = "polynomial"
    summary: ClassVar[str] = "polynomial TCR"
    params: ClassVar[tuple[ParamSpec, ...]] = ()

    r0: float
    tref: float
    tc1: float
    tc2: float

    @classmethod
    def from_params(
        cls, params: Mapping[str, ParamValue], r_nominal: float, tref: float | None = None
    ) -> Self:
        return cls(
            r0=r_nominal,
            tref=cls.reference(tref),
            tc1=pick(params, cls.params, "tc1") or 0.0,
            tc2=pick(params, cls.params, "tc2") or 0.0,
        )

    @property
    def reference_temperature(self) -> float:
        return self.tref

    def _resistance(self, t_c: FloatArray) -> FloatArray:
        dt = t_c - self.tref
        return self.r0 * (1.0 + self.tc1 * dt + self.tc2 * dt * dt)

    def _slope(self, t_c: FloatArray) -> FloatArray:
        dt = t_c - self.tref
        return self.r0 * (self.tc1 + 2.0 * self.tc2 * dt)

    def expression(self, temp: str, number: NumberFormat = fmt) -> str:
        dt = f"({paren(temp)}-{paren(number(self.tref))})"
        poly = f"1+{paren(number(self.tc1))}*{dt}"
        if self.tc2 != 0.0:
            poly += f"+{paren(number(self.tc2))}*{dt}*{dt}"
        return f"{paren(number(self.r0))}*({poly})"

    @classmethod
    def warnings(cls, params: Mapping[str, ParamValue]) -> tuple[ParamWarning, ...]:
        return tc_warnings(params)


@register
@dataclass(frozen=True, slots=True)
class Linear(Polynomial):
    """R = R0 (1 + tc1 (T - tref)): SPICE's first-order TCR (ngspice manual 3.3.3, eq. 14)."""

    name: ClassVar[str] = "linear"
    summary: ClassVar[str] = "first-order TCR: R0 (1 + tc1 dT)"
    valid_range: ClassVar[ValidRange | None] = None  # a coefficient fit: no published range
    params: ClassVar[tuple[ParamSpec, ...]] = tuple(replace(s, required=True) for s in TC1)
