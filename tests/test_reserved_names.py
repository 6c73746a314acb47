"""A deck that already uses a name heatweave adds is refused by every method alike.

The electrothermal deck adds nodes and elements whose names carry the reserved ``hw_``
marker; a deck already using one of them is refused at its card (exit 2), never renamed.
The co-simulation writes no such card, but it must refuse the same decks: a deck's result
must not depend on the method that ran it (and heatweave's own names are left out of the
reported node voltages).  One check, :func:`heatweave.emit.placement.refuse_reserved`,
runs for both.  The deck is a sine-driven divider whose thermal time constants (from 0.05 s
up) are at least 20 times its period, so ``--method cosim`` applies to it.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main
from heatweave.errors import EXIT_BAD_INPUT

pytestmark = [
    pytest.mark.ngspice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice"),
]

DECK = """self-heated divider under a sine drive
V1 in 0 SIN(0 14.142 1k)
R1 in {mid} 100
R2 {mid} 0 100
Rload {mid} 0 10k
.tran 10u 30m 0 2u
.end
"""
ANNOTATION = """schema = 1
[ambient]
temperature = 25.0
[node.board]
rth = 20.0
cth = 1.0
[part.R1]
model = "linear"
tc1 = 0.004
rth = 50.0
cth = 0.002
to = "board"
[part.R2]
model = "linear"
tc1 = -0.002
foster = [[40.0, 0.05], [40.0, 0.5]]
"""

# Node names the electrothermal deck adds for this annotation: R1's hot spot, the ambient
# source's node, the shared node, and the inner node of R2's two-stage Foster network.
RESERVED = ["hw_t_r1", "hw_amb", "hw_n_board", "hw_r2_n1"]


def write(tmp_path: Path, mid: str) -> str:
    deck = tmp_path / "divider.cir"
    deck.write_text(DECK.format(mid=mid))
    (tmp_path / "divider.thermal.toml").write_text(ANNOTATION)
    return str(deck)


@pytest.mark.parametrize("method", ["full", "cosim", "auto"])
@pytest.mark.parametrize("name", RESERVED)
def test_every_method_refuses_a_reserved_name(tmp_path: Path, name: str, method: str) -> None:
    deck = write(tmp_path, name)
    result = CliRunner().invoke(main, ["run", deck, "--method", method])
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert f"divider.cir:3:1: error: the deck already uses the name '{name}', which " \
        "heatweave reserves" in result.output


@pytest.mark.parametrize("method", ["full", "cosim"])
def test_a_free_name_runs_by_either_method(tmp_path: Path, method: str) -> None:
    deck = write(tmp_path, "mid")
    result = CliRunner().invoke(main, ["run", deck, "--method", method])
    assert result.exit_code == 0, result.output


@pytest.mark.parametrize("form", ["reference", "switch", "divider"])
@pytest.mark.parametrize("heating", [True, False])
def test_the_check_knows_every_name_the_emitter_adds(
    tmp_path: Path, form: str, heating: bool
) -> None:
    """The names the check derives from the thermal circuit are those the emitter records
    while writing (every form, with and without heating, a heat-only part and a subcircuit
    instance among them)."""
    from heatweave.emit.emitter import emit_deck, header, load_inputs, thermal_circuit
    from heatweave.emit.placement import reserved_nodes
    from heatweave.thermal.circuit import AMBIENT_NODE

    deck = tmp_path / "mixed.cir"
    deck.write_text(
        "mixed parts\nV1 in 0 DC 5\nR1 in mid 100\nD1 mid a dmod\nX1 a 0 leg\n"
        ".subckt leg p n\nRL p n 1k\n.ends\n.model dmod D\n.op\n.end\n"
    )
    notes = tmp_path / "mixed.thermal.toml"
    notes.write_text(
        ANNOTATION.replace("[part.R2]", "[part.\"X1.RL\"]")
        + '[part.D1]\nrth = 100.0\ncth = 0.01\nto = "board"\n'
    )
    inputs = load_inputs(str(deck), str(notes))
    circuit, _ = thermal_circuit(inputs)
    emitted = emit_deck(inputs.project, inputs.index, circuit, header("a", "", "b", ""),
                        form=form, heating=heating)  # fmt: skip
    recorded = {*emitted.added_nodes, AMBIENT_NODE, *(n.node for n in circuit.nodes)}
    assert set(reserved_nodes(circuit, form, heating)) == recorded
