"""Where the grammar's LALR tables are kept between runs, and how they are written.

Building the tables takes about 100 ms, loading them about 5 ms.  lark's own cache
(``cache=True``) writes a file of a fixed, guessable name straight into the shared temporary
folder: a run killed while writing it left part of a file there (issue 14), and any local
user could put a file of that name there first, which lark would unpickle (run).  heatweave
keeps the tables instead in a folder of the user's own, ``$XDG_CACHE_HOME/heatweave``
(``~/.cache/heatweave``), used only when it is a real folder no one else may write to, in
one file per grammar, lark and Python version:

* lark writes the file in place (its check of a file includes the file's name, so it
  cannot be written elsewhere and renamed); Ctrl-C, SIGTERM and SIGHUP are held back while
  it does, so a signal never cuts the file short;
* a file cut short anyway (SIGKILL, a full disk) fails lark's own check when next loaded:
  lark builds the tables again and writes the file anew.  A wrong table is never loaded;
* writing new tables removes those of other versions;
* anything but a regular file at the file's name (a link, a FIFO, a folder) is left alone
  and the tables built in memory: lark would read and write through a link, and wait on a
  FIFO for good.

Without a usable folder the tables are built in memory every time.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import re
import stat
import sys
from collections.abc import Callable
from pathlib import Path
from typing import TypeVar

from heatweave.processes import signals_deferred

T = TypeVar("T")

#: A kept file's name: the key says which grammar, lark and Python made it.
_KEPT = re.compile(r"tables-[0-9a-f]{32}\.lark")


def cache_folder() -> Path | None:
    """``$XDG_CACHE_HOME/heatweave`` (``~/.cache/heatweave``), made if missing (mode 700);
    ``None`` when it cannot be made or is no folder of this user's that only they may
    write to (a file planted there would be unpickled)."""
    base = os.environ.get("XDG_CACHE_HOME") or ""
    if not os.path.isabs(base):  # the XDG convention: a relative path is ignored
        home = os.path.expanduser("~")
        if not os.path.isabs(home):
            return None
        base = os.path.join(home, ".cache")
    folder = Path(base) / "heatweave"
    try:
        folder.mkdir(mode=0o700, parents=True, exist_ok=True)
        info = os.lstat(folder)
    except OSError:
        return None
    getuid = getattr(os, "getuid", None)
    if not stat.S_ISDIR(info.st_mode) or info.st_mode & 0o022:
        return None
    if getuid is not None and info.st_uid != getuid():
        return None
    return folder


def table_key(grammar_folder: Path, options: str) -> str:
    """A digest of every grammar file, the parser *options*, lark's and Python's versions."""
    from lark import __version__ as lark_version  # only a caller building tables needs lark

    digest = hashlib.sha256()
    for path in sorted(grammar_folder.glob("*.lark")):
        digest.update(path.name.encode() + b"\0" + path.read_bytes() + b"\0")
    digest.update(f"{options}\0{lark_version}\0{sys.version_info[:2]}".encode())
    return digest.hexdigest()[:32]


def with_kept_tables(build: Callable[[str | bool], T], grammar_folder: Path, options: str) -> T:
    """``build(cache)``, *cache* the file in :func:`cache_folder` lark loads the tables
    from or writes them to (``False``: none), with the ending signals held back."""
    folder = cache_folder()
    if folder is None:
        return build(False)
    kept = folder / f"tables-{table_key(grammar_folder, options)}.lark"
    try:
        mode: int | None = os.lstat(kept).st_mode
    except FileNotFoundError:
        mode = None
    except OSError:
        return build(False)
    if mode is not None and not stat.S_ISREG(mode):
        # lark opens the name itself: a link would be read and written through, a FIFO
        # waited on for good (with the signals held back).  Skip the cache, touch nothing.
        return build(False)
    new = mode is None
    with signals_deferred():  # lark writes the file in place: no signal cuts it short
        result = build(str(kept))
    if new:
        for path in folder.iterdir():  # only names heatweave gives, in its own folder
            if path != kept and _KEPT.fullmatch(path.name):
                with contextlib.suppress(OSError):
                    path.unlink()
    return result
