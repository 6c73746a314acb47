"""Turn ngspice's log into heatweave's error hierarchy, warnings and ``.meas`` results.

Both back ends feed the same log lines through :func:`failure`, so a deck fails with the same
exception class and message whichever way ngspice was run.  The patterns are ngspice 39's own
wording (checked by running decks under ``tests/fixtures/sim/``):

* ``doAnalyses: TRAN:  Timestep too small; time = 1.23e-06, timestep = 1.25e-21: ...``
  -> :class:`TimestepTooSmallError` (a transient that started and then stalled);
* ``doAnalyses: OP: ...``, ``... initial timepoint ...``, ``iteration limit reached``,
  ``no convergence``, ``DC solution failed``, gmin/source stepping failed, when the run
  stopped -> :class:`ConvergenceError` (steps that failed before a later one succeeded only
  give warnings);
* ``Error: -1.13e+200, 2 out of range for ^`` followed by ``in line bhw_p_rpt``: a
  behavioural source overflowed during one Newton iteration.  ngspice rejects that
  iteration and goes on (gmin, then source stepping), so the line alone stops nothing; a
  failure that follows is reported as usual.  It is a warning, and :func:`overflowed`
  names the sources, because a finished run after one may sit on a far, spurious root;
* any other ``Error`` line, ``unknown subckt``, ``could not find a valid modelname``,
  ``run simulation(s) aborted`` -> :class:`SimulatorError` quoting ngspice's lines.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence

from heatweave.errors import ConvergenceError, SimulatorError, TimestepTooSmallError

from .base import Plot, SimResult

_TIMESTEP = re.compile(r"timestep too small;\s*time\s*=\s*(?P<time>[-+0-9.eE]+)", re.IGNORECASE)
_CONVERGENCE = re.compile(
    r"iteration limit reached|no convergence|dc solution failed|transient solution failed"
    r"|timestep too small|gmin stepping failed|source stepping failed",
    re.IGNORECASE,
)
_FATAL = re.compile(
    r"\berror\b|unknown subckt|could not find a valid modelname|simulation\(s\) aborted"
    r"|simulation interrupted|there aren't any circuits loaded",
    re.IGNORECASE,
)
# ngspice 39 follows this line with the card it rejects and then the reason, each on a line.
# Inside a subcircuit the line says only "Error on line:" and the card's name is expanded
# (``r.x1.rs``).
_REJECTED = re.compile(r"^error on line(?: \d+ or its substitute)?:$", re.IGNORECASE)
# Lines with "error" that do not stop the run: failed or noisy .meas statements.
_HARMLESS = re.compile(r"^\s*error: measure|\.meas(ure)?\b.*failed!|^\s*\.meas", re.IGNORECASE)
_OVERFLOW = re.compile(r"^\s*error:\s*(?P<args>.+?)\s+out of range for\s+(?P<op>\S+)", re.I)
_OVERFLOW_AT = re.compile(r"^\s*in line\s+(?P<device>\S+)", re.IGNORECASE)
_WARNING = re.compile(r"\bwarning\b[:,]?\s*(?P<text>.*)", re.IGNORECASE)
_MEAS_HEADER = re.compile(r"^\s*Measurements for ", re.IGNORECASE)
_MEAS_VALUE = re.compile(
    r"^\s*(?P<name>[a-z_][\w.\[\]-]*)\s+=\s+(?P<value>[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?)(\s|$)",
    re.IGNORECASE,
)
_MAX_QUOTED = 6

CONVERGENCE_HINT = (
    "check for floating nodes and loops of ideal sources; try '.options gmin=1e-10 "
    "reltol=1e-3 itl1=500' or give starting values with '.nodeset'"
)
TIMESTEP_HINT = (
    "smooth the discontinuity near that time (finite rise times, a small series resistance "
    "or capacitance), or try '.options method=gear reltol=1e-3'"
)


def log_lines(text: str) -> list[str]:
    """The log split into lines, trailing blanks removed."""
    return [line.rstrip() for line in text.splitlines()]


def failure(lines: Sequence[str]) -> SimulatorError | None:
    """The error the log shows, or ``None`` when ngspice finished its analyses."""
    relevant = [line for line in lines if not _HARMLESS.search(line) and not _OVERFLOW.search(line)]
    for line in relevant:
        match = _TIMESTEP.search(line)
        if match and "tran" in line.lower() and "initial timepoint" not in line.lower():
            return TimestepTooSmallError(
                f"ngspice stopped the transient at t = {match['time']} s, timestep too small: "
                f"{line.strip()}",
                hint=TIMESTEP_HINT,
            )
    fatal = _fatal_lines(relevant)
    if not fatal:
        return None
    converge = [line.strip() for line in relevant if _CONVERGENCE.search(line)]
    if converge and any(_CONVERGENCE.search(line) for line in fatal):
        quoted = _best(converge)
        return ConvergenceError(f"ngspice did not converge: {quoted}", hint=CONVERGENCE_HINT)
    error = SimulatorError(
        "ngspice could not simulate the deck: " + " | ".join(fatal[:_MAX_QUOTED]),
        hint="fix the card ngspice quotes (it writes it in lower case); "
        "'heatweave lint DECK' checks the syntax of every card",
    )
    error.card, error.reason = _rejected(lines)
    return error


def _rejected(lines: Sequence[str]) -> tuple[str | None, str | None]:
    """The first card ngspice rejected and its reason, from the two lines that follow its
    "Error on line" line (``None, None`` when it quoted none)."""
    for k, line in enumerate(lines):
        if _REJECTED.match(line.strip()):
            follow = [text.strip() for text in lines[k + 1 : k + 3] if text.strip()]
            if follow and not _REJECTED.match(follow[0]):
                reason = follow[1] if len(follow) > 1 else None
                if reason is not None and reason.lower().startswith("simulation interrupted"):
                    reason = None
                return follow[0], reason
    return None, None


def _fatal_lines(lines: Sequence[str]) -> list[str]:
    """The lines that stopped ngspice; a rejected card becomes one ``rejected 'CARD': WHY``.

    ngspice's own line number is left out: it counts the lines of the deck it was given
    (the electrothermal one), not those of the user's deck.
    """
    found: list[str] = []
    index = 0
    while index < len(lines):
        line = lines[index].strip()
        index += 1
        if _REJECTED.match(line):
            follow: list[str] = []
            while index < len(lines) and len(follow) < 2:
                text = lines[index].strip()
                if _REJECTED.match(text) or text.lower().startswith("simulation interrupted"):
                    break
                index += 1
                if text:
                    follow.append(text)
            if follow:
                found.append(f"rejected '{follow[0]}'" + "".join(f": {t}" for t in follow[1:]))
                continue
        if _FATAL.search(line):
            found.append(line)
    return found


def _best(lines: Sequence[str]) -> str:
    """ngspice's most telling line: its ``doAnalyses:`` verdict when there is one."""
    for line in lines:
        if line.startswith("doAnalyses:"):
            return line
    return lines[-1]


