"""Conformance: lint and emit read every deck as ngspice 39 does, checked both ways.

Each deck here was written for this suite, one construct (or one family of cards) of the
ngspice manual's netlist chapter (2 to 11) or XSPICE chapter (12) at a time; the name says
which.  ``accept/`` holds decks ngspice 39 loads and runs: ngspice must accept each one
(run in the test), ``lint`` must exit 0, ``emit`` must write it back byte for byte, and
``emit`` with an annotation on ``Rsense`` must give a deck ngspice accepts too.  ``reject/``
holds decks ngspice 39 refuses (issue 14): ngspice must refuse each one, saying the words
in the table, ``lint`` must exit 1 saying its own, and ``run`` must refuse it with exit 2
before ngspice sees it.  So lint's exit status follows ngspice's acceptance on every deck.

"ngspice accepts a deck" is decided from its batch output (``ngspice -b``): it loaded a
circuit (a ``Circuit:`` line), printed no line holding the word ``error`` (model listings'
``<<NAN, error = 7>>`` aside: those are parameter dumps, not messages), and exited 0, or
1 with no error (ngspice 39 exits 1 when a deck has analyses but no ``.print`` line: "no
simulations run"); a crash or an assertion exits with a signal's status.
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main
from heatweave.cli.emit_cmd import emit
from heatweave.cli.lint_cmd import lint
from heatweave.cli.run_cmd import run

HERE = Path(__file__).parent
ACCEPT = sorted((HERE / "accept").glob("*.cir"))
# deck: (words lint prints, words ngspice 39.3 prints; None: no message, see the verdict)
REJECT = {
    "r01_unknown_dot": ("unknown dot card .foo", "unimplemented control card"),
    "r02_misspelled_analysis": ("unknown dot card .trans", "unimplemented control card"),
    "r03_undefined_param": ("parameter 'rmissing' is not defined", "Undefined parameter"),
    "r04_circular_param": ("depends on itself", "circular parameter dependency"),
    "r05_self_param": ("depends on itself", "Undefined parameter"),
    "r06_recursive_subckt": ("subcircuit cell instantiates itself", "unknown subckt"),
    "r07_mutual_subckt": ("instantiates itself", "unknown subckt"),
    "r08_nan_value": ("has the value nan", "unknown parameter (nan)"),
    "r09_inf_value": ("has the value inf", "unknown parameter (inf)"),
    "r10_infinite_expression": ("has no finite value", "unknown parameter (inf)"),
    "r11_unbalanced_open": ("unbalanced parenthesis", 'Closing ")" not found'),
    "r12_unbalanced_close": ("unbalanced parenthesis", "Expression err"),
    "r13_empty": ("the deck holds no circuit", None),  # no circuit loaded at all
    "r14_title_only_op": ("the deck holds no circuit", None),  # ngspice aborts (assertion)
    "r15_duplicate": ("duplicate element name Rsense", "device already exists"),
    "r16_duplicate_case": ("duplicate element name RSENSE", "device already exists"),
    "r17_duplicate_in_subckt": ("duplicate element name R1", "device already exists"),
    "r18_duplicate_in_branch": ("duplicate element name Rsense", "device already exists"),
    "r19_undefined_in_if": ("parameter 'nosuch' is not defined", "Undefined parameter"),
    "r20_lib_cycle": ("include cycle", "unimplemented control card"),
    "r21_param_title": ("the title line starts with .param", "title line is missing"),
    "r22_control_eof_models": ("has no .endc, and D1 uses a model", "valid modelname"),
    "r23_func_after_question": ("a .func call right after '?'", "Expression err"),
    "r24_three_inductor_k": ("a K card couples exactly two inductors", "unknown parameter (lt)"),
    "r25_if_never_closed": (".if is never closed", "Mismatch of .if ... .endif"),
    "r26_endif_without_if": (".endif without .if", "Mismatch of .if ... .endif"),
    "r27_subckt_too_many_nodes": (
        "connects 3 node(s) to subcircuit leg of 2 port(s)",
        "Too many parameters for subcircuit type",
    ),
    "r28_subckt_too_few_nodes": (
        "connects 1 node(s) to subcircuit leg of 2 port(s)",
        "Too few parameters for subcircuit type",
    ),
    "r29_undefined_diode_model": ("no .model card defines one", "could not find a valid modelname"),
    "r30_undefined_resistor_model": (
        "names the model 'nosuch', which no .model card defines",
        "unknown parameter (nosuch)",
    ),
    "r31_undefined_func": (
        "calls the function 'foo', which no .func defines",
        "Cannot compute substitute",
    ),
    "r32_undefined_code_model": (
        "names the code model 'nosuchgain', which no .model card defines",
        "MIF-ERROR - unable to find definition of model nosuchgain",
    ),
    "r33_undefined_mesfet_model": (
        "Z1 names the model 'nomes', and no .model card defines one",
        "Unable to find definition of model nomes",
    ),
    "r34_resistor_word_value": (
        "R2 has the value 'foo-bar', which is no number and names no model",
        "unknown parameter (foo)",
    ),
    "r35_resistor_unbraced_expression": (
        "R2 has the value 'rv*2', which is no number and names no model",
        "unknown parameter (rv)",
    ),
    "r36_resistor_undefined_word": (
        "R2 has the value 'rload', which is no number and names no model",
        "unknown parameter (rload)",
    ),
    "r37_pwl_repeat_off_grid": (
        "V1's PWL repeats from r=300u, which is not one of its time points",
        "does not match any time point given",
    ),
    "r38_current_pwl_repeat": (
        "I1: a current source takes no r=",
        "unknown parameter (r)",
    ),
    # Found by the lint/ngspice differential check, tests/fuzz/lintdiff.py (r39 on).
    "r39_param_behavioural_function": ("calls the function 'if'", "Formula() error"),
    "r40_capacitor_model_after_value": (
        "C1 has the word 'cpoly' after its value", "unknown parameter (cpoly)",
    ),
    "r41_resistor_tc_list": ("tc= takes one value, not a list", "unknown parameter (1u)"),
    "r42_diode_bare_area": (
        "D1 gives its area as a bare number", "could not find a valid modelname",
    ),
    "r43_mesfet_initial_condition": ("Z1 has ic=", "unknown parameter (ic)"),
    "r44_bsim_instance_temperature": (
        "dtemp=, which the level 8 model does not take", "unknown parameter (dtemp)",
    ),
    "r45_vbic_collector_area": (
        "areac=, which the level 4 model does not take", "unknown parameter (areac)",
    ),
    "r46_resistor_model_after_brace": (
        "names the model rtemp after the value {rnom}", "unknown parameter (rtemp)",
    ),
    "r47_short_options_word": (
        ".opt is read as .options, but its values as expressions", "Undefined parameter [gear]",
    ),
    "r48_resistor_word_glued_to_brace": (
        "has the word 'k' glued to its value {rnom}", "unknown parameter (k)",
    ),
    "r49_resistor_keyword_word_glued": (
        "has the word 'k' glued to its value {rnom}", "unknown parameter (k)",
    ),
    # .lib cards keep ';' and '//' in the section name (r50 on).
    "r50_lib_section_semicolon": (
        "library section 'fast;glued' not found", "section definition fast;glued not found",
    ),
    "r51_lib_section_slashes": (
        "library section 'slow//note' not found", "section definition slow//note not found",
    ),
    # A model level the build lacks, used by an element (spice/model_levels.py; r52 on).
    "r52_mosfet_level_missing": (
        "level=62, which ngspice 39 does not have", "could not find a valid modelname",
    ),
    "r53_bjt_level_missing": (
        "level=3, which ngspice 39 does not have", "Unable to find definition of given model",
    ),
}
NOTE = 'schema = 1\n[part.Rsense]\nmodel = "linear"\ntc1 = 0.001\nrth = 40.0\n'

pytestmark = [
    pytest.mark.ngspice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice"),
]

_ERROR = re.compile(r"\berror\b", re.IGNORECASE)
_MODEL_DUMP = re.compile(r"<<\s*NAN,\s*error\s*=\s*\d+\s*>>")


def ngspice(deck: Path) -> tuple[bool, str]:
    """(accepted, output) of ``ngspice -b DECK`` run in the deck's folder."""
    try:
        done = subprocess.run(
            ["ngspice", "-b", deck.name], capture_output=True, text=True, errors="replace",
            timeout=60, cwd=deck.parent,
        )  # fmt: skip
    except subprocess.TimeoutExpired:
        return False, "timed out"
    out = done.stdout + done.stderr
    loaded = re.search(r"^Circuit: ", out, re.MULTILINE) is not None
    errors = [
        line for line in out.splitlines()
        if _ERROR.search(line) and not _MODEL_DUMP.search(line)
        and not line.startswith("Circuit: ")
    ]  # fmt: skip
    accepted = loaded and not errors and done.returncode in (0, 1)
    return accepted, f"exit {done.returncode}\n{out}"


