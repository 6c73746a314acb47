"""Inputs a hostile colleague or a misconfigured CI job hands heatweave, and what must happen.

Every case runs the command as a user does (its own process, with a time limit), so a
command that blocks or spins fails the test instead of hanging the suite.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

DECK = "divider\nV1 in 0 DC 10\nRTOP in out 1k\nRBOT out 0 1k\n.op\n.end\n"
NOTES = 'schema = 1\n[part.RTOP]\nmodel = "linear"\ntc1 = 0.003\nrth = 60.0\ncth = 0.02\n'


def heatweave(args: list[str], cwd: Path, timeout: float = 60) -> subprocess.CompletedProcess[str]:
    """The command in its own process; a command still running after *timeout* fails."""
    return subprocess.run(
        [sys.executable, "-m", "heatweave", *args],
        cwd=cwd, capture_output=True, text=True, timeout=timeout, check=False,
    )  # fmt: skip


def special_file(kind: str, folder: Path) -> str:
    """A path that is no regular file: a device that never ends, a pipe nobody writes to."""
    if kind == "device":
        return "/dev/zero"
    fifo = folder / "pipe"
    os.mkfifo(fifo)
    return str(fifo)


# (command line with {x} for the special file, what it reads there, exit status). Each reads
# the special file as an input; a regular file there would be read to its end (common
# practice: a tool refuses what it cannot read to an end instead of blocking or filling
# memory). Every command, lint too, exits 2 (unusable input, README's table; issue 14).
SPECIAL_INPUTS = [
    (["lint", "{x}"], "a deck", 2),
    (["emit", "{x}", "-a", "d.thermal.toml"], "a deck", 2),
    (["run", "{x}", "-a", "d.thermal.toml"], "a deck", 2),
    (["lint", "d.cir", "-a", "{x}"], "an annotation file", 2),
    (["run", "d.cir", "-a", "{x}"], "an annotation file", 2),
    (["emit", "d.cir", "--check", "{x}"], "a committed emitted deck", 2),
    (["network", "fit", "{x}", "--stages", "1"], "a Zth table", 2),
    # a pipe nobody wrote to kept compare waiting; /dev/zero filled its memory (issue 14)
    (["compare", "{x}", "d.cir"], "a saved result", 2),
    # the init file: a pipe kept run waiting, /dev/zero was read until memory ran out
    (["run", "d.cir", "--init-file", "{x}"], "an init file", 2),
    (["sweep", "d.cir", "--ambient", "20:30:10", "--init-file", "{x}"], "an init file", 2),
]


@pytest.mark.parametrize("kind", ["device", "fifo"])
@pytest.mark.parametrize(
    ("args", "what", "status"), SPECIAL_INPUTS, ids=[" ".join(c[0]) for c in SPECIAL_INPUTS]
)
def test_an_input_that_is_no_regular_file_is_refused(
    tmp_path: Path, kind: str, args: list[str], what: str, status: int
) -> None:
    (tmp_path / "d.cir").write_text(DECK)
    (tmp_path / "d.thermal.toml").write_text(NOTES)
    special = special_file(kind, tmp_path)
    result = heatweave([a.replace("{x}", special) for a in args], tmp_path, timeout=30)
    assert result.returncode == status, (what, result.stdout, result.stderr)
    assert "not a regular file" in result.stdout + result.stderr, (what, result.stderr)
    assert "Traceback" not in result.stderr


LIBRARY = ".lib sec1\nRLIB a b 1k\n.endl sec1\n.lib sec2\n.lib 'parts.lib' sec1\n.endl sec2\n"
LIB_DECK = "divider\nV1 in 0 DC 5\nR1 in a 1k\n.lib parts.lib sec2\nRB b 0 1k\n.op\n.end\n"
LIB_NOTES = 'schema = 1\n[part.R1]\nmodel = "linear"\ntc1_ppm = 100\nrth = 50\ncth = 0.1\n'


@pytest.mark.ngspice
@pytest.mark.parametrize("backend", ["shared", "batch"])
def test_a_library_section_using_another_section_of_its_file_runs(
    tmp_path: Path, backend: str
) -> None:
    """A section that uses another section of its own file is library practice (manual 2.8)
    and no cycle: stock ngspice 39 loads it, lint passes it, and run simulates it with the
    section's resistor in the circuit."""
    (tmp_path / "parts.lib").write_text(LIBRARY)
    (tmp_path / "d.cir").write_text(LIB_DECK)
    (tmp_path / "d.thermal.toml").write_text(LIB_NOTES)
    plain = subprocess.run(
        ["ngspice", "-b", "d.cir"], cwd=tmp_path, capture_output=True, text=True, timeout=60
    )
    assert plain.returncode == 0 and "error" not in plain.stdout.lower() + plain.stderr.lower()
    assert heatweave(["lint", "d.cir"], tmp_path).returncode == 0
    result = heatweave(["run", "d.cir", "--backend", backend, "--json", "-"], tmp_path)
    assert result.returncode == 0, result.stderr
    # Hand calculation: 5 V across R1 + RLIB + RB = 3 kOhm, P(R1) = (5/3000)^2 * 1000 W; the
    # self-heating (50 K/W * 2.8 mW = 0.14 K at 100 ppm/K) moves it by 1.4e-5 only.
    power = json.loads(result.stdout)["parts"]["R1"]["power"]
    assert power == pytest.approx((5 / 3000) ** 2 * 1000, rel=1e-4)


