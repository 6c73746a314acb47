"""The batch back end: ``ngspice -b`` in a subprocess, results read from a raw file.

ngspice refuses ``.meas`` in batch mode when ``-r FILE`` is given, so instead of ``-r`` the
deck gets a small ``.control`` block appended: it runs the command script of
:func:`heatweave.simulators.base.command_script`, then walks the plots from the newest back
to the ``const`` plot and writes each one to the raw file (``set appendwrite``).  The reader
reverses that order, so plots come back in the order ngspice ran them, as in the shared back
end.  ngspice's own log (``-o``) is the result's log.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import ClassVar

import numpy as np

from heatweave import files
from heatweave.errors import NgspiceMissingError, UsageError
from heatweave.processes import die_with_parent, signals_deferred

from . import diagnose
from .base import (
    Plot,
    Progress,
    SimResult,
    Simulator,
    command_script,
    place_init_file,
    private_environment,
    timed_out,
    working_folder,
)
from .naming import number_plots
from .rawfile import read_raw

DECK_NAME = "heatweave-deck.cir"
RAW_NAME = "heatweave-out.raw"
LOG_NAME = "heatweave-out.log"
ALL_ECHO = "v(all)"
ENV_PROGRAM = "HEATWEAVE_NGSPICE"
MISSING_HINT = (
    f"install it with 'apt-get install ngspice', or set {ENV_PROGRAM} to the program's path"
)


def control_block(script: Sequence[str], raw_path: Path, filetype: str) -> str:
    """The ``.control`` block that runs *script* and writes every plot to *raw_path*."""
    lines = [".control", f"set filetype={filetype}", *script, "set appendwrite"]
    lines += [
        "repeat",
        "strcmp hw_at_const $curplot const",
        "if $hw_at_const = 0",
        "break",
        "end",
        f"write {raw_path}",
        "setplot previous",
        "end",
        "quit",
        ".endc",
    ]
    return "\n".join(lines) + "\n"


def _without_echo(plot: Plot) -> Plot:
    """*plot* without the ``v(all)`` copy ngspice's ``write`` adds to a one-vector plot.

    With ``save v(x)`` an operating point has just ``x``, which ngspice also takes as the
    scale; ``write`` then writes the scale and, again, the expression ``all`` as ``v(all)``.
    """
    echo = plot.vectors.get(ALL_ECHO)
    if echo is None:
        return plot
    for name, values in plot.vectors.items():
        if name != ALL_ECHO and np.array_equal(values, echo):
            kept = {key: value for key, value in plot.vectors.items() if key != ALL_ECHO}
            return replace(plot, vectors=kept)
    return plot


def in_run_order(written: Sequence[Plot]) -> tuple[Plot, ...]:
    """Plots written newest first, reversed and renamed ``kind1, kind2 ...`` in run order."""
    ordered = [_without_echo(plot) for plot in reversed(written)]
    names = number_plots([plot.kind for plot in ordered])
    return tuple(replace(plot, name=name) for plot, name in zip(ordered, names, strict=True))


def _run_program(
    command: list[str], cwd: Path, env: dict[str, str], timeout: float | None
) -> bytes:
    """Run ngspice to its end and return what it wrote to standard error.

    ngspice stays in this command's process group and dies with it, even by SIGKILL
    (:func:`die_with_parent`); on a timeout, Ctrl-C or SIGTERM it is killed and waited for
    before the caller's working folder is removed.
    """
    process = None
    try:
        with signals_deferred():  # ngspice must be recorded before a signal can strike
            process = subprocess.Popen(
                command,
                cwd=cwd,
                env=env,
                stdin=subprocess.DEVNULL,
                stdout=subprocess.DEVNULL,
                stderr=subprocess.PIPE,
                preexec_fn=die_with_parent,
            )
        _, stderr = process.communicate(timeout=timeout)
        return stderr
    except subprocess.TimeoutExpired as exc:
        raise timed_out(timeout) from exc
    except OSError as exc:
        raise NgspiceMissingError(
            f"the ngspice program {command[0]!r} could not be started: {exc}",
            hint=MISSING_HINT,
        ) from exc
    finally:
        if process is not None and process.poll() is None:
            process.kill()
        if process is not None:
            process.wait()
            if process.stderr is not None:
                process.stderr.close()


class BatchSimulator(Simulator):
    """Runs ``ngspice -b``; *executable* is the program's name or path (default:
    ``HEATWEAVE_NGSPICE``, else ``ngspice`` on the PATH)."""

    name: ClassVar[str] = "batch"

    def __init__(self, executable: str | None = None, filetype: str = "binary") -> None:
        if filetype not in ("binary", "ascii"):
            raise ValueError(f"filetype must be 'binary' or 'ascii', not {filetype!r}")
        self.executable = executable or os.environ.get(ENV_PROGRAM) or "ngspice"
        self.filetype = filetype

    def program(self) -> str:
        """The full path of the ngspice program, or :class:`NgspiceMissingError`."""
        found = shutil.which(self.executable)
        if found is None:
            raise NgspiceMissingError(
                f"the ngspice program {self.executable!r} was not found", hint=MISSING_HINT
            )
        return found

    def run(
        self,
        deck: str,
        *,
        analyses: Sequence[str] = (),
        deck_analyses: bool = True,
        save: Sequence[str] = (),
        cwd: str | os.PathLike[str] | None = None,
        workdir: str | os.PathLike[str] | None = None,
        timeout: float | None = None,
        progress: Progress | None = None,
        init_file: str | os.PathLike[str] | None = None,
    ) -> SimResult:
        """See :meth:`Simulator.run`; the batch back end reports progress only at the end.

        ngspice runs in the working folder with a private environment
        (:func:`private_environment`): it finds no init file but *init_file*, copied there.
        """
        script = command_script(analyses, deck_analyses, save)
        program = self.program()
        with working_folder(workdir) as folder:
            folder = folder.resolve()
            if any(ch.isspace() for ch in str(folder)):
                raise UsageError(
                    f"ngspice cannot write into a folder whose path has blanks: {folder}",
                    hint="choose a working folder without blanks in its path",
                )
            raw_path = folder / RAW_NAME
            log_path = folder / LOG_NAME
            raw_path.unlink(missing_ok=True)
            text = deck if deck.endswith("\n") else deck + "\n"
            text += control_block(script, raw_path, self.filetype)
            deck_path = folder / DECK_NAME
            deck_path.write_bytes(files.encode(text))
            place_init_file(init_file, folder)
            environment = private_environment(folder, cwd)
            command = [program, "-b", "-o", str(log_path), str(deck_path)]
            stderr = _run_program(command, folder, environment, timeout)
            log = files.decode(log_path.read_bytes()) if log_path.exists() else ""
            # A few messages go to standard error even with -o; they belong to the log too.
            stray = files.decode(stderr).strip()
            if stray:
                log = f"{log.rstrip()}\n{stray}\n"
            lines = diagnose.log_lines(log)
            error = diagnose.failure(lines)
            if error is not None:
                raise error
            plots = in_run_order(read_raw(raw_path)) if raw_path.exists() else ()
        if progress is not None:
            progress(1.0)
        return diagnose.result(plots, log, self.name)
