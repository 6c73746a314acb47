"""One error hierarchy for everything heatweave tells a user.

Every error about the user's input carries a :class:`Location` (file, line, column and the
source line) and a hint: a fix to try.  The command line prints :meth:`HeatweaveError.render`
and exits with :attr:`HeatweaveError.exit_code`; no traceback is ever shown for bad input.

Exit codes are stable and documented in the README:

==  =====================================================================
0   all good
1   a check failed (``check``, ``lint`` errors, ``emit --check`` stale)
2   unusable input: deck, annotation file, command-line option
3   the simulator ran but gave no answer (no convergence, other failure)
4   the simulator stopped: timestep too small
5   the ngspice program is not installed
6   the ngspice shared library is not installed or cannot be loaded
7   thermal runaway: the electrothermal operating point does not exist
8   a simulation did not finish within ``--timeout`` and was stopped
130 interrupted (Ctrl-C, SIGINT); 143: terminated (SIGTERM).  Every ngspice
    process, worker and temporary folder of the command is ended first
==  =====================================================================
"""

from __future__ import annotations

import os
import unicodedata
from dataclasses import dataclass

EXIT_OK = 0
EXIT_CHECK_FAILED = 1
EXIT_BAD_INPUT = 2
EXIT_SIMULATION_FAILED = 3
EXIT_TIMESTEP_TOO_SMALL = 4
EXIT_NGSPICE_MISSING = 5
EXIT_LIBNGSPICE_MISSING = 6
EXIT_THERMAL_RUNAWAY = 7
EXIT_TIMEOUT = 8
EXIT_INTERRUPTED = 130
EXIT_TERMINATED = 143


#: Unicode categories an excerpt never prints: control and format characters, line and
#: paragraph separators.
_HIDDEN = ("Cc", "Cf", "Zl", "Zp")


@dataclass(frozen=True, slots=True)
class Location:
    """Where in which file something is: 1-based line and column, and that line's text."""

    file: str
    line: int
    column: int = 1
    source_line: str | None = None
    #: A line of a file not proven to be SPICE (an included file without a SPICE name suffix
    #: that defines nothing: it may be a key or password file that happens to read as
    #: cards).  Its text is never kept, and a message located here is not shown either
    #: unless it is :class:`Plain` (see :func:`shown`).
    withheld: bool = False

    def __post_init__(self) -> None:
        if self.withheld and self.source_line is not None:
            object.__setattr__(self, "source_line", None)

    def prefix(self) -> str:
        """``FILE:LINE:COL`` as compilers print it."""
        return f"{self.file}:{self.line}:{self.column}"

    def excerpt(self) -> str:
        """The source line with a caret under the column, or an empty string."""
        if self.source_line is None:
            return ""
        # A control or format character or a line separator (what a refused name may hold)
        # is shown as "?": printed as it is, it would move, clear or split the terminal's
        # line.  One character for one keeps the caret under the column.
        text = "".join(
            "?" if ch != "\t" and unicodedata.category(ch) in _HIDDEN else ch
            for ch in self.source_line.rstrip("\r\n")
        )
        # Tabs before the column are kept so the caret lines up in a terminal.
        lead = "".join(ch if ch == "\t" else " " for ch in text[: max(self.column - 1, 0)])
        return f"    {text}\n    {lead}^"


class Plain(str):
    """A message made of heatweave's own words only, quoting nothing of the user's files
    (``Plain("dropped a .control block ...")``): shown even at a withheld line."""

    __slots__ = ()


class _Said(Plain):
    """A message :func:`shown` has already made fit for a withheld line."""

    __slots__ = ()


#: Why a withheld line and its message are not shown (see :attr:`Location.withheld`).
NOT_SHOWN = "the line is not shown because {name} is not proven to be a SPICE file"
WITHHELD_HINT = (
    "open the file at this line; an included file of SPICE cards is shown in full when its "
    "name ends in a SPICE suffix (.inc, .cir, .lib ...)"
)
_WITHHELD_LEAD = {
    "error": "an error in this line",
    "warning": "a warning about this line",
    "note": "a note about this line",
}


def shown(severity: str, message: str, location: Location | None) -> str:
    """*message* as it may be shown at *location*: unchanged, or at a withheld line only
    what says nothing of the line (a :class:`Plain` message, and why the line is not shown).

    The one place that decides this: every :class:`HeatweaveError` and :class:`Finding`
    goes through it, so no caller can show a withheld line by forgetting to check."""
    if location is None or not location.withheld or isinstance(message, _Said):
        return message
    name = os.path.basename(location.file)
    if isinstance(message, Plain):
        return _Said(f"{message} ({NOT_SHOWN.format(name=name)})")
    lead = _WITHHELD_LEAD.get(severity, "a message about this line")
    return _Said(
        f"{lead}: the line and what this message would quote from it are not shown because "
        f"{name} is not proven to be a SPICE file (it could be a key or password file that "
        "reads as cards)"
    )


