"""heatweave's own names, exactly: results keep every name of the deck's, collisions refused.

The electrothermal deck adds nodes, elements, models and subcircuit copies whose names carry
the ``hw_`` marker.  Results must leave out exactly those, and keep the deck's own names
even where they look alike (a node ``thw_1``, a node ``hw_out`` inside ``X1``, a source
``Vhw_meter``): held against stock ngspice, which lists every vector of the plain deck and
of the emitted one.  A deck already using one of heatweave's names is refused at its card,
by ``lint`` and by ``run``, never joined to heatweave's node or clashing with its element.
"""

from __future__ import annotations

import json
import shutil
from dataclasses import replace
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main
from heatweave.emit.emitter import emit_deck, header, load_inputs, thermal_circuit
from heatweave.emit.forms import FORMS
from heatweave.emit.names import added_names, own_vectors, reserved
from heatweave.errors import EXIT_BAD_INPUT
from heatweave.run import runner
from heatweave.run.prepare import RunOptions, prepare, simulate, with_deadline
from heatweave.run.results import extract
from heatweave.simulators import get_simulator
from heatweave.spice.reader import read

pytestmark = [
    pytest.mark.ngspice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice"),
]

# A divider whose names look like heatweave's: thw_1, X1's hw_out, sources Vthw and
# X1's Vhw_meter; annotated: a resistor and a diode at the top, a resistor and a diode
# inside X1 (the subcircuit is specialised, so its added names live in the copy).
DECK = """divider with names like heatweave's
V1 in 0 DC 5
Vthw in top 0
R1 top thw_1 100
D1 thw_1 a dmod
X1 a 0 leg
.subckt leg p n
RL p hw_out 1k
Vhw_meter hw_out m 0
D2 m k dmod
RM k n 1k
.ends
.model dmod D
.op
.end
"""
ANNOTATION = """schema = 1
[node.board]
rth = 15.0
cth = 2.0
[part.R1]
model = "linear"
tc1_ppm = 3900
rth = 60.0
to = "board"
[part."X1.RL"]
model = "linear"
tc1 = -0.002
foster = [[40.0, 0.05], [40.0, 0.5]]
[part.D1]
rth = 100.0
cth = 0.01
to = "board"
[part."X1.D2"]
rth = 80.0
cth = 0.01
"""


def vectors(text: str) -> set[str]:
    """The node voltages and branch currents ngspice 39 writes for an operating point."""
    sim = get_simulator("batch").run(text, analyses=("op",), deck_analyses=False)
    return {n for n in sim.plots[-1].vectors if n[:2] in ("v(", "i(")}


def plain_full_own(deck: Path, form: str) -> tuple[set[str], set[str], frozenset[str]]:
    """ngspice's vectors of *deck* and of its emitted deck in *form*, and heatweave's list."""
    inputs = load_inputs(str(deck), str(deck.with_suffix(".thermal.toml")))
    circuit, _ = thermal_circuit(inputs)
    emitted = emit_deck(inputs.project, inputs.index, circuit, header("a", "", "b", ""),
                        form=form)  # fmt: skip
    own = own_vectors(inputs.index, added_names(circuit, emitted.form, emitted.heating))
    return vectors(deck.read_text()), vectors(emitted.text), own


@pytest.fixture
def deck(tmp_path: Path) -> Path:
    path = tmp_path / "alike.cir"
    path.write_text(DECK)
    (tmp_path / "alike.thermal.toml").write_text(ANNOTATION)
    return path


@pytest.mark.parametrize("form", list(FORMS))
def test_own_vectors_are_exactly_what_the_emitted_deck_adds(deck: Path, form: str) -> None:
    """ngspice on the plain deck and on the emitted one: the vectors only the emitted deck
    has are exactly heatweave's list, and none of the deck's own is among them."""
    plain, full, own = plain_full_own(deck, form)
    assert full - plain == own
    assert {"v(thw_1)", "v(x1.hw_out)", "i(vthw)", "i(v.x1.vhw_meter)"} <= plain - own


