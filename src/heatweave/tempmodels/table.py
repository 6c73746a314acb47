"""``table``: R against T from points, piecewise linear, flat outside the table.

``points = [[t_degC, ohm], ...]`` gives R itself (the deck's value is then not used);
``ratio = [[t_degC, factor], ...]`` gives a shape that is scaled so that the deck's value holds
at ``tref``.  Temperatures must increase strictly.  In ngspice the temperature is clamped
to the table's range and fed to the B-source ``pwl`` function, which would otherwise
extrapolate the end segments.
"""

from __future__ import annotations

import itertools
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
    TempModel,
    ValidRange,
    paren,
)
from heatweave.tempmodels.registry import register


@register
@dataclass(frozen=True, slots=True)
class Table(TempModel):
    """Piecewise-linear R(T) through the given points, constant beyond the ends."""

    name: ClassVar[str] = "table"
    summary: ClassVar[str] = "piecewise-linear R(T) from points"
    valid_range: ClassVar[ValidRange | None] = None  # flat outside its points by definition
    params: ClassVar[tuple[ParamSpec, ...]] = (
        ParamSpec(
            "points",
            "[degC, ohm]",
            "R at each temperature",
            example="[[0, 1000], [100, 1400]]",
            group="table",
            required=True,
            kind="points",
        ),
        ParamSpec(
            "ratio",
            "[degC, 1]",
            "R relative to the deck's value at tref",
            example="[[0, 0.9], [100, 1.3]]",
            group="table",
            required=True,
            kind="points",
        ),
    )

    temps: tuple[float, ...]
    ohms: tuple[float, ...]
    tref: float = 25.0  # degC where the deck's value holds (ratio), or its nominal is read

    @classmethod
    def from_params(
        cls, params: Mapping[str, ParamValue], r_nominal: float, tref: float | None = None
    ) -> Self:
        points = params.get("points")
        scale = 1.0
        if not isinstance(points, tuple):
            points = params.get("ratio")
            assert isinstance(points, tuple)
            shape = cls(tuple(p[0] for p in points), tuple(p[1] for p in points))
            scale = r_nominal / shape.resistance(cls.reference(tref))
        temps = tuple(float(p[0]) for p in points)
        if len(temps) < 2 or any(b <= a for a, b in itertools.pairwise(temps)):
            raise ValueError("table temperatures must increase strictly, at least two points")
        ohms = tuple(float(p[1]) * scale for p in points)
        if any(r <= 0 for r in ohms):
            raise ValueError("table resistances must be positive")
        return cls(temps, ohms, cls.reference(tref))

    @property
    def reference_temperature(self) -> float:
        return self.tref

    def _resistance(self, t_c: FloatArray) -> FloatArray:
        return np.interp(t_c, self.temps, self.ohms)

    def _slope(self, t_c: FloatArray) -> FloatArray:
        # Right-hand slope of the segment holding t_c; zero outside the table.
        temps = np.asarray(self.temps)
        steps = np.diff(self.ohms) / np.diff(temps)
        index = np.searchsorted(temps, t_c, side="right") - 1
        inside = (index >= 0) & (index < len(steps))
        return np.where(inside, steps[np.clip(index, 0, len(steps) - 1)], 0.0)

    def expression(self, temp: str, number: NumberFormat = fmt) -> str:
        clamped = f"min(max({paren(temp)},{number(self.temps[0])}),{number(self.temps[-1])})"
        pairs = ",".join(
            f"{number(t)},{number(r)}" for t, r in zip(self.temps, self.ohms, strict=True)
        )
        return f"pwl({clamped},{pairs})"
