"""What every report shows, computed once from a finished run.

The table, JSON, CSV and plot writers read a :class:`RunReport`, so a number printed on the
terminal is the very number written to the JSON.  Rating margins follow
:mod:`heatweave.annotation.ratings`, judged as ``check`` judges them: the local ambient
of a part is the temperature at the cold end of its thermal path (the ambient, or the shared
node it sits on), where the run ends (over a settled period: its warmest,
:func:`heatweave.run.results.rated_ambient`); the power margin holds the derated rating
against the part's mean dissipation (``power``, :func:`heatweave.run.results.build_part`);
the temperature margin uses the hottest temperature reached.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field

import numpy as np

from heatweave.annotation.ratings import Margins, margins
from heatweave.emit.emitter import Inputs
from heatweave.errors import Finding
from heatweave.files import encode, repository_path
from heatweave.reports.private import without_private
from heatweave.run.prepare import deck_analyses_of
from heatweave.run.results import FloatArray, PartResult, RunResults, rated_ambient
from heatweave.run.runner import RunOutcome
from heatweave.spice.private import left_out_note

PPM = 1e6
#: From this many ppm drifts are shown in % (plots and the sweep table alike): thermistors
#: drift by tens of percent, where five- and six-digit ppm figures only get in the way.
PPM_LIMIT = 10_000


@dataclass(frozen=True, slots=True)
class PartRow:
    """One heated part as reports show it; ``local_ambient`` is the temperature (degC) at the
    cold end of its thermal path where the run ends, which its power rating is derated at."""

    result: PartResult
    to: str  # the annotation's name of the node its thermal path ends at
    local_ambient: float
    power_rating: float | None
    tmax: float | None
    derating_knee: float
    margins: Margins

    @property
    def path(self) -> str:
        return self.result.path

    @property
    def change_ppm(self) -> float | None:
        """Resistance change against the deck's value in ppm (final point)."""
        change = self.result.resistance_change
        return None if change is None else change * PPM

    def drift_series(self) -> FloatArray | None:
        """Resistance change over time (ppm), for resistors in a transient."""
        series, nominal = self.result.resistance_series, self.result.nominal_resistance
        if series is None or not nominal:
            return None
        return (series / nominal - 1.0) * PPM


@dataclass(frozen=True, slots=True)
class Probe:
    """A signal of the deck asked for with ``--probe``: a node voltage ``V(out)`` or the
    branch current ``I(vamm)`` of a device that has one (a voltage source, an inductor)."""

    kind: str  # "v" or "i"
    name: str  # node or device, lower case as ngspice names it

    @property
    def label(self) -> str:
        return f"{self.kind.upper()}({self.name})"

    @property
    def unit(self) -> str:
        return "V" if self.kind == "v" else "A"

    def final(self, results: RunResults) -> float:
        """The value at the end of the run (the operating point's value)."""
        return (results.voltages if self.kind == "v" else results.currents)[self.name]

    def series(self, results: RunResults) -> FloatArray:
        """The values over the run (one value for an operating point)."""
        table = results.voltage_series if self.kind == "v" else results.current_series
        values = table.get(self.name)
        return values if values is not None else np.array([self.final(results)])

    def extremes(self, results: RunResults) -> tuple[float, float]:
        """``(min, max)`` over every time point the simulator computed (the series may be
        coarser: the co-simulation keeps window ends only)."""
        found = results.extremes.get(f"{self.kind}({self.name})")
        if found is not None:
            return found
        values = self.series(results)
        return float(values.min()), float(values.max())

    def known(self, results: RunResults) -> bool:
        return self.name in (results.voltages if self.kind == "v" else results.currents)


def parse_probe(text: str) -> Probe:
    """``out`` or ``V(out)``: a node voltage; ``I(vamm)``: a branch current."""
    name = text.strip().lower()
    for kind in ("v", "i"):
        if name.startswith(f"{kind}(") and name.endswith(")"):
            return Probe(kind, name[2:-1].strip())
    return Probe("v", name)


def is_transient(results: RunResults) -> bool:
    """True when the results hold waveforms over time."""
    return results.analysis == "tran" and results.time is not None


