"""``heatweave lint`` on purpose-built decks, and the exact place and words of each error."""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.checks.lint import lint_file
from heatweave.cli.lint_cmd import lint

FIXTURES = Path(__file__).parent / "fixtures" / "lint"


def rendered(path: Path) -> list[str]:
    return [f.render().split(" (hint:")[0] for f in lint_file(str(path))]


def test_clean_deck_has_no_findings() -> None:
    assert rendered(FIXTURES / "clean.cir") == []


def test_structural_findings() -> None:
    deck = FIXTURES / "structure.cir"
    prefix = f"{deck}:"
    assert rendered(deck) == [
        prefix + f"4:1: error: duplicate element name R1 (first at {deck}:3)",
        prefix + "5:6: error: expected a node name",
        prefix + "6:1: error: X1 uses unknown subcircuit 'nosuch'",
        prefix + "6:1: warning: node a has a single connection (X1)",
        prefix + "6:1: warning: node b has a single connection (X1)",
        prefix + "7:1: error: .ends without .subckt",
        prefix + "8:1: warning: node lonely has a single connection (Rfloat)",
    ]


def test_unclosed_blocks() -> None:
    deck = FIXTURES / "unclosed.cir"
    found = rendered(deck)
    assert f"{deck}:4:1: error: .subckt never is never closed" in found
    assert f"{deck}:6:1: warning: .control without .endc runs to the end of the file" in found


# Bad snippets: (deck body after the title, line, column, message).
BAD = [
    ("R1 a\n", 2, 5, "expected a node name"),
    ("R1 a b {2*x\n", 2, 8, "unbalanced '{'"),
    ("V1 a 0 1\n.model\n", 3, 7, "expected a model name"),
    ("V1 a 0 1\nR1 a 0\n+ {1k\n", 4, 3, "unbalanced '{'"),
]


@pytest.mark.parametrize(("body", "line", "column", "message"), BAD)
def test_bad_snippets(tmp_path: Path, body: str, line: int, column: int, message: str) -> None:
    deck = tmp_path / "bad.cir"
    deck.write_text("title\n" + body)
    errors = [f for f in lint_file(str(deck)) if f.severity == "error"]
    assert errors, "no error found"
    first = errors[0]
    assert first.location is not None
    assert (first.location.line, first.location.column, first.message) == (line, column, message)


def test_cli_exit_status_and_format(tmp_path: Path) -> None:
    runner = CliRunner()
    ok = runner.invoke(lint, [str(FIXTURES / "clean.cir")])
    assert ok.exit_code == 0 and ok.output == ""
    bad = runner.invoke(lint, [str(FIXTURES / "structure.cir")])
    assert bad.exit_code == 1
    assert "structure.cir:4:1: error: duplicate element name R1" in bad.output
    assert "Traceback" not in bad.output


def test_lint_validates_the_annotation_file(tmp_path: Path) -> None:
    deck = tmp_path / "amp.cir"
    deck.write_text("amp\nV1 in 0 1\nRSENSE in 0 1\n.op\n.end\n")
    (tmp_path / "amp.thermal.toml").write_text(
        'schema = 1\n[part.RSENS]\nmodel = "linear"\ntc1 = 0\nrth = 1.0\n'
    )
    findings = lint_file(str(deck))
    assert any('"RSENS" is not in' in f.message for f in findings)
    assert any(f.location and f.location.line == 2 for f in findings)


NOTES = 'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = 1.0\n'
# What emit and check reject must fail lint too: (deck body, annotation, file, line, words).
REJECTED_LATER = [
    # check: a limit on a node the deck does not have
    (
        "V1 in 0 1\nR1 in out 1\nR2 out 0 1\n.op\n",
        NOTES + '[limit."V(outt)"]\nmax = 1.0\n',
        "amp.thermal.toml",
        6,
        'names node "outt"',
    ),
    # emit: the deck already uses a name heatweave adds for R1's hot spot
    (
        "V1 in 0 1\nR1 in hw_t_r1 1\nR2 hw_t_r1 0 1\n.op\n",
        NOTES,
        "amp.cir",
        3,
        "which heatweave reserves",
    ),
]


