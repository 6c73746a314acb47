"""``heatweave check``: run a deck and hold it to the limits of its annotation file.

Exit status 0 when every limit holds, 1 when one is violated, 2 for unusable input, and the
simulator's own statuses (3 no convergence, 4 timestep too small, 5 ngspice missing,
6 libngspice missing, 7 thermal runaway) when there is nothing to check.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import click

from heatweave.cli.common import guarded, is_terminal, report_findings
from heatweave.errors import EXIT_CHECK_FAILED, UsageError
from heatweave.quantities import SpiceQuantity
from heatweave.simulators import BACKENDS


def _analyses(op: bool, tran: tuple[float, float] | None) -> tuple[str, ...]:
    if op and tran:
        raise UsageError("--op and --tran exclude each other", hint="choose one analysis")
    if tran:
        step, stop = tran
        if not 0 < step < stop:
            raise UsageError(
                f"--tran needs 0 < TSTEP < TSTOP, not {step:g} {stop:g}",
                hint="e.g. --tran 1m 10",
            )
        return (f"tran {step:.12g} {stop:.12g}",)
    return ("op",) if op else ()


@click.command()
@click.argument("deck", type=click.Path(dir_okay=False, exists=True))
@click.option(
    "-a",
    "--annotations",
    type=click.Path(dir_okay=False, exists=True),
    help="Annotation file (default: DECK.thermal.toml beside the deck).",
)
@click.option(
    "--junit",
    "junit_file",
    metavar="FILE",
    help="Also write a JUnit XML report here (- is stdout).",
)
@click.option("--op", is_flag=True, help="Check the steady state instead of the deck's analyses.")
@click.option(
    "--tran",
    type=(SpiceQuantity(), SpiceQuantity()),
    metavar="TSTEP TSTOP",
    help="Check a transient instead of the deck's analyses.",
)
@click.option("--ambient", type=float, metavar="DEGC", help="Override the ambient temperature.")
@click.option(
    "--backend", type=click.Choice(BACKENDS), default="auto", show_default=True,
    help="How to run ngspice.",
)  # fmt: skip
@click.option(
    "--allow-control", is_flag=True, help="Keep the deck's .control blocks (trusted decks only)."
)
@guarded
def check(
    deck: str,
    annotations: str | None,
    junit_file: str | None,
    op: bool,
    tran: tuple[float, float] | None,
    ambient: float | None,
    backend: str,
    allow_control: bool,
) -> None:
    """Run DECK with self-heating and check every limit its annotation file sets.

    Checked: each part's tmax (the peak of a transient) and its power_rating derated by
    IEC 60115-1 at the temperature of the node its path ends on, and each [limit."V(node)"]
    table (min, max, and max_drift_ppm against the same deck without self-heating).
    """
    from heatweave import checks, junit, runner
    from heatweave.cli.emit_cmd import default_annotation
    from heatweave.emitter import load_inputs

    chosen = Path(annotations) if annotations else default_annotation(deck)
    if chosen is None:
        raise UsageError(
            f"no annotation file for {deck}",
            hint=f"write {Path(deck).with_suffix('.thermal.toml')} or pass -a FILE",
        )
    started = time.monotonic()
    inputs = load_inputs(deck, str(chosen))
    signals = checks.resolve_limits(inputs.annotation, inputs.index)
    options = runner.RunOptions(
        analyses=_analyses(op, tran), ambient=ambient, backend=backend,
        allow_control=allow_control,
    )  # fmt: skip
    outcome = runner.run(deck, str(chosen), options, inputs=inputs)
    report_findings(list(outcome.prepared.findings))
    baseline = runner.run_baseline(inputs, options) if checks.needs_baseline(signals) else None
    found = checks.evaluate(outcome, signals, baseline)
    elapsed = time.monotonic() - started
    for item in found:
        line = item.message()
        if is_terminal(sys.stdout):
            line = click.style(line[:4], fg="green" if item.passed else "red") + line[4:]
        click.echo(line)
    click.echo(f"{deck}: {checks.summary(found)}")
    if junit_file is not None:
        from heatweave.files import write_atomic

        suite = junit.Suite(
            name=deck,
            cases=tuple(
                junit.Case(
                    f"{item.subject} {item.limit}",
                    f"heatweave.{Path(deck).stem}",
                    failure=None if item.passed else item.message(),
                )
                for item in found
            ),
            time=elapsed,
        )
        write_atomic(junit_file, junit.render([suite]))
    if any(not item.passed for item in found):
        sys.exit(EXIT_CHECK_FAILED)
