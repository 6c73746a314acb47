"""``heatweave compare``: what a change did to the parts' temperatures, drift and margins.

Exit status 0 when the gate holds, 1 when a threshold is crossed or a limit that held now
fails, 2 for unusable input (no git repository, an unknown revision, a file missing at it,
a file that is not a result), and the simulator's own statuses (3 to 7) as ``run`` has them.
"""

from __future__ import annotations

import os
import shutil
import sys
import time
from collections.abc import Callable
from dataclasses import replace
from typing import TYPE_CHECKING, Any

import click

from heatweave.cli.common import (
    analyses_of,
    analysis_options,
    annotation_for,
    guarded,
    init_input,
    input_files,
    simulation_options,
    timeout_option,
    use_colour,
)
from heatweave.cli.html_out import check_html_path, html_option, write_html
from heatweave.compare import render
from heatweave.compare.diff import Comparison, Thresholds
from heatweave.compare.diff import compare as compare_sides
from heatweave.compare.revision import checkout
from heatweave.compare.snapshot import Snapshot, other_deck, read_result, snapshot_of
from heatweave.errors import EXIT_CHECK_FAILED, HeatweaveError, UsageError
from heatweave.files import refuse_overwrite, write_atomic
from heatweave.quantities import SpiceQuantity
from heatweave.spice.project import load_project

if TYPE_CHECKING:
    from heatweave.compare.execute import Side


def _gate_options(func: click.decorators.FC) -> click.decorators.FC:
    for name, unit, text in (
        ("--max-margin-loss", "%", "Most a limit's margin may shrink, in percent of the old one."),
        ("--max-drift-growth", "ppm", "Most the size of a part's drift may grow (ppm)."),
        ("--max-rise-growth", "K", "Most a part's rise above ambient may grow (K)."),
    ):
        func = click.option(
            name,
            type=SpiceQuantity(unit),
            metavar=unit.replace("%", "PERCENT").upper(),
            help=text + " Overrides the annotation file's [review] table.",
        )(func)
    return func


def _output_options(func: click.decorators.FC) -> click.decorators.FC:
    for name, text in (
        ("--junit", "Write JUnit XML, a case per part and limit (- is stdout)."),
        ("--json", "Write the comparison as JSON (- is stdout)."),
        ("--markdown", "Write Markdown for a review comment or CI job summary (- is stdout)."),
    ):
        func = click.option(name, f"{name[2:]}_file", metavar="FILE", help=text)(func)
    return func


@click.command()
@click.argument("sources", nargs=-1, required=True, metavar="DECK | OLD.json NEW.json")
@click.option("--against", "revision", metavar="REV", help="Git revision to compare DECK with.")
@click.option(
    "-a",
    "--annotations",
    type=click.Path(dir_okay=False, exists=True),
    help="Annotation file (default: DECK.thermal.toml beside the deck); with two results, "
    "the file whose [review] table sets the gate.",
)
@_gate_options
@_output_options
@html_option
@analysis_options
@simulation_options
@timeout_option("each side of the comparison")
@click.option(
    "--different-decks",
    is_flag=True,
    help="With two saved results: compare them even when they come from different decks "
    "(parts are then paired by name alone), with a warning, instead of refusing.",
)
@click.option("-q", "--quiet", is_flag=True, help="No table; the gate's verdict only.")
@guarded
def compare(
    sources: tuple[str, ...],
    revision: str | None,
    annotations: str | None,
    max_rise_growth: float | None,
    max_drift_growth: float | None,
    max_margin_loss: float | None,
    markdown_file: str | None,
    json_file: str | None,
    junit_file: str | None,
    html_file: str | None,
    op: bool,
    tran: tuple[float, float] | None,
    ambient: float | None,
    backend: str,
    allow_control: bool,
    init_file: str | None,
    timeout: float | None,
    different_decks: bool,
    quiet: bool,
) -> None:
    """Compare DECK now with DECK at git revision REV, or two saved results.

    heatweave compare DECK --against REV runs the deck and its annotation file as they are
    and as they were at REV (taken with git into a private temporary folder; the working
    tree is never touched), with the same analyses and options, and checks both.
    heatweave compare OLD.json NEW.json compares two results run, settle or sweep wrote.

    Per part: temperatures, rise above ambient, drift, dissipation and margins, old, new
    and change; per limit, whether its verdict changed; worst changes first.  Exit 1 when
    the gate is crossed.
    """

    started = time.monotonic()
    outputs = {
        "--markdown": markdown_file,
        "--json": json_file,
        "--junit": junit_file,
        "--html": html_file,
    }
    check_html_path(html_file)
    on_stdout = [name for name, path in outputs.items() if path == "-"]
    if len(on_stdout) > 1:
        raise UsageError(
            f"{' and '.join(on_stdout)} both write to stdout", hint="send at most one to -"
        )
    _guard_inputs(outputs, sources, annotations, revision, init_file)
    options = Thresholds(max_rise_growth, max_drift_growth, max_margin_loss)
    sides = None
    if revision is not None:
        if len(sources) != 1:
            raise UsageError(
                "--against compares one deck with its past",
                hint="heatweave compare DECK --against REV",
            )
        sides = _run_revisions(
            sources[0],
            annotations,
            revision,
            analyses_of(op, tran),
            ambient,
            backend,
            allow_control,
            timeout,
            init_file,
        )
        old_data, new_data = sides[0].data, sides[1].data
        labels = (sides[0].label, sides[1].label)
        annotation_path: str | None = annotation_for(sources[0], annotations)
    else:
        if len(sources) != 2:
            raise UsageError(
                "compare takes a deck with --against REV, or two saved results",
                hint="heatweave compare DECK --against HEAD~1; heatweave compare OLD.json NEW.json",
            )
        if op or tran or ambient is not None:
            raise UsageError(
                "--op, --tran and --ambient apply to a deck run with --against",
                hint="saved results are compared as they were run",
            )
        old_data, new_data = read_result(sources[0]), read_result(sources[1])
        labels = (sources[0], sources[1])
        annotation_path = annotations
    from_file = _file_thresholds(annotation_path)
    old_snap, new_snap = snapshot_of(old_data, labels[0]), snapshot_of(new_data, labels[1])
    if old_snap.kind != new_snap.kind:
        raise UsageError(
            f"{labels[0]} is a {old_snap.kind} result and {labels[1]} a {new_snap.kind} result",
            hint="compare results of the same command",
        )
    if revision is None:
        _hold_one_deck(old_snap, new_snap, different_decks)
    comparison = compare_sides(old_snap, new_snap, options.over(from_file))
    _write_outputs(comparison, outputs, sides, (old_data, new_data), time.monotonic() - started)
    if not quiet:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.compare.render import render_table

        stream = sys.stderr if on_stdout else sys.stdout
        click.echo(render_table(comparison, colour=use_colour(stream)), file=stream, nl=False)
    if not comparison.passed:
        sys.exit(EXIT_CHECK_FAILED)


