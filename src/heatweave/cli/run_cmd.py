"""``heatweave run``: simulate a deck with self-heating and report what it does to the parts."""

from __future__ import annotations

import difflib
import sys
from collections.abc import Collection
from dataclasses import replace
from typing import TYPE_CHECKING

import click

from heatweave.cli.common import (
    analyses_of,
    analysis_options,
    annotation_for,
    check_outputs,
    deck_options,
    guard_outputs,
    guarded,
    is_terminal,
    report_findings,
    report_options,
    require_plotting,
    run_control_options,
    simulation_options,
    step_option,
    use_colour,
)
from heatweave.cli.html_out import check_html_path, html_option, write_html
from heatweave.cli.progress import fraction_progress
from heatweave.errors import Finding, HeatweaveError, UsageError
from heatweave.files import write_atomic
from heatweave.spice.acceptance import refuse_rejected
from heatweave.spice.hierarchy import global_names, top_level_node
from heatweave.spice.netlist import card_nodes
from heatweave.spice.private import is_private, private_words

if TYPE_CHECKING:
    from heatweave.emit.emitter import Inputs
    from heatweave.reports.model import Probe, RunReport
    from heatweave.run.prepare import RunOptions
    from heatweave.run.results import RunResults
    from heatweave.spice.hierarchy import DeckIndex


def probe_nodes(
    probes: tuple[str, ...], known: Collection[str], hidden: frozenset[str] = frozenset()
) -> tuple[str, ...]:
    """The node voltages among ``--probe`` names (``out`` or ``V(out)``) as node names, each
    checked against the *known* node names (lower case, as ngspice names them); a hint names
    none that holds a *hidden* word (:func:`heatweave.spice.private.private_words`)."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.reports.model import parse_probe

    found = []
    for text in probes:
        probe = parse_probe(text)
        if probe.kind != "v":
            continue
        if probe.name not in known:
            raise UsageError(
                f"--probe {text}: the deck has no node {probe.name!r}",
                hint=nodes_hint(probe.name, [k for k in known if not is_private(k, hidden)]),
            )
        found.append(probe.name)
    return tuple(found)


def probe_signals(
    probes: tuple[str, ...], results: RunResults, hidden: frozenset[str] = frozenset()
) -> tuple[Probe, ...]:
    """``--probe`` names as signals of the finished run: node voltages (``out``,
    ``V(out)``) and branch currents (``I(vamm)``), each checked against its vectors."""
    return known_signals(probes, results.voltages, results.currents, hidden)


def known_signals(
    probes: tuple[str, ...],
    voltages: Collection[str],
    currents: Collection[str],
    hidden: frozenset[str] = frozenset(),
) -> tuple[Probe, ...]:
    """``--probe`` names as signals, each checked against the node *voltages* and branch
    *currents* a run recorded (lower case, as ngspice names them)."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.reports.model import parse_probe

    probe_nodes(probes, voltages, hidden)
    found = []
    for text in probes:
        probe = parse_probe(text)
        if probe.kind == "i" and probe.name not in currents:
            every = sorted(c for c in currents if not is_private(c, hidden))
            raise UsageError(
                f"--probe {text}: ngspice recorded no branch current of {probe.name!r}",
                hint="ngspice records the current of voltage sources and inductors only; put "
                "a 0 V source in series to measure it there (branch currents of this deck: "
                f"{', '.join(every[:LISTED]) or 'none'})",
            )
        found.append(probe)
    return tuple(dict.fromkeys(found))


#: How many node names a hint lists at most.
LISTED = 12


def nodes_hint(name: str, known: Collection[str]) -> str:
    """The nodes whose names are close to *name*, else the deck's nodes (the first few)."""

    close = difflib.get_close_matches(name, sorted(known), n=4, cutoff=0.6)
    if close:
        return f"did you mean {' or '.join(close)}?"
    every = sorted(known)
    shown = ", ".join(every[:LISTED]) or "none"
    more = f", ... ({len(every)} in all)" if len(every) > LISTED else ""
    return f"nodes of this deck: {shown}{more}"


def deck_nodes(index: DeckIndex) -> frozenset[str] | None:
    """Every node of the circuit as ngspice names it (``out``, ``x1.mid``), ground aside;
    ``None`` when some element's terminals cannot be told from its card (an XSPICE ``A``
    card, say), so that only the simulation's own vectors can say which nodes exist."""

    globals_ = global_names(index)
    found: set[str] = set()
    for path in index.element_paths():
        resolved = index.resolve(path)
        if resolved is None or resolved.card.letter == "K":  # K couples inductors: no nodes
            continue
        try:
            nodes = card_nodes(resolved.card, index)
        except HeatweaveError:
            return None
        found.update(top_level_node(resolved, node, globals_) for node in nodes)
    return frozenset(found - {"0", "gnd"})


