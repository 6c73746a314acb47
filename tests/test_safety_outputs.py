"""No input is ever overwritten: every output option of every command, aimed at the deck,
its annotation file or a file the deck includes, however the path is spelled, is refused
with exit status 2 before anything runs, and the file keeps its bytes.

The deck carries a ``.control`` block that would create a marker file: with
``--allow-control`` a run that went ahead would leave it, so its absence shows that nothing
ran.  Also here: ``emit --in-place`` and a SIGTERM during an atomic write."""

from __future__ import annotations

import os
import signal
import stat
import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main
from heatweave.errors import UsageError
from heatweave.files import refuse_overwrite, write_atomic

DECK = """output guard deck
.include parts.inc
V1 in 0 DC 10
RTOP in out 1k
.tran 1m 10m
.control
shell touch {marker}
.endc
.end
"""
PARTS = "* the lower leg, in a file of its own\nRBOT out 0 1k\n"
NOTES = 'schema = 1\n[part.RTOP]\nmodel = "linear"\ntc1 = 0.003\nrth = 60.0\ncth = 0.02\n'

# command words before DECK, and the words after it that every case of the command needs
SIMULATING = ["--allow-control", "--backend", "batch"]
COMMANDS: dict[str, tuple[list[str], list[str], list[str]]] = {
    # option -> (command, extra words, the option's own words besides the path)
    "emit -o": (["emit"], [], ["-o"]),
    "run --json": (["run"], SIMULATING, ["--json"]),
    "run --csv": (["run"], SIMULATING, ["--csv"]),
    "run --plot": (["run"], SIMULATING, ["--plot"]),
    "check --junit": (["check"], SIMULATING, ["--junit"]),
    "check --json": (["check"], SIMULATING, ["--json"]),
    "settle --json": (["settle"], [*SIMULATING, "--period", "1m"], ["--json"]),
    "settle --csv": (["settle"], [*SIMULATING, "--period", "1m", "--warmup", "10m"], ["--csv"]),
    "sweep --json": (["sweep"], [*SIMULATING, "-j", "1"], ["--json"]),
    "sweep --csv": (["sweep"], [*SIMULATING, "-j", "1"], ["--csv"]),
    "sweep --plot": (["sweep"], [*SIMULATING, "-j", "1"], ["--plot"]),
    "sweep --junit": (["sweep"], [*SIMULATING, "-j", "1", "--check"], ["--junit"]),
    "run --html": (["run"], SIMULATING, ["--html"]),
    "check --html": (["check"], SIMULATING, ["--html"]),
    "settle --html": (["settle"], [*SIMULATING, "--period", "1m"], ["--html"]),
    "settle --plot": (["settle"], [*SIMULATING, "--period", "1m"], ["--plot"]),
    "settle --junit": (["settle"], [*SIMULATING, "--period", "1m"], ["--junit"]),
    "sweep --html": (["sweep"], [*SIMULATING, "-j", "1"], ["--html"]),
    "compare --markdown": (["compare"], [*SIMULATING, "--against", "HEAD"], ["--markdown"]),
    "compare --json": (["compare"], [*SIMULATING, "--against", "HEAD"], ["--json"]),
    "compare --junit": (["compare"], [*SIMULATING, "--against", "HEAD"], ["--junit"]),
    "compare --html": (["compare"], [*SIMULATING, "--against", "HEAD"], ["--html"]),
}
TARGETS = {"deck": "d.cir", "annotation": "d.thermal.toml", "include": "parts.inc"}


def _relative(tmp: Path, name: str) -> str:
    return name


def _absolute(tmp: Path, name: str) -> str:
    return str(tmp / name)


def _dotdot(tmp: Path, name: str) -> str:
    return f"sub/../{name}"


def _symlink(tmp: Path, name: str) -> str:
    link = tmp / f"link-{name}"
    link.symlink_to(tmp / name)
    return link.name


def _hardlink(tmp: Path, name: str) -> str:
    link = tmp / "sub" / f"hard-{name}"
    os.link(tmp / name, link)
    return f"sub/{link.name}"


SPELLINGS: dict[str, Callable[[Path, str], str]] = {
    "relative": _relative,
    "absolute": _absolute,
    "dotdot": _dotdot,
    "symlink": _symlink,
    "hardlink": _hardlink,
}


