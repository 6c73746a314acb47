"""Building large trees of small objects quickly.

A million-card deck means a million immutable nodes made in one go.  Python's cyclic
garbage collector walks the young objects every few hundred allocations, which here costs
about a quarter of the reading time and finds nothing: the nodes hold strings and each
other, never a cycle.  Pausing it for the duration of such a build is the usual remedy.
"""

from __future__ import annotations

import dataclasses
import gc
from collections.abc import Iterator
from contextlib import contextmanager
from typing import TypeVar

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


_T = TypeVar("_T")
_MEMBER = type(vars(type("_Slotted", (), {"__slots__": ("x",)}))["x"])  # a slot's descriptor


def fast_init(cls: type[_T]) -> type[_T]:
    """Give a frozen dataclass an ``__init__`` that sets its fields about twice as fast.

    A frozen dataclass's own ``__init__`` looks ``object.__setattr__`` up afresh for every
    field; for the records made once per part (a hundred thousand of them from one glob)
    that is a measurable share of the run.  The replacement takes the same arguments, with
    the same defaults, sets the same fields and then calls ``__post_init__`` if there is
    one; it refuses fields with a ``default_factory``.  With ``slots=True`` it stores each
    field through its slot's own descriptor, which skips the attribute lookup that
    ``object.__setattr__`` makes (about half the cost per field).  Apply it above
    ``@dataclass``.
    """
    params: list[str] = []
    lines: list[str] = []
    closure: dict[str, object] = {"_set": object.__setattr__}
    for f in dataclasses.fields(cls):  # type: ignore[arg-type]
        if not f.init:
            continue
        if f.default_factory is not dataclasses.MISSING:
            raise TypeError(f"{cls.__name__}.{f.name}: fast_init takes no default_factory")
        if f.default is not dataclasses.MISSING:
            closure[f"_default_{f.name}"] = f.default
            params.append(f"{f.name}=_default_{f.name}")
        else:
            params.append(f.name)
        slot = cls.__dict__.get(f.name)
        if type(slot) is _MEMBER:  # a slot: its descriptor sets it directly
            closure[f"_set_{f.name}"] = slot.__set__  # type: ignore[union-attr]
            lines.append(f"        _set_{f.name}(self, {f.name})")
        else:
            lines.append(f"        _set(self, {f.name!r}, {f.name})")
    if hasattr(cls, "__post_init__"):
        lines.append("        self.__post_init__()")
    source = (
        f"def _make({', '.join(closure)}):\n"
        f"    def __init__(self, {', '.join(params)}):\n"
        + "\n".join(lines or ["        pass"])
        + "\n    return __init__\n"
    )
    namespace: dict[str, object] = {}
    exec(source, namespace)  # the source is made above from the class's own field names
    init = namespace["_make"](**closure)  # type: ignore[operator]
    init.__qualname__ = f"{cls.__qualname__}.__init__"
    cls.__init__ = init  # type: ignore[method-assign]
    return cls