def _hold_one_deck(old: Snapshot, new: Snapshot, allowed: bool) -> None:
    """Refuse two saved results of different decks (exit 2), or warn of them when
    *allowed*: their differences are no change to one design."""
    reason = other_deck(old, new)
    if reason is None:
        return
    if not allowed:
        raise UsageError(
            f"{reason}: they are not two versions of one deck, so their differences are no "
            "change to a design",
            hint="compare two results of one deck; --different-decks compares them anyway, "
            "pairing parts by name",
        )
    click.echo(
        f"warning: {reason}; compared anyway (--different-decks): parts are paired by name "
        "alone, and a difference is no change to one design",
        err=True,
    )


def _guard_inputs(
    outputs: dict[str, str | None],
    sources: tuple[str, ...],
    annotations: str | None,
    revision: str | None,
    init_file: str | None,
) -> None:
    """Refuse, before anything runs, an output that is an input: the deck, its annotation
    file and every file it includes (``--against``) or the ``--init-file``, or a saved
    result."""

    if revision is None or len(sources) != 1:
        refuse_overwrite(outputs, [("a result to compare", source) for source in sources])
        return

    deck = sources[0]
    refuse_overwrite(outputs, [*input_files(deck, annotations), *init_input(init_file)])
    chosen = annotation_for(deck, annotations)
    refuse_overwrite(outputs, input_files(deck, chosen, load_project(deck)))


def _file_thresholds(path: str | None) -> Thresholds:
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.annotation import load

    if path is None:
        return Thresholds()
    review = load(path).review
    if review is None:
        return Thresholds()
    return Thresholds(
        review.max_rise_growth, review.max_drift_growth_ppm, review.max_margin_loss_percent
    )


def _run_revisions(
    deck: str,
    annotations: str | None,
    revision: str,
    analyses: tuple[str, ...],
    ambient: float | None,
    backend: str,
    allow_control: bool,
    timeout: float | None,
    init_file: str | None = None,
) -> tuple[Side, Side]:
    """Run DECK as it was at *revision* and as it is, with the same options."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.compare.execute import run_side
    from heatweave.run.prepare import RunOptions

    chosen = annotation_for(deck, annotations)
    options = RunOptions(
        analyses=analyses,
        ambient=ambient,
        backend=backend,
        allow_control=allow_control,
        timeout=timeout,
        init_file=init_file,
    )
    past = checkout(deck, chosen, revision)
    folder = past.folder.rstrip("/") + "/"

    def named(text: str) -> str:
        """Paths in the temporary folder as the revision holds them (``HEAD~1:deck.cir``)."""
        return text.replace(folder, f"{revision}:")

    try:
        label = f"{revision} ({past.commit[:10]})"
        try:
            old = run_side(label, past.deck, past.annotations, options)
        except HeatweaveError as err:
            err.message = f"at {revision}: {named(err.message)}"
            if err.location is not None:
                err.location = replace(err.location, file=named(os.path.abspath(err.location.file)))
            raise
        files = tuple(replace(f, path=named(os.path.abspath(f.path))) for f in old.files)
        warnings = tuple(named(w) for w in old.report.warnings)
        data = {
            **old.data,
            "deck": deck,
            "annotations": {"path": chosen, "sha256": old.data["annotations"]["sha256"]},
            "warnings": list(warnings),
        }
        old = replace(old, data=data, files=files, report=replace(old.report, warnings=warnings))
        new = run_side("working tree", deck, chosen, options)
    finally:
        shutil.rmtree(past.folder, ignore_errors=True)
    return old, new


def _write_outputs(
    comparison: Comparison,
    outputs: dict[str, str | None],
    sides: tuple[Side, Side] | None,
    data: tuple[dict[str, Any], dict[str, Any]],
    elapsed: float,
) -> None:

    writers: dict[str, Callable[[], str]] = {
        "--markdown": lambda: render.render_markdown(comparison),
        "--json": lambda: render.render_json(comparison),
        "--junit": lambda: render.render_junit(
            comparison, comparison.new.deck or "compare", elapsed
        ),
    }
    for name, write in writers.items():
        path = outputs[name]
        if path is not None:
            write_atomic(path, write())
    if outputs["--html"] is None:
        return  # the page draws with matplotlib, the plot extra
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.compare.page import comparison_page, curves_of_data

    curves = (
        (None, None) if sides is not None else (curves_of_data(data[0]), curves_of_data(data[1]))
    )
    write_html(outputs["--html"], lambda: comparison_page(comparison, sides, curves))
