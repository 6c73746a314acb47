"""What every command shares: error reporting, exit codes, terminal detection, colour."""

from __future__ import annotations

import functools
import os
import sys
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, ParamSpec, TypeVar

import click

from heatweave.errors import EXIT_INTERRUPTED, Finding, HeatweaveError, UsageError
from heatweave.files import read_bytes, refuse_overwrite
from heatweave.processes import Terminated, catch_termination, leave, restore
from heatweave.quantities import SpiceQuantity, Temperature, format_number

if TYPE_CHECKING:
    from heatweave.emit.emitter import Inputs
    from heatweave.spice.project import Project

P = ParamSpec("P")
R = TypeVar("R")


def guarded(func: Callable[P, R]) -> Callable[P, R]:
    """Turn a :class:`HeatweaveError` into its message on stderr and its exit status.

    Bad input never produces a Python traceback; a genuine bug still does.  Ctrl-C exits
    with 130, SIGTERM with 143 and SIGHUP with 129, after the command's ngspice processes,
    workers and temporary folders have been ended and removed (:mod:`heatweave.processes`).
    """

    @functools.wraps(func)
    def wrapper(*args: P.args, **kwargs: P.kwargs) -> R:
        previous = catch_termination()
        try:
            return func(*args, **kwargs)
        except HeatweaveError as err:
            report_findings(list(err.findings))
            click.echo(style_severity(err.render(), err.severity), err=True)
            leave(err.exit_code)
        except KeyboardInterrupt:
            click.echo("interrupted; no output file was left half written", err=True)
            leave(EXIT_INTERRUPTED)
        except Terminated as ended:
            click.echo(f"{ended}; no output file was left half written", err=True)
            leave(ended.exit_code)
        finally:
            restore(previous)

    return wrapper


def is_terminal(stream: object = None) -> bool:
    """True when *stream* (default stderr) is an interactive terminal."""
    target = sys.stderr if stream is None else stream
    isatty = getattr(target, "isatty", None)
    return bool(isatty and isatty())


#: ``--color`` choices: decide by the stream, or force colour on or off.
COLOUR_MODES = ("auto", "always", "never")
#: Where the group keeps ``--color`` for its commands (the root context's ``meta``).
COLOUR_KEY = "heatweave.colour"


def colour_mode() -> str:
    """The ``--color`` given to ``heatweave`` (``auto`` outside a command line)."""
    ctx = click.get_current_context(silent=True)
    mode = ctx.find_root().meta.get(COLOUR_KEY, "auto") if ctx is not None else "auto"
    return str(mode)


def use_colour(stream: object = None) -> bool:
    """Colour for *stream* (default stderr)?  ``--color always``/``never`` decide; under
    ``auto`` only a terminal gets colour, and never while ``NO_COLOR`` is set to a non-empty
    value (the convention of no-color.org: a command-line option overrides it)."""
    mode = colour_mode()
    if mode != "auto":
        return mode == "always"
    return not os.environ.get("NO_COLOR") and is_terminal(stream)


def style_severity(text: str, severity: str) -> str:
    """Colour the severity word when stderr takes colour (:func:`use_colour`)."""
    if not use_colour():
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


# --- options shared by the commands that run a deck -------------------------------------

F = TypeVar("F", bound=Callable[..., object])

BACKENDS = ("auto", "shared", "batch")


def deck_options(func: F) -> F:
    """``DECK`` and ``-a/--annotations``, as every command that reads a deck takes them.

    ``-`` as DECK reads the deck from standard input (once: what is read travels on, to
    sweep workers too); its ``.include``/``.lib`` paths are then relative to the current
    folder, and ``-a`` is required since no file stands beside it.
    """
    func = click.option(
        "-a",
        "--annotations",
        type=click.Path(dir_okay=False, exists=True),
        help="Annotation file (default: DECK.thermal.toml beside the deck).  DECK - reads "
        "the deck from standard input: -a is then required, and its .include/.lib paths "
        "are relative to the current folder.",
    )(func)
    deck = click.Path(dir_okay=False, exists=True, allow_dash=True)
    return click.argument("deck", type=deck)(func)


INIT_FILE_HELP = (
    "An ngspice init file to read before the deck (by default none is: not the .spiceinit "
    "of the deck's folder, of the current folder or of your home)."
)


