"""Reading and writing files the way a careful tool does.

Decks are read as bytes and decoded as UTF-8 with ``surrogateescape`` so that any byte
(a Latin-1 comment, a stray control character) survives ``write(read(text))`` unchanged.
Every output is written atomically: to a temporary file in the target's folder, then renamed,
so an interrupted run never leaves half a file behind.
"""

from __future__ import annotations

import errno
import os
import re
import signal
import stat
import sys
import tempfile
import threading
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import BinaryIO

from heatweave.errors import UnreadableInputError, UsageError

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
        return decode(_at_most(sys.stdin.buffer, path))
    return decode(read_bytes(path))


def read_input(path: str | os.PathLike[str]) -> str:
    """:func:`read_text` of an input named on the command line, any OS error (no such
    file, no permission, a folder) reported as :class:`UnreadableInputError`."""
    try:
        return read_text(path)
    except OSError as err:
        raise UnreadableInputError(
            f"cannot read {path}: {err.strerror or err}",
            hint="check the path and that the file may be read",
        ) from None


def read_bytes(path: str | os.PathLike[str]) -> bytes:
    """The bytes of the regular file *path*.

    Anything else (a device such as ``/dev/zero`` that never ends, a pipe that may never be
    written to) is refused before a byte is read: opened without blocking, checked, closed.
    """
    fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    try:
        mode = os.fstat(fd).st_mode
        if stat.S_ISDIR(mode):
            raise IsADirectoryError(errno.EISDIR, "it is a folder", str(path))
        if not stat.S_ISREG(mode):
            raise UnreadableInputError(
                f"cannot read {path}: it is not a regular file ({_kind(mode)})",
                hint="save the input to a file, or pipe it through standard input as -",
            )
        os.set_blocking(fd, True)
        with os.fdopen(fd, "rb", closefd=False) as handle:
            return _at_most(handle, path)
    finally:
        os.close(fd)


#: The most heatweave reads from one input (a 1,000,000-card deck is about 30 MiB), so that
#: an endless standard input or a runaway generated file fills no memory.
MAX_INPUT_BYTES = 1 << 30


def _at_most(handle: BinaryIO, path: str | os.PathLike[str]) -> bytes:
    """All of *handle*, refused when it holds more than :data:`MAX_INPUT_BYTES`.

    Read in chunks: one ``read(MAX_INPUT_BYTES + 1)`` allocates a buffer of the limit
    (1 GiB) for a file of any size before shrinking it."""
    chunks: list[bytes] = []
    size = 0
    while chunk := handle.read(min(_CHUNK, MAX_INPUT_BYTES + 1 - size)):
        chunks.append(chunk)
        size += len(chunk)
        if size > MAX_INPUT_BYTES:
            raise UnreadableInputError(
                f"cannot read {path}: it holds more than {MAX_INPUT_BYTES} bytes",
                hint="split it into files of their own (a deck can .include them)",
            )
    return chunks[0] if len(chunks) == 1 else b"".join(chunks)


_CHUNK = 1 << 20


def _kind(mode: int) -> str:
    if stat.S_ISFIFO(mode):
        return "a pipe"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a file"


