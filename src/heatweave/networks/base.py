"""The one interface every thermal network form provides, and the records it returns.

A network sits between a part's hot spot (node ``hot``, where the part's dissipated power
enters) and node ``cold`` (where the part's thermal path ``to`` points: ambient, a board
node, another part).  The electrical analogue is fixed by the project: 1 V = 1 degC,
1 A = 1 W, 1 ohm = 1 K/W, 1 F = 1 J/K.

Forms are small frozen dataclasses registered by name (see :mod:`heatweave.networks`);
a new form is one module with one class plus one test table.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Sequence
from dataclasses import dataclass
from typing import ClassVar, Literal

import numpy as np
import numpy.typing as npt

from heatweave.errors import InputError, Location

FloatArray = npt.NDArray[np.float64]
ComplexArray = npt.NDArray[np.complex128]
Start = Literal["cold", "steady"]


class NetworkError(InputError):
    """A thermal network's values cannot be used (negative, zero, not numbers, wrong shape).

    Raised without a location; the caller, who knows where the values came from, adds one
    with :meth:`at`.
    """

    def at(self, location: Location | None) -> NetworkError:
        """The same error, told at *location*."""
        return type(self)(self.message, location, self.hint)


@dataclass(frozen=True, slots=True)
class Element:
    """One netlist element of a realised network: a resistor or a capacitor.

    ``name`` is the full SPICE name, type letter first (``R...``/``C...``).
    """

    kind: Literal["R", "C"]
    name: str
    node1: str
    node2: str
    value: float


@dataclass(frozen=True, slots=True)
class Realisation:
    """The elements that realise a network, and the internal nodes they introduced.

    Element names are ``kind + prefix + suffix`` (SPICE wants the type letter first);
    internal node names are ``prefix + suffix``.  Neither ``hot``, ``cold`` nor ``ground``
    is listed in :attr:`nodes`.
    """

    elements: tuple[Element, ...]
    nodes: tuple[str, ...]


@dataclass(frozen=True, slots=True)
class StateSpace:
    """A linear ODE ``dx/dt = A x + B u``, ``y = C x + D u`` with named signals.

    :meth:`NetworkForm.state_space` gives the single-input single-output model
    (``u = (P,)``, ``y = (T_hot - T_cold,)``, cold end held at 0);
    :meth:`NetworkForm.port_model` gives the two-port model
    (``u = (P, T_cold)``, ``y = (T_hot, Q_cold)``) for assembling many networks.
    """

    a: FloatArray
    b: FloatArray
    c: FloatArray
    d: FloatArray
    states: tuple[str, ...]
    inputs: tuple[str, ...]
    outputs: tuple[str, ...]

    def matrices(self) -> tuple[FloatArray, FloatArray, FloatArray, FloatArray]:
        """``(A, B, C, D)`` as plain arrays (what scipy.signal and expm want)."""
        return self.a, self.b, self.c, self.d

    def steady_state(self, u: Sequence[float]) -> FloatArray:
        """The state at rest under constant input *u*: ``x = -A^-1 B u``."""
        if self.a.shape[0] == 0:
            return np.zeros(0)
        return np.asarray(-np.linalg.solve(self.a, self.b @ np.asarray(u, dtype=float)))


class NetworkForm(ABC):
    """What every thermal network form can do.

    Time responses are for a 1 W power step into ``hot`` at ``t = 0`` with the network at
    rest and ``cold`` held at a fixed temperature; values before ``t = 0`` are 0.
    """

    __slots__ = ()
    kind: ClassVar[str]

    @classmethod
    @abstractmethod
    def from_annotation(cls, data: object) -> NetworkForm:
        """Build from the annotation tuples; raise :class:`NetworkError` with a hint."""

    @property
    @abstractmethod
    def total_rth(self) -> float:
        """Steady-state thermal resistance hot to cold (K/W)."""

    @abstractmethod
    def zth(self, t: npt.ArrayLike) -> FloatArray:
        """Step response Zth(t) in K/W: the hot node's rise per watt of a power step."""

    @abstractmethod
    def impedance(self, s: npt.ArrayLike) -> ComplexArray:
        """Zth(s) in K/W at complex frequencies *s* (1/s)."""

    @abstractmethod
    def foster_pairs(self) -> tuple[tuple[float, float], ...]:
        """(rth, tau) of the equivalent Foster network (same impedance at every frequency);
        :class:`NetworkError` where the form has none.  ``networks.convert`` builds on it."""

    @abstractmethod
    def port_model(self) -> StateSpace:
        """Two-port model: inputs ``(P, T_cold)``, outputs ``(T_hot, Q_cold)``.

        ``Q_cold`` is the heat flow (W) the network delivers into the cold node.  Use it to
        join networks to shared nodes whose temperatures are themselves states: feed the
        shared node's temperature in as ``T_cold`` and add ``Q_cold`` to that node's heat
        balance.  Each form's docstring says what its states are.
        """

    @abstractmethod
    def elements(self, prefix: str, hot: str, cold: str, ground: str = "0") -> Realisation:
        """The R and C elements that realise the network between *hot* and *cold*."""

    @abstractmethod
    def stage_rth(self) -> tuple[float, ...]:
        """Resistance of each stage in the order the realisation chains them hot to cold."""

    def state_space(self) -> StateSpace:
        """SISO model: input P (W) into hot, output T_hot - T_cold, cold end held at 0.

        This is the port model with ``T_cold = 0``; it is exact for one network on a fixed
        temperature.  Do not add ``T_cold`` to its output when the cold node moves: for a
        Cauer ladder or a single stage the capacitors go to the absolute reference, so a
        moving cold node changes the states; use :meth:`port_model` for that.
        """
        port = self.port_model()
        return StateSpace(
            port.a,
            port.b[:, :1],
            port.c[:1, :],
            port.d[:1, :1],
            port.states,
            ("P",),
            ("T_hot - T_cold",),
        )

    def initial_rises(
        self, prefix: str, hot: str, start: Start, power: float = 0.0
    ) -> dict[str, float]:
        """Initial voltages of *hot* and every internal node above the cold node's (K).

        ``start="cold"``: every node at the cold node's temperature (all 0).
        ``start="steady"``: the steady state under constant *power* (W).  Add the cold
        node's temperature to get the values for ``.ic``.  Under ``.tran ... uic`` give
        the cold node a value in ``.ic`` as well: ngspice starts every node not listed at
        0 V, which would charge a Foster capacitor to the cold node's temperature.
        """
        names = (hot, *self.elements(prefix, hot, "cold", "0").nodes)
        rths = self.stage_rth()
        if start == "cold":
            return dict.fromkeys(names, 0.0)
        # Node k sits after stage k; in steady state all the power flows through every stage.
        return {name: power * float(sum(rths[k:])) for k, name in enumerate(names)}