def overflows(lines: Sequence[str]) -> list[tuple[str, str]]:
    """``(device, what)`` for every arithmetic overflow in the log, in order: the
    behavioural source ngspice names on the next line (lower case, ``?`` when it names
    none) and the operation with its operands."""
    found = []
    for k, line in enumerate(lines):
        match = _OVERFLOW.search(line)
        if match:
            at = _OVERFLOW_AT.match(lines[k + 1]) if k + 1 < len(lines) else None
            what = f"{match['args']} out of range for {match['op']}"
            found.append((at["device"].lower() if at else "?", what))
    return found


def overflowed(log: str) -> tuple[str, ...]:
    """The behavioural sources whose expressions overflowed at some Newton iteration of a
    run (lower case, each once)."""
    return tuple(dict.fromkeys(device for device, _ in overflows(log_lines(log))))


def warnings(lines: Sequence[str]) -> tuple[str, ...]:
    """Every distinct warning text, in order of first appearance, plus failed measurements
    and one line per source that overflowed."""
    first: dict[str, str] = {}
    for device, what in overflows(lines):
        first.setdefault(device, what)
    seen = {f"{d}: arithmetic overflow in a Newton iteration ({w})": None for d, w in first.items()}
    for line in lines:
        match = _WARNING.search(line)
        if match and match["text"]:
            seen.setdefault(match["text"].strip(), None)
        elif ".meas" in line.lower() and line.rstrip().endswith("failed!"):
            seen.setdefault(line.strip(), None)
    return tuple(seen)


def measurements(lines: Iterable[str]) -> dict[str, float]:
    """``.meas`` results ngspice printed: ``name = value`` after a "Measurements for" header.

    A measurement run again by a later analysis keeps its latest value.
    """
    found: dict[str, float] = {}
    active = False
    for line in lines:
        if _MEAS_HEADER.search(line):
            active = True
            continue
        if active:
            match = _MEAS_VALUE.match(line)
            if match:
                found[match["name"].lower()] = float(match["value"])
    return found


NO_ANALYSIS = "no analysis ran: the deck has no analysis card and none was requested"


def result(plots: tuple[Plot, ...], log: str, backend: str) -> SimResult:
    """The :class:`SimResult` of a run that did not fail, the same way for every back end."""
    lines = log_lines(log)
    found = warnings(lines)
    if not plots:
        found = (*found, NO_ANALYSIS)
    return SimResult(
        plots=plots,
        log=log,
        warnings=found,
        measurements=measurements(lines),
        backend=backend,
    )
