"""How ``compare`` reads saved results and holds changes to its gate (no simulator needed).

The results are written here in the documented JSON forms of ``run``, ``settle`` and
``sweep`` (:mod:`heatweave.reports.json_report`, :mod:`heatweave.reports.settle`,
:mod:`heatweave.sweep.report`); the expected figures are plain arithmetic on them.
"""

from __future__ import annotations

import hashlib
import json
import math
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner

from heatweave.cli import main
from heatweave.compare.diff import Thresholds, compare, margin_loss_percent
from heatweave.compare.render import render_markdown, render_table
from heatweave.compare.snapshot import snapshot_of


def run_part(temperature: float, ppm: float, power: float, tmax_margin: float) -> dict[str, Any]:
    return {
        "model": "linear",
        "temperature": temperature,
        "peak_temperature": None,
        "resistance_change_ppm": ppm,
        "power": power,
        "ratings": {"power_rating": 1.0, "tmax": 155.0, "allowed_power": 1.0},
        "margins": {"temperature": tmax_margin, "power": 1.0 - power, "load": power},
    }


def run_result(parts: dict[str, dict[str, Any]], ambient: float = 25.0) -> dict[str, Any]:
    return {
        "deck": "board.cir",
        "annotations": {"path": "b.toml", "sha256": "0"},
        "analysis": "op",
        "ambient": ambient,
        "parts": parts,
        "nodes": {},
        "warnings": [],
    }


OLD = run_result({"R1": run_part(45.0, 200.0, 0.30, 110.0), "R2": run_part(30.0, 50.0, 0.1, 125.0)})
NEW = run_result(
    {"R1": run_part(52.0, 260.0, 0.31, 103.0), "R3": run_part(28.0, 10.0, 0.05, 127.0)}
)


@pytest.mark.parametrize(
    ("old", "new", "expected"),
    [
        (10.0, 8.0, 20.0),  # a fifth of the room lost
        (10.0, 12.0, -20.0),  # room gained
        (-2.0, -3.0, 50.0),  # already over, and further over: still a loss
        (0.0, 0.0, 0.0),
        (0.0, -1.0, math.inf),
    ],
)
def test_margin_loss_percent(old: float, new: float, expected: float) -> None:
    assert margin_loss_percent(old, new) == expected


def test_parts_added_removed_and_changed() -> None:
    result = compare(snapshot_of(OLD, "old"), snapshot_of(NEW, "new"), Thresholds())
    by_name = {p.name: p for p in result.parts}
    assert by_name["R2"].status == "removed" and by_name["R3"].status == "added"
    r1 = by_name["R1"]
    rise = r1.change("rise")
    assert rise is not None and rise.old == 20.0 and rise.new == 27.0 and rise.delta == 7.0
    assert r1.drift_growth == 60.0
    assert next(p.name for p in result.parts) == "R1"  # the part that got worse comes first
    statuses = {(c.subject, c.limit): c.status for c in result.limits}
    assert statuses[("R2", "tmax")] == "removed" and statuses[("R3", "tmax")] == "added"
    assert statuses[("R1", "tmax")] == "pass" and result.passed


@pytest.mark.parametrize(
    ("gate", "crossed"),
    [
        (Thresholds(max_rise_growth=6.9), ["R1: rise grew by 7 K, more than 6.9 K"]),
        (Thresholds(max_rise_growth=7.1), []),
        (Thresholds(max_drift_growth_ppm=59.0), ["R1: drift grew by 60 ppm, more than 59 ppm"]),
        (Thresholds(max_drift_growth_ppm=61.0), []),
        # R1's tmax margin went from 110 K to 103 K: 6.36 % of it lost.
        (Thresholds(max_margin_loss_percent=6.0), ["R1 tmax: margin shrank by 7 K"]),
        (Thresholds(max_margin_loss_percent=6.5), []),
    ],
)
def test_gate(gate: Thresholds, crossed: list[str]) -> None:
    result = compare(snapshot_of(OLD, "old"), snapshot_of(NEW, "new"), gate)
    assert len(result.crossed) == len(crossed)
    for line, words in zip(result.crossed, crossed, strict=True):
        assert line.startswith(words)
    assert result.passed is (not crossed)


def test_options_override_the_file() -> None:
    options = Thresholds(max_rise_growth=1.0)
    table = Thresholds(max_rise_growth=5.0, max_drift_growth_ppm=20.0)
    assert options.over(table) == Thresholds(1.0, 20.0, None)


