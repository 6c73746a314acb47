"""``heatweave lint``: parse every card and check structure and annotations."""

from __future__ import annotations

import sys

import click

from heatweave.cli.common import guarded, style_severity
from heatweave.errors import EXIT_CHECK_FAILED, UsageError


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
    there is one; -a names another one and then takes exactly one DECK.  Prints one finding
    a line as FILE:LINE:COL: error|warning: message, and exits with status 1 when there is
    any error (with --strict, any warning too; 2 for unusable options).  Errors are what
    ngspice 39 refuses or what would make heatweave's output wrong; a deck ngspice runs
    gives warnings at most.
    """
    from heatweave.checks.lint import lint_file

    if annotations is not None and len(decks) > 1:
        raise UsageError(
            f"-a/--annotations names the annotation file of one deck, but {len(decks)} "
            "decks were given",
            hint=f"lint that deck on its own (heatweave lint DECK -a {annotations}), or drop "
            "-a so that each deck is checked with its own DECK.thermal.toml",
        )
    errors = 0
    for deck in decks:
        for finding in lint_file(deck, annotations):
            if finding.severity == "error" or strict:
                errors += 1
            if finding.severity != "error" and no_warnings:
                continue
            click.echo(style_severity(finding.render(), finding.severity))
    if errors:
        sys.exit(EXIT_CHECK_FAILED)
