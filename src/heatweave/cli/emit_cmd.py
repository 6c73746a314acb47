"""``heatweave emit``: write the electrothermal deck (or check a committed one)."""

from __future__ import annotations

import sys
from collections.abc import Mapping
from pathlib import Path

import click

from heatweave.cli.common import guarded, input_files, report_findings
from heatweave.emit.forms import FORMS
from heatweave.errors import EXIT_CHECK_FAILED, UnreadableInputError, UsageError
from heatweave.files import encode, read_text, refuse_overwrite, same_file, write_atomic
from heatweave.spice.project import load_project


def default_annotation(deck: str) -> Path | None:
    """``DECK.thermal.toml`` beside the deck (``amp.thermal.toml`` for ``amp.cir``), or
    ``None`` when there is none (a folder there is refused when read)."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.annotation import annotation_beside

    return annotation_beside(deck)


def build_emitted(
    deck: str, annotation: str | None, *, form: str = "switch", outputs: Mapping[str, str | None]
) -> str:
    """The emitted deck's text (the input unchanged when there is no annotation file), once
    *outputs* are known to replace none of the files read (:func:`guard_outputs`)."""
    chosen = Path(annotation) if annotation else default_annotation(deck)
    if chosen is None:

        project = load_project(deck)
        refuse_overwrite(outputs, input_files(deck, None, project), hint=_HINT)
        return project.deck.write()
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.emit.emitter import emit_inputs, load_inputs

    inputs = load_inputs(deck, str(chosen))
    found = input_files(deck, inputs.annotation_path, inputs.project)
    refuse_overwrite(outputs, found, hint=_HINT)
    result = emit_inputs(inputs, form=form)
    report_findings(list(result.findings))
    return result.text


_HINT = "choose another -o, or pass --in-place (without -o) to rewrite the deck itself"


@click.command()
@click.argument("deck", type=click.Path(dir_okay=False, allow_dash=True))
@click.option(
    "-a",
    "--annotations",
    type=click.Path(dir_okay=False, exists=True),
    help="Annotation file (default: DECK.thermal.toml beside the deck).",
)
@click.option("-o", "--output", default="-", show_default=True, help="Where to write; - is stdout.")
@click.option(
    "--in-place",
    is_flag=True,
    help="Rewrite DECK itself (atomically, keeping its mode), instead of writing -o.",
)
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
    other = output != "-" and not same_file(output, deck)
    if in_place and (deck == "-" or other or check_file is not None):
        raise UsageError(
            "--in-place rewrites the deck file itself",
            hint="give a deck file, and no other -o and no --check with --in-place",
        )
    target = deck if in_place else output
    outputs: dict[str, str | None] = {} if in_place or check_file is not None else {"-o": output}
    text = build_emitted(deck, annotations, form=form, outputs=outputs)
    if check_file is not None:
        # numpy and scipy load here, when the command runs, not for --help
        from heatweave.emit.sections import stale_reason

        try:
            committed = read_text(check_file)
        except FileNotFoundError as err:
            raise UsageError(
                f"{check_file} does not exist", hint="emit it first with -o " + check_file
            ) from err
        except OSError as err:  # a path through a file, say
            raise UnreadableInputError(
                f"cannot read {check_file}: {err.strerror or err}", hint="check the path"
            ) from err
        if committed != text:
            click.echo(f"{check_file}: stale: {stale_reason(committed, text)}", err=True)
            sys.exit(EXIT_CHECK_FAILED)
        click.echo(f"{check_file}: up to date", err=True)
        return
    write_atomic(target, encode(text))
