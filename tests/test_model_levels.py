"""The model-level table of ``spice/model_levels`` held against stock ngspice 39, both ways.

For every device family with a row and every level 1 to 100, one deck with one element on
a ``.model`` of that level is run through ``ngspice -b`` (``.op`` only): the level is in
the table (or is 100, which ngspice sets to 1 with a warning) exactly when ngspice does not
stop with the family's words, and ``lint`` refuses the deck exactly when ngspice does.
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli.lint_cmd import lint
from heatweave.spice.model_levels import LEVELS

pytestmark = [
    pytest.mark.slow,  # 400 ngspice runs: about 8 s
    pytest.mark.ngspice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice"),
]

# family: (element card, model type, ngspice 39's words when it lacks the level)
DECKS = {
    "mos": ("M1 d g 0 0 dev w=10u l=1u", "nmos", "could not find a valid modelname"),
    "bjt": ("Q1 d g 0 dev", "npn", "Unable to find definition of given model"),
    "jfet": ("J1 d g 0 dev", "njf", "Unknown device type for model"),
    "mesfet": ("Z1 d g 0 dev", "nmf", "Unknown device type for model"),
}


@pytest.mark.parametrize("family", sorted(DECKS))
def test_table_matches_ngspice_every_level(tmp_path: Path, family: str) -> None:
    element, kind, words = DECKS[family]
    assert set(DECKS) == set(LEVELS)
    mismatches = []
    for level in range(1, 101):
        deck = tmp_path / f"{family}{level}.cir"
        deck.write_text(
            f"level {level}\n{element}\nVd d 0 1\nVg g 0 0.5\n"
            f".model dev {kind} level={level}\n.op\n.end\n"
        )
        done = subprocess.run(
            ["ngspice", "-b", deck.name], capture_output=True, text=True, errors="replace",
            timeout=60, cwd=tmp_path,
        )  # fmt: skip
        refused = words in done.stdout + done.stderr
        listed = level in LEVELS[family] or level >= 100
        linted = CliRunner().invoke(lint, [str(deck)])
        if refused == listed or (linted.exit_code == 1) != refused:
            mismatches.append((level, refused, listed, linted.exit_code))
        if refused:
            assert f"level={level}, which ngspice 39 does not have" in linted.output
            assert f"{deck.name}:5:" in linted.output  # located on the .model card
    assert not mismatches, mismatches
