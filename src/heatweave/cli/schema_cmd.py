"""``heatweave schema``: print the JSON Schema of the annotation file."""

from __future__ import annotations

import json

import click

from heatweave.annotation import schema as annotation_schema
from heatweave.cli.common import guarded
from heatweave.files import write_atomic


@click.command("schema")
@click.option(
    "-o",
    "--output",
    type=click.Path(dir_okay=False, writable=True),
    default="-",
    show_default=True,
    help="Write the schema to this file instead of standard output.",
)
@guarded
def schema(output: str) -> None:
    """Print the JSON Schema (draft 2020-12) of DECK.thermal.toml files.

    Editors with TOML schema support use it for completion and checks: write it with
    -o thermal.schema.json, then name it in the annotation file with the top-level key
    "$schema" = "thermal.schema.json" (heatweave accepts and ignores that key), or with a
    first-line comment #:schema ./thermal.schema.json where the editor reads that instead.
    """
    write_atomic(output, json.dumps(annotation_schema(), indent=2) + "\n")