def shown_hint(hint: str | None, location: Location | None) -> str | None:
    """*hint* as it may be shown at *location* (see :func:`shown`)."""
    if location is None or not location.withheld or isinstance(hint, Plain):
        return hint
    return WITHHELD_HINT


class HeatweaveError(Exception):
    """Base of every error heatweave reports to a user.

    :attr:`message` and :attr:`hint` read through :func:`shown`: at a withheld location
    (:attr:`Location.withheld`) they say nothing of the line, however they were built."""

    exit_code: int = EXIT_BAD_INPUT
    severity: str = "error"

    def __init__(
        self, message: str, location: Location | None = None, hint: str | None = None
    ) -> None:
        super().__init__(message)
        self._message = message
        self.location = location
        self._hint = hint
        # Warnings gathered before the error, printed ahead of it.
        self.findings: tuple[Finding, ...] = ()

    @property
    def message(self) -> str:
        """What went wrong, as it may be shown at :attr:`location`."""
        return shown(self.severity, self._message, self.location)

    @message.setter
    def message(self, value: str) -> None:
        self._message = value

    @property
    def hint(self) -> str | None:
        """A fix to try, as it may be shown at :attr:`location`."""
        return shown_hint(self._hint, self.location)

    @hint.setter
    def hint(self, value: str | None) -> None:
        self._hint = value

    def render(self) -> str:
        """The full message: ``FILE:LINE:COL: error: ...``, the source excerpt, the hint."""
        head = f"{self.severity}: {self.message}"
        if self.location is not None:
            head = f"{self.location.prefix()}: {head}"
        parts = [head]
        if self.location is not None and self.location.source_line is not None:
            parts.append(self.location.excerpt())
        if self.hint:
            parts.append(f"  hint: {self.hint}")
        return "\n".join(parts)

    def __str__(self) -> str:
        return self.render()


class InputError(HeatweaveError):
    """The user's input cannot be used as it is (exit status 2)."""


class UnreadableInputError(InputError):
    """An input named on the command line (a deck, an annotation file, a result) cannot be
    read at all: missing, a folder, no permission, no regular file, too large."""


class DeckSyntaxError(InputError):
    """A card of the deck does not follow ngspice's syntax."""


class DeckStructureError(InputError):
    """The deck's structure is broken: include cycles, missing files, unclosed blocks."""


class AnnotationError(InputError):
    """The annotation file is malformed or does not fit the deck."""


class EmitError(InputError):
    """The electrothermal deck cannot be written, e.g. a reserved name is already taken."""


class UsageError(InputError):
    """A command-line option has an unusable value."""


class SimulatorError(HeatweaveError):
    """The simulator ran but gave no usable answer."""

    exit_code = EXIT_SIMULATION_FAILED
    #: The card ngspice quoted as the one it rejects (as it wrote it: lower case, names of
    #: subcircuit elements expanded), and why; ``None`` when it named none.
    card: str | None = None
    reason: str | None = None


class ConvergenceError(SimulatorError):
    """ngspice did not converge."""


class TimestepTooSmallError(SimulatorError):
    """ngspice stopped a transient because its timestep became too small."""

    exit_code = EXIT_TIMESTEP_TOO_SMALL


class NgspiceMissingError(SimulatorError):
    """The ``ngspice`` program is not installed."""

    exit_code = EXIT_NGSPICE_MISSING


class LibngspiceMissingError(SimulatorError):
    """The ngspice shared library cannot be found or loaded."""

    exit_code = EXIT_LIBNGSPICE_MISSING


class ThermalRunawayError(SimulatorError):
    """The electrothermal operating point does not exist, or temperatures grow without bound."""

    exit_code = EXIT_THERMAL_RUNAWAY


class SimulationTimeoutError(HeatweaveError):
    """A simulation ran past its time limit and was stopped (exit status 8).

    Not a :class:`SimulatorError`: code that tries another simulation after a failed one
    (the runaway diagnosis, say) must not go on once the time is up.
    """

    exit_code = EXIT_TIMEOUT

    def __init__(
        self,
        message: str,
        location: Location | None = None,
        hint: str | None = None,
        limit: float | None = None,
    ) -> None:
        super().__init__(message, location, hint)
        #: The time limit (s) that was exceeded, when one was.
        self.limit = limit


@dataclass(frozen=True, slots=True)
class Finding:
    """A non-fatal message (lint finding, warning) with the same shape as an error."""

    severity: str  # "error" | "warning" | "note"
    message: str
    location: Location | None = None
    hint: str | None = None

    def __post_init__(self) -> None:
        # At a withheld line the message and hint say nothing of it (see :func:`shown`).
        object.__setattr__(self, "message", shown(self.severity, self.message, self.location))
        object.__setattr__(self, "hint", shown_hint(self.hint, self.location))

    def render(self) -> str:
        """One line ``FILE:LINE:COL: severity: message`` plus hint, as lint prints it."""
        head = f"{self.severity}: {self.message}"
        if self.location is not None:
            head = f"{self.location.prefix()}: {head}"
        if self.hint:
            head = f"{head} (hint: {self.hint})"
        return head