def test_settle_result_reads_the_cycle_mean_and_drift_from_resistance() -> None:
    data = {
        "analysis": "settle",
        "ambient": 20.0,
        "deck": "d.cir",
        "parts": {
            "RH": {
                "temperature": 50.0,
                "peak_temperature": 53.0,
                "resistance": 10.05,
                "nominal_resistance": 10.0,
                "power": 2.0,
            }
        },
    }
    part = snapshot_of(data, "s").parts["RH"]
    assert part.settled_mean == 50.0 and part.temperature is None and part.peak == 53.0
    assert part.rise == 30.0
    assert part.drift_ppm == pytest.approx(5000.0)


def test_sweep_parts_pair_up_by_corner() -> None:
    def corner(index: int, ambient: float, temperature: float) -> dict[str, Any]:
        return {
            "index": index,
            "ambient": ambient,
            "params": {"rload": 100.0},
            "draw": None,
            "status": "ok",
            "parts": {"R1": run_part(temperature, 0.0, 0.2, 100.0)},
            "limits": [
                {
                    "subject": "R1",
                    "limit": "tmax",
                    "value": temperature,
                    "bound": 155.0,
                    "unit": "degC",
                    "margin": 155.0 - temperature,
                    "passed": True,
                }
            ],
        }

    old = {"corners": [corner(0, -40.0, -20.0), corner(1, 85.0, 105.0)]}
    new = {"corners": [corner(0, 85.0, 108.0)]}  # only the hot corner is left, at index 0
    result = compare(snapshot_of(old, "a"), snapshot_of(new, "b"), Thresholds())
    by_name = {p.name: p for p in result.parts}
    hot = by_name["R1 @ 85 degC, rload=100"]
    rise = hot.change("rise")
    assert rise is not None and rise.delta == pytest.approx(3.0)
    assert by_name["R1 @ -40 degC, rload=100"].status == "removed"
    assert {(c.subject, c.status) for c in result.limits} == {
        ("R1 @ -40 degC, rload=100", "removed"),
        ("R1 @ 85 degC, rload=100", "pass"),
    }


def test_markdown_puts_the_worst_first_and_folds_the_rest() -> None:
    parts = {f"R{i}": run_part(30.0, 0.0, 0.1, 120.0) for i in range(1, 9)}
    worse = {**parts, "R7": run_part(40.0, 0.0, 0.1, 110.0), "R3": run_part(33.0, 0.0, 0.1, 117.0)}
    result = compare(
        snapshot_of(run_result(parts), "a"),
        snapshot_of(run_result(worse), "b"),
        Thresholds(max_rise_growth=5.0),
    )
    text = render_markdown(result)
    summary, folded = text.split("<details>")
    assert summary.index("`R7`") < summary.index("`R3`")  # 10 K worse before 3 K worse
    assert "`R1`" not in summary and "`R1`" in folded  # unchanged parts are folded away
    assert "- **crossed** `R7`: rise grew by 10 K, more than 5 K" in summary
    table = render_table(result)
    assert "CROSSED R7: rise grew by 10 K" in table and "gate crossed 1 time" in table


def test_results_of_two_commands_are_not_compared(tmp_path: Path) -> None:
    run = tmp_path / "run.json"
    run.write_text(json.dumps(OLD))
    settle = tmp_path / "settle.json"
    settle.write_text(json.dumps({**OLD, "analysis": "settle"}))
    result = CliRunner().invoke(main, ["compare", str(run), str(settle)])
    assert result.exit_code == 2 and "is a run result" in result.output


def _saved(tmp_path: Path, name: str, data: dict[str, Any]) -> str:
    path = tmp_path / name
    path.write_text(json.dumps(data))
    return str(path)


def _at(deck: str, in_repository: str | None, sha256: str = "") -> dict[str, Any]:
    """The deck keys of a result: its path, where it sits in its repository, its hash."""
    return {"deck": deck, "deck_in_repository": in_repository, "deck_sha256": sha256 or None}


def _sweep(deck: str, ambient: float) -> dict[str, Any]:
    corner = {"index": 0, "ambient": ambient, "params": {}, "draw": None, "status": "ok",
              "parts": {"R1": run_part(ambient + 20.0, 0.0, 0.2, 100.0)}}  # fmt: skip
    return {"deck": deck, "corners": [corner]}


