"""Every way a run can fail, through ``heatweave check`` and through ``runner.run``: a clear
message, its own exit status (errors.py), and never a traceback."""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main
from heatweave.errors import (
    EXIT_BAD_INPUT,
    EXIT_LIBNGSPICE_MISSING,
    EXIT_NGSPICE_MISSING,
    EXIT_SIMULATION_FAILED,
    EXIT_THERMAL_RUNAWAY,
    EXIT_TIMESTEP_TOO_SMALL,
    HeatweaveError,
)
from heatweave.run import runner

FIXTURES = Path(__file__).parent / "fixtures" / "check"

# (deck, annotation, backend, environment, exit status, words the message must hold)
CASES = [
    pytest.param("divider.cir", "divider.thermal.toml", "batch", {"PATH": "EMPTY"},
                 EXIT_NGSPICE_MISSING, ["ngspice program", "not found"], id="ngspice-missing"),
    pytest.param("divider.cir", "divider.thermal.toml", "shared",
                 {"HEATWEAVE_LIBNGSPICE": "/nonexistent/libngspice.so"},
                 EXIT_LIBNGSPICE_MISSING, ["libngspice", "/nonexistent"], id="library-missing"),
    # ngspice 39: a node whose load jumps past its feed current has no DC solution.
    pytest.param("noconv.cir", "noconv.thermal.toml", "auto", {}, EXIT_SIMULATION_FAILED,
                 ["did not converge", "doAnalyses: OP"], id="no-convergence"),
    # ngspice 39: a capacitor shorted by a switch it controls stalls the transient.
    pytest.param("timestep.cir", "timestep.thermal.toml", "auto", {}, EXIT_TIMESTEP_TOO_SMALL,
                 ["timestep too small", "t = 1.23"], id="timestep-too-small"),
    pytest.param("divider.cir", "broken.thermal.toml", "auto", {}, EXIT_BAD_INPUT,
                 ["broken.thermal.toml:5:7: error:", "rth must be a positive number"],
                 id="bad-input"),
    # 10.13 V: the fold of the Beta equation, closed form 10.1298 V (see test_runaway.py).
    pytest.param("ntc_supply.cir", "ntc_supply.thermal.toml", "auto", {}, EXIT_THERMAL_RUNAWAY,
                 ["RT runs away thermally", "loop gain", "V1 = 10.13 V"], id="runaway"),
]  # fmt: skip


def environment(monkeypatch: pytest.MonkeyPatch, tmp_path: Path, env: dict[str, str]) -> None:
    for key, value in env.items():
        monkeypatch.setenv(key, str(tmp_path) if value == "EMPTY" else value)


@pytest.mark.parametrize(("deck", "note", "backend", "env", "status", "words"), CASES)
def test_check_command(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, deck: str, note: str, backend: str,
    env: dict[str, str], status: int, words: list[str],
) -> None:  # fmt: skip
    environment(monkeypatch, tmp_path, env)
    result = CliRunner().invoke(
        main, ["check", str(FIXTURES / deck), "-a", str(FIXTURES / note), "--backend", backend]
    )
    assert isinstance(result.exception, SystemExit)
    assert result.exit_code == status, result.output
    assert "Traceback" not in result.output
    for word in words:
        assert word in result.output
    assert "hint:" in result.output


@pytest.mark.parametrize(("deck", "note", "backend", "env", "status", "words"), CASES)
def test_run_machinery(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path, deck: str, note: str, backend: str,
    env: dict[str, str], status: int, words: list[str],
) -> None:  # fmt: skip
    environment(monkeypatch, tmp_path, env)
    with pytest.raises(HeatweaveError) as caught:
        runner.run(str(FIXTURES / deck), str(FIXTURES / note), runner.RunOptions(backend=backend))
    assert caught.value.exit_code == status
    rendered = caught.value.render()
    for word in words:
        assert word in rendered


# --- included files that are not regular files, endless standard input (issue 14) -------
# (decks and annotation files that are devices or pipes: tests/test_hostile_inputs.py)

DIVIDER = FIXTURES / "divider.cir"
NOTE = FIXTURES / "divider.thermal.toml"


@pytest.mark.parametrize(
    ("command", "status"),
    [("lint", 1), ("emit", EXIT_BAD_INPUT), ("run", EXIT_BAD_INPUT), ("check", EXIT_BAD_INPUT)],
)
@pytest.mark.parametrize("include", ["/dev/zero", "FIFO", "FOLDER"])
def test_an_include_that_is_no_regular_file_is_refused_at_its_card(
    tmp_path: Path, command: str, status: int, include: str
) -> None:
    import os

    special = {"FIFO": tmp_path / "pipe.lib", "FOLDER": tmp_path}.get(include, Path(include))
    if include == "FIFO":
        os.mkfifo(special)  # nobody writes: reading it would wait for ever
    deck = tmp_path / "deck.cir"
    deck.write_text(DIVIDER.read_text().replace("\n", f"\n.include {special}\n", 1))
    result = CliRunner().invoke(main, [command, str(deck), "-a", str(NOTE)])
    assert result.exit_code == status, result.output
    assert f"{deck}:2:1: error: included file" in result.output  # FILE:LINE of the card
    assert "is not a regular file" in result.output
    assert "Traceback" not in result.output


