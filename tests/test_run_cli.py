"""``heatweave run`` as a user meets it: options, outputs, exit codes, safety.

The numbers themselves are checked against scipy in test_reports.py; here the command line
around them: both back ends agree, ``.control`` blocks do not run unless allowed, every
output lands whole and only where asked, bad options fail with exit status 2.
"""

from __future__ import annotations

import csv
import io
import itertools
import json
import shutil
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner, Result
from scipy.optimize import brentq

from heatweave.cli import main
from heatweave.cli.run_cmd import run
from heatweave.errors import EXIT_BAD_INPUT, EXIT_OK, EXIT_THERMAL_RUNAWAY
from heatweave.reports import CAUTION_TEXT

pytestmark = pytest.mark.ngspice

FIXTURES = Path(__file__).parent / "fixtures" / "run"
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), section 5.2


def invoke(*args: str, stdin: str | None = None) -> Result:
    return CliRunner().invoke(run, list(args), input=stdin, catch_exceptions=False)


def numbers(data: Any, prefix: str = "") -> dict[str, float]:
    """Every number in a JSON document by its key path."""
    found: dict[str, float] = {}
    if isinstance(data, dict):
        for key, value in data.items():
            found.update(numbers(value, f"{prefix}.{key}"))
    elif isinstance(data, float | int) and not isinstance(data, bool):
        found[prefix] = float(data)
    return found


def copy_fixture(tmp_path: Path, deck: str) -> Path:
    for name in (deck, deck.replace(".cir", ".thermal.toml")):
        shutil.copy(FIXTURES / name, tmp_path / name)
    return tmp_path / deck


@pytest.mark.parametrize(
    "args",
    [("board.cir",), ("board.cir", "--op"), ("divider_tran.cir",), ("heat_only.cir",)],
)
def test_both_back_ends_give_the_same_numbers(args: tuple[str, ...]) -> None:
    deck, *rest = args
    reports = {}
    for backend in ("shared", "batch"):
        # The same method on both: the co-simulation needs the shared library.
        result = invoke(
            str(FIXTURES / deck), *rest, "--backend", backend, "--method", "full", "-q",
            "--json", "-",
        )  # fmt: skip
        assert result.exit_code == EXIT_OK, result.stderr
        data = json.loads(result.stdout)
        assert data["backend"] == backend
        reports[backend] = numbers(data)
    assert reports["shared"].keys() == reports["batch"].keys()
    for key, value in reports["shared"].items():
        # one ngspice, one deck, one command script: only float formatting may differ
        assert reports["batch"][key] == pytest.approx(value, rel=1e-9, abs=1e-12), key


def control_deck(tmp_path: Path) -> tuple[Path, Path]:
    marker = tmp_path / "left-behind.txt"
    text = (FIXTURES / "control.cir.in").read_text().replace("@MARKER@", str(marker))
    deck = tmp_path / "control.cir"
    deck.write_text(text)
    shutil.copy(FIXTURES / "control.thermal.toml", tmp_path / "control.thermal.toml")
    return deck, marker


@pytest.mark.parametrize("backend", ["shared", "batch"])
def test_control_block_does_not_run_unless_allowed(tmp_path: Path, backend: str) -> None:
    deck, marker = control_deck(tmp_path)
    before = deck.read_bytes()
    result = invoke(str(deck), "--backend", backend, "-q")
    assert result.exit_code == EXIT_OK, result.stderr
    assert not marker.exists()
    # the warning points at the block in the user's deck (line 5), not in the emitted one
    assert f"{deck}:5:1: warning: dropped a .control block" in result.stderr
    assert "--allow-control" in result.stderr
    assert deck.read_bytes() == before
    # the same deck with the block allowed does create the file: the check above can fail
    allowed = invoke(str(deck), "--backend", backend, "-q", "--allow-control")
    assert allowed.exit_code == EXIT_OK, allowed.stderr
    assert marker.exists()