@pytest.mark.parametrize(
    ("body", "notes", "file", "line", "words"), REJECTED_LATER, ids=["limit", "reserved"]
)
def test_lint_finds_what_emit_and_check_reject(
    tmp_path: Path, body: str, notes: str, file: str, line: int, words: str
) -> None:
    deck = tmp_path / "amp.cir"
    deck.write_text("amp\n" + body + ".end\n")
    (tmp_path / "amp.thermal.toml").write_text(notes)
    errors = [f for f in lint_file(str(deck)) if f.severity == "error"]
    assert [words in f.message for f in errors] == [True], errors
    assert errors[0].location is not None
    assert (errors[0].location.file, errors[0].location.line) == (str(tmp_path / file), line)
    assert CliRunner().invoke(lint, [str(deck)]).exit_code == 1


def test_missing_include_is_a_finding(tmp_path: Path) -> None:
    deck = tmp_path / "inc.cir"
    deck.write_text("inc\n.include nothere.inc\n.end\n")
    (finding,) = lint_file(str(deck))
    assert finding.severity == "error" and "not found" in finding.message
    assert finding.location is not None and finding.location.line == 2


XSPICE_DECK = Path(__file__).parent / "decks" / "xspice_ports.cir"


def test_xspice_ports_count_as_connections() -> None:
    # Nodes reached through %v(), %vd(), %id(), [ ] vectors and ~ inversion are connected;
    # the flip-flop's qb output really is connected nowhere else.
    assert rendered(XSPICE_DECK) == [
        f"{XSPICE_DECK}:14:1: warning: node qb has a single connection (Aflop)"
    ]


def test_vnam_names_a_source_not_a_node(tmp_path: Path) -> None:
    deck = tmp_path / "vnam.cir"
    deck.write_text(
        "current into a multiplier\nV1 a 0 1\nVs a b 0\nR1 b 0 1k\n"
        "Am [%v(a) %vnam(Vs)] %v(p) prod\n.model prod mult\nRp p 0 1\n.end\n"
    )
    assert rendered(deck) == []


def test_emitted_switch_deck_lints_clean(tmp_path: Path) -> None:
    from heatweave.emit.emitter import emit_files

    root = Path(__file__).parents[1] / "decks" / "current-monitor"
    emitted = tmp_path / "monitor-emitted.cir"
    note = root / "monitor.thermal.toml"
    emitted.write_text(emit_files(str(root / "monitor.cir"), str(note), form="switch").text)
    assert [m for m in rendered(emitted) if "single connection" in m] == []


# A .global node is one net everywhere (ngspice manual 2.6, ".GLOBAL"): its cards in the
# subcircuits and at the top level are all connections of it.  (deck after the title,
# rendered findings with the deck's path cut off)
GLOBAL_DECKS = [
    (  # used once inside a subcircuit, driven at the top level
        ".global vbus\nV1 VBUS 0 5\nRt vbus 0 1k\nX1 0 cell\n.subckt cell n\nRg vbus n 100\n"
        ".ends\n.end\n",
        [],
    ),
    (  # used once at the top level, loaded inside a subcircuit
        ".global vcc\nV1 vcc 0 5\nX1 a cell\nRa a 0 1k\n.subckt cell n\nRg vcc n 100\n"
        "Rh vcc n 100\n.ends\n.end\n",
        [],
    ),
    (  # a node that is not global is still reported
        ".global vbus\nV1 vbus 0 5\nX1 0 cell\n.subckt cell n\nRg vbus n 100\nRx lone n 1\n"
        ".ends\n.end\n",
        ["7:1: warning: node lone has a single connection (Rx)"],
    ),
]


@pytest.mark.parametrize(("body", "expected"), GLOBAL_DECKS)
def test_global_nodes_are_connected_across_subcircuits(
    tmp_path: Path, body: str, expected: list[str]
) -> None:
    deck = tmp_path / "global.cir"
    deck.write_text("global nodes\n" + body)
    assert [m.removeprefix(f"{deck}:") for m in rendered(deck)] == expected


