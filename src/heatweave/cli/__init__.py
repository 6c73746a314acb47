"""The ``heatweave`` command line: one click group, one module per command.

Commands are loaded lazily so that ``heatweave --help`` and the fast ``emit`` path do not
import numpy, matplotlib or the ngspice library when they do not need them.
"""

from __future__ import annotations

import gc
import importlib
import signal
from types import FrameType
from typing import Any

import click

from heatweave import __version__
from heatweave.cli.common import COLOUR_KEY, COLOUR_MODES
from heatweave.processes import catch_termination, ignore_further

#: The command line's own collector threshold (young generation, then the two older ones).
#: Reading a large deck makes millions of small objects with no reference cycle among them;
#: the default young threshold (700) makes the collector walk them again and again.  Set only
#: by :func:`entry`, the installed command, which owns its process; the library never
#: changes the collector.
PROCESS_GC_THRESHOLD = (100_000, 50, 100)

# command name -> "module:attribute"; a new command is one module and one line here.
COMMANDS: dict[str, str] = {
    "check": "heatweave.cli.check_cmd:check",
    "compare": "heatweave.cli.compare_cmd:compare",
    "emit": "heatweave.cli.emit_cmd:emit",
    "lint": "heatweave.cli.lint_cmd:lint",
    "network": "heatweave.cli.network_cmd:network",
    "run": "heatweave.cli.run_cmd:run",
    "schema": "heatweave.cli.schema_cmd:schema",
    "settle": "heatweave.cli.settle_cmd:settle",
    "sweep": "heatweave.cli.sweep_cmd:sweep",
}


class LazyGroup(click.Group):
    """A click group whose subcommands are imported on first use."""

    def list_commands(self, ctx: click.Context) -> list[str]:
        return sorted(COMMANDS)

    def get_command(self, ctx: click.Context, cmd_name: str) -> click.Command | None:
        target = COMMANDS.get(cmd_name)
        if target is None:
            return None
        module_name, attr = target.split(":")
        command: Any = getattr(importlib.import_module(module_name), attr)
        assert isinstance(command, click.Command)
        return command


@click.group(cls=LazyGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="heatweave")
@click.option(
    "--color",
    "colour",
    type=click.Choice(COLOUR_MODES),
    default="auto",
    show_default=True,
    help="Colour in tables and messages: auto (on a terminal, unless NO_COLOR is set), "
    "always, or never.",
)
@click.pass_context
def main(ctx: click.Context, colour: str) -> None:
    """Self-heating for plain SPICE decks.

    Annotate which parts heat up and how, and heatweave writes an electrothermal deck that
    stock ngspice runs, simulates it, and reports temperatures, drift and rating margins.
    """
    ctx.meta[COLOUR_KEY] = colour
    if colour != "auto":
        # click.echo strips styles on a pipe unless told; --color always keeps them there
        ctx.color = colour == "always"


def _leave_early(signum: int, frame: FrameType | None) -> None:
    """A signal before the command's own handlers are in place (options being read,
    the command being imported): nothing has started, so leave at once with the shell's
    status, not with click's "Aborted!" and status 1."""
    ignore_further()
    click.echo("interrupted" if signum == signal.SIGINT else f"terminated by signal {signum}",
               err=True)  # fmt: skip
    raise SystemExit(128 + signum)


def entry() -> None:
    """The installed ``heatweave`` command: the process's collector setting and signal
    handlers (each command puts its own in place while it runs), then :func:`main`."""
    gc.set_threshold(*PROCESS_GC_THRESHOLD)
    catch_termination(_leave_early)
    main()