@pytest.fixture
def copied(tmp_path: Path) -> Path:
    """The suite's decks in a folder of their own (emitted decks are written beside them)."""
    shutil.copytree(HERE / "accept", tmp_path / "accept")
    shutil.copytree(HERE / "reject", tmp_path / "reject")
    return tmp_path


@pytest.mark.parametrize("name", [d.stem for d in ACCEPT])
def test_ngspice_accepts_lint_and_emit_accept(copied: Path, name: str) -> None:
    deck = copied / "accept" / f"{name}.cir"
    accepted, out = ngspice(deck)
    assert accepted, out
    runner = CliRunner()
    linted = runner.invoke(lint, [str(deck)])
    assert linted.exit_code == 0, linted.output
    assert " error: " not in linted.output
    written = copied / "accept" / f"{name}.out"
    emitted = runner.invoke(emit, [str(deck), "-o", str(written)])
    assert emitted.exit_code == 0, emitted.output
    assert written.read_bytes() == deck.read_bytes()


@pytest.mark.parametrize("name", [d.stem for d in ACCEPT])
def test_annotated_emit_is_accepted_too(copied: Path, name: str) -> None:
    # Only annotating an element heatweave cannot analyse may be refused: here the plain
    # resistor Rsense is annotated in every deck, beside the A, K, .if and .lib cards.
    deck = copied / "accept" / f"{name}.cir"
    note = copied / "accept" / f"{name}.toml"
    note.write_text(NOTE)
    written = copied / "accept" / f"{name}-hw.cir"
    emitted = CliRunner().invoke(emit, [str(deck), "-a", str(note), "-o", str(written)])
    assert emitted.exit_code == 0, emitted.output
    assert "Rhw" in written.read_text() or "rhw" in written.read_text().lower()
    accepted, out = ngspice(written)
    assert accepted, out


