"""``heatweave settle``: the thermal steady state of a periodically driven circuit."""

from __future__ import annotations

import sys

import click

from heatweave.cli.common import (
    annotation_for,
    deck_options,
    guarded,
    is_terminal,
    report_findings,
    report_options,
    run_control_options,
    simulation_options,
)
from heatweave.cli.html_out import check_html_path, html_option, write_html
from heatweave.errors import UsageError
from heatweave.quantities import SpiceQuantity
from heatweave.spice.acceptance import refuse_rejected


@click.command()
@deck_options
@click.option(
    "--period",
    required=True,
    type=SpiceQuantity("s", positive=True),
    metavar="T",
    help="Period of the drive, e.g. 1m or 10u.",
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
    "--envelope",
    type=SpiceQuantity("s", positive=True),
    metavar="TSTOP",
    help="Also compute the warm-up from cold up to TSTOP (JSON and CSV).",
)
@simulation_options
@report_options("Write the --envelope warm-up curve as CSV (- is stdout).", plot=False)
@run_control_options("Stop each ngspice run after this long.")
@html_option
@guarded
def settle(
    deck: str, annotations: str | None, period: float, periods: int, tstep: float | None,
    tol: float, max_iter: int, wave_tol: float, envelope: float | None,
    ambient: float | None, backend: str, allow_control: bool, json_file: str | None,
    csv_file: str | None, timeout: float | None, quiet: bool, html_file: str | None,
) -> None:  # fmt: skip
    """Find the thermal steady state of DECK driven periodically with period T.

    Simulates a few periods at fixed part temperatures, averages each part's dissipation
    over a period, solves the thermal network for its steady state, and repeats until
    the temperatures stop changing; then reports each part's cycle-mean, peak and valley
    temperature within the settled period.  Exit status 7 reports thermal runaway.
    """
    from heatweave.emit.emitter import load_inputs
    from heatweave.files import write_atomic
    from heatweave.reports.settle import progress_line, render_csv, render_json, render_table
    from heatweave.settle.periodic import SettleOptions, Step
    from heatweave.settle.periodic import settle as settle_deck

    if csv_file is not None and envelope is None:
        raise UsageError("--csv writes the warm-up curve", hint="add --envelope TSTOP")
    check_html_path(html_file)
    outputs = {"--json": json_file, "--csv": csv_file}
    if json_file == csv_file == "-":
        raise UsageError("--json and --csv both write to stdout", hint="give one a file name")
    annotation_path = annotation_for(deck, annotations)
    inputs = load_inputs(deck, annotation_path)
    refuse_rejected(inputs.index)  # what ngspice 39 would refuse: exit 2 before it runs

    def show(step: Step) -> None:
        click.echo(progress_line(step), err=True)

    options = SettleOptions(
        period=period, periods=periods, tstep=tstep, tol=tol, max_iter=max_iter,
        wave_tol=wave_tol, envelope=envelope, ambient=ambient, backend=backend,
        allow_control=allow_control, timeout=timeout,
        progress=show if not quiet and is_terminal() else None,
    )  # fmt: skip
    settled = settle_deck(deck, annotation_path, options, inputs=inputs)
    report_findings(list(settled.findings))
    if json_file is not None:
        write_atomic(json_file, render_json(settled, inputs))
    if csv_file is not None:
        write_atomic(csv_file, render_csv(settled))
    if html_file is not None:
        from heatweave.reports.html_pages import settle_page

        write_html(html_file, lambda: settle_page(settled, inputs))
    if not quiet:
        stream = sys.stderr if "-" in outputs.values() else sys.stdout
        click.echo(render_table(settled), file=stream, nl=False)
