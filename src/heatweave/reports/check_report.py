"""The JSON report of ``heatweave check --json FILE``.

Keys in this order:

``heatweave_version``, ``deck``
    As in ``run``'s report.
``annotations``
    ``{"path": ..., "sha256": ...}`` (``sha256`` is ``null`` when the run failed before the
    file was read).
``status``
    ``passed`` (every limit holds: exit 0), ``failed`` (some limit is violated: exit 1) or
    ``error`` (nothing could be checked: the exit status is in ``exit_code``).
``exit_code``
    The exit status of the command.
``error``
    The message of the error that left nothing to check, else ``null``.
``limits``
    Every limit checked, in the order the lines print, as
    :meth:`heatweave.checks.limits.LimitResult.as_dict` gives it (``subject``, ``limit``, ``value``,
    ``signed_value``, ``bound``, ``unit``, ``upper``, ``margin``, ``passed``, ``detail``).
``checked``, ``violated``
    How many limits were checked and how many of them are violated.
``cautions``
    What these numbers are and are not.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from heatweave import __version__
from heatweave.checks.limits import LimitResult
from heatweave.errors import EXIT_CHECK_FAILED, EXIT_OK, HeatweaveError
from heatweave.reports.cautions import CAUTION_TEXT
from heatweave.reports.json_report import json_text


def as_dict(
    deck: str, annotation: str, sha256: str | None, found: Sequence[LimitResult]
) -> dict[str, Any]:
    """The check as plain data, keys in documented order."""
    violated = sum(not item.passed for item in found)
    return {
        "heatweave_version": __version__,
        "deck": deck,
        "annotations": {"path": annotation, "sha256": sha256},
        "status": "failed" if violated else "passed",
        "exit_code": EXIT_CHECK_FAILED if violated else EXIT_OK,
        "error": None,
        "limits": [item.as_dict() for item in found],
        "checked": len(found),
        "violated": violated,
        "cautions": CAUTION_TEXT,
    }


def render(deck: str, annotation: str, sha256: str | None, found: Sequence[LimitResult]) -> str:
    """The JSON text of a check that ran."""
    return json_text(as_dict(deck, annotation, sha256, found))


def render_error(deck: str, annotation: str, err: HeatweaveError) -> str:
    """The JSON text of a check that gave nothing to check (the error and its status)."""
    data = as_dict(deck, annotation, None, ())
    data.update(status="error", exit_code=err.exit_code, error=err.render())
    return json_text(data)