# Issue 17: the same element name in two branches of one .if block is not a duplicate;
# conditions heatweave cannot compute leave every branch in, and only names in the same
# branch (or outside the block) clash.  ngspice 39 keeps the branch the .param values pick.
CONDITIONAL = [
    (".param sel=2\nV1 in 0 1\n.if (sel == 1)\nRx in 0 1k\n.else\nRx in 0 2k\n.endif\n", []),
    (  # undecided (ngspice would stop on the undefined name, lint says so once)
        "V1 in 0 1\n.if (corner == 1)\nRx in 0 1k\n.elseif (corner == 2)\nRx in 0 2k\n"
        ".else\nRx in 0 3k\n.endif\n",
        [
            f"{line}: error: parameter 'corner' is not defined: ngspice 39 stops with 'Undefined "
            "parameter'"
            for line in ("3:6", "5:10")
        ],
    ),
    (  # the active branch names Rx twice
        ".param sel=1\nV1 in 0 1\n.if (sel == 1)\nRx in 0 1k\nRx in 0 2k\n.endif\n",
        ["6:1: error: duplicate element name Rx (first at {deck}:5)"],
    ),
    (  # the inactive branch's duplicate is not read by ngspice
        ".param sel=0\nV1 in 0 1\nRx in 0 3k\n.if (sel)\nRx in 0 1k\n.endif\n",
        [],
    ),
]


@pytest.mark.parametrize(("body", "expected"), CONDITIONAL)
def test_conditional_branches(tmp_path: Path, body: str, expected: list[str]) -> None:
    deck = tmp_path / "cond.cir"
    deck.write_text("conditional\n" + body + ".op\n.end\n")
    found = [m.removeprefix(f"{deck}:") for m in rendered(deck) if " error: " in m]
    assert found == [e.format(deck=deck) for e in expected]


@pytest.mark.ngspice
@pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")
def test_duplicate_names_the_file_of_the_first(tmp_path: Path) -> None:
    # Stock ngspice 39 (run here) refuses a name the deck and its include both give:
    # "device already exists".  lint names the file and line of the first, wherever it is.
    (tmp_path / "parts.inc").write_text("* parts\nR1 a 0 2k\n")
    deck = tmp_path / "top.cir"
    deck.write_text("two files\nV1 a 0 1\n.include parts.inc\nR1 a 0 1k\n.op\n.end\n")
    done = subprocess.run(
        ["ngspice", "-b", deck.name], capture_output=True, text=True, cwd=tmp_path, timeout=60
    )
    assert "device already exists" in done.stdout + done.stderr
    assert rendered(deck) == [
        f"{deck}:4:1: error: duplicate element name R1 (first at {tmp_path / 'parts.inc'}:2)"
    ]


def test_strict_fails_on_warnings_only_when_asked(tmp_path: Path) -> None:
    deck = tmp_path / "ctl.cir"
    deck.write_text("control to the end\nV1 a 0 1\nR1 a 0 1k\n.op\n.control\nop\n")
    runner = CliRunner()
    plain = runner.invoke(lint, [str(deck)])
    assert plain.exit_code == 0
    assert "6:1: warning: .control without .endc" not in plain.output
    assert "5:1: warning: .control without .endc runs to the end of the file" in plain.output
    assert runner.invoke(lint, ["--strict", str(deck)]).exit_code == 1
    assert runner.invoke(lint, ["--strict", str(FIXTURES / "clean.cir")]).exit_code == 0


def test_title_line_read_as_a_card(tmp_path: Path) -> None:
    # ngspice 39.3 reads an .include on the title line (heatweave does not) and stops on a
    # .param there ("title line is missing"); checked in tests/conformance (r21).
    deck = tmp_path / "t.cir"
    (tmp_path / "more.inc").write_text("R9 a 0 1k\n")
    deck.write_text(".include more.inc\nV1 a 0 1\nR1 a 0 1k\n.op\n.end\n")
    (finding,) = lint_file(str(deck))
    assert finding.severity == "warning" and "title line is an .include" in finding.message


