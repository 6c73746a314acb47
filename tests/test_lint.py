"""``heatweave lint`` on purpose-built decks, and the exact place and words of each error."""

from __future__ import annotations

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
        prefix + "4:1: error: duplicate element name R1 (first at line 3)",
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
    ("+ stray\nR1 a 0 1\n", 2, 1, "continuation line with no card to continue"),
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
        "amp.thermal.toml", 6, 'names node "outt"',
    ),
    # emit: the deck already uses a name heatweave adds for R1's hot spot
    (
        "V1 in 0 1\nR1 in hw_t_r1 1\nR2 hw_t_r1 0 1\n.op\n",
        NOTES, "amp.cir", 3, "which heatweave reserves",
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
