"""``heatweave sweep``: one deck at many ambients, parameter values and Monte Carlo draws.

With ``--check`` every corner is held to the annotation's limits as ``check`` holds one run
(:mod:`heatweave.sweep.limits`), and ``--junit FILE`` writes one test case per corner and
limit.
"""

from __future__ import annotations

import sys
import time
from dataclasses import replace
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING

import click

from heatweave.cli.common import (
    BACKENDS,
    analyses_of,
    analysis_options,
    annotation_for,
    check_outputs,
    deck_options,
    guard_outputs,
    guarded,
    init_file_option,
    is_terminal,
    may_replace_report,
    report_options,
    require_plotting,
    run_control_options,
    step_option,
    style_severity,
    use_colour,
)
from heatweave.cli.html_out import check_html_path, html_option, write_html
from heatweave.cli.progress import count_progress
from heatweave.cli.run_cmd import check_probes_early, known_signals
from heatweave.errors import HeatweaveError, UsageError
from heatweave.files import write_atomic
from heatweave.reports.junit import Case
from heatweave.spice.acceptance import refuse_rejected
from heatweave.sweep import limits as sweep_limits
from heatweave.sweep import report as sweep_report
from heatweave.sweep.executors import make_executor

if TYPE_CHECKING:
    from collections.abc import Sequence

    from heatweave.annotation import Annotation
    from heatweave.emit.emitter import Inputs
    from heatweave.reports.model import Probe
    from heatweave.run.prepare import RunOptions
    from heatweave.sweep.corners import CornerOutcome, SweepPlan, SweepResult

#: What every worker imports: loaded once by the fork server, then shared by the workers.
WORKER_MODULES = (
    "heatweave.sweep.corners",
    "heatweave.reports",
    "heatweave.run.runaway",
    "heatweave.checks.limits",
)


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
@step_option
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
    help="Keep the .control blocks and *# lines of the deck and of every file it includes "
    "(they can run any command: trusted decks only).",
)
@init_file_option
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
@click.option(
    "--check",
    "check_limits",
    is_flag=True,
    help="Hold every corner to the annotation's limits (tmax, derated power_rating, "
    '[limit."V(node)"]), as check does; exit 1 when a corner violates one.',
)
@click.option(
    "--junit",
    "junit_file",
    metavar="FILE",
    help="With --check: write a JUnit XML report, one test case per corner and limit "
    "(- is stdout).",
)
@click.option(
    "--probe",
    multiple=True,
    metavar="SIGNAL",
    help="A node voltage (out, V(out)) or a branch current (I(vamm): voltage sources and "
    "inductors) shown per corner in the table and written to the CSV and JSON (repeatable).",
)
@report_options("Write one CSV row per corner and part.")
@run_control_options("each corner")
@html_option
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
    max_step: float | None,
    backend: str,
    allow_control: bool,
    init_file: str | None,
    jobs: int | None,
    executor: str,
    scheduler: str | None,
    check_limits: bool,
    junit_file: str | None,
    probe: tuple[str, ...],
    timeout: float | None,
    json_file: str | None,
    csv_file: str | None,
    plot_file: str | None,
    quiet: bool,
    html_file: str | None,
) -> None:
    """Run DECK at every corner of a sweep, in parallel, and report each part per corner.

    Corners are the full grid of --param values x Monte Carlo draws x --ambient values.
    Exit status: 0 when every corner ran, 1 when some failed (each is named) or, with
    --check, violated a limit, and when all failed the status of the first corner's error
    (3, 4, 7, ...).
    """  # fmt: skip
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.reports.model import parse_probe
    from heatweave.run.prepare import RunOptions
    from heatweave.sweep.corners import SweepPlan
    from heatweave.sweep.grid import parse_assignment, parse_range

    clock = (time.monotonic(), datetime.now(UTC))
    if seed is not None and draws is None:
        raise UsageError("--seed is for --monte-carlo", hint="add --monte-carlo N")
    if junit_file is not None and not check_limits:
        raise UsageError("--junit is for --check", hint="add --check")
    check_html_path(html_file)
    outputs = {"--json": json_file, "--csv": csv_file, "--plot": plot_file, "--junit": junit_file}
    annotation_path = annotation_for(deck, annotations)
    check_outputs({**outputs, "--html": html_file}, deck, annotation_path, init_file)
    if plot_file is not None:
        require_plotting()
    ambients: tuple[float | None, ...] = (None,)
    if ambient_range is not None:
        ambients = parse_range(ambient_range, "--ambient", temperature=True)
    params = tuple(parse_assignment(text) for text in param_ranges)
    names = [name.lower() for name, _ in params]
    if len(set(names)) != len(names):
        raise UsageError("--param names one parameter twice", hint="give each name once")
    plan = SweepPlan(ambients, params, draws or 0, seed)
    options = RunOptions(
        analyses=analyses_of(op, tran),
        max_step=max_step,
        backend=backend,
        allow_control=allow_control,
        init_file=init_file,
        timeout=timeout,
    )
    probes = tuple(dict.fromkeys(parse_probe(p) for p in probe))
    if probe and deck != "-":  # standard input is read once, by the sweep itself
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.emit.emitter import load_inputs

        check_probes_early(probe, load_inputs(deck, annotation_path).index)
    try:
        result = _run(deck, annotation_path, plan, options, check_limits, executor, jobs,
                      scheduler, quiet, {**outputs, "--html": html_file}, probes)  # fmt: skip
    except HeatweaveError as err:
        # As with check: a report is still written, so an older one never stands in.
        if junit_file is not None and may_replace_report(junit_file):
            _write_junit(junit_file, deck, (_run_error(deck, err),), clock)
        raise
    ran = next((o.data for o in result.outcomes if o.data is not None), None)
    if ran is not None and probe:  # every corner has the same nodes and devices
        known_signals(probe, ran["voltages"], ran["currents"])
    if html_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.sweep.page import sweep_page

        write_html(html_file, lambda: sweep_page(result))
    _report(result, outputs, junit_file, quiet, clock)