def write_atomic(path: str | os.PathLike[str], data: bytes | str) -> None:
    """Write *data* to *path* so that readers see the old file or the whole new one.

    ``-`` writes to standard output.  Text is encoded with :func:`encode`.  A symlink is
    written through (the link stays, its target is replaced); the file keeps its mode.
    SIGTERM or SIGHUP during the write removes the temporary file before the signal takes
    its course (see :func:`_signals_raise`).  What is no regular file (``/dev/null``, a
    named pipe) or is a descriptor spelt as a path (``/dev/stdout``, ``/dev/fd/3``) is
    written into, after what it holds: renaming over it would replace a device node or
    the shell's redirection with a file.
    """
    payload = encode(data) if isinstance(data, str) else data
    if str(path) == "-":
        sys.stdout.buffer.write(payload)
        sys.stdout.buffer.flush()
        return
    where = _written_into(path)
    if where is not None:
        _write_into(path, where, payload)
        return
    if os.path.exists(path) and not (os.path.isfile(path) or os.path.isdir(path)):
        raise UsageError(
            f"cannot write {path}: it is a block device or a socket, not a file",
            hint="name a file",
        )
    target = Path(os.path.realpath(path)) if os.path.islink(path) else Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if target.is_dir():
        raise UsageError(f"cannot write {path}: it is a folder", hint="name a file")
    with _signals_raise():
        try:
            fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
        except FileNotFoundError:
            raise UsageError(
                f"cannot write {path}: the folder {folder} does not exist",
                hint=f"create it first (mkdir -p {folder}) or choose another path",
            ) from None
        except PermissionError:
            raise UsageError(
                f"cannot write {path}: no permission to write in {folder}",
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


def _written_into(path: str | os.PathLike[str]) -> int | str | None:
    """Where to write *path* in place of replacing it: the descriptor number when it names
    one of this process's descriptors (``/dev/stdout`` -> ``/proc/self/fd/1``), the path
    for a character device, a named pipe or another process's descriptor, else ``None``."""
    hop = os.path.abspath(path)
    for _ in range(40):  # the kernel's own limit on symlinks followed
        found = _DESCRIPTORS.match(os.path.realpath(os.path.dirname(hop)))
        if found:
            own = found["pid"] in ("self", "thread-self", str(os.getpid()))
            name = os.path.basename(hop)
            return int(name) if own and name.isdigit() else str(path)
        if not os.path.islink(hop):
            break
        hop = os.path.abspath(os.path.join(os.path.dirname(hop), os.readlink(hop)))
    try:
        mode = os.stat(path).st_mode
    except OSError:
        return None
    return str(path) if stat.S_ISCHR(mode) or stat.S_ISFIFO(mode) else None


#: A process's descriptor folder, where ``/dev/fd`` and ``/dev/stdout`` lead on Linux.
_DESCRIPTORS = re.compile(r"/proc/(?P<pid>self|thread-self|\d+)(?:/task/\d+)?/fd\Z")


def _write_into(path: str | os.PathLike[str], where: int | str, payload: bytes) -> None:
    """Write *payload* into descriptor *where* (sharing its offset, so it lands after what
    was printed there, as ``-`` does) or into the device or pipe at path *where*."""
    sys.stdout.flush()
    try:
        if isinstance(where, int):
            view = memoryview(payload)
            while view:
                view = view[os.write(where, view) :]
            return
        with open(where, "ab") as handle:
            handle.write(payload)
    except OSError as err:
        raise UsageError(
            f"cannot write {path}: {err.strerror or err}", hint="choose another output"
        ) from None


class _Stopped(BaseException):
    """A termination signal arrived while a file was being written."""

    def __init__(self, signum: int) -> None:
        super().__init__(signum)
        self.signum = signum


#: Signals that end a process by default and that a CI runner or a closed terminal sends.
_ENDING = (signal.SIGTERM, signal.SIGHUP)


@contextmanager
def _signals_raise() -> Iterator[None]:
    """While the body runs, SIGTERM and SIGHUP raise instead of ending the process at once,
    so the body's cleanup (removing a temporary file) runs; afterwards the handlers in place
    before are restored and the signal is delivered to them again.  Only the main thread
    can set handlers; elsewhere the body runs as it is."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous: dict[int, signal._HANDLER] = {}

    def stop(signum: int, _frame: object) -> None:
        raise _Stopped(signum)

    for number in _ENDING:
        handler = signal.getsignal(number)
        if handler not in (signal.SIG_IGN, None):
            previous[number] = handler
            signal.signal(number, stop)
    try:
        yield
    except _Stopped as stopped:
        _restore(previous)
        previous = {}
        signal.raise_signal(stopped.signum)
        raise SystemExit(128 + stopped.signum) from None  # a handler that returned
    finally:
        _restore(previous)


def _restore(handlers: Mapping[int, signal._HANDLER]) -> None:
    for number, handler in handlers.items():
        signal.signal(number, handler)


def same_file(a: str | os.PathLike[str], b: str | os.PathLike[str]) -> bool:
    """True when two paths name one file: the same device and inode (a hard link, a
    symlink, ``..`` or another spelling), or the same resolved path (``-`` is never a file)."""
    if str(a) == "-" or str(b) == "-":
        return False
    try:
        first, second = os.stat(a), os.stat(b)
    except OSError:
        return os.path.realpath(a) == os.path.realpath(b)
    return (first.st_dev, first.st_ino) == (second.st_dev, second.st_ino)


def refuse_overwrite(
    outputs: Mapping[str, str | None], inputs: Sequence[tuple[str, str]], hint: str = ""
) -> None:
    """Refuse (exit 2) before anything runs when an output would replace an input.

    *outputs* maps each output option (``--json``) to its path, ``None`` when not given and
    ``-`` for stdout; *inputs* lists (what it is, path) for the deck, its annotation file and
    every file it includes.  Two outputs naming one file are refused too: one would be lost
    (a device, a pipe or a descriptor such as ``/dev/null`` takes both).
    """
    named = [(option, path) for option, path in outputs.items() if path not in (None, "-")]
    for option, path in named:
        assert path is not None
        for what, source in inputs:
            if source != "-" and same_file(path, source):
                raise UsageError(
                    f"{option} {path} is {what} ({source}), which heatweave never overwrites",
                    hint=hint or f"choose another file name for {option}",
                )
    for k, (option, path) in enumerate(named):
        for other, second in named[k + 1 :]:
            assert path is not None and second is not None
            if same_file(path, second) and _written_into(path) is None:
                raise UsageError(
                    f"{option} and {other} both write to {path}",
                    hint="give each output a file of its own",
                )


def repository_path(path: str) -> str | None:
    """Where the file *path* sits in the git work tree holding it (``amp/board.cir``,
    ``/``-separated), or ``None`` outside one or for standard input (``-``).  The work
    tree's top is the nearest folder above that has a ``.git`` entry (a folder, or the file
    of a linked work tree); git itself is not run."""
    if path == "-":
        return None
    target = Path(os.path.realpath(path))
    for folder in target.parents:
        if (folder / ".git").exists():
            return target.relative_to(folder).as_posix()
    return None
