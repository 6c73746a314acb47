"""``heatweave check``: run a deck and hold it to the limits of its annotation file.

Exit status 0 when every limit holds, 1 when one is violated, 2 for unusable input, and the
simulator's own statuses (3 no convergence, 4 timestep too small, 5 ngspice missing,
6 libngspice missing, 7 thermal runaway) when there is nothing to check.
"""

from __future__ import annotations

import sys
import time
from collections.abc import Sequence
from dataclasses import replace
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, TextIO

import click

from heatweave.checks import limits as checks
from heatweave.cli.common import (
    analyses_of,
    analysis_options,
    annotation_for,
    check_outputs,
    deck_options,
    guard_outputs,
    guarded,
    may_replace_report,
    report_findings,
    simulation_options,
    step_option,
    timeout_option,
    use_colour,
)
from heatweave.cli.html_out import check_html_path, html_option, write_html
from heatweave.errors import EXIT_CHECK_FAILED, HeatweaveError, UsageError
from heatweave.files import write_atomic
from heatweave.reports.junit import Case, Suite, render, shared_time
from heatweave.run import runner
from heatweave.spice.acceptance import refuse_rejected

if TYPE_CHECKING:
    from heatweave.checks.limits import LimitResult
    from heatweave.emit.emitter import Inputs


@click.command()
@deck_options
@click.option(
    "--junit",
    "junit_file",
    metavar="FILE",
    help="Also write a JUnit XML report here (- is stdout).",
)
@click.option(
    "--json",
    "json_file",
    metavar="FILE",
    help="Also write the limits checked as JSON here (- is stdout).",
)
@click.option(
    "-q", "--quiet", is_flag=True, help="Only the violated limits (on stderr); no summary."
)
@click.option(
    "--method",
    "method_name",
    type=click.Choice(("auto", "full", "cosim", "settle")),
    default="auto",
    show_default=True,
    help="What to hold to the limits: full: the deck's own run (the electrothermal deck); "
    "cosim: that run co-simulated (where it applies, as run --method cosim); settle: the "
    "periodic steady state (as settle finds it); auto: settle a periodic deck whose thermal "
    "time constants are long against its period, else full.",
)
@analysis_options
@step_option
@simulation_options
@html_option
@timeout_option("the check (its run without self-heating included)")
@guarded
def check(
    deck: str,
    annotations: str | None,
    junit_file: str | None,
    json_file: str | None,
    quiet: bool,
    method_name: str,
    op: bool,
    tran: tuple[float, float] | None,
    max_step: float | None,
    ambient: float | None,
    backend: str,
    allow_control: bool,
    html_file: str | None,
    init_file: str | None,
    timeout: float,
) -> None:
    """Run DECK with self-heating and check every limit its annotation file sets.

    Checked: each part's tmax (the peak of a transient) and its power_rating derated by
    IEC 60115-1 at the temperature of the node its path ends on, and each [limit."V(node)"]
    table (min, max, and max_drift_ppm against the same deck without self-heating).  A
    periodic deck whose thermal time constants are long against its period is checked in
    its periodic steady state (as settle finds it) instead of its own short transient
    (--method forces the choice); the method line says what ran.
    """
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.checks.periodic import choose
    from heatweave.emit.emitter import load_inputs
    from heatweave.run.prepare import RunOptions, with_deadline
    from heatweave.settle.periodic import SettleOptions, settle

    check_html_path(html_file)
    chosen = annotation_for(deck, annotations)
    outputs = {"--junit": junit_file, "--json": json_file, "--html": html_file}
    check_outputs(outputs, deck, chosen, init_file)
    started, stamp = time.monotonic(), datetime.now(UTC)
    try:
        inputs = load_inputs(deck, chosen)
        guard_outputs(outputs, inputs)
        # What ngspice 39 would refuse, and a deck analysis that would run to no points.
        refuse_rejected(inputs.index, own_analyses=not analyses_of(op, tran))
        signals = checks.resolve_limits(inputs.annotation, inputs.index)
        options = RunOptions(
            analyses=analyses_of(op, tran), ambient=ambient, backend=backend,
            allow_control=allow_control, init_file=init_file, timeout=timeout,
            max_step=max_step,
        )  # fmt: skip
        options = with_deadline(options)  # one limit for every run of the check
        method = choose(inputs, options, method_name)
        if max_step is not None and method.drive is not None:
            raise UsageError(
                "--max-step sets the maximum step of the deck's own run, and this check holds "
                "the periodic steady state, which settle finds with transients of its own",
                hint="leave --max-step out, or check the run itself with --method full",
            )
        settled, outcome, fast = None, None, None
        needed = checks.needs_baseline(signals)
        if method.drive is not None:
            # No period given: settle takes the sources' own and says where it came from.
            settle_options = SettleOptions(
                ambient=ambient, backend=backend,
                allow_control=allow_control, baseline=needed, timeout=timeout,
            )  # fmt: skip
            settled = settle(deck, chosen, settle_options, inputs=inputs)
            report_findings(list(settled.findings))
            found = checks.evaluate_settled(settled, signals)
        elif method.method == "cosim":
            # numpy and scipy load here, when the command runs, not for --help
            from heatweave.cosim import run_auto

            checks.refuse_window_ends(signals)
            # The same refusals as run --method cosim, where the co-simulation does not apply.
            fast = run_auto(deck, chosen, options, method="cosim", inputs=inputs)
            report_findings(list(fast.findings))
            method = replace(method, reason=f"{method.reason} ({fast.reason})")
            baseline = runner.run_baseline(inputs, options) if needed else None
            found = checks.evaluate_results(
                fast.results, signals, baseline.results if baseline else None
            )
        else:
            outcome = runner.run(deck, chosen, options, inputs=inputs)
            report_findings(list(outcome.prepared.findings))
            baseline = runner.run_baseline(inputs, options) if needed else None
            found = checks.evaluate(outcome, signals, baseline)
    except HeatweaveError as err:
        # A report is still written: the previous run's must not stand in for this one.
        elapsed = time.monotonic() - started
        if junit_file is not None and may_replace_report(junit_file):
            failed = junit_case(deck, "run", error=err.render(), seconds=elapsed)
            write_junit(junit_file, deck, (failed,), elapsed, stamp)
        if json_file is not None and may_replace_report(json_file):
            # numpy and scipy load here, when the command runs, not for --help
            from heatweave.reports import check_report

            write_atomic(json_file, check_report.render_error(deck, chosen, err))
        raise
    if html_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.reports import html_pages

        if settled is not None:
            write_html(html_file, lambda: html_pages.settle_page(settled, inputs, found, "check"))
        else:
            # numpy and scipy load here, when the command runs, not for --help
            from heatweave.reports.model import build_report, report_of

            if fast is not None:
                ran = fast.analyses or options.analyses or own_analyses(inputs)
                report = report_of(
                    inputs, fast.results, ran, "shared",
                    fast.findings, (), (fast.method, fast.reason),
                )  # fmt: skip
            else:
                assert outcome is not None
                report = build_report(inputs, outcome)
            write_html(html_file, lambda: html_pages.run_page(report, inputs, found, "check"))
    if json_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.reports import check_report

        sha256 = inputs.annotation.sha256
        write_atomic(json_file, check_report.render(deck, chosen, sha256, found))
    report_limits(
        deck, found, junit_file, time.monotonic() - started, method.line(),
        to_stdout=json_file == "-", quiet=quiet, stamp=stamp,
    )  # fmt: skip


