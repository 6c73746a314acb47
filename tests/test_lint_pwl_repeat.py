"""A source's ``PWL(...) r= td=``: lint's verdict is ngspice 39's, row by row.

Each row is run through stock ngspice in the test: a row ngspice refuses (or never finishes)
is a located lint error, and ``run`` refuses it before ngspice sees it; a row it runs draws
no error.  What ngspice 39.3 did when these rows were written (manual 4.1.4 for the
forms): a V source's PWL repeats from ``r``, which must be one of its times as ngspice reads
the numbers ("does not match any time point given"), and not after the last ("must be
smaller than final time point"); ``r`` equal to the last time never finishes; a negative
``r`` holds the last value; ``td=`` delays it.  A current source takes neither ``r=`` nor
``td=`` ("unknown parameter"), whatever its function.
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.checks.lint import lint_file
from heatweave.cli import main

pytestmark = [
    pytest.mark.ngspice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice"),
]

WAVE = "PWL(0 0 1m 1 2m 0)"

# (source card, the key lint's error points at (its last one on the card) or None for no
#  error, words of lint's message)
ROWS = [
    (f"V1 a 0 {WAVE} r=0", None, ""),
    (f"V1 a 0 {WAVE} r=1m", None, ""),
    (f"V1 a 0 {WAVE} r=0.001", None, ""),  # the same double as 1m
    (f"V1 a 0 {WAVE} r=-1", None, ""),
    (f"V1 a 0 {WAVE} r=-2", None, ""),
    (f"V1 a 0 {WAVE} td=1m", None, ""),
    (f"V1 a 0 {WAVE} r=0 td=1m", None, ""),
    ("V1 a 0 PWL(0 0 1m 1 2m 0 r=0)", None, ""),
    ("V1 a 0 PWL(0 0 2.5m 1 5m 0) r=0.0025", None, ""),
    (f"V1 a 0 {WAVE} r=0.5m", "r", "not one of its time points"),
    (f"V1 a 0 {WAVE} r=0.9999m", "r", "not one of its time points"),
    ("V1 a 0 PWL(0 0 0.3m 1 0.7m 0) r=300u", "r", "not one of its time points"),
    ("V1 a 0 PWL(0 0 1m 1 2m 0 r=0.5m)", "r", "not one of its time points"),
    (f"V1 a 0 {WAVE} r=1m r=0.5m", "r", "not one of its time points"),  # the last one wins
    ("V1 a 0 PWL(1m 0 2m 1 3m 0) r=0", "r", "not one of its time points"),
    (f"V1 a 0 {WAVE} r=3m", "r", "after its last time point"),
    (f"V1 a 0 {WAVE} r=2m", "r", "its last time point"),  # ngspice never finishes
    ("V1 a 0 PWL(0 1) r=0", "r", "its last time point"),
    (f"I1 0 a {WAVE}", None, ""),
    (f"I1 0 a {WAVE} r=0", "r", "a current source takes no r="),
    (f"I1 0 a {WAVE} r=-1", "r", "a current source takes no r="),
    (f"I1 0 a {WAVE} td=1m", "td", "a current source takes no td="),
    ("I1 0 a PWL(0 0 1m 1 2m 0 td=1m)", "td", "a current source takes no td="),
    ("I1 0 a SIN(0 1m 1k) td=1m", "td", "a current source takes no td="),
]


def deck_text(card: str) -> str:
    return f"repeat probe\n{card}\nR1 a 0 1k\n.tran 10u 5m\n.end\n"


def ngspice_refuses(deck: Path) -> bool:
    """ngspice 39 refused the deck, or had not finished it after 20 s (a 5 ms transient of
    two elements takes well under a second)."""
    try:
        done = subprocess.run(
            ["ngspice", "-b", "-r", "out.raw", str(deck)],
            capture_output=True, text=True, timeout=20, cwd=deck.parent,
        )  # fmt: skip
    except subprocess.TimeoutExpired:
        return True
    log = (done.stdout + done.stderr).lower()
    return done.returncode != 0 or "error" in log


@pytest.mark.parametrize(("card", "key", "words"), ROWS, ids=[r[0] for r in ROWS])
def test_lint_follows_ngspice(tmp_path: Path, card: str, key: str | None, words: str) -> None:
    deck = tmp_path / "probe.cir"
    deck.write_text(deck_text(card))
    refused = ngspice_refuses(deck)
    errors = [f for f in lint_file(str(deck)) if f.severity == "error"]
    assert refused == (key is not None)  # the row says what ngspice does
    if key is None:
        assert errors == []
        return
    assert len(errors) == 1 and words in errors[0].message
    location = errors[0].location
    column = card.rfind(f" {key}=") + 2  # 1-based, at the key
    assert location is not None and (location.line, location.column) == (2, column)


@pytest.mark.parametrize("card", [f"V1 a 0 {WAVE} r=2m", f"I1 0 a {WAVE} r=0"])
def test_run_refuses_before_ngspice(tmp_path: Path, card: str) -> None:
    deck = tmp_path / "probe.cir"
    deck.write_text(deck_text(card))
    (tmp_path / "probe.thermal.toml").write_text(
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = 50\ncth = 0.01\n'
    )
    result = CliRunner().invoke(main, ["run", str(deck), "--method", "full", "--timeout", "60"])
    assert result.exit_code == 2, result.output
    assert "probe.cir:2:" in result.output
