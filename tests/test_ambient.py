"""The ambient is the temperature of the whole circuit (issue 12 section 2).

Reference: stock ngspice run in the test on the plain deck, the annotated resistor written
as a plain resistor at the resistance heatweave reports for it, and ``.temp`` at the
ambient.  A silicon diode's forward voltage falls by about 2 mV/K (common practice), so a
diode left at 27 degC while the report says -40 or 125 degC is off by some 0.3 V; the
tolerance below (20 uV) is ngspice's own node-voltage tolerance (vntol 1 uV) with room.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave import cosim
from heatweave.cli import main
from heatweave.run import runner
from heatweave.settle.periodic import SettleOptions, settle

needs_ngspice = pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")
CORNERS = (-40.0, 0.0, 25.0, 85.0, 125.0)
VOLTS = 2e-5

DECK = """diode biased through an annotated resistor
V1 in 0 DC 5
R1 in a 4.7k
D1 a 0 dsig
.model dsig D(IS=2n N=1.8 RS=0.5)
{analysis}
.end
"""
ANNOTATION = """schema = 1
[ambient]
temperature = 25.0
[part.R1]
model = "linear"
tc1_ppm = 100
rth = 200
cth = 0.05
"""


def write(tmp_path: Path, analysis: str = ".op", annotation: str = ANNOTATION) -> tuple[str, str]:
    deck = tmp_path / "diode.cir"
    deck.write_text(DECK.format(analysis=analysis))
    toml = tmp_path / "diode.thermal.toml"
    toml.write_text(annotation)
    return str(deck), str(toml)


def stock_va(tmp_path: Path, ohms: float, temp: float) -> float:
    """V(a) from stock ngspice: R1 a plain resistor of *ohms*, the circuit at *temp*."""
    text = DECK.format(analysis=f".temp {temp!r}\n.control\nop\nprint v(a)\n.endc")
    return stock_op(tmp_path, text.replace("R1 in a 4.7k", f"R1 in a {ohms!r}"))


def stock_op(tmp_path: Path, text: str) -> float:
    """V(a) that stock ngspice prints for the deck *text*."""
    path = tmp_path / "stock.cir"
    path.write_text(text)
    out = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True, timeout=60)
    found = re.search(r"v\(a\)\s*=\s*(\S+)", out.stdout)
    assert found, out.stdout + out.stderr
    return float(found.group(1))


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("backend", ["batch", "shared"])
@pytest.mark.parametrize("ambient", CORNERS)
def test_run_op_puts_the_whole_circuit_at_the_ambient(
    tmp_path: Path, ambient: float, backend: str
) -> None:
    deck, toml = write(tmp_path)
    options = runner.RunOptions(ambient=ambient, backend=backend)
    results = runner.run(deck, toml, options).results
    part = results.part("R1")
    assert part.resistance is not None
    expected = stock_va(tmp_path, part.resistance, ambient)
    assert results.voltages["a"] == pytest.approx(expected, abs=VOLTS)


@needs_ngspice
@pytest.mark.ngspice
def test_forward_voltage_moves_with_the_ambient(tmp_path: Path) -> None:
    """The bug as reported: the diode kept its 27 degC voltage at every corner."""
    deck, toml = write(tmp_path)
    cold = runner.run(deck, toml, runner.RunOptions(ambient=-40.0)).results.voltages["a"]
    hot = runner.run(deck, toml, runner.RunOptions(ambient=125.0)).results.voltages["a"]
    assert cold - hot > 0.25  # about 2 mV/K over 165 K (common practice)


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("method", ["full", "cosim"])
def test_transient_methods_put_the_circuit_at_the_ambient(tmp_path: Path, method: str) -> None:
    deck, toml = write(tmp_path, ".tran 1m 0.5")
    outcome = cosim.run_auto(deck, toml, runner.RunOptions(ambient=85.0), method=method)
    assert outcome.method == method
    part = outcome.results.part("R1")
    assert part.resistance is not None
    expected = stock_va(tmp_path, part.resistance, 85.0)
    assert outcome.results.voltages["a"] == pytest.approx(expected, abs=VOLTS)


@needs_ngspice
@pytest.mark.ngspice
def test_settle_puts_the_circuit_at_the_ambient(tmp_path: Path) -> None:
    deck, toml = write(tmp_path, ".tran 1m 10m")
    settled = settle(deck, toml, SettleOptions(period=1e-3, ambient=-40.0))
    part = settled.parts[0]
    assert part.resistance is not None
    expected = stock_va(tmp_path, part.resistance, -40.0)
    assert settled.voltages["a"] == pytest.approx(expected, abs=VOLTS)


@needs_ngspice
@pytest.mark.ngspice
def test_sweep_and_check_corners_put_the_circuit_at_the_ambient(tmp_path: Path) -> None:
    limit = '\n[limit."V(a)"]\nmax = 5.0\n'
    deck, _toml = write(tmp_path, annotation=ANNOTATION + limit)
    out = tmp_path / "sweep.json"
    result = CliRunner().invoke(
        main, ["sweep", deck, "--ambient", "-40:125:165", "--check", "--json", str(out),
               "--backend", "batch", "--jobs", "1"],
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    corners = json.loads(out.read_text())["corners"]
    assert [c["ambient"] for c in corners] == [-40.0, 125.0]
    for corner in corners:
        ohms = corner["parts"]["R1"]["resistance"]
        expected = stock_va(tmp_path, ohms, corner["ambient"])
        assert corner["voltages"]["a"] == pytest.approx(expected, abs=VOLTS)
    checked = CliRunner().invoke(main, ["check", deck, "--ambient", "125"])
    assert checked.exit_code == 0, checked.output
    value = float(re.search(r"V\(a\) max: (\S+) V", checked.output).group(1))  # type: ignore[union-attr]
    assert value == pytest.approx(corners[1]["voltages"]["a"], abs=VOLTS)


@needs_ngspice
@pytest.mark.ngspice
def test_deck_temperature_cards_are_reported_and_overridden(tmp_path: Path) -> None:
    deck, toml = write(tmp_path, ".temp 100\n.options reltol=1e-4 tnom=50 temp=80\n.op")
    outcome = runner.run(deck, toml, runner.RunOptions(ambient=25.0))
    rendered = [f.render() for f in outcome.prepared.findings]
    name = Path(deck).name
    assert any(f"{name}:6:1: warning: the deck's .temp 100 is not used" in r for r in rendered)
    assert any(f"{name}:7:" in r and "temp=80 is not used" in r for r in rendered)
    assert any(f"{name}:7:" in r and "tnom=50 is kept" in r for r in rendered)
    # The deck's own tnom stays (the models' reference); the circuit runs at 25 degC.
    part = outcome.results.part("R1")
    assert part.resistance is not None
    stock = DECK.format(analysis=".options tnom=50\n.temp 25\n.control\nop\nprint v(a)\n.endc")
    path = tmp_path / "stock.cir"
    path.write_text(stock.replace("R1 in a 4.7k", f"R1 in a {part.resistance!r}"))
    out = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True, timeout=60)
    found = re.search(r"v\(a\)\s*=\s*(\S+)", out.stdout)
    assert found
    assert outcome.results.voltages["a"] == pytest.approx(float(found.group(1)), abs=VOLTS)


@needs_ngspice
@pytest.mark.ngspice
def test_agreeing_deck_temperature_is_not_reported(tmp_path: Path) -> None:
    deck, toml = write(tmp_path, ".temp 25\n.op")
    outcome = runner.run(deck, toml)
    assert not [f for f in outcome.prepared.findings if "temp" in f.message]


def test_ambient_profile_says_what_cannot_follow_it(tmp_path: Path) -> None:
    from heatweave.emit.emitter import emit_files

    profile = ANNOTATION.replace("temperature = 25.0", "profile = [[0, 10], [1, 60]]")
    deck, toml = write(tmp_path, ".tran 1m 1", profile)
    emitted = emit_files(deck, toml)
    assert ".temp 10\n" in emitted.text
    notes = [f.message for f in emitted.findings if f.severity == "note"]
    assert any("stays at 10 degC, the profile's value at t = 0" in n for n in notes)


@pytest.mark.parametrize(
    ("value", "needle"),
    [
        ("77F", "carries a unit or scale factor ('F')"),
        ("300K", "carries a unit or scale factor ('K')"),
        ("-300", "below absolute zero"),
        # Above 1000 degC no state is reported (README "How a result is verified"): an
        # ambient there is the input's fault, not a runaway (it was exit 7 "lower the
        # drive", and 1e300 exit 3 "did not converge, check for floating nodes").
        ("1500", "above 1000 degC"),
        ("1e300", "above 1000 degC"),
        ("1e400", "is not a finite temperature"),  # overflows an IEEE 754 double to infinity
        ("warm", "not a "),  # "not a temperature"; sweep: "not a value or a range"
    ],
)
@pytest.mark.parametrize("command", ["run", "check", "settle", "sweep"])
def test_bad_ambient_on_the_command_line_exits_2(
    tmp_path: Path, command: str, value: str, needle: str
) -> None:
    deck, _toml = write(tmp_path)
    extra = ["--period", "1m"] if command == "settle" else []
    result = CliRunner().invoke(main, [command, deck, f"--ambient={value}", *extra])
    assert result.exit_code == 2, result.output
    assert needle in result.output
    assert "--ambient" in result.output
    assert "1m,2m" not in result.output  # no scale factors proposed for a temperature


@pytest.mark.parametrize(
    ("table", "needle", "line"),
    [
        ("temperature = -300", "below absolute zero", 3),
        ("profile = [[0, 25], [10, -274]]", "below absolute zero", 3),
        ("temperature = 1e300", "above 1000 degC", 3),
        ("profile = [[0, 25], [10, 1200]]", "above 1000 degC", 3),
    ],
)
def test_annotation_ambient_below_absolute_zero_is_located(
    tmp_path: Path, table: str, needle: str, line: int
) -> None:
    deck, _toml = write(tmp_path, annotation=f"schema = 1\n[ambient]\n{table}\n")
    result = CliRunner().invoke(main, ["run", deck])
    assert result.exit_code == 2, result.output
    assert f"diode.thermal.toml:{line}:" in result.output
    assert needle in result.output


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("card", [".optxyz temp=50", ".OPTION\n+ temp = 50", ".opt temp=50 $ x"])
def test_every_options_spelling_ngspice_reads_is_reported(tmp_path: Path, card: str) -> None:
    # Stock ngspice 39 (run here) takes any card whose name starts with .opt as options:
    # the diode's forward voltage at temp=50 is the one at .temp 50, not the one at 27 degC.
    va = stock_op(tmp_path, DECK.format(analysis=f"{card}\n.control\nop\nprint v(a)\n.endc"))
    assert va == pytest.approx(stock_va(tmp_path, 4.7e3, 50.0), abs=VOLTS)
    assert abs(va - stock_va(tmp_path, 4.7e3, 27.0)) > 0.02  # ~2 mV/K
    deck, toml = write(tmp_path, f"{card}\n.op")
    outcome = runner.run(deck, toml, runner.RunOptions(ambient=25.0))
    rendered = [f.render() for f in outcome.prepared.findings]
    line = 6 + card[: card.lower().index("temp")].count("\n")  # where temp= is written
    said = [r for r in rendered if "temp=50 is not used" in r]
    assert [r.split(": warning")[0].rsplit(":", 2)[1] for r in said] == [str(line)], rendered
