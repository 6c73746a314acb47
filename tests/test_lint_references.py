"""Decks whose models, subcircuits and functions ngspice 39 finds (in includes, .lib
sections, subcircuits, .param names) pass lint and run's refusals; the refused side is in
tests/conformance/reject (r27 to r31).  Stock ngspice is run on each deck in the test."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli.lint_cmd import lint

pytestmark = [
    pytest.mark.ngspice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice"),
]

INC = ".model dinc D(is=1e-14)\n.func half(x) {x/2}\n"
LIB = "* lib\n.lib mods\n.model qlib NPN(bf=100)\n.endl mods\n"
# (cards after V1/R1, what they exercise)
ACCEPTED = [
    (".include inc.lib\nD1 a 0 dinc", "a diode model from an include"),
    (".lib sect.lib mods\nQ1 a b 0 qlib\nRb a b 10k", "a transistor model from a .lib section"),
    (".lib sect.lib mods\nQ2 a b 0 0 qlib\nRb a b 10k", "a model after the substrate node"),
    (".subckt leg p q\nD2 p q dsub\n.model dsub D\n.ends\nX1 a 0 leg", "a model in a subckt"),
    ("M1 a b 0 0 nch w=1u l=1u\n.model nch nmos level=1\nRb a b 10k", "a MOSFET's model"),
    ("J1 a b 0 jm\n.model jm NJF\nRb a b 10k", "a JFET's model"),
    (".include inc.lib\nR3 a 0 {half(4k)}", "a .func from an include"),
    ("R4 a 0 2k rm\n.model rm R(tc1=0)", "a resistor model that is defined"),
    (".param rval=2k\nR2 a 0 rval", "a resistor whose value is a parameter name"),
    (
        ".subckt leg p q params: k=1\nRL p q {k*1k}\n.ends\nX1 a 0 leg params: k=2",
        "an instance with params: and the right node count",
    ),
]


@pytest.mark.parametrize(("cards", "what"), ACCEPTED, ids=[w for _, w in ACCEPTED])
def test_defined_references_pass_lint(tmp_path: Path, cards: str, what: str) -> None:
    (tmp_path / "inc.lib").write_text(INC)
    (tmp_path / "sect.lib").write_text(LIB)
    deck = tmp_path / "d.cir"
    deck.write_text(f"{what}\nV1 in 0 DC 5\nR1 in a 1k\n{cards}\n.op\n.end\n")
    plain = subprocess.run(
        ["ngspice", "-b", deck.name], cwd=tmp_path, capture_output=True, text=True, timeout=60
    )
    out = plain.stdout + plain.stderr
    assert "Circuit: " in out and "Error" not in out and "interrupted" not in out, out
    linted = CliRunner().invoke(lint, [str(deck)])
    assert linted.exit_code == 0, linted.output