@pytest.mark.parametrize(
    ("old", "new", "words"),
    [
        # two designs by their file names (the folder is no part of a design's name)
        (OLD, {**NEW, "deck": "other/amplifier.cir"}, "of board.cir and "),
        # one file name, but no part in common: two designs that share a name
        (OLD, run_result({"Q7": run_part(40.0, 0.0, 0.1, 115.0)}), "have no part in common"),
        # one file name in two folders of a repository: two decks, by where they sit in it
        (
            {**OLD, **_at("/src/amp/board.cir", "amp/board.cir")},
            {**NEW, **_at("/src/psu/board.cir", "psu/board.cir")},
            "is a result of amp/board.cir and ",
        ),
    ],
)
def test_results_of_two_decks_are_refused_unless_asked(
    tmp_path: Path, old: dict[str, Any], new: dict[str, Any], words: str
) -> None:
    paths = [_saved(tmp_path, "old.json", old), _saved(tmp_path, "new.json", new)]
    refused = CliRunner().invoke(main, ["compare", *paths])
    assert refused.exit_code == 2, refused.output
    assert words in refused.output and "--different-decks" in refused.output
    assert "R1" not in refused.output  # no table of a comparison that means nothing
    allowed = CliRunner().invoke(main, ["compare", *paths, "--different-decks", "--json", "-"])
    assert allowed.exit_code == 0, allowed.output
    assert "warning: " in allowed.stderr and words in allowed.stderr
    assert json.loads(allowed.stdout)["new"]["deck"] == new["deck"]


@pytest.mark.parametrize(
    ("old", "new"),
    [
        (OLD, {**NEW, "deck": "/ci/checkout/boards/board.cir"}),  # another folder, one deck
        (OLD, {**NEW, "deck": "C:\\ci\\boards\\board.cir"}),  # written on another system
        (OLD, {**NEW, "deck": "-"}),  # standard input has no name to hold
        (_sweep("board.cir", 25.0), _sweep("board.cir", 85.0)),  # other corners, same parts
        # one deck in two checkouts of its repository (another folder, one place in it)
        (
            {**OLD, **_at("/home/u/wt/amp/board.cir", "amp/board.cir")},
            {**NEW, **_at("/ci/build/amp/board.cir", "amp/board.cir")},
        ),
        # one deck's very bytes under two names (a copy renamed)
        (
            {**OLD, **_at("board.cir", None, "ab" * 32)},
            {**NEW, **_at("plate.cir", None, "ab" * 32)},
        ),
    ],
)
def test_results_of_one_deck_are_compared(
    tmp_path: Path, old: dict[str, Any], new: dict[str, Any]
) -> None:
    paths = [_saved(tmp_path, "old.json", old), _saved(tmp_path, "new.json", new)]
    result = CliRunner().invoke(main, ["compare", *paths, "-q"])
    assert result.exit_code == 0, result.output
    assert "warning" not in result.output


@pytest.mark.ngspice
def test_run_records_the_deck_so_that_compare_knows_two_of_one_name(tmp_path: Path) -> None:
    """Two boards of one file name in two folders of one repository: run --json records
    each deck's place in it (and its hash), and compare refuses to pair them; one board in
    two checkouts of the repository is paired."""
    results = {}
    for repo, folder, ohms in (("wt1", "amp", 100), ("wt1", "psu", 200), ("wt2", "amp", 110)):
        (tmp_path / repo / ".git").mkdir(parents=True, exist_ok=True)  # a work tree's top
        where = tmp_path / repo / folder
        where.mkdir()
        (where / "board.cir").write_text(f"board\nV1 a 0 DC 5\nR1 a 0 {ohms}\n.op\n.end\n")
        (where / "board.thermal.toml").write_text(
            'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0.0\nrth = 50\n'
        )
        out = tmp_path / f"{repo}-{folder}.json"
        ran = CliRunner().invoke(main, ["run", str(where / "board.cir"), "--json", str(out)])
        assert ran.exit_code == 0, ran.output
        results[(repo, folder)] = str(out)
        data = json.loads(out.read_text())
        assert data["deck_in_repository"] == f"{folder}/board.cir"
        assert data["deck_sha256"] == hashlib.sha256((where / "board.cir").read_bytes()).hexdigest()
    two = CliRunner().invoke(main, ["compare", results["wt1", "amp"], results["wt1", "psu"]])
    assert two.exit_code == 2 and "amp/board.cir" in two.output and "psu/board.cir" in two.output
    one = CliRunner().invoke(main, ["compare", results["wt1", "amp"], results["wt2", "amp"], "-q"])
    assert one.exit_code in (0, 1), one.output  # compared (1: the gate judged the change)