# Two levels of instances: X1's definition holds XI of a cell defined inside it, whose
# diode (heat only) and resistor are annotated; the cell has a node hw_in of its own.
NESTED = """nested cells
V1 in 0 DC 3
X1 in 0 outer
.subckt outer p n
XI p mid cell
RO mid n 500
.subckt cell a b
RC a hw_in 200
Vhw_probe hw_in c 0
DC c b dmod
.ends
.ends
.model dmod D
.op
.end
"""
NESTED_NOTES = """schema = 1
[part."X1.XI.RC"]
model = "linear"
tc1 = 0.003
rth = 90.0
[part."X1.XI.DC"]
rth = 120.0
"""


@pytest.mark.parametrize("form", list(FORMS))
def test_own_vectors_of_nested_instances(tmp_path: Path, form: str) -> None:
    deck = tmp_path / "nested.cir"
    deck.write_text(NESTED)
    (tmp_path / "nested.thermal.toml").write_text(NESTED_NOTES)
    plain, full, own = plain_full_own(deck, form)
    assert full - plain == own
    # ngspice names a source of a cell defined inside another's definition v.x1.v.xi.NAME
    assert {"v(x1.xi.hw_in)", "i(v.x1.v.xi.vhw_probe)"} <= plain - own


def test_run_reports_every_vector_of_the_deck_and_no_other(deck: Path) -> None:
    result = CliRunner().invoke(main, ["run", str(deck), "--op", "--json", "-", "-q"])
    assert result.exit_code == 0, result.output
    data = json.loads(result.stdout)
    reported = {f"v({n})" for n in data["voltages"]} | {f"i({n})" for n in data["currents"]}
    assert reported == vectors(DECK)  # the plain deck's own vectors, as ngspice names them


def test_a_look_alike_node_is_a_probe(deck: Path) -> None:
    result = CliRunner().invoke(
        main, ["run", str(deck), "--op", "--probe", "thw_1", "--probe", "x1.hw_out"]
    )
    assert result.exit_code == 0, result.output


def test_every_element_the_emitter_writes_is_reserved(deck: Path) -> None:
    """The reserved element and definition names hold every name the emitted deck adds to
    the deck's own (read back from the emitted text, in every form)."""
    inputs = load_inputs(str(deck), str(deck.with_suffix(".thermal.toml")))
    circuit, _ = thermal_circuit(inputs)
    own = {card.name for card in read(DECK, "alike.cir").cards()}
    for form in FORMS:
        names = reserved(inputs.index, circuit, form, True)
        text = emit_deck(inputs.project, inputs.index, circuit, header("a", "", "b", ""),
                         form=form).text  # fmt: skip
        cards = list(read(text, "e.cir").cards())
        added = {c.name for c in cards if not c.is_dot} - own
        assert added <= names.elements, (form, added - names.elements)
        defined = {c.fields()[1].lower() for c in cards if c.name in (".model", ".subckt")}
        assert defined - {"dmod", "leg"} <= names.definitions, form


# (card added to the deck, the name refused, what heatweave adds under that name)
COLLISIONS = [
    ("Rz hw_amb 0 1k", "hw_amb", "a node"),  # the ambient source's node
    ("Rz z hw_n_board 1k", "hw_n_board", "a node"),  # the shared node
    ("Rz z hw_s_d1_1 1k", "hw_s_d1_1", "a node"),  # the diode's sensed terminal
    ("Rz hw_drive 0 1k", "hw_drive", "a node"),  # the runaway continuation's drive
    ("Rz hw_hs1 0 1k", "hw_hs1", "a node"),  # the state scan's index of its second part
    ("Vhw_hold0 z 0 0", "Vhw_hold0", "an element"),  # the state scan's holding source
    ("Bhw_p_r1 z 0 I = 1m", "Bhw_p_r1", "an element"),  # the resistor's heat source
    ("Rhw_r1_1 z 0 1k", "Rhw_r1_1", "an element"),  # its thermal resistance
    ("Vhw_amb z 0 1", "Vhw_amb", "an element"),  # the ambient source
    ("Vhw_s_d1_1 z 0 0", "Vhw_s_d1_1", "an element"),  # the diode's current sense
    ("Rhw_fix_r1 z 0 1k", "Rhw_fix_r1", "an element"),  # settle's held resistor
    ("Xz z 0 leg__hw_x1", "leg__hw_x1", "a model or subcircuit"),  # X1's specialised copy
]