def check_probes_early(probes: tuple[str, ...], index: DeckIndex) -> None:
    """Reject a ``--probe`` the deck certainly lacks before anything is simulated.

    Device-internal nodes (``q1#collector``) exist only in the simulation; they are left
    to the check against its vectors."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.reports.model import parse_probe

    wanted = tuple(p for p in probes if "#" not in p and parse_probe(p).kind == "v")
    known = deck_nodes(index) if wanted else None
    if known is not None:
        probe_nodes(wanted, known, private_words(index.project))


@click.command()
@deck_options
@analysis_options
@step_option
@simulation_options
@report_options("Write the waveforms as CSV (- is stdout).")
@click.option(
    "--probe",
    multiple=True,
    metavar="SIGNAL",
    help="A node voltage (out, V(out)) or a branch current (I(vamm): voltage sources and "
    "inductors) to plot and to write to the CSV and JSON reports (repeatable).",
)
@click.option(
    "--method",
    type=click.Choice(("auto", "cosim", "full")),
    default="auto",
    show_default=True,
    help="cosim: plain resistors in windows with the thermal network advanced exactly "
    "between them (fast, where time scales separate); full: the electrothermal deck; "
    "auto: cosim where it is accurate, else full.",
)
@run_control_options("the run")
@html_option
@guarded
def run(
    deck: str,
    annotations: str | None,
    op: bool,
    tran: tuple[float, float] | None,
    max_step: float | None,
    ambient: float | None,
    backend: str,
    allow_control: bool,
    init_file: str | None,
    json_file: str | None,
    csv_file: str | None,
    plot_file: str | None,
    probe: tuple[str, ...],
    timeout: float | None,
    method: str,
    quiet: bool,
    html_file: str | None,
) -> None:
    """Simulate DECK with self-heating and report part temperatures, drift and margins.

    The summary table goes to stdout (to stderr when a report is written to stdout).
    """  # fmt: skip
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.emit.emitter import load_inputs
    from heatweave.run.prepare import RunOptions

    analyses = analyses_of(op, tran)
    check_html_path(html_file)
    outputs = {"--json": json_file, "--csv": csv_file, "--plot": plot_file, "--html": html_file}
    if plot_file is not None:
        require_plotting()
    annotation_path = annotation_for(deck, annotations)
    check_outputs(outputs, deck, annotation_path, init_file)
    inputs = load_inputs(deck, annotation_path)
    guard_outputs(outputs, inputs)
    # What ngspice 39 would refuse, and a deck analysis that would run to no points: exit 2.
    refuse_rejected(inputs.index, own_analyses=not analyses)
    check_probes_early(probe, inputs.index)
    with fraction_progress(not quiet and is_terminal(), "simulating") as progress:
        options = RunOptions(
            analyses=analyses, ambient=ambient, backend=backend, allow_control=allow_control,
            init_file=init_file, timeout=timeout, progress=progress, max_step=max_step,
        )  # fmt: skip
        report, findings, method_line = _simulate(
            deck, annotation_path, inputs, options, method, probe
        )
    # after the bar has finished its line, so no message starts on the bar's line
    report_findings(findings)
    if not quiet:
        click.echo(method_line, err=True)
    _write_reports(report, inputs, outputs, quiet)


def _simulate(
    deck: str,
    annotation_path: str,
    inputs: Inputs,
    options: RunOptions,
    method: str,
    probe: tuple[str, ...],
) -> tuple[RunReport, list[Finding], str]:
    """Run the deck by *method*: its report, the findings to print and the method line
    (``method: NAME (why)``, whichever method ran)."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.reports import build_report
    from heatweave.run.runner import run as run_deck

    hidden = private_words(inputs.project)  # no hint names a word of an unproven include
    if method == "full":
        outcome = run_deck(deck, annotation_path, options, inputs=inputs)
        report = build_report(inputs, outcome, probe_signals(probe, outcome.results, hidden))
        why = "asked for the full electrothermal deck"
        report = replace(report, method_reason=why)
        return report, list(outcome.prepared.findings), f"method: full ({why})"
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.cosim import run_auto
    from heatweave.reports.model import report_of
    from heatweave.run.prepare import deck_analyses_of

    fast = run_auto(deck, annotation_path, options, method=method, inputs=inputs)
    if fast.full is not None:
        report = build_report(inputs, fast.full, probe_signals(probe, fast.results, hidden))
        report = replace(report, method_reason=fast.reason)
    else:
        own = tuple(deck_analyses_of(inputs.project.deck))
        report = report_of(
            inputs, fast.results, fast.analyses or options.analyses or own, "shared", fast.findings,
            probe_signals(probe, fast.results, hidden), (fast.method, fast.reason),
        )  # fmt: skip
    return report, list(fast.findings), f"method: {fast.method} ({fast.reason})"


def _write_reports(
    report: RunReport, inputs: Inputs, outputs: dict[str, str | None], quiet: bool
) -> None:
    """The files asked for, then the table (on stderr when a file went to stdout)."""

    json_file, csv_file, plot_file = outputs["--json"], outputs["--csv"], outputs["--plot"]
    html_file = outputs["--html"]
    if json_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.reports import json_report

        write_atomic(json_file, json_report.render(report))
    if csv_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.reports import csv_report

        write_atomic(csv_file, csv_report.render(report))
    if plot_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.reports import plot

        write_atomic(plot_file, plot.render_png(report))
    if html_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.reports.html_pages import run_page

        write_html(html_file, lambda: run_page(report, inputs))
    if not quiet:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.reports import table

        to_stderr = "-" in outputs.values()
        stream = sys.stderr if to_stderr else sys.stdout
        click.echo(table.render(report, colour=use_colour(stream)), file=stream, nl=False)