def test_checks_see_the_nodes_of_a_and_k_cards(tmp_path: Path) -> None:
    # Issue 15: a deck with XSPICE A cards and a K card made check exit 2 ("cannot tell
    # the terminals"); a limit on a node only an A card drives must now resolve.
    deck = tmp_path / "mixed.cir"
    deck.write_text(
        "mixed\nV1 in 0 sin(0 1 1k)\nR1 in a 100\nAgain %v(a) %vd(out 0) amp\n"
        ".model amp gain(gain=2)\nRo out 0 1k\nL1 a 0 1m\nL2 b 0 1m\nK1 L1 L2 0.5\n"
        "Rb b 0 10\n.tran 1u 1m\n.end\n"
    )
    (tmp_path / "mixed.thermal.toml").write_text(NOTES + '[limit."V(out)"]\nmax = 5.0\n')
    assert [f for f in lint_file(str(deck)) if f.severity == "error"] == []


@pytest.mark.parametrize(
    ("part", "words"),
    [("Again", "is an XSPICE code-model element"), ("K1", "couples two inductors")],
)
def test_annotating_a_and_k_cards_is_refused(tmp_path: Path, part: str, words: str) -> None:
    # Issue 15: only annotating the element heatweave cannot analyse is refused; the rest
    # of the deck (its nodes, the resistor beside it) is checked as usual.
    deck = tmp_path / "mixed.cir"
    deck.write_text(
        "mixed\nV1 in 0 1\nR1 in a 100\nAgain %v(a) %vd(out 0) amp\n.model amp gain(gain=2)\n"
        "Ro out 0 1k\nL1 a 0 1m\nL2 b 0 1m\nK1 L1 L2 0.5\nRb b 0 10\n.op\n.end\n"
    )
    (tmp_path / "mixed.thermal.toml").write_text(f"schema = 1\n[part.{part}]\nrth = 5.0\n")
    errors = [f for f in lint_file(str(deck)) if f.severity == "error"]
    assert [words in f.message for f in errors] == [True], errors
    assert errors[0].location is not None and errors[0].location.line == 2


def test_annotating_an_element_of_an_undecided_branch_is_refused(tmp_path: Path) -> None:
    # ngspice 39.3 decides a condition on a subcircuit parameter per instance (this deck
    # draws 5 mA through X1's 1k branch); heatweave cannot, so it refuses to guess.
    deck = tmp_path / "cond.cir"
    deck.write_text(
        "per instance\nV1 in 0 5\nX1 in 0 stage gain=3\n.subckt stage hi lo params: gain=1\n"
        ".if (gain == 3)\nR1 hi lo 1k\n.else\nR1 hi lo 2k\n.endif\n.ends\n.op\n.end\n"
    )
    (tmp_path / "cond.thermal.toml").write_text(
        'schema = 1\n[part."X1.R1"]\nmodel = "linear"\ntc1 = 0\nrth = 1.0\n'
    )
    errors = [f for f in lint_file(str(deck)) if f.severity == "error"]
    assert [("branch of an .if block" in f.message) for f in errors] == [True], errors


def test_continuation_after_the_title_is_a_warning(tmp_path: Path) -> None:
    # ngspice 39.3 runs "title / + stray / V1 a 0 1 / R1 a 0 1k / .op" and prints v(a) = 1:
    # the '+' line joins the title.  Plain lint must pass it; --strict flags it.
    deck = tmp_path / "orphan.cir"
    deck.write_text("title\n+ stray\nV1 a 0 1\nR1 a 0 1k\n.op\n.end\n")
    (finding,) = lint_file(str(deck))
    assert (finding.severity, finding.location and finding.location.line) == ("warning", 2)
    assert CliRunner().invoke(lint, [str(deck)]).exit_code == 0
    assert CliRunner().invoke(lint, ["--strict", str(deck)]).exit_code == 1
