"""Signals to long-running commands: real signals to real ``heatweave`` processes.

Each command runs in a session of its own with a private ``TMPDIR`` and a marker in its
environment (inherited by every worker and ngspice process it starts).  After the signal
the test waits for the command to exit and then checks, from ``/proc``, that no process
carrying the marker is left, and that ``TMPDIR`` holds nothing heatweave made.
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time
import uuid
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import pytest

from heatweave.errors import EXIT_INTERRUPTED, EXIT_TIMEOUT

pytestmark = [
    pytest.mark.ngspice,
    pytest.mark.skipif(not Path("/proc/self/environ").exists(), reason="needs /proc"),
]

HEATWEAVE = Path(sys.executable).with_name("heatweave")

# A transient far longer than any test waits: 50 s of a 1 kHz drive at 1 us steps.
SLOW_DECK = """slow self-heated divider: a transient that takes minutes to simulate
V1 in 0 SIN(0 14.142 1k)
R1 in out 100
R2 out 0 100
.tran 1u 50 0 1u
.end
"""
# check would settle a periodic deck instead; this one ramps.
RAMP_DECK = SLOW_DECK.replace("SIN(0 14.142 1k)", "PWL(0 0 50 14)")
# A transient of a second or so per corner here: a sweep of four corners ends in seconds.
BRIEF_DECK = SLOW_DECK.replace(".tran 1u 50 0 1u", ".tran 1u 0.1 0 1u")
ANNOTATION = """schema = 1

[ambient]
temperature = 25.0

[part.R1]
model = "linear"
tc1 = 0.004
rth = 50.0
cth = 0.002
"""


@dataclass
class Command:
    process: subprocess.Popen[bytes]
    marker: str
    tmpdir: Path
    seen: dict[str, set[int]] = field(default_factory=dict)

    def marked(self) -> list[tuple[int, str]]:
        """(pid, name) of every live process carrying this command's marker."""
        found = []
        needle = f"HW_SIGNAL_TEST={self.marker}".encode()
        for entry in Path("/proc").iterdir():
            if not entry.name.isdigit():
                continue
            try:
                if needle in (entry / "environ").read_bytes():
                    status = (entry / "stat").read_text()
                    if ") Z" not in status:  # a zombie is gone, only not yet reaped
                        found.append((int(entry.name), (entry / "comm").read_text().strip()))
            except OSError:
                continue
        return found

    def wait_for(self, name: str, timeout: float = 60.0) -> None:
        """Wait until a process called *name* runs under this command."""
        end = time.monotonic() + timeout
        while time.monotonic() < end:
            if any(comm == name for _, comm in self.marked()):
                return
            assert self.process.poll() is None, self.process.communicate()
            time.sleep(0.2)
        pytest.fail(f"no {name} process appeared")

    def left_over(self, within: float = 15.0) -> list[tuple[int, str]]:
        """Processes still alive *within* seconds (none is the expected answer)."""
        end = time.monotonic() + within
        while True:
            alive = [(pid, comm) for pid, comm in self.marked() if pid != self.process.pid]
            if not alive or time.monotonic() > end:
                return alive
            time.sleep(0.2)

    def started(self, needle: str) -> set[int]:
        """Pids of this command's processes, dead or alive, whose command line holds *needle*
        (gathered while :meth:`wait_until` polls)."""
        for pid, _ in self.marked():
            try:
                if needle.encode() in Path(f"/proc/{pid}/cmdline").read_bytes():
                    self.seen.setdefault(needle, set()).add(pid)
            except OSError:
                continue
        return self.seen.get(needle, set())

    def wait_until(self, needle: str, count: int, timeout: float = 90.0) -> None:
        """Wait until *count* processes with *needle* in their command line have started."""
        end = time.monotonic() + timeout
        while len(self.started(needle)) < count:
            assert time.monotonic() < end, f"fewer than {count} {needle} processes appeared"
            assert self.process.poll() is None, self.process.communicate()
            time.sleep(0.05)

    def files(self) -> list[str]:
        """What is left in the command's TMPDIR (a folder with its contents)."""
        found = []
        for path in sorted(self.tmpdir.iterdir()):
            inner = sorted(q.name for q in path.iterdir()) if path.is_dir() else []
            found.append(f"{path.name} {inner}" if inner else path.name)
        return found


