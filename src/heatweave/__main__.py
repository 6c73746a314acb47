"""``heatweave``, the installed command, and ``python -m heatweave``.

Python's own Ctrl-C handler prints a traceback if the key is pressed while the command
line's modules load (the first ~0.15 s).  It is replaced here, before they load and only
in this module, which owns its process: a signal then ends the command with 130, 143 or
129 and no traceback.  :func:`heatweave.cli.entry` puts each command's handlers in place.
"""

from __future__ import annotations

import signal
from types import FrameType


def _end_quietly(signum: int, frame: FrameType | None) -> None:
    raise SystemExit(128 + signum)


for _ending in (signal.SIGINT, signal.SIGTERM, signal.SIGHUP):
    signal.signal(_ending, _end_quietly)

from heatweave.cli import entry  # noqa: E402  (after the handlers, on purpose)

__all__ = ["entry"]

if __name__ == "__main__":
    entry()