def _refuse_unsettled_check(
    deck: str, inputs: Inputs, plan: SweepPlan, options: RunOptions
) -> None:
    """The sweep does not settle its corners: ``--check`` refuses a deck ``check`` settles."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.checks.periodic import refuse_unsettled

    ambient = plan.ambients[0]
    at = "" if ambient is None else f" --ambient {ambient:g}"
    refuse_unsettled(
        inputs, replace(options, ambient=ambient), "sweep --check (its corners are not settled)",
        f"gate each corner with 'heatweave check {deck}{at}' (or settle --check)",
    )  # fmt: skip


def _run(
    deck: str,
    annotation_path: str,
    plan: SweepPlan,
    options: RunOptions,
    check_limits: bool,
    executor: str,
    jobs: int | None,
    scheduler: str | None,
    quiet: bool,
    outputs: dict[str, str | None],
    probes: tuple[Probe, ...],
) -> SweepResult:
    """Load the inputs, refuse *outputs* that would replace one, resolve the limits (bad
    ones are exit 2 before any corner runs) and run every corner."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.checks.limits import resolve_limits
    from heatweave.emit.emitter import load_inputs, refuse_unwritable_inputs
    from heatweave.sweep.corners import run_sweep

    inputs = load_inputs(deck, annotation_path)
    refuse_unwritable_inputs(inputs)  # before the header line names the deck
    guard_outputs(outputs, inputs)
    # What ngspice 39 would refuse, and a deck analysis that would run to no points: exit 2.
    refuse_rejected(inputs.index, own_analyses=not options.analyses)
    limits = resolve_limits(inputs.annotation, inputs.index) if check_limits else None
    if limits is not None:
        _refuse_unsettled_check(deck, inputs, plan, options)
    if plan.draws and not _has_tolerances(inputs.annotation):
        message = (
            f"warning: {inputs.annotation_path} gives no tolerance: every Monte Carlo draw is "
            "the nominal design (hint: write a key as {nominal = ..., sigma = ...} or "
            "{nominal = ..., min = ..., max = ...})"
        )
        click.echo(style_severity(message, "warning"), err=True)
    pool = make_executor(executor, jobs, scheduler, preload=WORKER_MODULES)
    try:
        with count_progress(not quiet and is_terminal(), "corners") as progress:
            return run_sweep(inputs, plan, options, pool, progress, limits=limits, probes=probes)
    except BaseException:  # Ctrl-C, SIGTERM: no worker may outlive the command
        pool.abort()
        raise
    finally:
        pool.close()