@pytest.fixture
def start(tmp_path: Path) -> Iterator[object]:
    for name, text in (("slow", SLOW_DECK), ("ramp", RAMP_DECK), ("brief", BRIEF_DECK)):
        (tmp_path / f"{name}.cir").write_text(text)
        (tmp_path / f"{name}.thermal.toml").write_text(ANNOTATION)
    started: list[Command] = []

    def launch(*args: str, deck: str = "slow.cir") -> Command:
        deck, quiet = ("ramp.cir", []) if args[0] == "check" else (deck, ["-q"])
        tmpdir = tmp_path / f"tmp{len(started)}"
        tmpdir.mkdir()
        marker = uuid.uuid4().hex
        env = {**os.environ, "HW_SIGNAL_TEST": marker, "TMPDIR": str(tmpdir)}
        process = subprocess.Popen(
            [str(HEATWEAVE), *args, *quiet, str(tmp_path / deck)],
            cwd=tmp_path,
            env=env,
            stdin=subprocess.DEVNULL,
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            start_new_session=True,  # a process group of its own, as a shell job has
        )
        command = Command(process, marker, tmpdir)
        started.append(command)
        return command

    yield launch
    for command in started:  # never leave a stray process behind a failed test
        for pid, _ in command.marked():
            os.kill(pid, signal.SIGKILL)
        command.process.wait()


def finish(command: Command, timeout: float = 30.0) -> tuple[int, str]:
    _, err = command.process.communicate(timeout=timeout)
    return command.process.returncode, err.decode(errors="replace")


needs_program = pytest.mark.skipif(shutil.which("ngspice") is None, reason="no ngspice")

CASES = [
    # (command line, process to wait for, signal, to the whole group, exit status)
    pytest.param(["sweep", "--ambient", "20:40:10", "-j", "2", "--backend", "batch"],
                 "ngspice", signal.SIGTERM, False, 143, marks=needs_program, id="sweep-term"),
    pytest.param(["sweep", "--ambient", "20:40:10", "-j", "2", "--backend", "batch"],
                 "ngspice", signal.SIGINT, True, EXIT_INTERRUPTED, marks=needs_program,
                 id="sweep-ctrl-c"),
    pytest.param(["run", "--backend", "batch", "--method", "full"], "ngspice", signal.SIGTERM,
                 False, 143, marks=needs_program, id="run-batch-term"),
    pytest.param(["run", "--backend", "batch", "--method", "full"], "ngspice", signal.SIGINT,
                 True, EXIT_INTERRUPTED, marks=needs_program, id="run-batch-ctrl-c"),
    pytest.param(["run", "--backend", "shared", "--method", "full"], None, signal.SIGINT, True,
                 EXIT_INTERRUPTED, id="run-shared-ctrl-c"),
    pytest.param(["run", "--method", "cosim"], None, signal.SIGINT, True, EXIT_INTERRUPTED,
                 id="run-cosim-ctrl-c"),
    pytest.param(["run", "--method", "cosim"], None, signal.SIGTERM, False, 143,
                 id="run-cosim-term"),
    pytest.param(["settle", "--period", "1m", "--tstep", "1n"], None, signal.SIGINT, True,
                 EXIT_INTERRUPTED, id="settle-ctrl-c"),
]  # fmt: skip


@pytest.mark.parametrize(("args", "wait_for", "signum", "group", "status"), CASES)
def test_signal_ends_everything(
    start, args: list[str], wait_for: str | None, signum: int, group: bool, status: int
) -> None:  # type: ignore[no-untyped-def]
    command = start(*args)
    if wait_for:
        command.wait_for(wait_for)
    else:
        time.sleep(4.0)  # the shared library runs in the command's own process
        assert command.process.poll() is None, finish(command)
    sent = time.monotonic()
    if group:  # Ctrl-C at a terminal reaches every process of the foreground group
        os.killpg(command.process.pid, signum)
    else:
        command.process.send_signal(signum)
    code, err = finish(command)
    assert time.monotonic() - sent < 15, "the command took too long to end"
    assert code == status, err
    assert "Traceback" not in err
    assert command.left_over() == []
    assert command.files() == [], err


@needs_program
def test_sigkill_of_a_sweep_ends_its_workers_and_ngspice(start) -> None:  # type: ignore[no-untyped-def]
    command = start("sweep", "--ambient", "20:40:10", "-j", "2", "--backend", "batch")
    command.wait_for("ngspice")
    command.process.kill()  # no handler sees this: the children must notice themselves
    command.process.wait()
    assert command.left_over() == []
    # Each worker removed its own ngspice folder, and the first to notice the command
    # gone removed the command's multiprocessing folder (pymp-*, issue 14).
    assert command.files() == []


