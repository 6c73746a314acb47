"""Progress on stderr with an estimate of the time left, drawn by click's progress bar.

Shown only on a terminal: in a CI log or a pipe a redrawn line is noise.  The callbacks the
run and sweep stages take (:data:`heatweave.simulators.base.Progress`, the sweep's
``(done, total, failed)``) are adapted here; the bar itself is click's, not hand-written
carriage returns.
"""

from __future__ import annotations

import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any

import click

#: Steps a fraction in [0, 1] is counted in.
STEPS = 1000
#: Width of the bar in characters.
WIDTH = 24


def _bar(length: int, label: str, show_item: Callable[[Any], str | None] | None = None) -> Any:
    return click.progressbar(
        length=length, label=label, file=sys.stderr, width=WIDTH, show_eta=True,
        show_percent=True, item_show_func=show_item,
    )  # fmt: skip


@contextmanager
def fraction_progress(enabled: bool, label: str) -> Iterator[Callable[[float], None] | None]:
    """A callback taking the fraction done (never moving back), or ``None`` when disabled.

    The bar is closed (its line finished) when the block ends."""
    if not enabled:
        yield None
        return
    with _bar(STEPS, label) as bar:
        shown = [0]

        def show(fraction: float) -> None:
            target = min(max(round(fraction * STEPS), 0), STEPS)
            if target > shown[0]:
                bar.update(target - shown[0])
                shown[0] = target

        yield show


@contextmanager
def count_progress(enabled: bool, label: str) -> Iterator[Callable[[int, int, int], None] | None]:
    """A callback taking ``(done, total, failed)``, or ``None`` when disabled; the bar
    appears with the first call (when the total is known) and names the failures."""
    if not enabled:
        yield None
        return
    state: dict[str, Any] = {"bar": None, "done": 0}

    def failures(failed: int | None) -> str | None:
        return f"{failed} failed" if failed else None

    def show(done: int, total: int, failed: int) -> None:
        if state["bar"] is None:
            state["bar"] = _bar(total, label, failures).__enter__()
        bar = state["bar"]
        bar.update(max(done - state["done"], 0), current_item=failed)
        state["done"] = max(done, state["done"])

    try:
        yield show
    finally:
        if state["bar"] is not None:
            state["bar"].__exit__(None, None, None)
