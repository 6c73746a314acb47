"""Quantities on the command line: a scale factor, then at most the option's own unit.

ngspice 39 ignores letters after a number or a scale factor (manual 2.1.4.3, verified in
shared/reference/ngspice-syntax.md): ``5x`` is 5 and ``1k5`` is 1000.  In a deck that is
ngspice's reading and heatweave follows it; typed on the command line, ``--max-step 5x``
is a typo far more often than a unit, so heatweave reads a number, an optional scale factor
(T G Meg K m u n p f, case-insensitive) and then only the option's unit (``s`` for times,
``%``, ``ppm``), and refuses anything else naming the option (exit 2).  A ``K`` where the
unit is kelvin is refused too: SPICE reads it as kilo, the writer meant kelvin.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main
from heatweave.quantities import parse_quantity

# (text, unit, value): scale factors from the manual (2.1.4.2), the unit after them.
GOOD = [
    ("5", "s", 5.0),
    ("5s", "s", 5.0),
    ("5S", "s", 5.0),
    ("5ms", "s", 5e-3),
    ("5m", "s", 5e-3),
    ("2.5us", "s", 2.5e-6),
    ("1e-3", "s", 1e-3),
    ("2meg", "s", 2e6),
    ("3MEGs", "s", 3e6),
    ("10n", "s", 10e-9),
    ("5", "", 5.0),
    ("10k", "", 1e4),
    ("10mil", "", 25.4e-5),  # a length parameter: 1 mil = 25.4 um
    ("5%", "%", 5.0),
    ("100ppm", "ppm", 100.0),
    ("0.5", "K", 0.5),
]

# (text, unit, words in the reason)
BAD = [
    ("5x", "s", "'x'"),
    ("5sec", "s", "'sec'"),
    ("1k5", "s", "'k5'"),  # ngspice reads 1000; RKM notation is not SPICE's
    ("5mx", "s", "'mx'"),
    ("5V", "s", "'V'"),
    ("5mil", "s", "'mil'"),  # a length is no time
    ("10kOhm", "", "'kOhm'"),
    ("0.5K", "K", "kilo"),
    ("2k", "K", "kilo"),
    ("5ppm", "%", "'ppm'"),
    ("abc", "s", "not a number"),
]


@pytest.mark.parametrize(("text", "unit", "value"), GOOD)
def test_a_scale_factor_and_the_unit_are_read(text: str, unit: str, value: float) -> None:
    got, problem = parse_quantity(text, unit)
    assert problem is None and got == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize(("text", "unit", "words"), BAD)
def test_anything_else_is_refused(text: str, unit: str, words: str) -> None:
    got, problem = parse_quantity(text, unit)
    assert got is None and problem is not None and words in problem


DECK = "heater\nV1 a 0 DC 10\nR1 a 0 100\n.tran 1m 10m\n.end\n"
TOML = 'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0.0\nrth = 50\ncth = 0.01\n'

# Every option of every command that takes a quantity, with a value that has a suffix the
# option does not know: (arguments before the value, option as named in the error, value).
OPTIONS = [
    (["run", "DECK", "--max-step"], "--max-step", "5x"),
    (["run", "DECK", "--timeout"], "--timeout", "30sec"),
    (["run", "DECK", "--ambient"], "--ambient", "77F"),
    (["run", "DECK", "--tran", "1m"], "--tran", "10x"),
    (["check", "DECK", "--timeout"], "--timeout", "1k5"),
    (["check", "DECK", "--max-step"], "--max-step", "5mV"),
    (["settle", "DECK", "--period"], "--period", "1mx"),
    (["settle", "DECK", "--tstep"], "--tstep", "2uV"),
    (["settle", "DECK", "--tol"], "--tol", "0.01K"),
    (["settle", "DECK", "--wave-tol"], "--wave-tol", "1e-4x"),
    (["settle", "DECK", "--warmup"], "--warmup", "1minute"),
    (["sweep", "DECK", "--ambient"], "--ambient", "-40:125:5K"),
    (["sweep", "DECK", "--ambient"], "--ambient", "25,85F"),
    (["sweep", "DECK", "--param"], "--param", "vs=9:15:1x"),
    (["sweep", "DECK", "--param"], "--param", "vs=10kOhm"),
    (["sweep", "DECK", "--max-step"], "--max-step", "5x"),
    (["compare", "DECK", "--timeout"], "--timeout", "5x"),
    (["compare", "DECK", "--max-rise-growth"], "--max-rise-growth", "2K"),
    (["compare", "DECK", "--max-margin-loss"], "--max-margin-loss", "5x"),
    (["compare", "DECK", "--max-drift-growth"], "--max-drift-growth", "100ppb"),
    (["network", "fit", "ZTH", "-n", "1", "--t-min"], "--t-min", "10uV"),
    (["network", "fit", "ZTH", "-n", "1", "--t-max"], "--t-max", "1x"),
]


@pytest.mark.parametrize(("before", "option", "value"), OPTIONS)
def test_every_quantity_option_refuses_an_unknown_suffix(
    tmp_path: Path, before: list[str], option: str, value: str
) -> None:
    deck = tmp_path / "heater.cir"
    deck.write_text(DECK)
    (tmp_path / "heater.thermal.toml").write_text(TOML)
    zth = tmp_path / "zth.csv"
    zth.write_text("time,zth\n1e-3,0.1\n1e-2,0.5\n1e-1,1.0\n")
    named = {"DECK": str(deck), "ZTH": str(zth)}
    args = [named.get(a, a) for a in before] + [value]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 2, result.output
    assert option in result.output and value.split("=")[-1].split(",")[-1] in result.output
    assert "Traceback" not in result.output