@pytest.mark.parametrize("name", sorted(REJECT))
def test_ngspice_rejects_lint_and_run_reject(copied: Path, name: str) -> None:
    lint_words, ngspice_words = REJECT[name]
    deck = copied / "reject" / f"{name}.cir"
    accepted, out = ngspice(deck)
    assert not accepted, out
    if ngspice_words is not None:
        assert ngspice_words in out, out
    runner = CliRunner()
    linted = runner.invoke(lint, [str(deck)])
    assert linted.exit_code == 1, linted.output
    assert lint_words in linted.output, linted.output
    note = copied / "reject" / "empty.toml"
    note.write_text("schema = 1\n")
    refused = runner.invoke(run, [str(deck), "-a", str(note), "--op", "--backend", "batch"])
    assert refused.exit_code == 2, refused.output
    assert lint_words in refused.output, refused.output


def test_every_deck_is_in_a_table() -> None:
    names = {d.stem for d in (HERE / "reject").glob("*.cir")}
    assert names == set(REJECT)
    assert len(ACCEPT) >= 30


@pytest.mark.parametrize("command", ["check", "settle", "sweep"])
def test_every_simulating_command_refuses_before_ngspice(copied: Path, command: str) -> None:
    deck = copied / "reject" / "r15_duplicate.cir"
    note = copied / "reject" / "empty.toml"
    note.write_text("schema = 1\n")
    refused = CliRunner().invoke(main, [command, str(deck), "-a", str(note)])
    assert refused.exit_code == 2, refused.output
    assert "duplicate element name Rsense" in refused.output
