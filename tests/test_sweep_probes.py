"""``sweep --probe``: node voltages and branch currents, as ``run --probe`` takes them, in the
table, the CSV and the JSON of every corner.

The deck: a 5 V source drives a 1 kohm resistor with tc1 = 4000 ppm/K (annotated, Rth 50 K/W)
through a 0 V source VAMM, the ammeter.  Hand calculation at each corner, by Ohm's law and
the linear model: I = V / (R0 (1 + tc1 (T - 25))) with T = Ta + Rth V I, solved here with
scipy's brentq; V(mid) = 5 V across the ammeter-free node.  ngspice's tolerances (reltol
1e-3 on currents, vntol 1 uV) bound the comparison.
"""

from __future__ import annotations

import csv
import io
import json
import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner
from scipy.optimize import brentq

from heatweave.cli import main

pytestmark = [
    pytest.mark.ngspice,
    pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice"),
]

V, R0, TC1, RTH = 5.0, 1e3, 4e-3, 50.0
DECK = """a resistor heated by its own current, read through a 0 V ammeter
V1 top 0 DC 5
VAMM top mid DC 0
RHOT mid 0 1k
.op
.end
"""
ANNOTATION = """schema = 1
[ambient]
temperature = 25.0
[part.RHOT]
model = "linear"
tc1_ppm = 4000
rth = 50.0
cth = 0.01
"""


def current(ambient: float) -> float:
    """The closed-form steady state: T = Ta + Rth V^2 / R(T), I = V / R(T)."""

    def balance(t: float) -> float:
        return t - ambient - RTH * V * V / (R0 * (1 + TC1 * (t - 25.0)))

    t = brentq(balance, ambient, ambient + 100.0)
    return V / (R0 * (1 + TC1 * (t - 25.0)))


def write(tmp_path: Path) -> str:
    deck = tmp_path / "hot.cir"
    deck.write_text(DECK)
    (tmp_path / "hot.thermal.toml").write_text(ANNOTATION)
    return str(deck)


def test_probes_reach_the_table_csv_and_json(tmp_path: Path) -> None:
    deck = write(tmp_path)
    out_json, out_csv = tmp_path / "s.json", tmp_path / "s.csv"
    result = CliRunner().invoke(
        main, ["sweep", deck, "--ambient", "0:50:50", "--jobs", "1", "--probe", "I(vamm)",
               "--probe", "mid", "--json", str(out_json), "--csv", str(out_csv)],
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    assert "I(vamm)" in result.output and "V(mid)" in result.output
    corners = json.loads(out_json.read_text())["corners"]
    assert [c["ambient"] for c in corners] == [0.0, 50.0]
    rows = list(csv.DictReader(io.StringIO(out_csv.read_text())))
    assert len(rows) == 2  # one corner and part each
    for corner, row in zip(corners, rows, strict=True):
        expected = current(corner["ambient"])
        # ngspice reads a source's current as flowing into its + node: +I for VAMM (top -> mid)
        probe = corner["probes"]["I(vamm)"]
        assert probe["unit"] == "A"
        assert probe["final"] == pytest.approx(expected, rel=2e-3)
        assert float(row["I(vamm) [A]"]) == pytest.approx(probe["final"], rel=1e-12)
        assert corner["probes"]["V(mid)"]["final"] == pytest.approx(V, abs=1e-5)
        assert float(row["V(mid) [V]"]) == pytest.approx(V, abs=1e-5)
    # self-heating at 50 degC lowers the current more than at 0 degC raises it (hand calc.)
    assert current(0.0) > current(50.0)


def test_unknown_branch_current_is_refused_with_the_recorded_ones(tmp_path: Path) -> None:
    deck = write(tmp_path)
    result = CliRunner().invoke(main, ["sweep", deck, "--ambient", "0:50:50", "--jobs", "1",
                                       "--probe", "I(rhot)"])  # fmt: skip
    assert result.exit_code == 2, result.output
    assert "ngspice recorded no branch current of 'rhot'" in result.output
    assert "vamm" in result.output