def init_file_option(func: F) -> F:
    """``--init-file FILE``: the one way an ngspice init file is read."""
    return click.option(
        "--init-file",
        type=click.Path(dir_okay=False, exists=True, resolve_path=True),
        metavar="FILE",
        help=INIT_FILE_HELP,
        callback=_regular_init_file,
    )(func)


def _regular_init_file(ctx: click.Context, param: click.Parameter, value: str | None) -> str | None:
    """Refuse an init file that cannot be read or is no regular file (a pipe may never
    end, /dev/zero does not) before anything runs; ngspice reads it when it starts."""
    if value is not None:
        try:
            read_bytes(value)
        except HeatweaveError as err:
            raise click.BadParameter(err.message, ctx, param) from None
        except OSError as err:
            why = f"cannot read {value}: {err.strerror or err}"
            raise click.BadParameter(why, ctx, param) from None
    return value


def simulation_options(func: F) -> F:
    """``--ambient``, ``--backend``, ``--allow-control`` and ``--init-file``."""

    func = init_file_option(func)
    func = click.option(
        "--allow-control",
        is_flag=True,
        help="Keep the .control blocks and *# lines of the deck and of every file it "
        "includes (they can run any command: trusted decks only).",
    )(func)
    func = click.option(
        "--backend",
        type=click.Choice(BACKENDS),
        default="auto",
        show_default=True,
        help="How to drive ngspice: shared library, batch program, or whichever works.",
    )(func)
    return click.option(
        "--ambient",
        type=Temperature(),
        metavar="DEGC",
        help="Ambient temperature (degC, a plain number) instead of the annotation file's; "
        "it sets every element's temperature, annotated or not.",
    )(func)


def analysis_options(func: F) -> F:
    """``--op`` and ``--tran TSTEP TSTOP`` (SPICE quantities); see :func:`analyses_of`."""

    func = click.option(
        "--tran",
        type=(SpiceQuantity("s", positive=True), SpiceQuantity("s", positive=True)),
        metavar="TSTEP TSTOP",
        help="Run a transient instead of the deck's analyses, e.g. 1m 10.",
    )(func)
    return click.option(
        "--op", is_flag=True, help="Run an operating point instead of the deck's analyses."
    )(func)


def step_option(func: F) -> F:
    """``--max-step TMAX``: the transient's maximum step (a SPICE quantity)."""
    return click.option(
        "--max-step",
        type=SpiceQuantity("s", positive=True),
        metavar="TMAX",
        help="The transient's largest time step, e.g. 5u, in place of the .tran card's TMAX "
        "(the deck is not changed). Without it heatweave runs again with a smaller step "
        "when the result is not verified.",
    )(func)


def analyses_of(op: bool, tran: tuple[float, float] | None) -> tuple[str, ...]:
    """The analyses asked for on the command line (none: the deck's own cards)."""

    if op and tran is not None:
        raise UsageError(
            "--op and --tran ask for two different analyses",
            hint="give one of them; the report is read from a single analysis",
        )
    if op:
        return ("op",)
    if tran is not None:
        step, stop = tran
        if step >= stop:
            raise UsageError(
                f"--tran step {format_number(step)} s is not below the stop time "
                f"{format_number(stop)} s",
                hint="write --tran TSTEP TSTOP, e.g. --tran 1m 10",
            )
        # 12 digits: 100u stays 0.0001, not the float 9.999999999999999e-05
        return (f"tran {step:.12g} {stop:.12g}",)
    return ()


def annotation_for(deck: str, annotations: str | None) -> str:
    """The annotation file to use: the one given, else ``DECK.thermal.toml`` beside the deck."""

    # numpy and scipy load here, when the command runs, not for --help
    from heatweave.annotation import annotation_beside, default_path

    if annotations:
        return annotations
    if deck == "-":
        raise UsageError(
            "a deck read from standard input (-) has no annotation file beside it",
            hint="name the annotation file with -a FILE, e.g. - -a amp.thermal.toml",
        )
    found = annotation_beside(deck)
    if found is not None:  # a folder or broken link there is refused when read
        return str(found)
    raise UsageError(
        f"no annotation file for {deck}",
        hint=f"write {default_path(deck)} beside the deck, or name one with -a FILE",
    )


