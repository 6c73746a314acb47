"""``heatweave run``: simulate a deck with self-heating and report what it does to the parts."""

from __future__ import annotations

import sys
from collections.abc import Callable
from dataclasses import replace

import click

from heatweave.cli.common import (
    analyses_of,
    analysis_options,
    annotation_for,
    check_outputs,
    deck_options,
    guarded,
    is_terminal,
    report_findings,
    report_options,
    run_control_options,
    simulation_options,
)
from heatweave.errors import UsageError


def progress_printer(enabled: bool) -> Callable[[float], None] | None:
    """A progress callback drawing ``simulated NN%`` on stderr, or ``None`` when quiet."""
    if not enabled:
        return None
    shown = [-1]

    def show(fraction: float) -> None:
        percent = int(fraction * 100)
        if percent == shown[0]:
            return
        shown[0] = percent
        end = "\n" if percent >= 100 else ""
        click.echo(f"\rsimulated {percent:3d}% of the transient", err=True, nl=False)
        if end:
            click.echo("\r" + " " * 32 + "\r", err=True, nl=False)

    return show


def probe_nodes(probes: tuple[str, ...], voltages: dict[str, float]) -> tuple[str, ...]:
    """``--probe`` names (``out`` or ``V(out)``) as the result's node names, checked."""
    found = []
    for probe in probes:
        name = probe.strip().lower()
        if name.startswith("v(") and name.endswith(")"):
            name = name[2:-1]
        if name not in voltages:
            known = ", ".join(sorted(voltages)) or "none"
            raise UsageError(
                f"--probe {probe}: the deck has no node {name!r}",
                hint=f"nodes of this deck: {known}",
            )
        found.append(name)
    return tuple(found)


@click.command()
@deck_options
@analysis_options
@simulation_options
@report_options("Write the waveforms as CSV (- is stdout).")
@click.option(
    "--probe",
    multiple=True,
    metavar="NODE",
    help="Deck node whose voltage the plot shows (repeatable).",
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
@run_control_options("Stop ngspice after this long.")
@guarded
def run(
    deck: str,
    annotations: str | None,
    op: bool,
    tran: tuple[float, float] | None,
    ambient: float | None,
    backend: str,
    allow_control: bool,
    json_file: str | None,
    csv_file: str | None,
    plot_file: str | None,
    probe: tuple[str, ...],
    timeout: float | None,
    method: str,
    quiet: bool,
) -> None:
    """Simulate DECK with self-heating and report part temperatures, drift and margins.

    The summary table goes to stdout (to stderr when a report is written to stdout).
    """  # fmt: skip
    from heatweave.emitter import load_inputs
    from heatweave.files import write_atomic
    from heatweave.reports import build_report
    from heatweave.runner import RunOptions
    from heatweave.runner import run as run_deck

    analyses = analyses_of(op, tran)
    outputs = {"--json": json_file, "--csv": csv_file, "--plot": plot_file}
    check_outputs(outputs, deck)
    annotation_path = annotation_for(deck, annotations)
    inputs = load_inputs(deck, annotation_path)
    options = RunOptions(
        analyses=analyses,
        ambient=ambient,
        backend=backend,
        allow_control=allow_control,
        timeout=timeout,
        progress=progress_printer(not quiet and is_terminal()),
    )
    if method == "full":
        outcome = run_deck(deck, annotation_path, options, inputs=inputs)
        report_findings(list(outcome.prepared.findings))
        report = build_report(inputs, outcome, probe_nodes(probe, outcome.results.voltages))
        report = replace(report, method_reason="asked for the full electrothermal deck")
    else:
        from heatweave.cosim import run_auto
        from heatweave.reports.model import report_of
        from heatweave.runner import deck_analyses_of

        fast = run_auto(deck, annotation_path, options, method=method, inputs=inputs)
        report_findings(list(fast.findings))
        if fast.full is not None:
            report = build_report(inputs, fast.full, probe_nodes(probe, fast.results.voltages))
            report = replace(report, method_reason=fast.reason)
        else:
            own = tuple(deck_analyses_of(inputs.project.deck.write()))
            report = report_of(
                inputs, fast.results, analyses or own, "shared", fast.findings,
                probe_nodes(probe, fast.results.voltages), (fast.method, fast.reason),
            )  # fmt: skip
        if not quiet:
            click.echo(f"method: {fast.method} ({fast.reason})", err=True)
    if json_file is not None:
        from heatweave.reports import json_report

        write_atomic(json_file, json_report.render(report))
    if csv_file is not None:
        from heatweave.reports import csv_report

        write_atomic(csv_file, csv_report.render(report))
    if plot_file is not None:
        from heatweave.reports import plot

        write_atomic(plot_file, plot.render_png(report))
    if not quiet:
        from heatweave.reports import table

        to_stderr = "-" in outputs.values()
        stream = sys.stderr if to_stderr else sys.stdout
        click.echo(table.render(report, colour=is_terminal(stream)), file=stream, nl=False)
