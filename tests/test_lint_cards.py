"""lint's card rules (heatweave.spice.lint_cards), each row held against ngspice 39 itself.

Every row names the manual section of the card's general form and says what ngspice 39.3
does with the card; the test runs ngspice on the same deck and checks that it really does
so (rejects it with the quoted words, computes the stated number of points, never
finishes, or quietly uses 1 mOhm), then checks lint's exact finding.
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.checks.lint import lint_file
from heatweave.cli.lint_cmd import lint
from heatweave.simulators.rawfile import read_raw

pytestmark = pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")

# The analysed circuit; the card under test is line 7.
ANALYSIS_DECK = (
    "probe deck\nV1 in 0 dc 1 ac 1\nV2 aux 0 1\nRa aux 0 1k\nR1 in out 1k\nR2 out 0 1k\n"
)
LINE = 7


def ngspice(deck: Path, timeout: float = 20) -> tuple[int | None, str, int | None]:
    """Exit status (None: still running after *timeout* s), output, rawfile points."""
    raw = deck.with_suffix(".raw")
    try:
        done = subprocess.run(
            ["ngspice", "-b", "-r", str(raw), str(deck)],
            capture_output=True, text=True, timeout=timeout, cwd=deck.parent,
        )  # fmt: skip
    except subprocess.TimeoutExpired:
        return None, "", None
    points = None
    if raw.is_file():
        found = re.search(rb"No\. Points:\s*(\d+)", raw.read_bytes())
        points = int(found.group(1)) if found else None
    return done.returncode, done.stdout + done.stderr, points


def accepted(output: str) -> bool:
    """ngspice 39 accepted the deck: a ``Circuit:`` line and no line with "error"."""
    lines = output.lower().splitlines()
    return any(line.startswith("circuit:") for line in lines) and not any(
        "error" in line for line in lines
    )


def findings(deck: Path) -> list[tuple[int, int, str, str]]:
    return [
        (f.location.line, f.location.column, f.severity, f.message)
        for f in lint_file(str(deck))
        if f.location is not None
    ]


# (card, column, severity, lint's message, manual section, what ngspice 39 does:
#  ("rejects", words it prints) | ("points", how many it computes) | ("hangs", None))
REJECTED = [
    (".tran 1m", 9, "error", ".tran is missing tstop, the stop time", "15.3.10",
     ("rejects", "TSTOP is invalid, must be greater than zero")),
    (".tran 1u uic", 13, "error", ".tran is missing tstop, the stop time", "15.3.10",
     ("rejects", "TSTOP is invalid, must be greater than zero")),
    (".tran", 6, "error", ".tran is missing tstep, the time step", "15.3.10",
     ("rejects", "TSTEP is invalid, must be greater than zero")),
    (".tran 1m 0", 10, "error", ".tran tstop must be greater than zero, not 0", "15.3.10",
     ("rejects", "TSTOP is invalid, must be greater than zero")),
    (".tran 1m -1", 10, "error", ".tran tstop must be greater than zero, not -1", "15.3.10",
     ("rejects", "TSTOP is invalid, must be greater than zero")),
    (".tran 0 1m", 7, "error", ".tran tstep must be greater than zero, not 0", "15.3.10",
     ("rejects", "TSTEP is invalid, must be greater than zero")),
    (".tran 1u abc", 10, "error", ".tran tstop must be a number, not 'abc'", "15.3.10",
     ("rejects", "TSTOP is invalid, must be greater than zero")),
    (".tran 1u 1m 1m", 13, "error", ".tran tstart must be less than tstop (1m), not 1m",
     "15.3.10", ("rejects", "TSTART is invalid, must be less than TSTOP")),
    (".tran 1u 1m 0 -1u", 15, "error", ".tran tmax must not be negative, not -1u", "15.3.10",
     ("rejects", "Timestep too small")),
    (".ac dec 10 1", 13, "warning",
     ".ac is missing fstop, the stop frequency: ngspice 39 runs it and computes no points",
     "15.3.1", ("points", 0)),
    (".ac dec 10", 11, "error", ".ac is missing fstart, the start frequency", "15.3.1",
     ("rejects", "AC startfreq <= 0")),
    (".ac", 4, "error", ".ac is missing the sweep type (dec, oct or lin)", "15.3.1",
     ("rejects", "no such parameter on this device")),
    (".ac foo 10 1 1k", 5, "error", ".ac expects dec, oct or lin, not 'foo'", "15.3.1",
     ("rejects", "no such parameter on this device")),
    (".ac dec 10 0 1k", 12, "error",
     ".ac fstart must be greater than zero for a dec sweep, not 0", "15.3.1",
     ("rejects", "AC startfreq <= 0")),
    (".ac lin 10 -1 1k", 12, "error", ".ac fstart must not be negative, not -1", "15.3.1",
     ("rejects", "Frequency of < 0 is invalid for AC start")),
    (".ac dec 10 1 -1", 14, "error", ".ac fstop must be greater than zero, not -1", "15.3.1",
     ("rejects", "Frequency of < 0 is invalid for AC stop")),
    (".ac dec 10 1k 1", 15, "warning",
     ".ac fstop 1 is below fstart 1k: ngspice 39 computes no points", "15.3.1",
     ("points", 0)),
    (".ac dec 0 1 1k", 9, "warning", ".ac points must be at least 1, not 0", "15.3.1",
     ("points", 4)),  # one point per decade from 1 Hz to 1 kHz
    (".dc V1 0 1", 11, "error", ".dc is missing vincr, the step", "15.3.2", ("hangs", None)),
    (".dc V1 0 1 0", 12, "error", ".dc vincr must not be zero: ngspice 39 never finishes",
     "15.3.2", ("hangs", None)),
    (".dc V1 0 1 -0.1", 12, "warning",
     ".dc vincr -0.1 leads away from vstop 1: ngspice 39 computes no points", "15.3.2",
     ("points", 0)),
    (".dc V1 0 1 0.1 V2 0 1", 22, "error", ".dc is missing incr2, the step", "15.3.2",
     ("hangs", None)),
    (".dc", 4, "error", ".dc is missing the source to sweep", "15.3.2",
     ("rejects", "no such device")),
    (".noise v(out) V1 dec 10 1", 26, "error", ".noise is missing fstop, the stop frequency",
     "15.3.4", ("rejects", "Frequency of 0 is invalid")),
    (".noise v(out)", 14, "error", ".noise is missing the input source", "15.3.4",
     ("rejects", "no such parameter on this device")),
    (".noise out V1 dec 10 1 1k", 8, "error",
     ".noise expects the output as v(<node>), not 'out'", "15.3.4", ("rejects", "bad syntax")),
    (".noise v(out) V1 dec 0 1 1k", 22, "error", ".noise points must be greater than zero, not 0",
     "15.3.4", ("rejects", "Number of steps for noise measurement has to be larger than 0")),
    (".noise v(out) V1 lin 10 0 1k", 25, "error", ".noise fstart must be greater than zero, not 0",
     "15.3.4", ("rejects", "Frequency of 0 is invalid")),
    (".noise v(out) V1 dec 10 1k 1", 28, "warning",
     ".noise fstop 1 is below fstart 1k: ngspice 39 computes no points", "15.3.4",
     ("points", 0)),
]  # fmt: skip


@pytest.mark.parametrize(
    ("card", "column", "severity", "message", "section", "observed"),
    REJECTED,
    ids=[row[0] for row in REJECTED],
)
def test_analysis_card_rules(
    tmp_path: Path,
    card: str,
    column: int,
    severity: str,
    message: str,
    section: str,
    observed: tuple[str, object],
) -> None:
    deck = tmp_path / "probe.cir"
    deck.write_text(ANALYSIS_DECK + card + "\n.end\n")
    kind, detail = observed
    status, output, points = ngspice(deck, timeout=2 if kind == "hangs" else 20)
    if kind == "rejects":
        assert status != 0 and str(detail) in output, output
    elif kind == "points":
        assert status == 0 and points == detail, (status, points)
        assert accepted(output), output  # it loads and runs: lint warns, never errs (issue 17)
    else:
        assert status is None, "ngspice finished"
    assert findings(deck) == [(LINE, column, severity, message)]


# Cards ngspice 39 runs to a result, and lint leaves alone (manual section).
ACCEPTED = [
    (".tran 1u 1m", "15.3.10"),
    (".tran 1u 1m uic", "15.3.10"),
    (".tran 1u 1m 0 0", "15.3.10"),  # tmax 0: ngspice chooses it
    (".tran 1u 1m -1m", "15.3.10"),  # a negative tstart is accepted
    (".tran 1u {1m}", "15.3.10"),  # an expression: not evaluated by lint
    (".ac dec 10 1 10k", "15.3.1"),
    (".ac lin 10 0 1k", "15.3.1"),  # a linear sweep may start at 0 Hz
    (".ac lin 10 1k 1k", "15.3.1"),
    (".dc V1 1 0 -0.1", "15.3.2"),
    (".dc V1 0 1 0.1 V2 0 1 0.5", "15.3.2"),
    (".dc TEMP -15 75 5", "15.3.2"),
    (".dc R1 1k 2k 100", "15.3.2"),
    (".noise v(out,0) V1 oct 8 1 1meg 1", "15.3.4"),
]


@pytest.mark.parametrize(("card", "section"), ACCEPTED, ids=[row[0] for row in ACCEPTED])
def test_accepted_analysis_cards(tmp_path: Path, card: str, section: str) -> None:
    deck = tmp_path / "probe.cir"
    deck.write_text(ANALYSIS_DECK + card + "\n.end\n")
    status, output, points = ngspice(deck)
    assert status == 0 and points, output
    assert findings(deck) == []


def test_analysis_finding_points_into_the_source(tmp_path: Path) -> None:
    deck = tmp_path / "probe.cir"
    deck.write_text(ANALYSIS_DECK + ".tran 1m\n.end\n")
    (finding,) = lint_file(str(deck))
    assert finding.location is not None and finding.location.source_line == ".tran 1m"
    assert finding.hint == "write .tran <tstep> <tstop> [<tstart> [<tmax>]] [uic]"
    # a value on a continuation line is reported on that line (manual 2.1.4.1)
    deck.write_text(ANALYSIS_DECK + ".tran 1m\n* the stop time:\n+ 0\n.end\n")
    assert findings(deck) == [(9, 3, "error", ".tran tstop must be greater than zero, not 0")]


RESISTOR_DECK = (
    "probe deck\nV1 in 0 1\nR1 in out 1k\n{card}\n.model rmod r (rsh=100)\n"
    ".model rmod2 r (tc1=0.01)\n.model rmod3 r (r=500)\n.options filetype=ascii\n.op\n.end\n"
)
NGSPICE_WARNING = "resistance to low, set to 1 mOhm"  # ngspice 39.3's words, as printed

# (card on line 4, column, lint's message, whether ngspice 39 warns); manual 3.3.1 for all.
DEFAULTED = [
    ("R3 out 0", 9, "R3 has no resistance value; ngspice 39 uses 1 mOhm", True),
    ("R3 out 0 tc1=0.01", 9, "R3 has no resistance value; ngspice 39 uses 1 mOhm", True),
    ("R3 out 0 ac=2k", 9, "R3 has no resistance value; ngspice 39 uses 1 mOhm", True),
    ("R3 out 0 0", 10, "R3 has resistance 0, which ngspice 39 silently replaces by 1 mOhm",
     False),
    ("R3 out 0 r=0", 12, "R3 has resistance 0, which ngspice 39 silently replaces by 1 mOhm",
     False),
    ("R3 out 0 rmod2", 10, "R3 has no resistance value and model rmod2 sets neither rsh nor r; "
     "ngspice 39 uses 1 mOhm", True),
]  # fmt: skip


def out_voltage(deck: Path) -> float:
    status, output, _ = ngspice(deck)
    assert status == 0, output
    (plot,) = read_raw(deck.with_suffix(".raw"))
    return float(plot["v(out)"][0])


@pytest.mark.parametrize(
    ("card", "column", "message", "warns"), DEFAULTED, ids=[row[0] for row in DEFAULTED]
)
def test_resistor_without_a_value(
    tmp_path: Path, card: str, column: int, message: str, warns: bool
) -> None:
    deck = tmp_path / "probe.cir"
    deck.write_text(RESISTOR_DECK.format(card=card))
    _status, output, _ = ngspice(deck)
    assert (NGSPICE_WARNING in output) is warns, output
    # 1 V over 1 kOhm and 1 mOhm in series: the divider's output, by Ohm's law
    assert out_voltage(deck) == pytest.approx(1e-3 / (1e3 + 1e-3), rel=1e-6)
    assert findings(deck) == [(4, column, "warning", message)]


# Resistor cards whose value ngspice takes from the card or its model (manual 3.3.1-3.3.3).
VALUED = [
    ("R3 out 0 1k", 1e3),
    ("R3 out 0 r={2*500}", 1e3),
    ("R3 out 0 rmod", 100.0),  # rsh=100 times the default l/w of 10u/10u (3.3.3)
    ("R3 out 0 rmod3", 500.0),  # the model's default value r=500
]


@pytest.mark.parametrize(("card", "ohms"), VALUED, ids=[row[0] for row in VALUED])
def test_resistor_with_a_value(tmp_path: Path, card: str, ohms: float) -> None:
    deck = tmp_path / "probe.cir"
    deck.write_text(RESISTOR_DECK.format(card=card))
    assert out_voltage(deck) == pytest.approx(ohms / (1e3 + ohms), rel=1e-6)
    assert findings(deck) == []


def test_annotation_file_with_several_decks_is_a_usage_error(tmp_path: Path) -> None:
    one, two = tmp_path / "one.cir", tmp_path / "two.cir"
    for deck in (one, two):
        deck.write_text("divider\nV1 in 0 1\nR1 in 0 1k\n.op\n.end\n")
    notes = tmp_path / "one.thermal.toml"
    notes.write_text('schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = 1.0\n')
    result = CliRunner().invoke(lint, [str(one), str(two), "-a", str(notes)])
    assert result.exit_code == 2
    assert "names the annotation file of one deck, but 2 decks were given" in result.output
    assert "hint: lint that deck on its own" in result.output
    assert CliRunner().invoke(lint, [str(one), "-a", str(notes)]).exit_code == 0
    assert CliRunner().invoke(lint, [str(one), str(two)]).exit_code == 0


# The rows ngspice 39 runs to no points: a warning for plain lint (exit 0), an error under
# --strict, and a located refusal (exit 2) from every command that would run that analysis.
EMPTY = [row for row in REJECTED if row[5] == ("points", 0)]
EMPTY_IDS = [row[0] for row in EMPTY]


@pytest.mark.parametrize("row", EMPTY, ids=EMPTY_IDS)
def test_lint_exit_status_follows_ngspice(tmp_path: Path, row: tuple[object, ...]) -> None:
    card = str(row[0])
    deck = tmp_path / "probe.cir"
    deck.write_text(ANALYSIS_DECK + card + "\n.end\n")
    assert CliRunner().invoke(lint, [str(deck)]).exit_code == 0
    strict = CliRunner().invoke(lint, [str(deck), "--strict"])
    assert strict.exit_code == 1 and str(row[3]) in strict.output


@pytest.mark.parametrize("command", ["run", "check", "sweep"])
@pytest.mark.parametrize("row", EMPTY, ids=EMPTY_IDS)
def test_simulating_commands_refuse_an_analysis_computing_nothing(
    tmp_path: Path, row: tuple[object, ...], command: str
) -> None:
    from heatweave.cli import main

    card, column, message = str(row[0]), int(str(row[1])), str(row[3])
    deck = tmp_path / "probe.cir"
    deck.write_text(ANALYSIS_DECK + card + "\n.end\n")
    (tmp_path / "probe.thermal.toml").write_text(
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1_ppm = 100\nrth = 50\ncth = 0.01\n'
    )
    extra = ["--ambient", "25:50:25"] if command == "sweep" else []
    result = CliRunner().invoke(main, [command, str(deck), *extra])
    assert result.exit_code == 2, result.output
    assert f"probe.cir:{LINE}:{column}: error: {message}" in result.output
    assert card in result.output  # the source line is shown
    # The same deck with its analysis replaced on the command line runs.
    replaced = CliRunner().invoke(main, [command, str(deck), *extra, "--op"])
    assert replaced.exit_code == 0, replaced.output


@pytest.mark.parametrize(
    ("function", "high", "warned"),
    [
        ("PULSE(0 1 0 0.5m 0.5m 0 1m)", True, True),  # a triangle written with PW 0
        ("pulse(0 1 0 0.5m 0.5m 0.0 1m 0)", True, True),
        ("PULSE(0 1 0 0.5m 0.5m 1n 1m)", False, False),  # a triangle with a tiny PW
        ("PULSE(0 1 0 1u 1u 0)", True, True),  # a single spike written with PW 0
        ("PULSE(0 1 0 1u 1u)", True, False),  # PW left out: TSTOP, as the manual says
        ("PULSE 0 1 0 0.5m 0.5m 0 1m", True, True),  # no parentheses: ngspice 39 runs it
        ("pulse 0 1 0 0.5m 0.5m 1n 1m", False, False),
    ],
)
def test_pulse_width_zero_is_the_default(
    tmp_path: Path, function: str, high: bool, warned: bool
) -> None:
    """Manual 4.1.1: PW defaults to TSTOP, and ngspice 39 takes a PW of 0 as not given: the
    source rises once and stays at V2 (run here: 0.7 ms into the second period of a 1 ms
    triangle it still reads V2).  lint warns at a PW written as 0."""
    deck = tmp_path / "pulse.cir"
    deck.write_text(
        "pulse width\n"
        f"I1 0 a {function}\n"
        "R1 a 0 10\n"
        ".tran 10u 5m\n"
        ".control\nrun\nmeas tran late find v(a) at=1.7m\n.endc\n.end\n"
    )
    _, output, _ = ngspice(deck)
    late = re.search(r"late\s*=\s*(\S+)", output)
    assert late is not None, output
    assert (abs(float(late[1]) - 10.0) < 1e-6) == high  # V2 = 1 A into 10 ohm
    warnings = [f for f in findings(deck) if f[2] == "warning" and "PW" in f[3]]
    if warned:
        pw = list(re.finditer(r"[^\s()]+", function))[6]  # PULSE V1 V2 TD TR TF PW
        column = len("I1 0 a ") + pw.start() + 1
        assert [(w[0], w[1]) for w in warnings] == [(2, column)], warnings
    else:
        assert warnings == []
