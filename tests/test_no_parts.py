"""An annotation file that annotates no part (only ``[ambient]``, or its part tables removed).

A designer expects the deck to run as it is, at the annotation's ambient like every run
(``.temp``, see test_ambient.py), with the node values reported and a plain note that no part
is annotated; commands whose only answer is a part temperature (``settle``) refuse in words.
Reference: stock ngspice 39 run in the test on the plain deck with ``.temp`` at the ambient.
A silicon diode's forward voltage falls by about 2 mV/K (common practice), so a deck left at
ngspice's 27 degC would miss the reference by tens of mV; 20 uV is ngspice's vntol with room.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main

needs_ngspice = pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")
VOLTS = 2e-5
NOTE = "no annotated parts"

DECK = """diode biased through a plain resistor, nothing annotated
V1 in 0 DC 5
R1 in a 4.7k
D1 a 0 dsig
.model dsig D(IS=2n N=1.8 RS=0.5)
{analysis}
.end
"""
ONLY_AMBIENT = "schema = 1\n[ambient]\ntemperature = {ambient}\n"
PWM = """pulsed drive into a plain load, nothing annotated
VPWM drive 0 PULSE(0 10 0 10n 10n 20u 50u)
RLOAD drive 0 100
.tran 0.1u 200u
.end
"""


def write(tmp_path: Path, deck: str, annotation: str) -> str:
    path = tmp_path / "plain.cir"
    path.write_text(deck)
    (tmp_path / "plain.thermal.toml").write_text(annotation)
    return str(path)


def stock_va(tmp_path: Path, temp: float) -> float:
    """V(a) of the operating point from stock ngspice with the circuit at *temp*."""
    text = DECK.format(analysis=f".temp {temp!r}\n.control\nop\nprint v(a)\n.endc")
    path = tmp_path / "stock.cir"
    path.write_text(text)
    out = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True, timeout=60)
    found = re.search(r"v\(a\)\s*=\s*(\S+)", out.stdout)
    assert found, out.stdout + out.stderr
    return float(found.group(1))


def invoke(*args: str) -> tuple[int, str]:
    result = CliRunner().invoke(main, list(args))
    return result.exit_code, result.output


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize(
    ("analysis", "extra"),
    [(".op", ["--backend", "batch"]), (".op", ["--backend", "shared"]),
     (".tran 1m 10m", ["--method", "full"]), (".tran 1m 10m", ["--method", "auto"])],
)  # fmt: skip
def test_run_reports_the_plain_deck_at_the_ambient(
    tmp_path: Path, analysis: str, extra: list[str]
) -> None:
    deck = write(tmp_path, DECK.format(analysis=analysis), ONLY_AMBIENT.format(ambient=85.0))
    out = tmp_path / "out.json"
    code, output = invoke("run", deck, "--json", str(out), *extra)
    assert code == 0, output
    assert NOTE in output
    data = json.loads(out.read_text())
    assert data["parts"] == {}
    assert data["voltages"]["a"] == pytest.approx(stock_va(tmp_path, 85.0), abs=VOLTS)


@needs_ngspice
@pytest.mark.ngspice
def test_removed_part_tables_are_the_same_case(tmp_path: Path) -> None:
    """Shared nodes but no part: the nodes sit at the ambient, nothing heats them."""
    annotation = ONLY_AMBIENT.format(ambient=-20.0) + "[node.board]\nrth = 10.0\ncth = 1.0\n"
    deck = write(tmp_path, DECK.format(analysis=".op"), annotation)
    out = tmp_path / "out.json"
    code, output = invoke("run", deck, "--json", str(out))
    assert code == 0, output
    assert NOTE in output
    assert json.loads(out.read_text())["voltages"]["a"] == pytest.approx(
        stock_va(tmp_path, -20.0), abs=VOLTS
    )


@needs_ngspice
@pytest.mark.ngspice
def test_cosim_refuses_in_words(tmp_path: Path) -> None:
    deck = write(tmp_path, DECK.format(analysis=".tran 1m 10m"), ONLY_AMBIENT.format(ambient=25))
    code, output = invoke("run", deck, "--method", "cosim")
    assert code == 2, output
    assert NOTE in output and "--method full" in output


@needs_ngspice
@pytest.mark.ngspice
def test_check_holds_node_limits_of_the_plain_deck(tmp_path: Path) -> None:
    limit = '[limit."V(a)"]\nmin = 0.1\n'
    deck = write(tmp_path, DECK.format(analysis=".op"), ONLY_AMBIENT.format(ambient=125.0) + limit)
    code, output = invoke("check", deck)
    assert code == 0, output
    assert NOTE in output
    value = float(re.search(r"V\(a\) min: (\S+) V", output).group(1))  # type: ignore[union-attr]
    assert value == pytest.approx(stock_va(tmp_path, 125.0), rel=1e-4)  # 5 digits printed
    assert "1 limits checked, 0 violated" in output or "1 limit checked, 0 violated" in output


@needs_ngspice
@pytest.mark.ngspice
def test_check_of_a_periodic_deck_runs_it(tmp_path: Path) -> None:
    deck = write(tmp_path, PWM, ONLY_AMBIENT.format(ambient=25.0))
    code, output = invoke("check", deck)
    assert code == 0, output
    assert NOTE in output


@needs_ngspice
@pytest.mark.ngspice
def test_sweep_reports_each_corner(tmp_path: Path) -> None:
    deck = write(tmp_path, DECK.format(analysis=".op"), ONLY_AMBIENT.format(ambient=25.0))
    out = tmp_path / "sweep.json"
    code, output = invoke(
        "sweep", deck, "--ambient", "-40:125:165", "--json", str(out), "--jobs", "1",
        "--backend", "batch", "--probe", "a",
    )  # fmt: skip
    assert code == 0, output
    assert NOTE in output and "failed" not in output
    corners = json.loads(out.read_text())["corners"]
    for corner in corners:
        expected = stock_va(tmp_path, corner["ambient"])
        assert corner["voltages"]["a"] == pytest.approx(expected, abs=VOLTS)


@needs_ngspice
@pytest.mark.ngspice
def test_settle_refuses_in_words(tmp_path: Path) -> None:
    deck = write(tmp_path, PWM, ONLY_AMBIENT.format(ambient=25.0))
    code, output = invoke("settle", deck)
    assert code == 2, output
    assert NOTE in output
    assert "Traceback" not in output


def test_emit_ends_with_the_ambient(tmp_path: Path) -> None:
    """``emit`` writes what ``run`` simulates: the deck, and ``.temp`` at the ambient."""
    deck = write(tmp_path, DECK.format(analysis=".op"), ONLY_AMBIENT.format(ambient=60.0))
    out = tmp_path / "emitted.cir"
    code, output = invoke("emit", deck, "-o", str(out))
    assert code == 0, output
    text = out.read_text()
    assert text.startswith(DECK.format(analysis=".op").replace(".end\n", ""))
    assert text.splitlines()[-2:] == [".temp 60", ".end"]


@needs_ngspice
@pytest.mark.ngspice
def test_a_deck_node_named_like_the_ambient_source_is_not_the_ambient(tmp_path: Path) -> None:
    """Nothing is emitted without a part, so a node of the deck's own that happens to bear
    the ambient source's name (hw_amb, at 3.3 V here) is not the ambient: the ambient
    reported is the annotation's 40 degC, as the note says (it read 3.30 degC)."""
    deck = "a node named like heatweave's ambient\nV1 hw_amb 0 DC 3.3\nR1 hw_amb 0 1k\n.op\n.end\n"
    path = write(tmp_path, deck, ONLY_AMBIENT.format(ambient=40.0))
    out = tmp_path / "r.json"
    result = CliRunner().invoke(main, ["run", path, "--json", str(out)])
    assert result.exit_code == 0, result.output
    data = json.loads(out.read_text())
    assert data["ambient"] == 40.0
    assert "ambient 40.00 degC" in result.output