@pytest.fixture
def project(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    """A deck, its annotation file and an included file, with the tests run from there."""
    (tmp_path / "sub").mkdir()
    marker = tmp_path / "MARKER"
    (tmp_path / "d.cir").write_text(DECK.format(marker=marker))
    (tmp_path / "parts.inc").write_text(PARTS)
    (tmp_path / "d.thermal.toml").write_text(NOTES)
    monkeypatch.chdir(tmp_path)
    return tmp_path


def snapshot(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()}


@pytest.mark.parametrize("spelling", SPELLINGS)
@pytest.mark.parametrize("target", TARGETS)
@pytest.mark.parametrize("option", COMMANDS)
def test_every_output_option_refuses_every_input(
    project: Path, option: str, target: str, spelling: str
) -> None:
    command, extra, words = COMMANDS[option]
    path = SPELLINGS[spelling](project, TARGETS[target])
    before = snapshot(project)
    result = CliRunner().invoke(main, [*command, "d.cir", *extra, *words, path])
    assert result.exit_code == 2, result.output
    assert "never overwrites" in result.output
    assert "Traceback" not in result.output
    assert snapshot(project) == before
    assert not (project / "MARKER").exists()


@pytest.mark.parametrize("card", [".includex extra.inc", ".Library extra.inc low"])
@pytest.mark.parametrize("option", ["emit -o", "run --json", "check --junit", "sweep --csv"])
def test_an_include_spelled_as_ngspice_reads_it_is_an_input_too(
    project: Path, option: str, card: str
) -> None:
    """ngspice 39 reads any card name starting ".inc" or ".lib" as an include (issue 14)."""
    deck = project / "d.cir"
    text = deck.read_text().replace(".include parts.inc\n", f".include parts.inc\n{card}\n")
    deck.write_text(text)
    (project / "extra.inc").write_text(".lib low\nRX out 0 1meg\n.endl\n" if "low" in card
                                       else "RX out 0 1meg\n")  # fmt: skip
    command, extra, words = COMMANDS[option]
    before = snapshot(project)
    result = CliRunner().invoke(main, [*command, "d.cir", *extra, *words, "extra.inc"])
    assert result.exit_code == 2, result.output
    assert "never overwrites" in result.output
    assert snapshot(project) == before


@pytest.mark.parametrize("spelling", ["relative", "dotdot", "symlink", "hardlink"])
@pytest.mark.parametrize("option", [name for name in COMMANDS if not name.startswith("emit")])
def test_every_output_option_refuses_the_init_file(
    project: Path, option: str, spelling: str
) -> None:
    """The file ``--init-file`` names is an input too: no output may replace it."""
    command, extra, words = COMMANDS[option]
    (project / "my.init").write_text("* an ngspice init file of the user's\n")
    path = SPELLINGS[spelling](project, "my.init")
    before = snapshot(project)
    result = CliRunner().invoke(
        main, [*command, "d.cir", *extra, "--init-file", "my.init", *words, path]
    )
    assert result.exit_code == 2, result.output
    assert "never overwrites" in result.output
    assert snapshot(project) == before
    assert not (project / "MARKER").exists()


@pytest.mark.parametrize(
    ("option", "extra"),
    [("-o", []), ("--plot", ["--plot"])],
    ids=["fit -o", "fit --plot"],
)
def test_network_fit_refuses_its_data(project: Path, option: str, extra: list[str]) -> None:
    data = project / "zth.csv"
    data.write_text("time,zth\n1e-3,0.5\n1e-2,2\n1e-1,5\n1,8\n10,9.5\n")
    before = data.read_bytes()
    words = ["-o", "sub/../zth.csv"] if option == "-o" else ["--plot", "link.csv"]
    (project / "link.csv").symlink_to(data)
    result = CliRunner().invoke(main, ["network", "fit", "zth.csv", "-n", "1", *words])
    assert result.exit_code == 2 and "never overwrites" in result.output
    assert data.read_bytes() == before


def test_network_convert_refuses_its_input(project: Path) -> None:
    source = project / "net.toml"
    source.write_text("foster = [[1.0, 0.1], [2.0, 1.0]]\n")
    before = source.read_bytes()
    result = CliRunner().invoke(
        main, ["network", "convert", "net.toml", "--to", "cauer", "-o", str(source)]
    )
    assert result.exit_code == 2 and "never overwrites" in result.output
    assert source.read_bytes() == before


@pytest.mark.parametrize("option", ["--markdown", "--json", "--junit", "--html"])
def test_compare_refuses_its_saved_results(project: Path, option: str) -> None:
    for name in ("old.json", "new.json"):
        (project / name).write_text("{}\n")
    before = snapshot(project)
    result = CliRunner().invoke(main, ["compare", "old.json", "new.json", option, "./new.json"])
    assert result.exit_code == 2 and "never overwrites" in result.output, result.output
    assert snapshot(project) == before


def test_two_outputs_to_one_file_are_refused(project: Path) -> None:
    result = CliRunner().invoke(
        main, ["run", "d.cir", *SIMULATING, "--json", "r.out", "--csv", "./r.out"]
    )
    assert result.exit_code == 2 and "both write to" in result.output
    assert not (project / "MARKER").exists()


def test_emit_in_place_rewrites_the_deck_like_sed(project: Path) -> None:
    deck = project / "d.cir"
    deck.chmod(0o640)
    link = project / "link.cir"
    link.symlink_to(deck)
    result = CliRunner().invoke(main, ["emit", "link.cir", "-a", "d.thermal.toml", "--in-place"])
    assert result.exit_code == 0, result.output
    assert result.stdout_bytes == b""  # nothing on stdout: the deck itself was rewritten
    assert link.is_symlink()  # written through the link, which stays
    assert "*hw* RTOP: model linear" in deck.read_text()
    assert deck.stat().st_mode & 0o777 == 0o640
    assert sorted(p.name for p in project.iterdir() if p.name.startswith(".")) == []


@pytest.mark.parametrize(
    "words",
    [["-", "--in-place"], ["d.cir", "--in-place", "-o", "other.cir"]],
    ids=["stdin", "other-output"],
)
def test_emit_in_place_needs_a_deck_file_and_no_other_output(
    project: Path, words: list[str]
) -> None:
    before = snapshot(project)
    result = CliRunner().invoke(main, ["emit", *words, "-a", "d.thermal.toml"], input="t\n")
    assert result.exit_code == 2 and "--in-place" in result.output
    assert snapshot(project) == before


WRITER = """
import sys, time
from heatweave import files
payload = b"x" * (1 << 20)
def slow_fsync(fd):
    print("writing", flush=True)
    time.sleep(30)
files.os.fsync = slow_fsync
files.write_atomic(sys.argv[1], payload)
"""


def test_sigterm_during_an_atomic_write_leaves_no_temporary_file(tmp_path: Path) -> None:
    target = tmp_path / "out.cir"
    target.write_text("old\n")
    child = subprocess.Popen(
        [sys.executable, "-c", WRITER, str(target)], stdout=subprocess.PIPE, text=True
    )
    assert child.stdout is not None
    assert child.stdout.readline().strip() == "writing"
    assert any(p.name.startswith(".out.cir.") for p in tmp_path.iterdir())
    child.send_signal(signal.SIGTERM)
    assert child.wait(timeout=20) == -signal.SIGTERM  # still ended by the signal
    time.sleep(0.05)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.cir"]
    assert target.read_text() == "old\n"


def test_an_output_that_is_a_named_pipe_is_written_into_not_replaced(tmp_path: Path) -> None:
    """``--json FIFO`` (like ``--json /dev/null`` or ``/dev/stdout``) names something that is
    no regular file: renaming a temporary file over it replaced the pipe (as root, the
    device node /dev/null) with a regular file.  It must stay what it is and get the data,
    as a shell's ``> FIFO`` does (POSIX open(2) on a FIFO: the writer meets the reader)."""
    pipe = tmp_path / "results.fifo"
    os.mkfifo(pipe)
    reader = os.open(pipe, os.O_RDONLY | os.O_NONBLOCK)  # a reader waits: open(2) for writing
    try:
        write_atomic(pipe, '{"heatweave_version": "x"}\n')
        received = os.read(reader, 4096)
    finally:
        os.close(reader)
    assert stat.S_ISFIFO(os.lstat(pipe).st_mode)
    assert received == b'{"heatweave_version": "x"}\n'
    assert [p.name for p in tmp_path.iterdir()] == ["results.fifo"]  # no temporary left


@pytest.mark.parametrize("spelling", ["/proc/self/fd/{fd}", "/dev/fd/{fd}"])
def test_an_output_spelled_as_a_descriptor_writes_through_it(
    tmp_path: Path, spelling: str
) -> None:
    """``--json /dev/stdout >> log.txt``: the path is the shell's descriptor, not a file to
    replace; renaming over what it resolves to swapped log.txt for a new file (its earlier
    lines lost, and whatever heatweave printed on stdout after that went to the old one).
    The report goes after what is there, as with ``--json -``."""
    log = tmp_path / "log.txt"
    log.write_text("earlier line\n")
    inode = log.stat().st_ino
    fd = os.open(log, os.O_WRONLY | os.O_APPEND)
    try:
        write_atomic(spelling.format(fd=fd), "report\n")
    finally:
        os.close(fd)
    assert log.stat().st_ino == inode
    assert log.read_text() == "earlier line\nreport\n"  # after what the descriptor wrote
    assert sorted(p.name for p in tmp_path.iterdir()) == ["log.txt"]


def test_two_outputs_into_one_pipe_are_allowed(tmp_path: Path) -> None:
    """Two outputs into one device or pipe (``--json /dev/null --csv /dev/null``) lose
    nothing, unlike two onto one file (checked on a named pipe: nothing is written)."""
    pipe, plain = tmp_path / "both.fifo", tmp_path / "both.txt"
    os.mkfifo(pipe)
    refuse_overwrite({"--json": str(pipe), "--csv": str(pipe)}, [])
    plain.write_text("")
    with pytest.raises(UsageError, match="both write to"):
        refuse_overwrite({"--json": str(plain), "--csv": str(plain)}, [])
