"""The solver tolerances the balance check follows: the deck's options cards, read from the
deck tree (spice/options.py) as ngspice 39 reads them.

Each row is a deck of our own; stock ngspice, given the same deck with a ``.control``
block that lists its options (the ``option`` command), is the outside check of what it
set.  The balance takes the loosest value a deck gives (never tighter than ngspice's
defaults, reltol 1e-3 and vntol 1 uV: manual 15.1.1).
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest

from heatweave.emit.emitter import load_inputs
from heatweave.run.prepare import RunOptions, prepare
from heatweave.run.verify import solver_tolerances
from heatweave.spice.reader import read

NGSPICE = shutil.which("ngspice")
DEFAULT_RELTOL, DEFAULT_VNTOL = 1e-3, 1e-6  # ngspice manual 15.1.1

ROWS = [
    ("* none\n", 1e-3, 1e-6),
    (".opt reltol=1e-2\n", 1e-2, 1e-6),  # any name starting .opt (the old reader missed it)
    (".optxyz reltol=0.0222\n", 0.0222, 1e-6),
    (".option\n+ reltol=1e-2 vntol=1m\n", 1e-2, 1e-3),  # continuation (missed before)
    (".options abstol=1n $ reltol=0.0444\n", 1e-3, 1e-6),  # inline comment (read before)
    (".options reltol = 0.0333\n", 0.0333, 1e-6),
    (".options reltol=5e-2, vntol=2m\n", 5e-2, 2e-3),
    ("* .options reltol=0.5\n", 1e-3, 1e-6),  # a comment line sets nothing
    (".subckt s p\n.options reltol=0.0123\nR p 0 1\n.ends\nX1 a s\n", 0.0123, 1e-6),
    (".if (0)\n.options vntol=0.0456\n.endif\n", 1e-3, 0.0456),  # inactive branch: still read
]


def deck_of(cards: str) -> str:
    return f"options deck\nV1 a 0 1\nR1 a 0 1\n{cards}.op\n.end\n"


@pytest.mark.parametrize(("cards", "reltol", "vntol"), ROWS)
def test_options_as_ngspice_reads_them(cards: str, reltol: float, vntol: float) -> None:
    got = solver_tolerances(read(deck_of(cards)))
    assert got == pytest.approx((max(reltol, DEFAULT_RELTOL), max(vntol, DEFAULT_VNTOL) - 1e-6))


@pytest.mark.ngspice
@pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed")
@pytest.mark.parametrize(("cards", "reltol", "vntol"), ROWS)
def test_the_rows_are_what_ngspice_sets(
    tmp_path: Path, cards: str, reltol: float, vntol: float
) -> None:
    text = deck_of(cards).replace(".end\n", ".control\nop\noption\n.endc\n.end\n")
    (tmp_path / "o.cir").write_text(text)
    out = subprocess.run(
        [str(NGSPICE), "-b", "o.cir"], capture_output=True, text=True, timeout=60, cwd=tmp_path
    )
    listed = dict(re.findall(r"(?m)^(reltol|vntol)\s+\([a-z]+\)\s+=\s+(\S+)", out.stdout))
    assert float(listed["reltol"]) == pytest.approx(reltol)
    assert float(listed["vntol"]) == pytest.approx(vntol)


def test_a_brace_value_is_not_read() -> None:
    # ngspice evaluates {0.01*5} to 0.05; heatweave does not read it and keeps the
    # default, the tighter balance (a state may be refused, never wrongly accepted).
    assert solver_tolerances(read(deck_of(".options reltol={0.01*5}\n"))) == (1e-3, 0.0)


def test_a_subcircuit_body_counts_even_uninstanced() -> None:
    # ngspice 39 reads an options card in a .subckt body that no instance uses only when the
    # deck has an .if block somewhere (checked with its option command); heatweave counts
    # it always, as the text reader before it did: the balance may be that much looser.
    text = deck_of(".subckt s p\n.options reltol=0.0123\nR p 0 1\n.ends\n")
    assert solver_tolerances(read(text)) == pytest.approx((0.0123, 0.0))


def test_options_in_an_included_file_count(tmp_path: Path) -> None:
    # The prepared deck has its includes inlined (run/safedeck.py): ngspice reads one file.
    (tmp_path / "opts.inc").write_text("* solver settings\n.options reltol=1e-2 vntol=1m\n")
    (tmp_path / "d.cir").write_text("d\nV1 a 0 5\nRB a 0 100\n.include opts.inc\n.op\n.end\n")
    (tmp_path / "d.thermal.toml").write_text(
        'schema = 1\n[part.RB]\nmodel = "linear"\ntc1 = 0.004\nrth = 30.0\n'
    )
    inputs = load_inputs(str(tmp_path / "d.cir"), str(tmp_path / "d.thermal.toml"))
    prepared = prepare(inputs, RunOptions())
    assert solver_tolerances(prepared.deck) == pytest.approx((1e-2, 1e-3 - 1e-6))
