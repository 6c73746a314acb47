"""The grammar's kept LALR tables (``spice.tablecache``): a signal never leaves part of a
file, nothing lands in the temporary folder, and a file someone else could have written is
never loaded (issue 14: a run killed while lark wrote its cache left a
``.lark_cache_*.tmp`` in the temporary folder; lark loads that fixed, guessable name with
pickle, so a file planted there would run code).

Real signals to real processes: the command line runs with its own handlers, and lark's
writing is interrupted from inside (its ``save`` sends the signal half-way through), so
the signal lands while the file is being written every time, not by luck of timing.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from heatweave.errors import EXIT_INTERRUPTED, EXIT_TERMINATED
from heatweave.spice.grammar import grammar_dir

# A brace value needs the grammar: plain cards, words and key=value pairs only, are read
# without it (spice.cardscan).
DECK = "diode\nV1 a 0 DC 1\nR1 a k {1k}\nD1 k 0 dmod\n.model dmod D(is=1e-14)\n.op\n.end\n"

# Runs the command line with lark's save() sending a signal to this very process after
# writing part of the file (signal name in argv[1], deck in argv[2]).
INTERRUPTED_SAVE = """
import io, os, signal, sys
import lark

save = lark.Lark.save
signum = getattr(signal, sys.argv[1])
deck = sys.argv[2]

