"""``heatweave emit`` as a user meets it: stdin/stdout, refusing to overwrite, --check,
bad input with FILE:LINE:COL and exit status 2, never a traceback."""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main

FIXTURES = Path(__file__).parent / "fixtures" / "emit"
CORPUS = sorted((Path(__file__).parent / "decks").glob("*.cir"))


def invoke(*args: str, stdin: bytes | None = None) -> tuple[int, bytes, str]:
    runner = CliRunner()
    result = runner.invoke(main, list(args), input=stdin)
    return result.exit_code, result.stdout_bytes, result.stderr


@pytest.mark.parametrize("deck", CORPUS, ids=lambda p: p.name)
def test_no_annotation_writes_the_input_unchanged(deck: Path) -> None:
    code, out, _err = invoke("emit", str(deck))
    assert code == 0 and out == deck.read_bytes()


def test_stdin_to_stdout() -> None:
    data = b"t\r\nR1 a 0 1k ; \xe9\r\n.end"
    code, out, _err = invoke("emit", "-", stdin=data)
    assert code == 0 and out == data


def test_refuses_to_overwrite_its_input(tmp_path: Path) -> None:
    for name in ("divider.cir", "divider.thermal.toml"):
        shutil.copy(FIXTURES / name, tmp_path / name)
    deck = tmp_path / "divider.cir"
    before = deck.read_bytes()
    code, _out, err = invoke("emit", str(deck), "-o", str(deck))
    assert code == 2 and "never overwrites" in err and deck.read_bytes() == before
    code, _out, _err = invoke("emit", str(deck), "-o", str(deck), "--in-place")
    assert code == 0 and b"*hw* R1: model linear" in deck.read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["divider.cir", "divider.thermal.toml"]


@pytest.mark.parametrize("notes", ["divider.thermal.toml", "empty"])
@pytest.mark.parametrize("command", ["emit", "run", "check"])
def test_an_emitted_deck_is_not_taken_for_a_source_deck(
    tmp_path: Path, command: str, notes: str
) -> None:
    """After emit --in-place the deck holds heatweave's own cards: fed back, its parts read
    as missing, or (with no part annotated) its ambient source as the ambient.  Refused at
    the header line that says what the file is."""
    for name in ("divider.cir", "divider.thermal.toml"):
        shutil.copy(FIXTURES / name, tmp_path / name)
    deck = tmp_path / "divider.cir"
    assert invoke("emit", str(deck), "--in-place")[0] == 0
    annotation = tmp_path / "divider.thermal.toml"
    if notes == "empty":
        annotation.write_text("schema = 1\n[ambient]\ntemperature = 40.0\n")
    code, _out, err = invoke(command, str(deck), "-a", str(annotation))
    assert code == 2, err
    assert f"{deck}:2:1: error: " in err and "electrothermal deck heatweave wrote" in err
    assert "Traceback" not in err


def test_check_reports_stale_and_which_input(tmp_path: Path) -> None:
    for name in ("divider.cir", "divider.thermal.toml"):
        shutil.copy(FIXTURES / name, tmp_path / name)
    deck, emitted = tmp_path / "divider.cir", tmp_path / "divider.hw.cir"
    assert invoke("emit", str(deck), "-o", str(emitted))[0] == 0
    code, _out, err = invoke("emit", str(deck), "--check", str(emitted))
    assert code == 0 and "up to date" in err
    notes = tmp_path / "divider.thermal.toml"
    notes.write_text(notes.read_text().replace("rth = 50.0", "rth = 55.0"))
    code, _out, err = invoke("emit", str(deck), "--check", str(emitted))
    assert code == 1 and "annotation file changed" in err
    deck.write_text(deck.read_text().replace("DC 10", "DC 12"))
    code, _out, err = invoke("emit", str(deck), "--check", str(emitted))
    assert code == 1 and "the deck changed" in err


LIBRARY_DECK = (
    "leg from a library\nV1 in 0 DC 10\nX1 in out leg\nR2 out 0 100\n.include parts.lib\n"
    ".op\n.end\n"
)
LIBRARY = ".subckt leg a b\nRL a b 100\n.ends\n"
LIBRARY_NOTES = 'schema = 1\n[part."X1.RL"]\nmodel = "linear"\ntc1 = 0.004\nrth = 50.0\n'


