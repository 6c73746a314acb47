"""Thermal runaway: explain a missing electrothermal solution (placeholder until the
diagnosis lands; it explains nothing, so the original failure is reported)."""

from __future__ import annotations

from typing import TYPE_CHECKING

from heatweave.errors import SimulatorError, ThermalRunawayError

if TYPE_CHECKING:
    from heatweave.emitter import Inputs
    from heatweave.results import RunResults
    from heatweave.runner import Prepared, RunOptions


def explain(
    inputs: Inputs,
    options: RunOptions,
    prepared: Prepared,
    failure: SimulatorError | None,
    results: RunResults | None,
) -> ThermalRunawayError | None:
    """The runaway behind a failure, or ``None``."""
    return None