def test_endless_standard_input_is_refused(monkeypatch: pytest.MonkeyPatch) -> None:
    from heatweave import files

    monkeypatch.setattr(files, "MAX_INPUT_BYTES", 1000)
    result = CliRunner().invoke(main, ["emit", "-", "-a", str(NOTE)], input="* x\n" * 1000)
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert "more than 1000 bytes" in result.output


# --- ngspice's complaint pointed at the user's card (issue 14) -------------------------------
# ngspice 39's words for these cards, observed: "Error on line 3 or its substitute:" /
# "r1 a 0 1k junk=3" / "unknown parameter (junk)"; inside a subcircuit "Error on line:" /
# "r.x1.rs a 0 2k bogus=1".  The emitted deck's line numbers are not the user's.

REJECTED = [
    ("bad\nV1 a 0 1\nR1 a 0 1k junk=3\nR2 a 0 1k\n.op\n.end\n", None, 3, "junk"),
    ("bad\nV1 a 0 1\nR2 a 0 1k\n.subckt sub p q\nRS p q 2k bogus=1\n.ends\nX1 a 0 sub\n.op\n"
     ".end\n", None, 5, "bogus"),
    ("bad\nV1 a 0 1\nR2 a 0 1k\n.include parts.inc\n.op\n.end\n",
     "* parts\nRP a 0 3k\nRQ a 0 4k tc9=1\n", 3, "tc9"),
]  # fmt: skip


@pytest.mark.parametrize("backend", ["shared", "batch"])
@pytest.mark.parametrize(("deck", "include", "line", "parameter"), REJECTED)
def test_ngspice_rejection_names_the_users_file_and_line(
    tmp_path: Path, backend: str, deck: str, include: str | None, line: int, parameter: str
) -> None:
    (tmp_path / "d.cir").write_text(deck)
    (tmp_path / "d.thermal.toml").write_text(
        'schema = 1\n[part.R2]\nmodel = "linear"\ntc1 = 0.004\nrth = 50.0\ncth = 0.002\n'
    )
    where = tmp_path / "d.cir"
    if include is not None:
        where = tmp_path / "parts.inc"
        where.write_text(include)
    result = CliRunner().invoke(main, ["run", str(tmp_path / "d.cir"), "--backend", backend])
    assert result.exit_code == EXIT_SIMULATION_FAILED, result.output
    assert (
        f"{where}:{line}:1: error: ngspice rejects this card: unknown parameter ({parameter})"
        in result.output
    )
    assert "Traceback" not in result.output


# --- names outside ASCII (issue 14: a non-ASCII node name gave "please report") ----------

UMLAUT = "utf\nV1 eingäng 0 10\nR1 eingäng aus 1k\nR2 aus 0 1k\n.op\n.end\n"
UMLAUT_NOTE = 'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0.004\nrth = 50.0\ncth = 0.002\n'


@pytest.mark.skipif(__import__("shutil").which("ngspice") is None, reason="no ngspice")
def test_ngspice_39_reads_non_ascii_bytes_as_underscores(tmp_path: Path) -> None:
    # The reason for the refusal below, checked against stock ngspice: the UTF-8 umlaut's
    # two bytes each become '_' (two nodes eingäng and eingöng would be one).
    import subprocess

    deck = tmp_path / "utf.cir"
    deck.write_text(UMLAUT.replace(".op\n", ".op\n.print op v(eing__ng)\n"), encoding="utf-8")
    done = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True,
                          errors="replace", timeout=60, check=False)  # fmt: skip
    assert "eing__ng" in done.stdout
    assert "1.000000e+01" in done.stdout.split("eing__ng")[-1]  # V1 = 10 V on it


@pytest.mark.parametrize(("command", "status"), [("run", EXIT_BAD_INPUT), ("lint", 1)])
def test_a_non_ascii_name_is_refused_at_its_card(
    tmp_path: Path, command: str, status: int
) -> None:
    deck = tmp_path / "utf.cir"
    deck.write_text(UMLAUT, encoding="utf-8")
    (tmp_path / "utf.thermal.toml").write_text(UMLAUT_NOTE)
    result = CliRunner().invoke(main, [command, str(deck)])
    assert result.exit_code == status, result.output
    assert f"{deck}:2:8: error: 'eingäng' holds characters outside ASCII" in result.output
    assert "'eing__ng'" in result.output
    assert "please report" not in result.output


def test_non_ascii_comments_are_fine(tmp_path: Path) -> None:
    deck = tmp_path / "c.cir"
    deck.write_text("c\n* Widerstände\nV1 a 0 10 ; für\nR1 a b 1k\nR2 b 0 1k $ größe\n.op\n"
                    ".end\n", encoding="utf-8")  # fmt: skip
    (tmp_path / "c.thermal.toml").write_text(UMLAUT_NOTE)
    result = CliRunner().invoke(main, ["run", str(deck), "-q"])
    assert result.exit_code == 0, result.output