# Two [node] names of the annotation file that are one node name in the deck: ngspice reads
# names without regard to case (manual 2.1.1), and heatweave writes a name's other
# characters as "_". Each pair would be two nodes in the file and one in the emitted deck.
COLLIDING_NODES = [("Board", "board"), ("bo ard", "bo_ard"), ("b\u00f6ard", "b_ard")]


@pytest.mark.parametrize(("first", "second"), COLLIDING_NODES)
@pytest.mark.parametrize(("command", "status"), [("lint", 1), ("emit", 2), ("run", 2)])
def test_two_nodes_that_are_one_in_the_deck_are_refused(
    tmp_path: Path, first: str, second: str, command: str, status: int
) -> None:
    (tmp_path / "d.cir").write_text(DECK)
    (tmp_path / "d.thermal.toml").write_text(
        f'schema = 1\n[node."{first}"]\nrth = 10\ncth = 1\n[node."{second}"]\nrth = 1000\n'
        f'cth = 1\n[part.RTOP]\nmodel = "linear"\ntc1 = 0.003\nrth = 60.0\ncth = 0.02\n'
        f'to = "{first}"\n[part.RBOT]\nmodel = "linear"\ntc1 = 0.003\nrth = 60.0\ncth = 0.02\n'
        f'to = "{second}"\n',
        encoding="utf-8",
    )
    result = heatweave([command, "d.cir"], tmp_path)
    assert result.returncode == status, (result.stdout, result.stderr)
    # Located at the second node's table header, naming the first.
    assert "d.thermal.toml:5:" in result.stdout + result.stderr, result.stdout + result.stderr
    assert first in result.stdout + result.stderr


PATH_DECK = """two paths, one name
.subckt inner a b
R3 a b 1k
.ends
.subckt outer a b
X2 a b inner
.ends
V1 in 0 DC 5
X1 in 0 outer
X1_X2 in 0 inner
.op
.end
"""
PATH_NOTES = """schema = 1
[part."X1.X2.R3"]
model = "linear"
tc1_ppm = 100
rth = 50
cth = 0.1
[part."X1_X2.R3"]
model = "linear"
tc1_ppm = 100
rth = 500
cth = 0.1
"""


@pytest.mark.parametrize(("command", "status"), [("lint", 1), ("emit", 2), ("run", 2)])
def test_two_parts_whose_paths_are_one_name_are_refused(
    tmp_path: Path, command: str, status: int
) -> None:
    """X1.X2.R3 and X1_X2.R3 are two resistors (stock ngspice loads the deck) that would
    share one hot-spot node; run found no verified state (exit 7), emit wrote one node."""
    (tmp_path / "d.cir").write_text(PATH_DECK)
    (tmp_path / "d.thermal.toml").write_text(PATH_NOTES)
    result = heatweave([command, "d.cir"], tmp_path)
    assert result.returncode == status, (result.stdout, result.stderr)
    assert "d.thermal.toml:7:" in result.stdout + result.stderr, result.stdout + result.stderr


# An annotated resistor's card with a name after its value: ngspice 39 reads the name as
# the card's model and refuses the card when no .model defines it ("unknown parameter");
# heatweave read the value alone and reported a 2 ohm resistor for "{big}k". (card lines,
# the annotated part, whether stock ngspice 39 loads the deck: checked in the test.)
MODEL_CARDS = [
    ("R1 in a {big}k", "R1", False),
    ("R1 in a {big} k", "R1", False),
    ("R1 in a 2k nosuch", "R1", False),
    ("R1 in a 2k rmod\n.model rmod R(tc1=0)", "R1", True),
    ("R1 in a 2k RMOD\n.model rmod R(tc1=0)", "R1", True),
    (".subckt leg p q\nRL p q 2k lmod\n.model lmod R(tc1=0)\n.ends\nX1 in a leg", "X1.RL", True),
]


@pytest.mark.ngspice
@pytest.mark.parametrize(("cards", "part", "accepted"), MODEL_CARDS)
def test_an_annotated_resistor_naming_an_undefined_model_is_refused(
    tmp_path: Path, cards: str, part: str, accepted: bool
) -> None:
    deck = f"model names\n.param big=2\nV1 in 0 DC 5\n{cards}\nR2 a 0 2k\n.op\n.end\n"
    (tmp_path / "d.cir").write_text(deck)
    (tmp_path / "d.thermal.toml").write_text(
        f'schema = 1\n[part."{part}"]\nmodel = "linear"\ntc1_ppm = 100\nrth = 50\ncth = 0.1\n'
    )
    plain = subprocess.run(
        ["ngspice", "-b", "d.cir"], cwd=tmp_path, capture_output=True, text=True, timeout=60
    )
    refused = "unknown parameter" in plain.stdout + plain.stderr
    assert refused is not accepted, plain.stdout + plain.stderr
    for command in ("emit", "run"):
        result = heatweave([command, "d.cir"], tmp_path)
        assert result.returncode == (0 if accepted else 2), (command, result.stderr)
        if not accepted:
            # the model check names the model; a word glued to a brace ({big}k) is named
            # as ngspice 39 names it, before the model check runs
            said = "no .model card defines" if "{big}k" not in cards else "unknown parameter (k)"
            assert "d.cir:4:" in result.stderr and said in result.stderr