@needs_program
def test_sigkill_of_a_batch_run_ends_ngspice(start) -> None:  # type: ignore[no-untyped-def]
    command = start("run", "--backend", "batch", "--method", "full")
    command.wait_for("ngspice")
    command.process.kill()
    command.process.wait()
    assert command.left_over() == []


@pytest.mark.parametrize(
    "args",
    [
        pytest.param(["run", "--method", "cosim"], id="cosim"),
        pytest.param(["run", "--method", "full", "--backend", "shared"], id="full-shared"),
        pytest.param(["run", "--method", "full", "--backend", "batch"], marks=needs_program,
                     id="full-batch"),
        pytest.param(["check"], id="check"),
        pytest.param(["settle", "--period", "1m", "--tstep", "1n"], id="settle"),
        pytest.param(["sweep", "--ambient", "20:30:10", "-j", "2"], id="sweep"),
    ],
)  # fmt: skip
def test_timeout_ends_every_command(start, args: list[str]) -> None:  # type: ignore[no-untyped-def]
    command = start(*args, "--timeout", "3")
    began = time.monotonic()
    code, err = finish(command, timeout=60)
    took = time.monotonic() - began
    # Start-up (imports, emitting) plus 3 s of simulation plus the halt: well under 20 s.
    assert took < 20, err
    # A sweep whose every corner failed exits with the first corner's status.
    assert code == EXIT_TIMEOUT, err
    assert "did not finish within 3 s" in err
    assert "Traceback" not in err
    assert command.left_over() == []
    assert command.files() == []


STUCK = """
import sys, time
from heatweave import processes
from heatweave.errors import SimulationTimeoutError
from heatweave.simulators import get_simulator, libngspice

# As if ngspice never looked at the halt request: its thread runs on, unstopped.
def deaf(self):
    if self.running():
        self.stuck = True
        return False
    return True

libngspice.Library.halt = deaf
deck = open(sys.argv[1]).read()
try:
    get_simulator("shared").run(deck, timeout=1.0)
except SimulationTimeoutError as err:
    print(err.message, flush=True)
assert libngspice.busy()
try:
    get_simulator("shared").run(deck, timeout=1.0)
except SimulationTimeoutError as err:
    print(err.message, flush=True)
processes.leave(8)
"""


def test_a_run_ngspice_will_not_halt_still_ends_the_command() -> None:
    # At -300 degC (refused now) an NTC kept a loop inside ngspice busy for twelve
    # minutes, deaf to the halt request (issue 14).  Such a library refuses further runs,
    # and the process leaves at once with its status instead of waiting for the thread.
    deck = Path(__file__).parent / "fixtures" / "sim" / "never_settles.cir"
    began = time.monotonic()
    done = subprocess.run(
        [sys.executable, "-c", STUCK, str(deck)],
        capture_output=True, text=True, timeout=60, check=False,
    )  # fmt: skip
    assert time.monotonic() - began < 20, done.stderr
    assert done.returncode == EXIT_TIMEOUT, done.stderr
    lines = done.stdout.splitlines()
    assert lines[0] == "ngspice did not finish within 1 s and was stopped"
    assert lines[1].startswith("ngspice is still busy with a run it would not stop")


def test_a_command_run_in_process_leaves_the_signal_handlers_alone() -> None:
    # The command line installs its own handlers while it runs (above); a program that
    # runs it in process (a test, a wrapper) gets its own back.
    from click.testing import CliRunner

    from heatweave.cli import main

    watched = (signal.SIGINT, signal.SIGTERM, signal.SIGHUP)
    before = [signal.getsignal(s) for s in watched]
    deck = Path(__file__).parent / "fixtures" / "check" / "divider.cir"
    result = CliRunner().invoke(main, ["lint", str(deck)])
    assert result.exit_code in (0, 1), result.output
    assert [signal.getsignal(s) for s in watched] == before


def test_a_timeout_below_a_second_explains_the_scale_factor(tmp_path: Path) -> None:
    # "--timeout 1m" is one millisecond in SPICE notation, not a minute (1u: surely too short).
    deck = Path(__file__).parent / "fixtures" / "check" / "divider.cir"
    done = subprocess.run(
        [str(HEATWEAVE), "run", str(deck), "-q", "--timeout", "1u"],
        capture_output=True, text=True, timeout=60, check=False,
    )  # fmt: skip
    assert done.returncode == EXIT_TIMEOUT, done.stderr
    assert "within 1e-06 s" in done.stderr and "1m is a millisecond" in done.stderr


