"""What every command shares: error reporting, exit codes, terminal detection."""

from __future__ import annotations

import functools
import sys
from collections.abc import Callable
from typing import ParamSpec, TypeVar

import click

from heatweave.errors import Finding, HeatweaveError

P = ParamSpec("P")
R = TypeVar("R")


def guarded(func: Callable[P, R]) -> Callable[P, R]:
    """Turn a :class:`HeatweaveError` into its message on stderr and its exit status.

    Bad input never produces a Python traceback; a genuine bug still does.
    """

    @functools.wraps(func)
    def wrapper(*args: P.args, **kwargs: P.kwargs) -> R:
        try:
            return func(*args, **kwargs)
        except HeatweaveError as err:
            report_findings(list(err.findings))
            click.echo(style_severity(err.render(), err.severity), err=True)
            sys.exit(err.exit_code)
        except KeyboardInterrupt:
            click.echo("interrupted; no output file was left half written", err=True)
            sys.exit(130)

    return wrapper


def is_terminal(stream: object = None) -> bool:
    """True when *stream* (default stderr) is an interactive terminal."""
    target = sys.stderr if stream is None else stream
    isatty = getattr(target, "isatty", None)
    return bool(isatty and isatty())


def style_severity(text: str, severity: str) -> str:
    """Colour the severity word on a terminal only."""
    if not is_terminal():
        return text
    colour = {"error": "red", "warning": "yellow", "note": "cyan"}.get(severity)
    if colour is None:
        return text
    word = f"{severity}:"
    return text.replace(word, click.style(word, fg=colour, bold=True), 1)


def report_findings(findings: list[Finding]) -> None:
    """Print findings (warnings, lint results) on stderr, one a line."""
    for finding in findings:
        click.echo(style_severity(finding.render(), finding.severity), err=True)
