"""The deck is read once per run (issue 13): the emitted text at most once, the plain deck
the co-simulation runs never, and the co-simulation emits no electrothermal deck.

The counts are taken by wrapping the reader wherever heatweave's modules hold it.  The
numbers of the runs are held to the outside elsewhere (tests/test_cosim.py against the full
deck and brentq); the divider check below is the closed form V(out) = V R2 / (R1 + R2).
"""

from __future__ import annotations

import subprocess
import sys
from collections import Counter
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner

from heatweave import cosim
from heatweave.cli import main
from heatweave.emit import emitter
from heatweave.errors import EmitError
from heatweave.run.prepare import RunOptions
from heatweave.run.runner import run
from heatweave.run.safedeck import safe_deck
from heatweave.spice import reader
from heatweave.spice.project import load_project

# A heated divider of our own whose lower leg comes from an included file, with a .control
# block (dropped, so the safe deck is rebuilt as a tree) and a .temp card the annotation's
# ambient overrides.  Thermal tau 0.1 s against a 1 ms ramp: auto co-simulates.
DECK = """heater divider read once
V1 in 0 PWL(0 0 1m 10)
R1 in out 100
.include lower.inc
.temp 40
.control
echo hw-control-ran
.endc
.tran 10u 0.2 0 10u
.end
"""
ANNOTATION = """schema = 1

[ambient]
temperature = 25.0

[part.R1]
model = "linear"
tc1 = 0.004
rth = 50.0
cth = 0.002
"""


@pytest.fixture
def files(tmp_path: Path) -> tuple[str, str]:
    (tmp_path / "lower.inc").write_text("* lower leg\nR2 out 0 100\n")
    deck, annotation = tmp_path / "divider.cir", tmp_path / "divider.thermal.toml"
    deck.write_text(DECK)
    annotation.write_text(ANNOTATION)
    return str(deck), str(annotation)


def _replace_everywhere(monkeypatch: pytest.MonkeyPatch, old: object, new: object) -> None:
    """Put *new* wherever a heatweave module holds *old* (``from x import f`` copies)."""
    for name, module in list(sys.modules.items()):
        if name == "heatweave" or name.startswith("heatweave."):
            for attr, value in list(vars(module).items()):
                if value is old:
                    monkeypatch.setattr(module, attr, new)


@pytest.fixture
def reads(monkeypatch: pytest.MonkeyPatch) -> Counter[str]:
    """Every text the reader is given, counted."""
    seen: Counter[str] = Counter()
    original = reader.read

    def counting(text: str, *args: Any, **kwargs: Any) -> Any:
        seen[text] += 1
        return original(text, *args, **kwargs)

    _replace_everywhere(monkeypatch, original, counting)
    return seen


def _no_emitting(monkeypatch: pytest.MonkeyPatch) -> None:
    for function in (emitter.emit_inputs, emitter.emit_deck):

        def refused(*_args: Any, _name: str = function.__name__, **_kwargs: Any) -> Any:
            raise AssertionError(f"the co-simulation called {_name}")

        _replace_everywhere(monkeypatch, function, refused)


def _once_each(reads: Counter[str]) -> None:
    twice = {text[:60]: n for text, n in reads.items() if n > 1}
    assert not twice, f"texts read more than once: {twice}"


@pytest.mark.ngspice
def test_a_full_run_reads_the_emitted_deck_once(
    files: tuple[str, str], reads: Counter[str]
) -> None:
    outcome = run(*files)
    assert reads[outcome.prepared.emitted.text] == 1
    _once_each(reads)
    # The tree the analyses came from is the one ngspice got.
    assert outcome.prepared.deck.write() == outcome.prepared.text
    assert "*hw* a .control block was dropped here" in outcome.prepared.text