#: When the signal comes in a two-worker sweep of four corners: (deck, what has started).
MOMENTS = {
    # the fork server importing the worker modules, or starting the first workers
    "fork-server": ("slow.cir", "forkserver", 1),
    "workers": ("slow.cir", "forkserver", 2),
    # both workers inside ngspice
    "mid-run": ("slow.cir", "heatweave-deck.cir", 2),
    # the last of the four corners started: the first ones have finished and reported
    "last-corner": ("brief.cir", "heatweave-deck.cir", 4),
}


@pytest.mark.slow
@needs_program
@pytest.mark.parametrize("attempt", range(3))
@pytest.mark.parametrize("moment", MOMENTS)
@pytest.mark.parametrize(
    ("signum", "group", "status"),
    [
        pytest.param(signal.SIGINT, True, EXIT_INTERRUPTED, id="ctrl-c"),
        pytest.param(signal.SIGTERM, False, 143, id="term"),
    ],
)
def test_a_signal_to_a_sweep_prints_no_traceback(
    start, moment: str, signum: int, group: bool, status: int, attempt: int
) -> None:  # type: ignore[no-untyped-def]
    # Issue 14: on Python 3.11 the pool's manager thread, finding its workers gone, set an
    # error on jobs the sweep had already cancelled and printed an InvalidStateError
    # traceback; a Ctrl-C during the fork server's imports printed theirs; a worker half
    # started when the command left printed a FileNotFoundError traceback.
    deck, needle, count = MOMENTS[moment]
    command = start("sweep", "--ambient", "20:50:10", "-j", "2", deck=deck)
    command.wait_until(needle, count)
    time.sleep(0.1 * attempt)  # a little later each time
    assert command.process.poll() is None, finish(command)
    if group:
        os.killpg(command.process.pid, signum)
    else:
        command.process.send_signal(signum)
    code, err = finish(command)
    assert "Traceback" not in err, err
    assert "Error" not in err, err
    assert code == status, err
    assert command.left_over() == []
    assert command.files() == [], err


EARLY = """
import signal, sys
import click
from heatweave import cli

convert = click.Choice.convert
signum = getattr(signal, sys.argv[1])

def convert_then_signal(self, value, param, ctx):
    signal.raise_signal(signum)  # while the options are read
    return convert(self, value, param, ctx)

click.Choice.convert = convert_then_signal
sys.argv = ["heatweave", "--color", "never", "lint", "missing.cir"]
cli.entry()
"""


@pytest.mark.parametrize(("name", "status"), [("SIGINT", 130), ("SIGTERM", 143), ("SIGHUP", 129)])
def test_a_signal_while_the_options_are_read_exits_with_its_status(name: str, status: int) -> None:
    # Before a command's own handlers are in place, Ctrl-C gave click's "Aborted!" and
    # status 1 (a failed check, to CI), SIGTERM ended the process with no message.
    done = subprocess.run(
        [sys.executable, "-c", EARLY, name], capture_output=True, text=True, timeout=60,
        check=False,
    )  # fmt: skip
    assert done.returncode == status, done.stderr
    assert "Aborted" not in done.stderr and "Traceback" not in done.stderr, done.stderr
    assert done.stderr.startswith("interrupted" if name == "SIGINT" else "terminated")


ABORT = """
import time
from heatweave.sweep.executors import ProcessExecutor

pool = ProcessExecutor(2)
jobs = [pool._pool.submit(time.sleep, 60) for _ in range(4)]
while len([p for p in pool._pool._processes.values() if p.is_alive()]) < 2:
    time.sleep(0.01)
manager = pool._pool._executor_manager_thread
pool.abort()
print("manager running" if manager.is_alive() else "manager ended")
pool.close()
"""


@pytest.mark.slow
@pytest.mark.parametrize("attempt", range(5))
def test_an_aborted_pool_has_ended_its_manager_before_the_interpreter_exits(attempt: int) -> None:
    # Issue 14, seen in CI: abort() took the pool's manager thread after shutdown() had
    # already forgotten it, so it never waited for it; a manager still closing its wakeup
    # pipe at exit raced the pool's exit hook, which wrote to it: "Exception ignored in
    # <module 'threading'> ... OSError: [Errno 9] Bad file descriptor" after a Ctrl-C.
    done = subprocess.run(
        [sys.executable, "-c", ABORT], capture_output=True, text=True, timeout=60, check=False
    )
    assert done.stdout.strip() == "manager ended", done.stderr
    assert done.returncode == 0 and done.stderr == "", done.stderr
