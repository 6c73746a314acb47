"""``heatweave lint``: parse every card and check structure and annotations."""

from __future__ import annotations

import sys

import click

from heatweave.cli.common import guarded, style_severity
from heatweave.errors import (
    EXIT_BAD_INPUT,
    EXIT_CHECK_FAILED,
    Finding,
    HeatweaveError,
    UnreadableInputError,
    UsageError,
)


@click.command()
@click.argument("decks", nargs=-1, required=True, type=click.Path(dir_okay=False))
@click.option(
    "-a",
    "--annotations",
    type=click.Path(dir_okay=False, exists=True),
    help="Annotation file to validate against the deck; only with a single DECK "
    "(default: each DECK's own DECK.thermal.toml, if present).",
)
@click.option("--no-warnings", is_flag=True, help="Print errors only.")
@click.option(
    "--strict",
    is_flag=True,
    help="Exit with status 1 on warnings too (layouts ngspice accepts but that are likely "
    "a slip: a .control block without .endc, a .model whose '(' never closes).",
)
@guarded
def lint(decks: tuple[str, ...], annotations: str | None, no_warnings: bool, strict: bool) -> None:
    """Check DECKS: every card against the grammar, structure, and the annotation file.

    Each DECK is checked with its own annotation file, DECK.thermal.toml beside it, when
    there is one; -a names another one and then takes exactly one DECK.  An annotation
    file given as a DECK (NAME.thermal.toml, as a pre-commit hook passes it) checks the
    deck beside it (NAME.cir, .sp, .spi, .spice or .ckt), or the file alone when there is
    none.  Prints one finding a line as FILE:LINE:COL: error|warning: message, and exits
    with status 1 when there is any error (with --strict, any warning too); 2 for unusable
    options or a deck or annotation file that cannot be read.  Errors are what ngspice 39
    refuses or what would make heatweave's output wrong; a deck ngspice runs gives
    warnings at most.
    """

    if annotations is not None and len(decks) > 1:
        raise UsageError(
            f"-a/--annotations names the annotation file of one deck, but {len(decks)} "
            "decks were given",
            hint=f"lint that deck on its own (heatweave lint DECK -a {annotations}), or drop "
            "-a so that each deck is checked with its own DECK.thermal.toml",
        )
    errors = 0
    unreadable = 0
    for deck in _decks(decks):
        try:
            found = _findings(deck, annotations)
        except UnreadableInputError as err:  # the other decks are still linted
            click.echo(style_severity(err.render(), err.severity), err=True)
            unreadable += 1
            continue
        for finding in found:
            if finding.severity == "error" or strict:
                errors += 1
            if finding.severity != "error" and no_warnings:
                continue
            click.echo(style_severity(finding.render(), finding.severity))
    if unreadable:  # unusable input, as for every command
        sys.exit(EXIT_BAD_INPUT)
    if errors:
        sys.exit(EXIT_CHECK_FAILED)


def _decks(files: tuple[str, ...]) -> list[str]:
    """*files* with each annotation file replaced by the deck beside it (when there is
    one), each deck once, in the order given."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.annotation.loader import deck_beside, is_annotation_file

    found: dict[str, None] = {}
    for name in files:
        deck = deck_beside(name) if is_annotation_file(name) else None
        found.setdefault(str(deck) if deck is not None else name)
    return list(found)


def _findings(file: str, annotations: str | None) -> list[Finding]:
    """Lint a deck; an annotation file with no deck beside it is validated on its own."""
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.annotation.loader import is_annotation_file, load
    from heatweave.checks.lint import lint_file

    if annotations is None and is_annotation_file(file):
        try:
            load(file)
        except UnreadableInputError:
            raise
        except HeatweaveError as err:
            return [*err.findings, Finding("error", err.message, err.location, err.hint)]
        return []
    return lint_file(file, annotations)
