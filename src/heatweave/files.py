"""Reading and writing files the way a careful tool does.

Decks are read as bytes and decoded as UTF-8 with ``surrogateescape`` so that any byte
(a Latin-1 comment, a stray control character) survives ``write(read(text))`` unchanged.
Every output is written atomically: to a temporary file in the target's folder, then renamed,
so an interrupted run never leaves half a file behind.
"""

from __future__ import annotations

import os
import sys
import tempfile
from pathlib import Path

from heatweave.errors import UsageError

ENCODING = "utf-8"
ERRORS = "surrogateescape"


def decode(data: bytes) -> str:
    """Bytes of a deck to text that encodes back to the very same bytes."""
    return data.decode(ENCODING, ERRORS)


def encode(text: str) -> bytes:
    """The inverse of :func:`decode`."""
    return text.encode(ENCODING, ERRORS)


def read_text(path: str | os.PathLike[str]) -> str:
    """A deck or include file as lossless text; ``-`` reads standard input."""
    if str(path) == "-":
        return decode(sys.stdin.buffer.read())
    return decode(Path(path).read_bytes())


def write_atomic(path: str | os.PathLike[str], data: bytes | str) -> None:
    """Write *data* to *path* so that readers see the old file or the whole new one.

    ``-`` writes to standard output.  Text is encoded with :func:`encode`.
    """
    payload = encode(data) if isinstance(data, str) else data
    if str(path) == "-":
        sys.stdout.buffer.write(payload)
        sys.stdout.buffer.flush()
        return
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if target.is_dir():
        raise UsageError(f"cannot write {target}: it is a folder", hint="name a file")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    except FileNotFoundError:
        raise UsageError(
            f"cannot write {target}: the folder {folder} does not exist",
            hint=f"create it first (mkdir -p {folder}) or choose another path",
        ) from None
    except PermissionError:
        raise UsageError(
            f"cannot write {target}: no permission to write in {folder}",
            hint="choose a folder you can write to",
        ) from None
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(payload)
            handle.flush()
            os.fsync(handle.fileno())
        if target.exists():
            os.chmod(tmp, target.stat().st_mode & 0o777)
        else:
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(tmp, 0o666 & ~umask)
        os.replace(tmp, target)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def same_file(a: str | os.PathLike[str], b: str | os.PathLike[str]) -> bool:
    """True when two paths name one existing file (``-`` is never a file)."""
    if str(a) == "-" or str(b) == "-":
        return False
    try:
        return os.path.samefile(a, b)
    except OSError:
        return Path(a).resolve() == Path(b).resolve()