@dataclass(frozen=True, slots=True)
class RunReport:
    """A run with everything reports need: sources, settings, rows, findings."""

    deck: str
    annotations: str
    annotations_sha256: str
    analyses: tuple[str, ...]
    backend: str
    results: RunResults
    rows: tuple[PartRow, ...]
    warnings: tuple[str, ...] = ()
    probes: tuple[Probe, ...] = ()
    ambient_series: FloatArray | None = field(default=None, repr=False)
    method: str = "full"  # "full" (the electrothermal deck) or "cosim" (the fast path)
    method_reason: str = ""
    #: The deck's place in its repository and the SHA-256 of its bytes (:func:`deck_identity`).
    deck_in_repository: str | None = None
    deck_sha256: str | None = None

    @property
    def transient(self) -> bool:
        return is_transient(self.results)

    @property
    def simulated(self) -> str:
        """What ngspice ran: the co-simulation, the electrothermal deck, or (no annotated
        part) the plain deck at the ambient."""
        if self.method == "cosim":
            return "co-simulation"
        return "electrothermal deck" if self.results.parts else "plain deck at the ambient"


def part_row(part: PartResult, results: RunResults, ambient: FloatArray) -> PartRow:
    """A part's row, its power rating held against its mean dissipation (``power``) at the
    local ambient :func:`~heatweave.run.results.rated_ambient` gives (where the run ends; a
    settled period's warmest), as ``check`` holds it (IEC 60115-1 rates continuous load;
    ``tmax`` is held against the hottest temperature reached)."""
    plan = part.plan
    assert plan is not None
    local = rated_ambient(results, plan.to_label, ambient)
    row_margins = margins(
        hottest=part.hottest,
        power=part.power,
        local_ambient=local,
        rating=plan.power_rating,
        tmax=plan.tmax,
        knee=plan.derating_knee,
    )
    return PartRow(
        part, plan.to_label, local, plan.power_rating, plan.tmax, plan.derating_knee,
        row_margins,
    )  # fmt: skip


def build_report(inputs: Inputs, outcome: RunOutcome, probes: tuple[Probe, ...] = ()) -> RunReport:
    """The report of one finished run of *inputs*; *probes* are the deck's signals asked for
    (plotted, and written to CSV and JSON)."""
    prepared = outcome.prepared
    return report_of(
        inputs,
        outcome.results,
        prepared.analyses or tuple(deck_analyses_of(prepared.deck)),
        outcome.sim.backend,
        prepared.findings,
        probes,
    )


def report_of(
    inputs: Inputs,
    results: RunResults,
    analyses: tuple[str, ...],
    backend: str,
    findings: tuple[Finding, ...],
    probes: tuple[Probe, ...] = (),
    method: tuple[str, str] = ("full", ""),
) -> RunReport:
    """The report of *results*, however they were computed (full deck or co-simulation);
    signals named in an included file not proven SPICE are left out, with a note, unless
    probed (:mod:`heatweave.spice.private`)."""
    results, left = without_private(results, inputs, {p.name for p in probes})
    if left:
        findings = (*findings, Finding("note", left_out_note(inputs.project, left), None))
    if results.ambient_series is not None:
        ambient = results.ambient_series
    else:
        ambient = np.full(len(results.time) if results.time is not None else 1, results.ambient)
    in_repository, digest = deck_identity(inputs)
    return RunReport(
        deck=inputs.deck_path,
        deck_in_repository=in_repository,
        deck_sha256=digest,
        annotations=inputs.annotation_path,
        annotations_sha256=inputs.annotation.sha256,
        analyses=analyses,
        backend=backend,
        results=results,
        rows=tuple(part_row(part, results, ambient) for part in results.parts),
        warnings=tuple(f.render() for f in findings),
        probes=probes,
        ambient_series=ambient if is_transient(results) else None,
        method=method[0],
        method_reason=method[1],
    )


def deck_identity(inputs: Inputs) -> tuple[str | None, str | None]:
    """What a result records of its deck, so that ``compare`` knows one deck from another
    of the same file name: its path inside its git work tree (``None`` outside one) and the
    SHA-256 of its text as read (``None`` where there is none)."""
    source = inputs.project.deck.source
    digest = hashlib.sha256(encode(source.text)).hexdigest() if source is not None else None
    return repository_path(inputs.deck_path), digest


def deck_keys(inputs: Inputs) -> dict[str, str | None]:
    """``deck_in_repository`` and ``deck_sha256`` as every JSON result writes them."""
    in_repository, digest = deck_identity(inputs)
    return {"deck_in_repository": in_repository, "deck_sha256": digest}