def test_outputs_are_whole_and_only_where_asked(tmp_path: Path) -> None:
    deck = copy_fixture(tmp_path, "board.cir")
    before = deck.read_bytes()
    out = tmp_path / "out"
    out.mkdir()
    result = invoke(
        str(deck), "-q", "--json", str(out / "r.json"), "--csv", str(out / "w.csv"),
        "--plot", str(out / "f.png"), "--probe", "mid",
    )  # fmt: skip
    assert result.exit_code == EXIT_OK, result.stderr
    assert result.stdout == ""
    assert sorted(p.name for p in out.iterdir()) == ["f.png", "r.json", "w.csv"]
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "board.cir", "board.thermal.toml", "out",
    ]  # fmt: skip
    assert deck.read_bytes() == before
    assert (out / "f.png").read_bytes().startswith(PNG_SIGNATURE)
    data = json.loads((out / "r.json").read_text())
    assert list(data) == [
        "heatweave_version", "deck", "deck_in_repository", "deck_sha256", "annotations",
        "analysis", "analysis_commands",
        "backend", "method", "ambient", "parts", "nodes", "voltages", "currents", "probes",
        "warnings", "cautions",
    ]  # fmt: skip
    assert list(data["parts"]) == ["RA", "RB", "DK"]
    assert data["cautions"] == CAUTION_TEXT
    rows = list(csv.reader(io.StringIO((out / "w.csv").read_text())))
    header = rows[0]
    assert header[0] == "time [s]"
    assert "T(node patch) [degC]" in header and "V(mid) [V]" in header
    times = [float(r[0]) for r in rows[1:]]
    assert times[0] == 0.0 and times[-1] == pytest.approx(4.0)  # board.cir: .tran 2m 4
    assert all(b > a for a, b in itertools.pairwise(times))
    assert all(len(r) == len(header) for r in rows)
    # the CSV's last row is the JSON's final state
    assert float(rows[-1][header.index("T(RA) [degC]")]) == data["parts"]["RA"]["temperature"]


def test_json_on_stdout_moves_the_table_to_stderr() -> None:
    result = invoke(str(FIXTURES / "divider.cir"), "--json", "-")
    assert result.exit_code == EXIT_OK
    assert json.loads(result.stdout)["parts"]["R1"]["model"] == "linear"
    assert "T final" in result.stderr and "caution:" in result.stderr


def test_table_names_parts_units_and_nodes() -> None:
    result = invoke(str(FIXTURES / "board.cir"), "--op")
    assert result.exit_code == EXIT_OK
    lines = result.stdout.splitlines()
    assert any(line.split()[:2] == ["RB", "quadratic"] for line in lines if line)
    assert any(line.split()[:3] == ["DK", "heat", "only"] for line in lines if line)
    units = next(line for line in lines if "degC" in line and "ppm" in line)
    assert units.split() == ["degC", "%", "ppm", "W", "W", "W", "K"]
    assert any(line.startswith("patch ") for line in lines)
    # RB dissipates above its 0.5 W rating (see test_reports for the numbers)
    assert any(line.startswith("over rating: RB") for line in lines)
    assert "\x1b[" not in result.stdout  # no colour codes off a terminal
    assert "simulated" not in result.stderr  # no progress off a terminal


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (("--op", "--tran", "1m", "1"), "--op and --tran"),
        (("--tran", "1", "1m"), "is not below the stop time"),
        (("--tran", "fast", "1"), "is not a number"),
        # 1e400 overflows a double (IEEE 754 binary64 tops out near 1.8e308): infinity
        (("--tran", "1u", "1e400"), "is not a finite number"),
        (("--json", "-", "--csv", "-"), "both write to stdout"),
        (("--probe", "nowhere"), "the deck has no node 'nowhere'"),
        (("--backend", "remote"), "Invalid value for '--backend'"),
    ],
)
def test_bad_options_exit_2(args: tuple[str, ...], message: str) -> None:
    result = invoke(str(FIXTURES / "divider.cir"), *args)
    assert result.exit_code == EXIT_BAD_INPUT
    assert message in result.stderr
    assert "Traceback" not in result.stderr


def test_missing_annotation_file_is_bad_input(tmp_path: Path) -> None:
    deck = tmp_path / "alone.cir"
    shutil.copy(FIXTURES / "divider.cir", deck)
    result = invoke(str(deck))
    assert result.exit_code == EXIT_BAD_INPUT
    assert "alone.thermal.toml" in result.stderr


def test_output_may_not_be_the_deck(tmp_path: Path) -> None:
    deck = copy_fixture(tmp_path, "divider.cir")
    before = deck.read_bytes()
    result = invoke(str(deck), "--csv", str(deck))
    assert result.exit_code == EXIT_BAD_INPUT
    assert deck.read_bytes() == before


# (--tran values as typed, the analysis command ngspice gets)
TRAN_OPTIONS = [("10m", "0.5", "tran 0.01 0.5"), ("100u", "0.2", "tran 0.0001 0.2")]


@pytest.mark.parametrize(("step", "stop", "command"), TRAN_OPTIONS)
def test_tran_option_replaces_the_decks_analysis(step: str, stop: str, command: str) -> None:
    result = invoke(str(FIXTURES / "divider.cir"), "--tran", step, stop, "-q", "--json", "-")
    data = json.loads(result.stdout)
    assert data["analysis"] == "tran"
    assert data["analysis_commands"] == [command]
    assert data["parts"]["R1"]["peak_temperature"] is not None


