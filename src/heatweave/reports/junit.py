"""JUnit XML for CI servers: one ``<testsuite>`` per deck, one ``<testcase>`` per limit.

The layout follows the JUnit XML report format as CI servers read it: a ``<testsuites>``
root with ``tests``/``failures``/``errors``/``time`` totals; each ``<testsuite>`` with
``name``, ``tests``, ``failures``, ``errors``, ``skipped``, ``time``, ``timestamp``,
``hostname``, ``id`` and ``package``; each ``<testcase>`` with ``name``, ``classname`` and
``time``, and a ``<failure message=... type=...>`` child when the limit is violated, or an
``<error message=... type=...>`` child when nothing could be checked (the run gave no answer).

``timestamp`` is the moment the suite started, ISO 8601 with its UTC offset
(``2026-03-01T14:05:09+00:00``); ``hostname`` the machine that ran it.  Times are wall-clock
seconds: a suite's is the whole command's; the limits of one run are decided together by
that run, so each of its cases carries an equal share of the run's time (the cases of a
suite add up to the simulations' time, never more).
"""

from __future__ import annotations

import socket
import xml.etree.ElementTree as ET
from collections.abc import Sequence
from dataclasses import dataclass, replace
from datetime import UTC, datetime


@dataclass(frozen=True, slots=True)
class Case:
    """One test case: a limit, with the failure message when it was violated; or the run
    itself, with the error message when it gave nothing to check."""

    name: str
    classname: str
    time: float = 0.0
    failure: str | None = None
    failure_type: str = "LimitViolated"
    error: str | None = None
    error_type: str = "RunFailed"


@dataclass(frozen=True, slots=True)
class Suite:
    """The test cases of one deck."""

    name: str
    cases: tuple[Case, ...]
    time: float = 0.0
    timestamp: datetime | None = None

    @property
    def failures(self) -> int:
        return sum(case.failure is not None for case in self.cases)

    @property
    def errors(self) -> int:
        return sum(case.error is not None for case in self.cases)


def _seconds(value: float) -> str:
    return f"{value:.3f}"


def timestamp(moment: datetime) -> str:
    """ISO 8601 to the second with the UTC offset; a naive *moment* is taken as UTC."""
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=UTC)
    return moment.isoformat(timespec="seconds")


def shared_time(cases: Sequence[Case], seconds: float) -> tuple[Case, ...]:
    """*cases* decided together by one run of *seconds*, each carrying an equal share."""
    if not cases:
        return ()
    share = max(seconds, 0.0) / len(cases)
    return tuple(replace(case, time=share) for case in cases)


def render(suites: Sequence[Suite], name: str = "heatweave check") -> str:
    """The XML document (UTF-8 declaration, indented) for *suites*."""
    root = ET.Element(
        "testsuites",
        name=name,
        tests=str(sum(len(s.cases) for s in suites)),
        failures=str(sum(s.failures for s in suites)),
        errors=str(sum(s.errors for s in suites)),
        time=_seconds(sum(s.time for s in suites)),
    )
    host = socket.gethostname() or "localhost"
    for number, suite in enumerate(suites):
        stamp = timestamp(suite.timestamp or datetime.now(UTC))
        element = ET.SubElement(
            root,
            "testsuite",
            name=suite.name,
            tests=str(len(suite.cases)),
            failures=str(suite.failures),
            errors=str(suite.errors),
            skipped="0",
            time=_seconds(suite.time),
            timestamp=stamp,
            hostname=host,
            id=str(number),
            package="heatweave",
        )
        for case in suite.cases:
            item = ET.SubElement(
                element, "testcase", name=case.name, classname=case.classname,
                time=_seconds(case.time),
            )  # fmt: skip
            for tag, text, kind in (
                ("failure", case.failure, case.failure_type),
                ("error", case.error, case.error_type),
            ):
                if text is not None:
                    # the attribute holds the first line, the element the whole message
                    child = ET.SubElement(item, tag, message=text.splitlines()[0], type=kind)
                    child.text = text
    ET.indent(root)
    return ET.tostring(root, encoding="unicode", xml_declaration=False).join(
        ('<?xml version="1.0" encoding="UTF-8"?>\n', "\n")
    )