FORMS: dict[str, type[NetworkForm]] = {}
"""Registered forms by annotation key (``"single"``, ``"foster"``, ``"cauer"``)."""


def register(cls: type[NetworkForm]) -> type[NetworkForm]:
    """Class decorator: make a form available under its ``kind``."""
    FORMS[cls.kind] = cls
    return cls


def positive_pairs(
    data: object, kind: str, names: tuple[str, str]
) -> tuple[tuple[float, float], ...]:
    """Validate ``((a, b), ...)``: a non-empty sequence of pairs of finite positive numbers."""
    example = f"{kind} = [[{names[0]}, {names[1]}], ...]"
    if isinstance(data, str | bytes) or not isinstance(data, Sequence) or len(data) == 0:
        raise NetworkError(
            f"a {kind} network needs a non-empty list of [{names[0]}, {names[1]}] stages",
            hint=f"write it as {example}",
        )
    stages = []
    for index, pair in enumerate(data, start=1):
        if isinstance(pair, str | bytes) or not isinstance(pair, Sequence) or len(pair) != 2:
            raise NetworkError(
                f"stage {index} of the {kind} network is not a pair [{names[0]}, {names[1]}]",
                hint=f"write it as {example}",
            )
        stages.append((positive(pair[0], f"{names[0]} of {kind} stage {index}"),
                       positive(pair[1], f"{names[1]} of {kind} stage {index}")))
    return tuple(stages)


def positive(value: object, what: str, allow_zero: bool = False) -> float:
    """*value* as a float that is finite and > 0 (or >= 0)."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise NetworkError(f"{what} is {value!r}, not a number", hint="write a plain number")
    number = float(value)
    ok = number >= 0 if allow_zero else number > 0
    if not np.isfinite(number) or not ok:
        bound = "zero or more" if allow_zero else "greater than zero"
        raise NetworkError(
            f"{what} is {value!r}; it must be a finite number {bound}",
            hint="thermal resistances, capacitances and time constants are all positive",
        )
    return number


def as_times(t: npt.ArrayLike) -> FloatArray:
    """*t* as a float array (any shape)."""
    return np.asarray(t, dtype=float)