# ------------------------------------------------------------ a deck on standard input

# divider.cir / divider.thermal.toml: 10 V across R1 = 100 ohm (tc1 0.004/K, Rth 50 K/W)
# in series with R2 = 100 ohm.
# ngspice's default convergence tolerances (manual 11.1.2, .options reltol and vntol):
# node voltages, and so temperatures (1 V = 1 degC), are good to reltol * |V| + vntol.
RELTOL, VNTOL = 1e-3, 1e-6


def divider_temperature() -> float:
    """R1's steady state T = 25 + Rth P(T), P = I^2 R1(T), by scipy's brentq."""

    def balance(t: float) -> float:
        r1 = 100.0 * (1 + 0.004 * (t - 25.0))
        return t - 25.0 - 50.0 * (10.0 / (r1 + 100.0)) ** 2 * r1

    return float(brentq(balance, 25.0, 500.0, xtol=1e-12))


@pytest.mark.parametrize(
    "args",
    [
        ("divider.cir", "--op", "--method", "full"),
        ("divider_tran.cir",),  # --method auto, the deck's own transient
        ("board.cir", "--op"),  # a heat-only part and a shared node
    ],
)
def test_deck_on_stdin_gives_the_numbers_of_the_file(args: tuple[str, ...]) -> None:
    deck, *rest = args
    annotation = str(FIXTURES / deck.replace(".cir", ".thermal.toml"))
    on_file = invoke(str(FIXTURES / deck), *rest, "-q", "--json", "-")
    piped = invoke(
        "-", "-a", annotation, *rest, "-q", "--json", "-", stdin=(FIXTURES / deck).read_text()
    )
    assert on_file.exit_code == EXIT_OK, on_file.stderr
    assert piped.exit_code == EXIT_OK, piped.stderr
    from_file, from_stdin = json.loads(on_file.stdout), json.loads(piped.stdout)
    assert from_stdin["deck"] == "-"  # as emit and lint name a deck read from stdin
    # one deck text, one simulator: the very same numbers
    assert numbers(from_stdin) == numbers(from_file)


@pytest.mark.parametrize(
    ("folder", "status"),
    [(".", EXIT_OK), ("elsewhere", EXIT_BAD_INPUT)],
    ids=["cwd-holds-include", "cwd-without-include"],
)
def test_stdin_include_is_relative_to_the_current_folder(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch, folder: str, status: int
) -> None:
    text = (FIXTURES / "divider.cir").read_text()
    assert "R2 out 0 100\n" in text
    (tmp_path / "leg.inc").write_text("R2 out 0 100\n")
    (tmp_path / "elsewhere").mkdir()
    monkeypatch.chdir(tmp_path / folder)
    annotation = str(FIXTURES / "divider.thermal.toml")
    result = invoke(
        "-", "-a", annotation, "-q", "--json", "-",
        stdin=text.replace("R2 out 0 100\n", ".include leg.inc\n"),
    )  # fmt: skip
    assert result.exit_code == status, result.stderr
    if status == EXIT_OK:
        expected = divider_temperature()
        found = json.loads(result.stdout)["parts"]["R1"]["temperature"]
        assert found == pytest.approx(expected, abs=RELTOL * expected + VNTOL)
    else:
        assert "included file 'leg.inc' not found" in result.stderr
        assert "includes relative to the current folder" in result.stderr
        assert "Traceback" not in result.stderr


# Every command that runs a deck, with what it needs besides DECK.
DECK_COMMANDS = [("run",), ("check",), ("settle", "--period", "1m"), ("sweep",)]


@pytest.mark.parametrize("command", DECK_COMMANDS, ids=[c[0] for c in DECK_COMMANDS])
def test_stdin_deck_needs_an_annotation_file(command: tuple[str, ...]) -> None:
    name, *rest = command
    text = (FIXTURES / "divider.cir").read_text()
    result = CliRunner().invoke(main, [name, "-", *rest], input=text)
    assert result.exit_code == EXIT_BAD_INPUT
    # no FILE:LINE:COL: there is no file; the hint says what to add
    assert result.stderr.startswith(
        "error: a deck read from standard input (-) has no annotation file beside it\n"
    )
    assert "hint: name the annotation file with -a FILE" in result.stderr
    assert "Traceback" not in result.output


# ------------------------------------------------------------------ --probe up front

CHECK_FIXTURES = FIXTURES.parent / "check"


