"""Building large trees of small objects quickly.

A million-card deck means a million immutable nodes made in one go.  Python's cyclic
garbage collector walks the young objects every few hundred allocations, which here costs
about a quarter of the reading time and finds nothing: the nodes hold strings and each
other, never a cycle.  Pausing it for the duration of such a build is the usual remedy.
"""

from __future__ import annotations

import gc
from collections.abc import Iterator
from contextlib import contextmanager

#: Objects made during a pause above which they are frozen when it ends (see paused_gc).
FREEZE_ABOVE = 100_000


@contextmanager
def paused_gc() -> Iterator[None]:
    """Run the body with the cyclic collector off, restoring its state afterwards.

    When the body made many objects (a deck read, an index built), they are moved to the
    collector's permanent generation (:func:`gc.freeze`) before it is switched back on:
    otherwise its next young-generation passes walk every one of them again, which on a
    million-card deck costs a few tenths of a second each time, and finds nothing.  Frozen
    objects are still freed by reference counting when dropped; only a reference cycle
    among them would outlive its use, and the trees built here hold none.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if gc.get_count()[0] > FREEZE_ABOVE:
            gc.freeze()
        if was_enabled:
            gc.enable()