@pytest.mark.parametrize(
    ("change", "words"),
    [
        # the included file holds the annotated part, whose copy the emitted deck carries
        (
            lambda d: (d / "parts.lib").write_text(LIBRARY.replace("100", "120")),
            ["unchanged", "differs from line", "*hw* RL a b 100", "*hw* RL a b 120"],
        ),
        # a hand edit of the committed deck
        (
            lambda d: (d / "top.hw.cir").write_text(
                (d / "top.hw.cir").read_text().replace("R2 out 0 100", "R2 out 0 110")
            ),
            ["unchanged", "R2 out 0 110", "R2 out 0 100"],
        ),
        # the committed deck checked out with CRLF line ends
        (
            lambda d: (d / "top.hw.cir").write_bytes(
                (d / "top.hw.cir").read_bytes().replace(b"\n", b"\r\n")
            ),
            ["line ends differ"],
        ),
    ],
    ids=["included file", "hand edit", "line ends"],
)
def test_check_names_what_differs_when_the_inputs_did_not(
    tmp_path: Path, change: Callable[[Path], object], words: list[str]
) -> None:
    (tmp_path / "top.cir").write_text(LIBRARY_DECK)
    (tmp_path / "parts.lib").write_text(LIBRARY)
    (tmp_path / "top.thermal.toml").write_text(LIBRARY_NOTES)
    deck, emitted = tmp_path / "top.cir", tmp_path / "top.hw.cir"
    assert invoke("emit", str(deck), "-o", str(emitted))[0] == 0
    change(tmp_path)
    code, _out, err = invoke("emit", str(deck), "--check", str(emitted))
    assert code == 1, err
    for word in words:
        assert word in err


BAD_INPUT = [
    # (deck body, annotation, location, words of the message)
    (
        "V1 in 0 1\nR1 in 0 {2*\n.op\n",
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = 1.0\n',
        "bad.cir:3:9",
        "unbalanced '{'",
    ),
    (
        "V1 in 0 1\nRSENSE in 0 1\n.op\n",
        'schema = 1\n[part.RSENS]\nmodel = "linear"\ntc1 = 0\nrth = 1.0\n',
        "bad.thermal.toml:2:",
        'did you mean "RSENSE"',
    ),
    (
        "V1 in 0 1\nR1 in 0 1\n.op\n",
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = "abc"\n',
        "bad.thermal.toml:5:7",
        "rth must be a positive number",
    ),
    (
        "V1 in 0 1\nR1 in hw_t_r1 1\nR2 hw_t_r1 0 1\n.op\n",
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = 1.0\n',
        "bad.cir:3:",
        "reserves",
    ),
]


@pytest.mark.parametrize(("body", "notes", "where", "words"), BAD_INPUT)
def test_bad_input_is_located_and_exits_2(
    tmp_path: Path, body: str, notes: str, where: str, words: str
) -> None:
    (tmp_path / "bad.cir").write_text("bad\n" + body + ".end\n")
    (tmp_path / "bad.thermal.toml").write_text(notes)
    code, _out, err = invoke("emit", str(tmp_path / "bad.cir"))
    assert code == 2, err
    assert "Traceback" not in err
    assert f"{tmp_path}/{where}" in err and words in err
    assert "hint:" in err


@pytest.mark.parametrize("with_notes", [False, True], ids=["no annotation", "annotation"])
def test_missing_deck_exits_2_without_a_traceback(tmp_path: Path, with_notes: bool) -> None:
    notes = tmp_path / "notes.thermal.toml"
    notes.write_text('schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = 1.0\n')
    extra = ["-a", str(notes)] if with_notes else []
    code, _out, err = invoke("emit", str(tmp_path / "nosuch.cir"), *extra)
    assert code == 2, err
    assert "Traceback" not in err
    assert "nosuch.cir: no such file" in err and "hint:" in err


@pytest.mark.ngspice
@pytest.mark.parametrize("form", ["switch", "reference", "divider"])
def test_each_form_gives_the_divider_steady_state(tmp_path: Path, form: str) -> None:
    # The fixed point T = Ta + Rth P(T) of the divider (tests/test_emitter.py), found by
    # scipy's brentq; the emitted deck of every form, run by ngspice, must land on it.
    from scipy.optimize import brentq

    from heatweave.simulators import get_simulator

    def power(t: float) -> float:
        r = 100.0 * (1 + 0.004 * (t - 25.0))
        return 100.0 * r / (r + 100.0) ** 2

    expected = brentq(lambda t: t - 25.0 - 50.0 * power(t), 25.0, 500.0)
    code, out, err = invoke("emit", str(FIXTURES / "divider.cir"), "--form", form)
    assert code == 0, err
    plot = get_simulator("batch").run(out.decode()).plots[-1]
    assert float(plot["v(hw_t_r1)"][-1]) == pytest.approx(expected, abs=1e-3)
