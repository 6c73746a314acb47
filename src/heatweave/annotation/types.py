"""The validated annotation as immutable objects (see :mod:`heatweave.annotation`)."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from heatweave.annotation.fields import Distribution
from heatweave.annotation.ratings import derated_power
from heatweave.errors import AnnotationError, Finding, Location
from heatweave.tempmodels import REGISTRY, ParamValue, TempModel

SCHEMA_VERSION = 1
AMBIENT = "ambient"

Tolerances = tuple[tuple[str, Distribution], ...]


@dataclass(frozen=True, slots=True)
class Ambient:
    """The ambient temperature: fixed, or a (time s, degC) profile, piecewise linear."""

    temperature: float = 25.0
    profile: tuple[tuple[float, float], ...] | None = None

    def at(self, time_s: float) -> float:
        """Ambient in degC at *time_s* (flat before the first and after the last point)."""
        if self.profile is None:
            return self.temperature
        times, temps = zip(*self.profile, strict=True)
        return float(np.interp(time_s, times, temps))


@dataclass(frozen=True, slots=True)
class NetworkSpec:
    """A part's thermal path as plain data: ``single`` ((rth, cth),), ``foster`` ((rth, tau),
    ...) or ``cauer`` ((rth, cth), ...); K/W, s, J/K.  ``cth`` 0 means steady state only."""

    kind: Literal["single", "foster", "cauer"]
    stages: tuple[tuple[float, float], ...]

    @property
    def rth_total(self) -> float:
        """The steady-state thermal resistance, K/W."""
        return math.fsum(rth for rth, _ in self.stages)


@dataclass(frozen=True, slots=True)
class NodeSpec:
    """A shared thermal node (board area, heat sink, enclosure)."""

    name: str
    rth: float
    cth: float
    to: str
    location: Location
    tolerances: Tolerances = ()


@dataclass(frozen=True, slots=True)
class PartSpec:
    """One ``[part."..."]`` table: which elements, which temperature model, which path."""

    pattern: str
    model: str | None
    params: tuple[tuple[str, ParamValue], ...]
    tref: float | None
    network: NetworkSpec
    to: str
    power_rating: float | None
    tmax: float | None
    derating_knee: float
    location: Location
    tolerances: Tolerances = ()

    @property
    def is_glob(self) -> bool:
        return any(ch in self.pattern for ch in "*?[")

    @property
    def param_map(self) -> dict[str, ParamValue]:
        return dict(self.params)

    def temp_model(self, r_nominal: float) -> TempModel | None:
        """The part's temperature model for a deck value of *r_nominal* ohm (None: heat only)."""
        if self.model is None:
            return None
        try:
            return REGISTRY[self.model].from_params(self.param_map, r_nominal, self.tref)
        except (ValueError, ZeroDivisionError) as err:
            raise AnnotationError(
                f'part "{self.pattern}": {err}',
                self.location,
                f"check the keys of model {self.model}",
            ) from None

    def rated_power(self, t_c: float) -> float | None:
        """Allowed power (W) at *t_c*: full to the knee, linear to zero at tmax (IEC 60115-1)."""
        if self.power_rating is None:
            return None
        return derated_power(self.power_rating, t_c, self.derating_knee, self.tmax)


@dataclass(frozen=True, slots=True)
class PathSpec:
    """An extra thermal resistance between two nodes (or a node and ambient)."""

    between: tuple[str, str]
    rth: float
    location: Location
    tolerances: Tolerances = ()


@dataclass(frozen=True, slots=True)
class LimitSpec:
    """A pass/fail bound on one output signal, e.g. ``V(out)``."""

    signal: str
    max_drift_ppm: float | None
    min: float | None
    max: float | None
    location: Location


@dataclass(frozen=True, slots=True)
class ReviewSpec:
    """The ``[review]`` table: how much worse ``heatweave compare`` lets a change make things."""

    max_rise_growth: float | None
    max_drift_growth_ppm: float | None
    max_margin_loss_percent: float | None
    location: Location


@dataclass(frozen=True, slots=True)
class Annotation:
    """A validated annotation file; immutable, transforms return new objects."""

    path: str
    text: str
    sha256: str
    schema: int
    start: Literal["cold", "steady"]
    ambient: Ambient
    nodes: tuple[NodeSpec, ...]
    parts: tuple[PartSpec, ...]
    paths: tuple[PathSpec, ...]
    limits: tuple[LimitSpec, ...]
    warnings: tuple[Finding, ...] = ()
    deck_name: str | None = None
    review: ReviewSpec | None = None

    def node(self, name: str) -> NodeSpec:
        """The node called *name* (KeyError if none)."""
        for node in self.nodes:
            if node.name == name:
                return node
        raise KeyError(name)


@dataclass(frozen=True, slots=True)
class BoundPart:
    """A deck element with the part table that applies to it."""

    element: str  # instance path in the deck's spelling, e.g. "X2.R4"
    kind: str  # first letter, upper case
    spec: PartSpec
    position: int = -1  # its place in the catalog's element_paths(), -1 when not known
