"""Which state ``check`` holds to the limits: the deck's own run, or its periodic steady state.

A switching deck's own transient is a few periods long and starts cold, while its parts
take seconds to minutes to warm up: the limits of that transient say nothing about the
board in use.  When the deck is periodic and its thermal time constants are long against
the period, ``check`` settles it (:func:`heatweave.settle.periodic.settle`) instead, under
the rule ``run --method auto`` uses to trust averaged powers
(:data:`heatweave.cosim.method.SEPARATION`): the fastest thermal time constant at least
that many periods long.
"""

from __future__ import annotations

from dataclasses import dataclass

from heatweave.cosim.method import SEPARATION, Transient
from heatweave.emit.emitter import Inputs, thermal_circuit
from heatweave.errors import HeatweaveError, UsageError
from heatweave.run.prepare import RunOptions, deck_analyses_of
from heatweave.run.waves import DrivePeriod, drive_period, seconds
from heatweave.thermal.solver import ThermalAssemblyError, assemble


@dataclass(frozen=True, slots=True)
class Choice:
    """The state to check: ``drive`` set for the periodic steady state, ``method`` what runs
    otherwise (``full``: the deck's own run; ``cosim``: that run co-simulated); ``reason``
    says why."""

    drive: DrivePeriod | None
    reason: str
    method: str = "full"
    forced: bool = False

    def line(self) -> str:
        """``method: ...`` for the report."""
        if self.method == "cosim":
            return f"method: co-simulation of the run itself, {self.reason}"
        if self.drive is None and self.forced:
            return f"method: the run itself (full electrothermal deck): {self.reason}"
        if self.drive is None:
            return f"method: the run itself, not its periodic steady state: {self.reason}"
        return (
            f"method: periodic steady state (as settle finds it), period "
            f"{seconds(self.drive.period)}, {self.drive.describe()}; {self.reason}"
        )


def choose(inputs: Inputs, options: RunOptions, method: str = "auto") -> Choice:
    """*method* when forced (``settle`` refused, located at the source, for a deck whose
    sources do not repeat); for ``auto`` the periodic steady state when the run would be the
    deck's own single transient, the deck's sources share a period, the ambient is fixed and
    every thermal time constant is at least :data:`SEPARATION` periods; else the run itself,
    with the reason."""
    asked = f"asked for with --method {method}"
    if method in ("full", "cosim"):
        return Choice(None, asked, method, forced=True)
    if method == "settle":
        if options.analyses:
            raise UsageError(
                "--method settle checks the periodic steady state, which settle finds with "
                "transients of its own: --op and --tran do not apply",
                hint="leave out --op/--tran, or check that analysis with --method full",
            )
        try:
            drive = drive_period(inputs.index, None)
        except UsageError as err:
            # check takes the period from the deck's sources only: no --period to suggest.
            raise UsageError(
                err.message, err.location, "check --method settle needs a deck whose sources "
                "repeat; check its own run with --method full",
            ) from None
        return Choice(drive, asked, "settle", forced=True)
    if options.analyses:
        return Choice(None, "the analysis given on the command line")
    own = deck_analyses_of(inputs.project.deck)
    if len(own) != 1 or Transient.parse(own[0]) is None:
        asked = ", ".join(own) or "no analysis"
        return Choice(None, f"the deck asks for {asked}, not one transient")
    if options.ambient is None and inputs.annotation.ambient.profile is not None:
        return Choice(None, "the ambient follows a profile")
    try:
        drive = drive_period(inputs.index, None)
    except HeatweaveError as err:
        return Choice(None, f"not periodic: {err.message}")
    circuit, _findings = thermal_circuit(inputs, ambient=options.ambient)
    if not circuit.parts:
        return Choice(None, "no annotated parts")
    try:
        system = assemble(circuit)
    except ThermalAssemblyError as err:
        return Choice(None, f"the thermal network could not be assembled: {err.message}")
    if system.has_feedthrough:
        return Choice(None, "a part or node without heat capacity follows its power instantly")
    fastest = float(system.time_constants[0])
    ratio = fastest / drive.period
    periods = f"{ratio:.0f}" if ratio >= 100 else f"{ratio:.3g}"
    if ratio < SEPARATION:
        return Choice(
            None, f"the fastest thermal time constant ({fastest:.3g} s) is only {periods} "
            f"periods; settling needs {SEPARATION:g}",
        )  # fmt: skip
    return Choice(drive, f"fastest thermal time constant {fastest:.3g} s = {periods} periods")


def refuse_unsettled(inputs: Inputs, options: RunOptions, what: str, instead: str) -> None:
    """Refuse to gate the deck's own transient (for *what*, e.g. ``sweep --check``) where
    ``check`` would hold the deck in its periodic steady state: that transient is a few
    periods from cold and passes limits the settled board breaks.  *instead* is the hint."""
    chosen = choose(inputs, options)
    if chosen.drive is None:
        return
    raise UsageError(
        f"{what} would hold the deck's own transient, a few periods from cold, to the limits, "
        "while check holds this periodic deck in its periodic steady state "
        f"({chosen.drive.describe()}; {chosen.reason})",
        hint=f"{instead}, or give --tran TSTEP TSTOP to gate the transient itself",
    )