@pytest.mark.parametrize(
    ("deck", "probe", "hint", "unprobed"),
    [
        # runs away when simulated (exit 7): exit 2 shows the probe was checked first
        (CHECK_FIXTURES / "ntc_supply.cir", "rial", "did you mean rail?", EXIT_THERMAL_RUNAWAY),
        (FIXTURES / "nested.cir", "x1.mdi", "did you mean x1.mid?", EXIT_OK),
        (FIXTURES / "nested.cir", "V(X1.MD)", "did you mean x1.mid?", EXIT_OK),
        (FIXTURES / "divider.cir", "zzz", "nodes of this deck: in, out", EXIT_OK),
        # ground is no vector ngspice writes
        (FIXTURES / "divider.cir", "0", "nodes of this deck: in, out", EXIT_OK),
    ],
)  # fmt: skip
def test_unknown_probe_is_refused_before_simulating(
    deck: Path, probe: str, hint: str, unprobed: int
) -> None:
    annotation = str(deck.with_suffix(".thermal.toml"))
    assert invoke(str(deck), "-a", annotation, "-q").exit_code == unprobed
    result = invoke(str(deck), "-a", annotation, "--probe", probe, "-q")
    assert result.exit_code == EXIT_BAD_INPUT
    name = probe.lower().removeprefix("v(").removesuffix(")")
    message = f"error: --probe {probe}: the deck has no node {name!r}"
    assert result.stderr == f"{message}\n  hint: {hint}\n"


def test_probe_inside_a_subcircuit() -> None:
    """ngspice names a node inside an instance by its path (x1.mid); the divider's output,
    10 V * R2 / (R1(T) + R2), at R1's brentq steady state."""
    result = invoke(str(FIXTURES / "nested.cir"), "--probe", "X1.MID", "-q", "--csv", "-")
    assert result.exit_code == EXIT_OK, result.stderr
    rows = list(csv.reader(io.StringIO(result.stdout)))
    assert rows[0][-1] == "V(x1.mid) [V]"
    t = divider_temperature()
    expected = 10.0 * 100.0 / (100.0 * (1 + 0.004 * (t - 25.0)) + 100.0)
    assert float(rows[-1][-1]) == pytest.approx(expected, abs=RELTOL * expected + VNTOL)


# ------------------------------------------------------------ --probe: voltages and currents


@pytest.mark.parametrize("method", ["full", "cosim"])
def test_branch_current_probe_feeds_csv_and_json(tmp_path: Path, method: str) -> None:
    """``--probe I(v1)`` without ``--plot``: the branch current of the divider's source in
    the CSV and JSON.  Ohm's law at R1's brentq temperature: I = 10 V / (R1(T) + R2), and
    ngspice's branch current of a source delivering it is negative (current into its +
    terminal, the SPICE sign convention)."""
    deck = tmp_path / "divider.cir"
    deck.write_text((FIXTURES / "divider.cir").read_text().replace(".op", ".tran 1m 2"))
    annotation = str(FIXTURES / "divider.thermal.toml")
    csv_file, json_file = tmp_path / "w.csv", tmp_path / "r.json"
    result = invoke(str(deck), "-a", annotation, "--probe", "I(V1)", "--probe", "out",
                    "--method", method, "-q", "--csv", str(csv_file), "--json", str(json_file))
    assert result.exit_code == EXIT_OK, result.stderr
    t_hot = divider_temperature()
    expected = -10.0 / (100.0 * (1 + 0.004 * (t_hot - 25.0)) + 100.0)
    rows = list(csv.reader(csv_file.read_text().splitlines()))
    column = rows[0].index("I(v1) [A]")
    assert float(rows[-1][column]) == pytest.approx(expected, rel=2e-3)
    assert len(rows) > 3  # one row per time point: the current is a waveform
    probes = json.loads(json_file.read_text())["probes"]
    assert list(probes) == ["I(v1)", "V(out)"]
    current = probes["I(v1)"]
    assert current["unit"] == "A"
    assert current["final"] == pytest.approx(expected, rel=2e-3)
    # heating raises R1, so the cold start draws the most: |I| largest at t = 0
    assert current["min"] == pytest.approx(-10.0 / 200.0, rel=2e-3)
    assert probes["V(out)"]["final"] == pytest.approx(-expected * 100.0, rel=2e-3)


def test_probe_of_a_current_ngspice_does_not_record(tmp_path: Path) -> None:
    annotation = str(FIXTURES / "divider.thermal.toml")
    result = invoke(str(FIXTURES / "divider.cir"), "-a", annotation, "--op", "--probe", "I(R1)")
    assert result.exit_code == EXIT_BAD_INPUT
    assert "no branch current of 'r1'" in result.stderr
    assert "0 V source in series" in result.stderr and "v1" in result.stderr
