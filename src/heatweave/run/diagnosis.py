"""What the runaway diagnosis found, in words, and the error that carries it.

:mod:`heatweave.run.runaway` finds the numbers (continuation in the drive, loop gains at
the branch end); this module words them for the reader.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from heatweave.errors import Location, ThermalRunawayError
from heatweave.run.results import IMPLAUSIBLE_TEMPERATURE

if TYPE_CHECKING:
    from heatweave.thermal.balance import FloatArray
    from heatweave.thermal.circuit import ThermalCircuit

HINT = (
    "lower the drive, give the part a lower thermal resistance (more copper, a heat sink), "
    "or add series resistance so its dissipation falls as it heats"
)


@dataclass(frozen=True, slots=True)
class Diagnosis:
    """What the continuation found at the last steady state before the branch vanished."""

    part: str
    loop_gain: float  # the named part's own lambda * Rth * dP/dT
    circuit_gain: float  # largest eigenvalue of the loop matrix
    drive: float  # last drive (share of full dissipation) with a steady state
    temperature: float  # the named part's temperature there, degC
    source: tuple[str, float, float] | None = None  # (name, critical value, deck value)
    # When the branch ended at the named part's model range: that range in words.
    model_range: str | None = None

    def sentence(self) -> str:
        """The diagnosis in words."""
        if self.model_range is not None:
            return self._range_sentence(self.model_range)
        if not self.drive > 0:
            # Past the finest share the continuation follows: no critical value to give.
            return (
                "no steady state even at the smallest share of the full dissipation followed "
                f"(from {self.part} unheated at {self.temperature:.4g} degC): its loop gain "
                "Rth*dP/dT passes 1 at a drive too small to resolve, far below the deck's"
            )
        text = (
            f"loop gain Rth*dP/dT reached {self.loop_gain:.3g} at {100 * self.drive:.3g} % of "
            f"the full dissipation ({self.part} at {self.temperature:.4g} degC) and the "
            "solution vanished beyond it"
        )
        if self.temperature > IMPLAUSIBLE_TEMPERATURE:
            # A pole, not a fold: the loop gain stays up as the part heats.
            text = (
                f"loop gain Rth*dP/dT reached {self.loop_gain:.3g} at {100 * self.drive:.3g} "
                f"% of the full dissipation, where {self.part}'s steady temperature grows "
                f"without bound ({self.temperature:.4g} degC at the last point followed)"
            )
        if abs(self.circuit_gain - self.loop_gain) > 0.02:
            text += f" (loop gain of the whole circuit {self.circuit_gain:.3g})"
        return text + self._source_clause()

    def _range_sentence(self, model_range: str) -> str:
        return (
            f"no steady state inside its {model_range}; at full dissipation "
            f"its loop gain Rth*dP/dT is {self.loop_gain:.3g} at {self.temperature:.4g} degC, "
            "where that range ends, so each kelvin of warming still brings more than a "
            f"kelvin more; its steady state reaches {self.temperature:.4g} degC at "
            f"{100 * self.drive:.3g} % of the full dissipation"
        ) + self._source_clause()

    def _source_clause(self) -> str:
        if self.source is None:
            return ""
        name, critical, value = self.source
        unit = "A" if name[:1].upper() == "I" else "V"
        return (
            f"; with {name} as the only source this is {name} = {critical:.4g} {unit}"
            f" (the deck has {value:.4g} {unit})"
        )


class RunawayError(ThermalRunawayError):
    """A thermal runaway, with the numbers behind the message."""

    def __init__(
        self,
        message: str,
        hint: str,
        diagnosis: Diagnosis | None,
        location: Location | None = None,
    ) -> None:
        super().__init__(message, location, hint)
        self.diagnosis = diagnosis


def beyond_bound(circuit: ThermalCircuit, full: FloatArray) -> RunawayError | None:
    """An operating point whose steady state (at full dissipation, found by continuation)
    lies beyond :data:`IMPLAUSIBLE_TEMPERATURE`: refused as the same deck's transient is,
    which passes that bound on its way there; ``None`` when every part stays below it."""
    rows = np.asarray(full[: len(circuit.parts)], dtype=float)
    if not rows.size or float(np.max(rows)) <= IMPLAUSIBLE_TEMPERATURE:
        return None
    i = int(np.argmax(rows))
    part = circuit.parts[i]
    return RunawayError(
        f"{part.path} has no physical steady state: the one at full dissipation lies at "
        f"{float(rows[i]):.4g} degC, beyond {IMPLAUSIBLE_TEMPERATURE:g} degC",
        HINT,
        None,
        part.location,
    )