def report_options(csv_help: str, *, plot: bool = True) -> Callable[[F], F]:
    """``--json FILE``, ``--csv FILE`` (with *csv_help*) and, with *plot*, ``--plot FILE.png``;
    ``-`` writes a report to stdout."""

    def decorate(func: F) -> F:
        if plot:
            func = click.option(
                "--plot", "plot_file", metavar="FILE.png", help="Write a PNG figure."
            )(func)
        func = click.option("--csv", "csv_file", metavar="FILE", help=csv_help)(func)
        return click.option(
            "--json", "json_file", metavar="FILE", help="Write the JSON report (- is stdout)."
        )(func)

    return decorate


def require_plotting(option: str = "--plot") -> None:
    """Refuse *option* before anything runs when matplotlib (the ``plot`` extra) is missing."""

    try:
        import matplotlib  # noqa: F401
    except ImportError:
        raise UsageError(
            f"{option} draws with matplotlib, which is not installed",
            hint="install the plot extra: pip install 'heatweave[plot]'",
        ) from None


#: Seconds the simulations of one command (one corner of a sweep) may take by default: far
#: beyond any deck of a CI gate, yet a stuck one ends with exit status 8 instead of never.
DEFAULT_TIMEOUT = 600.0


def timeout_option(what: str) -> Callable[[F], F]:
    """``--timeout SECONDS``, the time limit of every simulation *what* runs, together."""

    def decorate(func: F) -> F:
        return click.option(
            "--timeout",
            type=SpiceQuantity("s", positive=True),
            default=DEFAULT_TIMEOUT,
            show_default=True,
            metavar="SECONDS",
            help=f"Stop ngspice and fail (exit status 8) when the simulations of {what} "
            "take longer than this in all.",
        )(func)

    return decorate


def run_control_options(what: str) -> Callable[[F], F]:
    """``--timeout SECONDS`` (for the simulations of *what*) and ``-q/--quiet``."""

    def decorate(func: F) -> F:
        func = click.option(
            "-q",
            "--quiet",
            is_flag=True,
            help="No table and no progress: warnings only (and, with --check, the violated "
            "limits).",
        )(func)
        return timeout_option(what)(func)

    return decorate


def check_outputs(
    outputs: dict[str, str | None],
    deck: str,
    annotation: str | None = None,
    init_file: str | None = None,
) -> None:
    """At most one output on stdout, and none of them the deck, its annotation file or the
    ``--init-file`` (the files it includes are checked by :func:`guard_outputs` once they
    are known)."""

    on_stdout = [name for name, path in outputs.items() if path == "-"]
    if len(on_stdout) > 1:
        raise UsageError(
            f"{' and '.join(on_stdout)} both write to stdout",
            hint="send at most one of them to -; give the others file names",
        )
    refuse_overwrite(outputs, [*input_files(deck, annotation), *init_input(init_file)])


def init_input(init_file: str | None) -> list[tuple[str, str]]:
    """The ``--init-file`` as an input of the output guard (none when not given)."""
    return [] if init_file is None else [("the init file", init_file)]


def guard_outputs(outputs: dict[str, str | None], inputs: Inputs) -> None:
    """Refuse outputs that are the deck, its annotation file or any file it includes."""

    found = input_files(inputs.deck_path, inputs.annotation_path, inputs.project)
    refuse_overwrite(outputs, found)


def may_replace_report(path: str) -> bool:
    """True when *path* is stdout, absent, or an earlier XML or heatweave JSON report.  A
    report written on the way out of a failure (when the files a deck includes may not all
    be known yet) goes only to such a path, never over a file that could be an input."""

    if path == "-" or not Path(path).exists():
        return True
    try:
        with open(path, "rb") as handle:
            start = handle.read(64).lstrip()
    except OSError:
        return False
    json_report = start.startswith(b"{") and b'"heatweave_version"' in start
    return json_report or start.startswith((b"<?xml", b"<testsuites"))


def input_files(
    deck: str, annotation: str | None = None, project: Project | None = None
) -> list[tuple[str, str]]:
    """(what it is, path) of every file a command reads: the output guard's list."""
    found = [("the input deck", deck)]
    if annotation is not None:
        found.append(("the annotation file", annotation))
    if project is not None:
        found.extend(("a file the deck includes", include.path) for include in project.includes)
    return found
