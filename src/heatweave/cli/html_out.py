"""``--html FILE``, as ``run``, ``check``, ``settle``, ``sweep`` and ``compare`` take it."""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, TypeVar

import click

from heatweave.cli.common import require_plotting
from heatweave.errors import UsageError
from heatweave.files import write_atomic

if TYPE_CHECKING:
    from heatweave.reports.html import Page

F = TypeVar("F", bound=Callable[..., object])


def html_option(func: F) -> F:
    """``--html FILE``: one self-contained page (no network, no other files)."""
    return click.option(
        "--html",
        "html_file",
        metavar="FILE",
        help="Write one self-contained HTML page: inputs and their SHA-256, tables, "
        "limits, plots, warnings, cautions.",
    )(func)


def check_html_path(path: str | None) -> None:
    """A page goes to a file (a browser cannot open stdout), and its figures are drawn with
    matplotlib: both refused before anything runs."""
    if path == "-":
        raise UsageError(
            "--html writes a page to a file", hint="give it a file name, e.g. --html page.html"
        )
    if path is not None:
        require_plotting("--html")


def write_html(path: str | None, build: Callable[[], Page]) -> None:
    """Build the page only when asked for, and write it atomically."""
    if path is None:
        return
    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.reports.html import render_page

    write_atomic(path, render_page(build()))