@pytest.mark.ngspice
def test_a_cosimulation_reads_nothing_twice_and_emits_nothing(
    files: tuple[str, str], reads: Counter[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    _no_emitting(monkeypatch)
    ran: list[str] = []
    cosimulate = cosim.cosimulate

    def recording(text: str, *args: Any, **kwargs: Any) -> Any:
        ran.append(text)
        return cosimulate(text, *args, **kwargs)

    monkeypatch.setattr(cosim, "cosimulate", recording)
    fast = cosim.run_auto(*files, method="cosim")
    assert fast.method == "cosim", fast.reason
    assert len(ran) == 1 and reads[ran[0]] == 0  # the plain deck is written, never read
    assert "R2 out 0 100" in ran[0] and ".temp 25" in ran[0] and ".tran" not in ran[0]
    _once_each(reads)
    # The findings of the plain deck are still heard: the overridden .temp, the dropped block.
    messages = [finding.message for finding in fast.findings]
    assert any("the deck's .temp 40 is not used" in m for m in messages), messages
    assert any("dropped a .control block" in m for m in messages), messages


def _cli(args: list[str]) -> Callable[[], None]:
    def invoke() -> None:
        result = CliRunner().invoke(main, args)
        assert result.exit_code == 0, result.output

    return invoke


@pytest.mark.ngspice
@pytest.mark.parametrize("command", ["run", "check"])
def test_commands_read_each_text_once(
    files: tuple[str, str], reads: Counter[str], command: str
) -> None:
    deck, annotation = files
    _cli([command, deck, "-a", annotation])()
    assert reads[Path(deck).read_text()] == 1  # the deck file, by load_project
    _once_each(reads)


def test_an_included_file_without_a_final_line_end_keeps_the_next_card(tmp_path: Path) -> None:
    # ngspice 39 reads the last line of an included file as a line of its own whether or
    # not the file ends with a line end (checked below with ngspice itself): the inlined
    # copy must end that line, or the deck's next card would join it.
    (tmp_path / "lower.inc").write_text("R2 out 0 100")
    deck = tmp_path / "divider.cir"
    deck.write_text("divider\nV1 in 0 10\nR1 in out 100\n.include lower.inc\n.op\n.end\n")
    project = load_project(str(deck))
    safe = safe_deck(project.deck, project, str(tmp_path), False)
    assert "\nR2 out 0 100\n.op\n" in safe.text
    assert safe.deck.write() == safe.text


@pytest.mark.ngspice
def test_ngspice_reads_an_include_without_a_final_line_end(tmp_path: Path) -> None:
    (tmp_path / "lower.inc").write_text("R2 out 0 300")
    deck = tmp_path / "divider.cir"
    deck.write_text("divider\nV1 in 0 10\nR1 in out 100\n.include lower.inc\n.op\n"
                    ".print dc v(out)\n.end\n")  # fmt: skip
    done = subprocess.run(
        ["ngspice", "-b", deck.name], cwd=tmp_path, capture_output=True, text=True, timeout=60
    )
    # V(out) = 10 * 300 / (100 + 300) = 7.5 V: R2 was read and the .op ran.
    assert "7.5" in done.stdout, done.stdout + done.stderr


@pytest.mark.ngspice
def test_a_run_over_such_an_include_is_the_divider(tmp_path: Path) -> None:
    (tmp_path / "lower.inc").write_text("R2 out 0 100")
    deck, annotation = tmp_path / "divider.cir", tmp_path / "divider.thermal.toml"
    deck.write_text("divider\nV1 in 0 10\nR1 in out 100\n.include lower.inc\n.op\n.end\n")
    annotation.write_text(ANNOTATION)
    outcome = run(str(deck), str(annotation), RunOptions())
    r1 = outcome.results.part("R1").resistance
    assert r1 > 100.0  # heated
    # Closed form of the divider at the heated resistance (Ohm's law).
    assert outcome.results.voltages["out"] == pytest.approx(10 * 100 / (r1 + 100), rel=1e-6)


def test_the_cosimulation_refuses_the_decks_the_emitter_refuses(files: tuple[str, str]) -> None:
    # Without emitting, the co-simulation still refuses a part the full deck cannot place
    # (tests/test_emitter.py::test_part_in_included_file_is_refused), so both methods
    # accept the same decks.
    deck, annotation = files
    Path(annotation).write_text(ANNOTATION.replace("[part.R1]", "[part.R2]"))
    with pytest.raises(EmitError, match="included file"):
        cosim.run_auto(deck, annotation, method="cosim")
    with pytest.raises(EmitError, match="included file"):
        run(deck, annotation)
