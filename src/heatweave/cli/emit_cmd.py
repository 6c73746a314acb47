"""``heatweave emit``: write the electrothermal deck (or check a committed one)."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from heatweave.cli.common import guarded, report_findings
from heatweave.emit.forms import FORMS
from heatweave.errors import EXIT_CHECK_FAILED, UsageError
from heatweave.files import encode, read_text, same_file, write_atomic


def default_annotation(deck: str) -> Path | None:
    """``DECK.thermal.toml`` beside the deck (``amp.thermal.toml`` for ``amp.cir``), or
    ``None`` when there is none."""
    from heatweave.annotation import default_path

    candidate = default_path(deck)
    return candidate if deck != "-" and candidate.is_file() else None


def build_emitted(deck: str, annotation: str | None, *, form: str = "switch") -> str:
    """The emitted deck's text: the input unchanged when there is no annotation file."""
    chosen = Path(annotation) if annotation else default_annotation(deck)
    if chosen is None:
        from heatweave.spice.reader import read_deck_text

        return read_deck_text(deck)
    from heatweave.emit.emitter import emit_files

    result = emit_files(deck, str(chosen), form=form)
    report_findings(list(result.findings))
    return result.text


@click.command()
@click.argument("deck", type=click.Path(dir_okay=False, allow_dash=True))
@click.option(
    "-a",
    "--annotations",
    type=click.Path(dir_okay=False, exists=True),
    help="Annotation file (default: DECK.thermal.toml beside the deck).",
)
@click.option("-o", "--output", default="-", show_default=True, help="Where to write; - is stdout.")
@click.option("--in-place", is_flag=True, help="Allow OUTPUT to be the input deck itself.")
@click.option(
    "--check",
    "check_file",
    type=click.Path(dir_okay=False),
    help="Compare with a committed emitted deck instead of writing; exit 1 when it is stale.",
)
@click.option(
    "--form",
    type=click.Choice(tuple(FORMS)),
    default="switch",
    show_default=True,
    help="How annotated resistors are written: switch (XSPICE code models, about five times "
    "cheaper to simulate), reference (two behavioural sources each, what run simulates), "
    "divider (code models, linear models only).",
)
@guarded
def emit(
    deck: str,
    annotations: str | None,
    output: str,
    in_place: bool,
    check_file: str | None,
    form: str,
) -> None:
    """Write DECK with self-heating added, as a deck stock ngspice runs as is.

    Without an annotation file the deck is written unchanged, byte for byte.
    """
    text = build_emitted(deck, annotations, form=form)
    if check_file is not None:
        from heatweave.emit.sections import stale_reason

        try:
            committed = read_text(check_file)
        except FileNotFoundError as err:
            raise UsageError(
                f"{check_file} does not exist", hint="emit it first with -o " + check_file
            ) from err
        if committed != text:
            click.echo(f"{check_file}: stale: {stale_reason(committed, text)}", err=True)
            sys.exit(EXIT_CHECK_FAILED)
        click.echo(f"{check_file}: up to date", err=True)
        return
    if output != "-" and deck != "-" and same_file(output, deck) and not in_place:
        raise UsageError(
            f"refusing to overwrite the input deck {deck}",
            hint="choose another -o, or pass --in-place to replace it (written atomically)",
        )
    write_atomic(output, encode(text))