def report_limits(
    deck: str, found: Sequence[LimitResult], junit_file: str | None, elapsed: float,
    method: str | None = None, stream: TextIO | None = None, *, to_stdout: bool = False,
    quiet: bool = False, stamp: datetime | None = None,
) -> None:  # fmt: skip
    """What ``check`` and ``settle --check`` print: the method line, one line per limit
    and the summary (on *stream*, else stdout, or stderr when the JUnit report or another
    report, *to_stdout*, goes to stdout; with *quiet* only the violated limits, on stderr),
    the JUnit report (started at *stamp*), and exit status 1 on a violation."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.checks.limits import summary

    # With a report on stdout, the lines go to stderr so that stdout stays XML or JSON.
    if quiet:
        stream = sys.stderr
    elif stream is None:
        stream = sys.stderr if junit_file == "-" or to_stdout else sys.stdout
    if method is not None and not quiet:
        click.echo(method, file=stream)
    for item in found:
        if quiet and item.passed:
            continue
        line = item.message()
        if use_colour(stream):
            line = click.style(line[:4], fg="green" if item.passed else "red") + line[4:]
        click.echo(line, file=stream)
    if not quiet:
        click.echo(f"{deck}: {summary(found)}", file=stream)
    if junit_file is not None:
        cases = tuple(
            junit_case(
                deck, f"{item.subject} {item.limit}", None if item.passed else item.message()
            )
            for item in found
        )
        # One run decided every limit: each case carries its share of the run's time.
        write_junit(junit_file, deck, shared_time(cases, elapsed), elapsed, stamp)
    if any(not item.passed for item in found):
        sys.exit(EXIT_CHECK_FAILED)


def junit_case(
    deck: str,
    name: str,
    failure: str | None = None,
    error: str | None = None,
    seconds: float = 0.0,
) -> Case:
    """One JUnit test case of *deck*'s suite."""
    return Case(name, f"heatweave.{Path(deck).stem}", seconds, failure=failure, error=error)


def write_junit(
    path: str, deck: str, cases: tuple[Case, ...], elapsed: float,
    stamp: datetime | None = None,
) -> None:  # fmt: skip
    """The JUnit report of one deck's check (``-``: stdout), the suite started at *stamp*
    (default: now)."""

    suite = Suite(name=deck, cases=cases, time=elapsed, timestamp=stamp)
    write_atomic(path, render([suite]))


def own_analyses(inputs: Inputs) -> tuple[str, ...]:
    """The deck's own analysis cards, as written."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.run.prepare import deck_analyses_of

    return tuple(deck_analyses_of(inputs.project.deck))
