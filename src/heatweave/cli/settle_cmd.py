"""``heatweave settle``: the thermal steady state of a periodically driven circuit."""

from __future__ import annotations

import sys
import time

import click

from heatweave.checks import limits
from heatweave.cli.common import (
    annotation_for,
    check_outputs,
    deck_options,
    guard_outputs,
    guarded,
    is_terminal,
    may_replace_report,
    report_findings,
    report_options,
    require_plotting,
    run_control_options,
    simulation_options,
)
from heatweave.cli.html_out import check_html_path, html_option, write_html
from heatweave.errors import Finding, HeatweaveError, UsageError
from heatweave.files import write_atomic
from heatweave.quantities import SpiceQuantity
from heatweave.spice.acceptance import refuse_rejected


@click.command()
@deck_options
@click.option(
    "--period",
    type=SpiceQuantity("s", positive=True),
    metavar="T",
    help="Period of the drive, e.g. 1m or 10u; it must be a whole multiple of every "
    "source's period (default: the least common period of the deck's PULSE, SIN, PWL r=, "
    "SFFM and AM sources).",
)
@click.option(
    "--periods",
    type=click.IntRange(min=2),
    default=4,
    show_default=True,
    help="Electrical periods per iteration (doubled until two periods agree).",
)
@click.option(
    "--tstep",
    type=SpiceQuantity("s", positive=True),
    metavar="TSTEP",
    help="Largest transient step (default: period/400).",
)
@click.option(
    "--tol",
    type=SpiceQuantity("K", positive=True),
    default=0.01,
    show_default=True,
    help="Stop when no part temperature changes by more than this (K).",
)
@click.option(
    "--max-iter",
    type=click.IntRange(min=1),
    default=30,
    show_default=True,
    help="Give up after this many iterations.",
)
@click.option(
    "--wave-tol",
    type=SpiceQuantity(positive=True),
    default=1e-4,
    show_default=True,
    help="Relative difference allowed between two successive periods.",
)
@click.option(
    "--warmup",
    type=SpiceQuantity("s", positive=True),
    metavar="TSTOP",
    help="Also compute the warm-up from cold up to TSTOP (JSON, CSV and plot).",
)
@click.option(
    "--envelope",
    "old_envelope",
    type=SpiceQuantity("s", positive=True),
    metavar="TSTOP",
    hidden=True,
    help="Former name of --warmup.",
)
@simulation_options
@report_options("Write the --warmup curve as CSV (- is stdout).")
@click.option(
    "--check",
    is_flag=True,
    help="Hold the settled period to the annotation's limits, as check does (exit 1 on a "
    "violation).",
)
@click.option(
    "--junit",
    "junit_file",
    metavar="FILE",
    help="Write the limits as a JUnit XML report here (- is stdout); implies --check.",
)
@run_control_options("the whole settling")
@html_option
@guarded
def settle(
    deck: str, annotations: str | None, period: float | None, periods: int,
    tstep: float | None, tol: float, max_iter: int, wave_tol: float, warmup: float | None,
    old_envelope: float | None, ambient: float | None, backend: str, allow_control: bool,
    init_file: str | None,
    json_file: str | None, csv_file: str | None, plot_file: str | None, check: bool,
    junit_file: str | None, timeout: float | None, quiet: bool, html_file: str | None,
) -> None:  # fmt: skip
    """Find the thermal steady state of DECK driven periodically.

    The period is --period T, else the least common period of the deck's sources; a
    period the sources do not repeat with, or a circuit whose waveforms do not repeat
    with it, is refused.  Simulates a few periods at fixed part temperatures, averages
    each part's dissipation over a period, solves the thermal network for its steady
    state, and repeats until the temperatures stop changing; then reports each part's
    cycle-mean, peak and valley temperature within the settled period.  With --check,
    each part's tmax is held against its peak temperature, its derated power_rating
    against its mean dissipation, and each [limit] table against the settled period.
    Exit status 1 reports a violated limit, 7 thermal runaway.
    """
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.cli.check_cmd import junit_case, report_limits, write_junit
    from heatweave.emit.emitter import load_inputs
    from heatweave.reports.private import settled_without_private
    from heatweave.reports.settle import progress_line, render_csv, render_json, render_table
    from heatweave.settle.periodic import SettleOptions, Step
    from heatweave.settle.periodic import settle as settle_deck

    if old_envelope is not None:
        if warmup is not None:
            raise UsageError("--envelope is the former name of --warmup", hint="give --warmup only")
        report_findings([Finding("warning", "--envelope is deprecated; use --warmup TSTOP", None)])
        warmup = old_envelope
    if csv_file is not None and warmup is None:
        raise UsageError("--csv writes the warm-up curve", hint="add --warmup TSTOP")
    outputs = {"--json": json_file, "--csv": csv_file, "--plot": plot_file, "--junit": junit_file,
               "--html": html_file}  # fmt: skip
    check_html_path(html_file)
    if plot_file is not None:
        require_plotting()
    check = check or junit_file is not None
    started = time.monotonic()
    annotation_path = annotation_for(deck, annotations)
    check_outputs(outputs, deck, annotation_path, init_file)
    try:
        inputs = load_inputs(deck, annotation_path)
        guard_outputs(outputs, inputs)
        # What ngspice 39 would refuse (exit 2); settle runs its own transient, never the
        # deck's analysis cards, so one that computes no points does not stop it.
        refuse_rejected(inputs.index, own_analyses=False)
        # Limit tables naming nodes the deck lacks are refused before simulating.
        signals = limits.resolve_limits(inputs.annotation, inputs.index) if check else ()

        def show(step: Step) -> None:
            click.echo(progress_line(step), err=True)

        options = SettleOptions(
            period=period, periods=periods, tstep=tstep, tol=tol, max_iter=max_iter,
            wave_tol=wave_tol, envelope=warmup, ambient=ambient, backend=backend,
            allow_control=allow_control, init_file=init_file, timeout=timeout,
            progress=show if not quiet and is_terminal() else None,
            baseline=limits.needs_baseline(signals),
        )  # fmt: skip
        settled = settle_deck(deck, annotation_path, options, inputs=inputs)
    except HeatweaveError as err:
        # no stale report of an earlier run left standing (nor over a file not a report)
        if junit_file is not None and may_replace_report(junit_file):
            failed = junit_case(deck, "settle", error=err.render())
            write_junit(junit_file, deck, (failed,), time.monotonic() - started)
        raise
    found = limits.evaluate_settled(settled, signals) if check else None
    # a name only an unproven include holds is left out, unless a [limit] names it
    named = {node for s in signals for node in (s.plus, s.minus)}
    settled = settled_without_private(settled, inputs, named)
    report_findings(list(settled.findings))
    if json_file is not None:
        write_atomic(json_file, render_json(settled, inputs, found))
    if csv_file is not None:
        write_atomic(csv_file, render_csv(settled))
    if plot_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.reports.settle_plot import render_png

        write_atomic(plot_file, render_png(settled, deck))
    if html_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.reports.html_pages import settle_page

        write_html(html_file, lambda: settle_page(settled, inputs, found))
    stream = sys.stderr if "-" in outputs.values() else sys.stdout
    if not quiet:
        click.echo(render_table(settled), file=stream, nl=False)
    if found is not None:
        report_limits(
            deck, found, junit_file, time.monotonic() - started, stream=stream, quiet=quiet
        )