def save_and_signal(self, f, *args, **kwargs):
    whole = io.BytesIO()
    save(self, whole, *args, **kwargs)
    data = whole.getvalue()
    f.write(data[: len(data) // 2])
    f.flush()
    os.kill(os.getpid(), signum)
    f.write(data[len(data) // 2 :])

lark.Lark.save = save_and_signal
from heatweave import cli
sys.argv = ["heatweave", "lint", deck]
cli.entry()
"""


def _environment(tmp_path: Path) -> dict[str, str]:
    (tmp_path / "tmp").mkdir(exist_ok=True)
    return {**os.environ, "XDG_CACHE_HOME": str(tmp_path / "xdg"), "TMPDIR": str(tmp_path / "tmp")}


def _lint(tmp_path: Path, *script: str) -> subprocess.CompletedProcess[str]:
    command = [sys.executable, "-c", *script] if script else [sys.executable, "-m", "heatweave"]
    deck = tmp_path / "d.cir"
    deck.write_text(DECK)
    args = [*command, "lint", str(deck)] if not script else [*command, str(deck)]
    return subprocess.run(
        args, capture_output=True, text=True, timeout=60, env=_environment(tmp_path),
        check=False,
    )  # fmt: skip


def _tables(tmp_path: Path) -> list[Path]:
    folder = tmp_path / "xdg" / "heatweave"
    return sorted(folder.iterdir()) if folder.exists() else []


def _identity(path: Path) -> tuple[int, int, int]:
    info = path.stat()
    return info.st_ino, info.st_size, info.st_mtime_ns


@pytest.mark.parametrize(
    ("name", "status"), [("SIGTERM", EXIT_TERMINATED), ("SIGINT", EXIT_INTERRUPTED)]
)
def test_a_signal_while_the_tables_are_written_leaves_a_whole_file(
    tmp_path: Path, name: str, status: int
) -> None:
    done = _lint(tmp_path, INTERRUPTED_SAVE, name)
    assert done.returncode == status, done.stderr
    assert "Traceback" not in done.stderr
    assert list((tmp_path / "tmp").iterdir()) == []  # nothing in the temporary folder
    [kept] = _tables(tmp_path)
    before = _identity(kept)
    # The next run loads the file as it is: lark found it whole (its own check), or it
    # would have built the tables again and rewritten it.
    again = _lint(tmp_path)
    assert again.returncode == 0, again.stdout + again.stderr
    assert _identity(kept) == before
    assert _tables(tmp_path) == [kept]


def test_tables_cut_short_by_sigkill_are_built_again(tmp_path: Path) -> None:
    # SIGKILL cannot be held back: the file is left cut short, in heatweave's own folder,
    # where the next run finds it unusable, builds the tables and writes the file anew.
    done = _lint(tmp_path, INTERRUPTED_SAVE, "SIGKILL")
    assert done.returncode == -signal.SIGKILL
    [kept] = _tables(tmp_path)
    cut = kept.stat().st_size
    again = _lint(tmp_path)
    assert again.returncode == 0, again.stdout + again.stderr
    assert kept.stat().st_size > cut  # written anew, whole
    rewritten = _identity(kept)
    third = _lint(tmp_path)
    assert third.returncode == 0 and _identity(kept) == rewritten  # whole now: reused
    assert list((tmp_path / "tmp").iterdir()) == []


PLANTED = """
import pathlib, pickle, sys
class Planted:
    def __reduce__(self):
        return (pathlib.Path(sys.argv[1]).touch, ())
sys.stdout.buffer.write(b"0" * 64 + b"\\n" + pickle.dumps(Planted()))
"""


def test_tables_in_a_folder_others_may_write_are_never_loaded(tmp_path: Path) -> None:
    from heatweave.spice.tablecache import table_key

    folder = tmp_path / "xdg" / "heatweave"
    folder.mkdir(parents=True)
    folder.chmod(0o777)  # anyone may put a file here
    marker = tmp_path / "ran"
    planted = subprocess.run(
        [sys.executable, "-c", PLANTED, str(marker)], capture_output=True, check=True
    ).stdout
    key = table_key(grammar_dir(), "lalr maybe_placeholders=False")
    (folder / f"tables-{key}.lark").write_bytes(planted)
    done = _lint(tmp_path)
    assert done.returncode == 0, done.stdout + done.stderr
    assert not marker.exists(), "a file in a folder others may write to was unpickled"
    assert (folder / f"tables-{key}.lark").read_bytes() == planted  # not used, not replaced


def _kept_name() -> str:
    from heatweave.spice.tablecache import table_key

    return f"tables-{table_key(grammar_dir(), 'lalr maybe_placeholders=False')}.lark"


def test_a_link_at_the_tables_name_is_neither_followed_nor_written_through(
    tmp_path: Path,
) -> None:
    # lark opens its cache file by name, for reading and then for writing: a link there
    # (the user's own mistake, or a folder restored from a backup) would have its target
    # read and, when that is no table, overwritten with the tables (seen: a text file
    # replaced by 30 kB of tables, exit 0).  A cache that cannot be used is skipped.
    folder = tmp_path / "xdg" / "heatweave"
    folder.mkdir(parents=True, mode=0o700)
    target = tmp_path / "notes.txt"
    target.write_text("the user's own notes\n")
    (folder / _kept_name()).symlink_to(target)
    done = _lint(tmp_path)
    assert done.returncode == 0, done.stdout + done.stderr
    assert target.read_text() == "the user's own notes\n"
    assert (folder / _kept_name()).is_symlink()  # left alone, not replaced


def test_a_fifo_at_the_tables_name_is_skipped_not_waited_on(tmp_path: Path) -> None:
    # lark's open() of a FIFO blocks until a writer comes, with the ending signals held
    # back around it: the run hung for good, deaf to Ctrl-C and SIGTERM (seen).
    folder = tmp_path / "xdg" / "heatweave"
    folder.mkdir(parents=True, mode=0o700)
    os.mkfifo(folder / _kept_name())
    done = _lint(tmp_path)  # its timeout (60 s) fails the test instead of hanging
    assert done.returncode == 0, done.stdout + done.stderr


@pytest.mark.slow
@pytest.mark.parametrize("delay", [0.3, 0.5, 0.7, 0.9, 1.1, 1.3, 1.6, 2.0])
def test_sigterm_at_any_moment_of_a_first_lint(tmp_path: Path, delay: float) -> None:
    # From outside, at moments across start-up, tables building and writing, and linting.
    deck = tmp_path / "d.cir"
    deck.write_text(DECK)
    process = subprocess.Popen(
        [sys.executable, "-m", "heatweave", "lint", str(deck)],
        env=_environment(tmp_path), stdout=subprocess.PIPE, stderr=subprocess.PIPE,
    )  # fmt: skip
    time.sleep(delay)
    process.send_signal(signal.SIGTERM)
    _, err = process.communicate(timeout=60)
    # 0: it had finished; -15: before the command line set its handlers (nothing written)
    assert process.returncode in (0, EXIT_TERMINATED, -signal.SIGTERM), err
    assert b"Traceback" not in err
    assert list((tmp_path / "tmp").iterdir()) == []
    for kept in _tables(tmp_path):
        before = _identity(kept)
        assert _lint(tmp_path).returncode == 0
        assert _identity(kept) == before  # whole: loaded, not built again