def _report(
    result: SweepResult,
    outputs: dict[str, str | None],
    junit_file: str | None,
    quiet: bool,
    clock: tuple[float, datetime],
) -> None:
    """Warnings, the reports asked for, the table and the limit lines; then exit."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.sweep.corners import corner_ambient, describe, exit_status

    # Warnings every corner repeats (a dropped .control block) are printed once; one only
    # some corners give (their own steady states) is printed for each, naming it.
    for text, owners in corner_warnings(result.outcomes):
        click.echo(style_severity(f"{owners}: {text}" if owners else text, "warning"), err=True)
    json_file, csv_file, plot_file = outputs["--json"], outputs["--csv"], outputs["--plot"]
    if json_file is not None:
        write_atomic(json_file, sweep_report.render_json(result))
    if csv_file is not None:
        write_atomic(csv_file, sweep_report.render_csv(result))
    if plot_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.sweep import plot as sweep_plot  # matplotlib: the plot extra

        write_atomic(plot_file, sweep_plot.render_png(result))
    if junit_file is not None:
        cases = sweep_limits.junit_cases(result)
        _write_junit(junit_file, result.inputs.deck_path, cases, clock)
    stream = sys.stderr if "-" in outputs.values() else sys.stdout
    if not quiet:
        text = sweep_report.render_table(
            result, colour=use_colour(stream), caution=False
        )
        click.echo(text, file=stream, nl=False)
    elif result.failed:
        for outcome in result.failed:
            where = describe(outcome.corner, corner_ambient(result, outcome))
            click.echo(f"{where} failed: {outcome.error}", err=True)
    if result.checked:
        # -q keeps the violations (on stderr, like failed corners) and drops the summary.
        lines = sweep_limits.violation_lines(result)
        if not quiet:
            lines += sweep_limits.summary_lines(result)
        target = sys.stderr if quiet else stream
        for line in lines:
            if line.startswith("FAIL") and use_colour(target):
                line = click.style(line[:4], fg="red") + line[4:]
            click.echo(line, file=target)
    if not quiet:
        # after the limit lines, so nothing stands between the table and its FAIL lines
        click.echo("\n".join(sweep_report.caution_lines()), file=stream)
    sys.exit(exit_status(result))


def _run_error(deck: str, err: HeatweaveError) -> Case:
    """The one JUnit test case of a sweep that gave nothing to check."""
    return Case("run", f"heatweave.{Path(deck).stem}", error=err.render())


def _write_junit(
    path: str, deck: str, cases: tuple[Case, ...], clock: tuple[float, datetime]
) -> None:
    """The sweep's JUnit report: one suite for the deck (``-``: stdout), timed from
    *clock* (the monotonic and the calendar time the sweep started)."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.reports.junit import Suite, render

    started, stamp = clock
    elapsed = time.monotonic() - started

    suite = Suite(name=deck, cases=cases, time=elapsed, timestamp=stamp)
    write_atomic(path, render([suite], name="heatweave sweep"))


def corner_warnings(outcomes: Sequence[CornerOutcome]) -> list[tuple[str, str]]:
    """Each distinct warning with the corners that give it (``""`` when every corner that
    ran does), in order of first appearance."""
    ran = {o.corner.index for o in outcomes if o.ok}
    found: dict[str, dict[int, None]] = {}
    for outcome in outcomes:
        for text in outcome.warnings:
            found.setdefault(text, {})[outcome.corner.index] = None
    return [
        (text, "" if ran <= owners.keys() else "corner " + ", ".join(map(str, owners)))
        for text, owners in found.items()
    ]