@pytest.mark.parametrize(("card", "name", "kind"), COLLISIONS)
def test_a_deck_using_a_reserved_name_is_refused_at_its_card(
    tmp_path: Path, card: str, name: str, kind: str
) -> None:
    path = tmp_path / "clash.cir"
    path.write_text(DECK.replace(".model dmod D\n", f"{card}\nRzz z 0 1k\n.model dmod D\n"))
    (tmp_path / "clash.thermal.toml").write_text(ANNOTATION)
    words = f"clash.cir:13:1: error: the deck already uses the name '{name}', which " \
        f"heatweave reserves: it adds {kind} of that name"  # fmt: skip
    linted = CliRunner().invoke(main, ["lint", str(path)])
    assert linted.exit_code == 1 and words in linted.output, linted.output
    ran = CliRunner().invoke(main, ["run", str(path), "--op"])
    assert ran.exit_code == EXIT_BAD_INPUT and words in ran.output, ran.output


@pytest.mark.parametrize("card", ["Rhw_t_r1 z 0 1k", "Rz z hw_out2 1k", "Bhw_p_mine z 0 I = 1m"])
def test_a_look_alike_name_that_clashes_with_nothing_runs(tmp_path: Path, card: str) -> None:
    """An element named like a hot-spot node, a node or source of a name heatweave never
    writes: the deck runs."""
    path = tmp_path / "free.cir"
    path.write_text(DECK.replace(".model dmod D\n", f"{card}\nRzz z 0 1k\n.model dmod D\n"))
    (tmp_path / "free.thermal.toml").write_text(ANNOTATION)
    ran = CliRunner().invoke(main, ["run", str(path), "--op", "-q"])
    assert ran.exit_code == 0, ran.output


def test_a_limit_on_a_look_alike_node_is_checked(tmp_path: Path) -> None:
    path = tmp_path / "limits.cir"
    path.write_text(DECK)
    limits = '[limit."V(thw_1)"]\nmax = 6\n[limit."V(x1.hw_out)"]\nmin = 0.5\n'
    (tmp_path / "limits.thermal.toml").write_text(ANNOTATION + limits)
    result = CliRunner().invoke(main, ["check", str(path), "--op"])
    assert result.exit_code == 0, result.output
    assert "2 limits checked, 0 violated" in result.output


# An RTD (IEC 60751 model) inside a cell, driven at 50 mA: a plausible run.  At 1 A stock
# ngspice 39's gmin stepping overflows in its heat source and names it so (checked by hand
# with ngspice -b on the emitted deck): "Error: -1.13002e+200, 2 out of range for ^" then
# "    in line b.x1.bhw_p_x1_rpt".
RTD_CELL = """rtd inside a cell
IEXC 0 top DC 50m
RLEAD1 top hi 0.4
X1 hi lo probe
RLEAD2 lo 0 0.4
.subckt probe a b
RPT a b 100
.ends
.op
.end
"""
RTD_NOTES = 'schema = 1\n[part."X1.RPT"]\nmodel = "rtd"\nrth = 250.0\ncth = 0.2\n'


@pytest.mark.parametrize(("device", "suspected"), [
    ("b.x1.bhw_p_x1_rpt", True),  # heatweave's heat source, as ngspice names it in X1
    ("b.x1.bthw_p_x1_rpt", False),  # a deck's own source that merely looks alike
])  # fmt: skip
def test_an_overflow_is_heatweaves_only_in_its_own_sources(
    tmp_path: Path, device: str, suspected: bool
) -> None:
    (tmp_path / "cell.cir").write_text(RTD_CELL)
    (tmp_path / "cell.thermal.toml").write_text(RTD_NOTES)
    inputs = load_inputs(str(tmp_path / "cell.cir"), str(tmp_path / "cell.thermal.toml"))
    options = with_deadline(RunOptions(backend="batch"))
    prepared = prepare(inputs, options)
    sim = simulate(prepared, options)
    results = extract(sim, prepared.emitted, inputs.index)
    assert not runner.suspect(results, sim, prepared, inputs)  # plausible, nothing overflowed
    overflow = "Error: -1.13002e+200, 2 out of range for ^\n    in line " + device + "\n"
    logged = replace(sim, log=overflow + sim.log)
    assert runner.suspect(results, logged, prepared, inputs) is suspected
