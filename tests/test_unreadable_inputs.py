"""An input that cannot be read at all exits 2, the README's "unusable input", on every
command (issue 14: lint said 1, "a check failed", for a missing deck; a folder where the
annotation file should be was taken as no annotation file; a path through a file gave a
traceback).  Missing files, folders, paths through a file, broken links, pipes and files
that may not be read, as the deck, as ``-a FILE``, as ``--init-file FILE`` (a pipe was
waited on for ever, ``/dev/zero`` read until memory ran out) and as the ``DECK.thermal.toml``
beside the deck.  Run in process: every case is refused before anything is simulated.
"""

from __future__ import annotations

import errno
import os
import threading
from collections.abc import Callable
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave import files
from heatweave.cli import main

DECK = "divider\nV1 in 0 DC 10\nRTOP in out 1k\nRBOT out 0 1k\n.op\n.end\n"
NOTES = 'schema = 1\n[part.RTOP]\nmodel = "linear"\ntc1 = 0.003\nrth = 60.0\ncth = 0.02\n'


def _missing(path: Path) -> None:
    return None


def _folder(path: Path) -> None:
    path.mkdir()


def _through_a_file(path: Path) -> None:
    # the caller uses path / "x": a name below a regular file (ENOTDIR)
    path.write_text(DECK)


def _broken_link(path: Path) -> None:
    path.symlink_to(path.with_name("gone"))


def _pipe(path: Path) -> None:
    os.mkfifo(path)
    # A writer that closes at once: a command that wrongly reads the pipe gets an empty
    # input and a message of another kind (the test fails) instead of waiting for ever.
    threading.Thread(target=lambda: os.close(os.open(path, os.O_WRONLY)), daemon=True).start()


def _no_permission(path: Path) -> None:
    path.write_text(DECK)
    path.chmod(0)


#: How each kind of unreadable input is made at a path (and the path then named).
KINDS: dict[str, Callable[[Path], None]] = {
    "missing": _missing,
    "folder": _folder,
    "through-a-file": _through_a_file,
    "broken-link": _broken_link,
    "pipe": _pipe,
    "no-permission": _no_permission,
}

#: Commands and where the unreadable file goes: {deck}, {notes} (for -a) or "beside".
COMMANDS = [
    ("lint", ["lint", "{deck}"]),
    ("emit", ["emit", "{deck}", "-a", "d.thermal.toml"]),
    ("run", ["run", "{deck}", "-a", "d.thermal.toml"]),
    ("check", ["check", "{deck}", "-a", "d.thermal.toml"]),
    ("settle", ["settle", "{deck}", "-a", "d.thermal.toml", "--period", "1m"]),
    ("sweep", ["sweep", "{deck}", "-a", "d.thermal.toml", "--ambient", "20:30:10"]),
    ("compare", ["compare", "{deck}", "{deck}"]),
    ("network-fit", ["network", "fit", "{deck}", "--stages", "1"]),
    ("network-convert", ["network", "convert", "{deck}", "--to", "cauer"]),
    ("lint -a", ["lint", "d.cir", "-a", "{notes}"]),
    ("emit -a", ["emit", "d.cir", "-a", "{notes}"]),
    ("run -a", ["run", "d.cir", "-a", "{notes}"]),
    ("check -a", ["check", "d.cir", "-a", "{notes}"]),
    ("sweep -a", ["sweep", "d.cir", "-a", "{notes}", "--ambient", "20:30:10"]),
    ("run --init-file", ["run", "d.cir", "--init-file", "{notes}"]),
    ("check --init-file", ["check", "d.cir", "--init-file", "{notes}"]),
    ("settle --init-file", ["settle", "d.cir", "--init-file", "{notes}", "--period", "1m"]),
    ("sweep --init-file", ["sweep", "d.cir", "--init-file", "{notes}", "--ambient", "20:30:10"]),
    ("lint beside", ["lint", "b.cir"]),
    ("emit beside", ["emit", "b.cir"]),
    ("run beside", ["run", "b.cir"]),
    ("check beside", ["check", "b.cir"]),
]


@pytest.fixture
def denied(monkeypatch: pytest.MonkeyPatch) -> Callable[[Path], None]:
    """Make reading *path* fail with EACCES as for another user (a test run as root reads
    a file of mode 000; an unprivileged user is stopped by the option check already)."""
    blocked: set[str] = set()
    real_open = os.open

    def fake_open(path: str | os.PathLike[str], flags: int, *args: int, **kw: int) -> int:
        if os.path.abspath(path) in blocked:
            raise PermissionError(errno.EACCES, os.strerror(errno.EACCES), str(path))
        return real_open(path, flags, *args, **kw)

    monkeypatch.setattr(files.os, "open", fake_open)
    return lambda path: blocked.add(os.path.abspath(path))


def _cases() -> list[object]:
    cases = []
    for name, args in COMMANDS:
        for kind in KINDS:
            beside = name.endswith("beside")
            if beside and kind == "through-a-file":
                continue  # the file beside the deck has a name of its own
            if beside and kind == "missing" and name.startswith(("lint", "emit")):
                continue  # both take a deck with no annotation file beside it
            cases.append(pytest.param(name, args, kind, id=f"{name}-{kind}"))
    return cases


@pytest.mark.parametrize(("name", "args", "kind"), _cases())
def test_an_unreadable_input_exits_2(
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    denied: Callable[[Path], None],
    name: str,
    args: list[str],
    kind: str,
) -> None:
    monkeypatch.chdir(tmp_path)
    (tmp_path / "d.cir").write_text(DECK)
    (tmp_path / "d.thermal.toml").write_text(NOTES)
    (tmp_path / "b.cir").write_text(DECK)
    target = tmp_path / ("b.thermal.toml" if name.endswith("beside") else "bad")
    KINDS[kind](target)
    if kind == "no-permission":
        denied(target)
    named = target / "x" if kind == "through-a-file" else target
    line = [a.replace("{deck}", str(named)).replace("{notes}", str(named)) for a in args]
    result = CliRunner().invoke(main, line)
    assert result.exception is None or isinstance(result.exception, SystemExit), result.output
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.output
    assert target.name in result.output, result.output  # refused for this file, not another
    if kind == "pipe":
        assert "not a regular file (a pipe)" in result.output, result.output
    if kind == "pipe":  # release the writer, whose open waits for a reader
        os.close(os.open(target, os.O_RDONLY | os.O_NONBLOCK))
