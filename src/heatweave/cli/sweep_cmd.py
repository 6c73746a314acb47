"""``heatweave sweep``: one deck at many ambients, parameter values and Monte Carlo draws."""

from __future__ import annotations

import sys
from collections.abc import Callable
from typing import TYPE_CHECKING

import click

from heatweave.cli.common import (
    BACKENDS,
    analyses_of,
    analysis_options,
    annotation_for,
    check_outputs,
    deck_options,
    guarded,
    is_terminal,
    report_options,
    run_control_options,
    style_severity,
)
from heatweave.errors import UsageError

if TYPE_CHECKING:
    from heatweave.annotations import Annotation

#: What every worker imports: loaded once by the fork server, then shared by the workers.
WORKER_MODULES = ("heatweave.sweep", "heatweave.reports", "heatweave.runaway")
#: Width of the progress bar in characters.
BAR = 30


def progress_bar(enabled: bool) -> Callable[[int, int, int], None] | None:
    """A callback drawing ``corners 12/20 [######....] 1 failed`` on stderr, or ``None``."""
    if not enabled:
        return None

    def show(done: int, total: int, failed: int) -> None:
        filled = BAR * done // total
        bar = "#" * filled + "." * (BAR - filled)
        tail = f" {failed} failed" if failed else ""
        click.echo(f"\rcorners {done}/{total} [{bar}]{tail}", err=True, nl=False)
        if done == total:
            click.echo("\r" + " " * (BAR + 40) + "\r", err=True, nl=False)

    return show


def _has_tolerances(annotation: Annotation) -> bool:
    """True when some part, shared node or thermal path has a toleranced key."""
    return any(
        table.tolerances for tables in (annotation.parts, annotation.nodes, annotation.paths)
        for table in tables
    )  # fmt: skip


@click.command()
@deck_options
@click.option(
    "--ambient",
    "ambient_range",
    metavar="START:STOP:STEP",
    help="Ambient temperatures (degC), e.g. -40:125:5 or one value; default the annotation's.",
)
@click.option(
    "--param",
    "param_ranges",
    multiple=True,
    metavar="NAME=START:STOP:STEP",
    help="Values of a .param of the deck or of a file it includes (repeatable: the full "
    "grid).",
)
@click.option(
    "--monte-carlo",
    "draws",
    type=click.IntRange(min=1),
    metavar="N",
    help="N Monte Carlo draws of the annotation's tolerances, each at every corner.",
)
@click.option(
    "--seed", type=click.IntRange(min=0), metavar="S", help="Seed of the Monte Carlo draws."
)
@analysis_options
@click.option(
    "--backend",
    type=click.Choice(BACKENDS),
    default="auto",
    show_default=True,
    help="How each worker drives ngspice; auto: the batch program if installed (faster per "
    "corner), else the shared library.",
)
@click.option(
    "--allow-control",
    is_flag=True,
    help="Keep the deck's .control blocks (they can run any command).",
)
@click.option("-j", "--jobs", type=int, help="Worker processes (default: all cores).")
@click.option(
    "--executor",
    type=click.Choice(("local", "dask")),
    default="local",
    show_default=True,
    help="Local worker processes, or a Dask distributed cluster.",
)
@click.option(
    "--scheduler",
    metavar="ADDRESS",
    help="Dask scheduler (tcp://HOST:PORT); without it --executor dask starts a local cluster.",
)
@report_options("Write one CSV row per corner and part.")
@run_control_options("Stop ngspice after this long (each corner).")
@guarded
def sweep(
    deck: str,
    annotations: str | None,
    ambient_range: str | None,
    param_ranges: tuple[str, ...],
    draws: int | None,
    seed: int | None,
    op: bool,
    tran: tuple[float, float] | None,
    backend: str,
    allow_control: bool,
    jobs: int | None,
    executor: str,
    scheduler: str | None,
    timeout: float | None,
    json_file: str | None,
    csv_file: str | None,
    plot_file: str | None,
    quiet: bool,
) -> None:
    """Run DECK at every corner of a sweep, in parallel, and report each part per corner.

    Corners are the full grid of --param values x Monte Carlo draws x --ambient values.
    Exit status: 0 when every corner ran, 1 when some failed (each is named), and when all
    failed the status of the first corner's error (3, 4, 7, ...).
    """  # fmt: skip
    from heatweave.emitter import load_inputs
    from heatweave.executors import make_executor
    from heatweave.files import write_atomic
    from heatweave.runner import RunOptions
    from heatweave.sweep import SweepPlan, describe, exit_status, run_sweep
    from heatweave.sweep_grid import parse_assignment, parse_range

    if seed is not None and draws is None:
        raise UsageError("--seed is for --monte-carlo", hint="add --monte-carlo N")
    outputs = {"--json": json_file, "--csv": csv_file, "--plot": plot_file}
    check_outputs(outputs, deck)
    ambients: tuple[float | None, ...] = (None,)
    if ambient_range is not None:
        ambients = parse_range(ambient_range, "--ambient")
    params = tuple(parse_assignment(text) for text in param_ranges)
    names = [name.lower() for name, _ in params]
    if len(set(names)) != len(names):
        raise UsageError("--param names one parameter twice", hint="give each name once")
    plan = SweepPlan(ambients, params, draws or 0, seed)
    options = RunOptions(
        analyses=analyses_of(op, tran),
        backend=backend,
        allow_control=allow_control,
        timeout=timeout,
    )
    annotation_path = annotation_for(deck, annotations)
    inputs = load_inputs(deck, annotation_path)
    if draws and not _has_tolerances(inputs.annotation):
        message = (
            f"warning: {inputs.annotation_path} gives no tolerance: every Monte Carlo draw is "
            "the nominal design (hint: write a key as {nominal = ..., sigma = ...} or "
            "{nominal = ..., min = ..., max = ...})"
        )
        click.echo(style_severity(message, "warning"), err=True)
    pool = make_executor(executor, jobs, scheduler, preload=WORKER_MODULES)
    try:
        progress = progress_bar(not quiet and is_terminal())
        result = run_sweep(inputs, plan, options, pool, progress)
    finally:
        pool.close()
    # Warnings every corner repeats (a dropped .control block) are printed once.
    for text in dict.fromkeys(w for o in result.outcomes for w in o.warnings):
        click.echo(style_severity(text, "warning"), err=True)
    from heatweave import sweep_report

    if json_file is not None:
        write_atomic(json_file, sweep_report.render_json(result))
    if csv_file is not None:
        write_atomic(csv_file, sweep_report.render_csv(result))
    if plot_file is not None:
        from heatweave.reports import sweep_plot

        write_atomic(plot_file, sweep_plot.render_png(result))
    if not quiet:
        stream = sys.stderr if "-" in outputs.values() else sys.stdout
        text = sweep_report.render_table(result, colour=is_terminal(stream))
        click.echo(text, file=stream, nl=False)
    elif result.failed:
        for outcome in result.failed:
            where = describe(outcome.corner, sweep_report.corner_ambient(result, outcome))
            click.echo(f"{where} failed: {outcome.error}", err=True)
    sys.exit(exit_status(result))
