"""A figure of a transient that its own numbers do not back (:mod:`heatweave.run.stepcheck`
finds them; reports and ``check`` say so)."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True, slots=True)
class Disagreement:
    """A figure of a transient that its own numbers do not back.

    ``kind`` is ``integration`` (``value``: ngspice's temperature against the network's
    own response, K, the largest at ``at`` s), ``sampling`` (``value``: the estimated
    error of the mean power, W, up to ``at`` s where set) or ``ripple`` (``value``: how
    far a settled period's peak and valley temperatures may move for that error of its
    power, K); ``bound`` is what the check allows."""

    subject: str
    kind: str
    value: float
    bound: float
    at: float | None = None
    reference: float | None = None

    @property
    def unit(self) -> str:
        """The unit of ``value`` and ``bound``."""
        return "W" if self.kind == "sampling" else "K"

    def words(self) -> str:
        """The disagreement in words."""
        if self.kind == "ripple":
            return (
                f"{self.subject}'s peak and valley temperatures depend by up to "
                f"{self.value:.3g} K on what happens between ngspice's time points (at most "
                f"{self.bound:.2g} K)"
            )
        if self.kind == "integration":
            return (
                f"{self.subject}'s temperature is {self.value:.3g} K from the thermal network's "
                f"own response to the dissipation ngspice computed (at t = {self.at:.4g} s; "
                f"ngspice's accuracy there is {self.bound:.2g} K)"
            )
        share = 100 * self.value / self.reference if self.reference else float("inf")
        until = f" up to t = {self.at:.4g} s" if self.at is not None else ""
        return (
            f"{self.subject}'s mean dissipation{until} depends by {self.value:.3g} W "
            f"({share:.2g} %) on what happens between ngspice's time points "
            f"(at most {self.bound:.2g} W)"
        )

    def limit_detail(self) -> str:
        """What ``check``'s line for this figure measures."""
        if self.kind == "integration":
            return (
                f"ngspice's temperature against the thermal network's own response to its "
                f"dissipation, largest at t = {self.at:.4g} s: not verified"
            )
        if self.kind == "ripple":
            return (
                "the peak and valley temperatures' dependence on ngspice's time points: "
                "not verified"
            )
        return "the mean dissipation's dependence on ngspice's time points: not verified"
