"""``heatweave network fit`` and ``convert`` through click's test runner."""

from __future__ import annotations

import tomllib
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from heatweave.cli.network_cmd import network
from heatweave.networks import Cauer, Foster

FIXTURES = Path(__file__).parent / "fixtures" / "networks"
# The network zth_two_stage.csv was sampled from (see the file's comment).
TWO_STAGE = Foster(((0.8, 2e-3), (1.5, 0.1)))
S_POINTS = np.concatenate([1j * np.logspace(-3, 6, 40), np.logspace(-3, 6, 40)])


def _run(*args: str, stdin: str | None = None) -> tuple[int, str, str]:
    result = CliRunner().invoke(network, list(args), input=stdin)
    return result.exit_code, result.stdout, result.stderr


@pytest.mark.parametrize("command", [[], ["fit"], ["convert"]])
def test_help(command: list[str]) -> None:
    code, out, _ = _run(*command, "--help")
    assert code == 0 and "Usage:" in out


def test_fit_prints_a_pasteable_snippet() -> None:
    # Derived here: the fixture holds 12-digit samples of TWO_STAGE, so the fit gives it
    # back to about 1e-9 and the printed TOML parses to those stages.
    code, out, _ = _run("fit", str(FIXTURES / "zth_two_stage.csv"), "--stages", "2")
    assert code == 0
    stages = tomllib.loads(out)["foster"]
    assert np.allclose(np.array(stages), np.array(TWO_STAGE.stages), rtol=1e-7)
    assert "fit error: RMS" in out and "26 points" in out


def test_fit_reads_stdin_writes_file_and_plot(tmp_path: Path) -> None:
    text = (FIXTURES / "zth_two_stage.csv").read_text()
    target, plot = tmp_path / "net.toml", tmp_path / "fit.png"
    code, out, _ = _run("fit", "-", "-n", "2", "-o", str(target), "--plot", str(plot),
                        stdin=text)
    assert code == 0 and out == ""
    assert tomllib.loads(target.read_text())["foster"]
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec 5.2)


def test_fit_time_window_takes_spice_factors() -> None:
    # Samples run 1e-5 .. 1 s, 5 per decade (26 points): from 100u on there are 21.
    code, out, _ = _run("fit", str(FIXTURES / "zth_two_stage.csv"), "-n", "2", "--t-min", "100u")
    assert code == 0 and "21 points" in out
    code, _, err = _run("fit", str(FIXTURES / "zth_two_stage.csv"), "-n", "2", "--t-min", "x")
    assert code == 2 and "not a number" in err


@pytest.mark.parametrize(
    ("name", "where", "words"),
    [
        ("bad_word.csv", "bad_word.csv:3:8:", "not a number"),
        ("bad_columns.csv", "bad_columns.csv:3:1:", "expected 2 columns"),
        ("bad_negative.csv", "bad_negative.csv:3:1:", "not greater than zero"),
        ("bad_zero.csv", "bad_zero.csv:2:5:", "not greater than zero"),
        ("bad_order.csv", "bad_order.csv:5:1:", "4m is not after 5m (line 4)"),
        ("bad_repeat.csv", "bad_repeat.csv:3:1:", "2m is not after 2m (line 2)"),
    ],
)
def test_fit_bad_rows_are_located(name: str, where: str, words: str) -> None:
    code, out, err = _run("fit", str(FIXTURES / name), "-n", "1")
    assert code == 2 and out == ""
    assert where in err and words in err and "hint:" in err
    assert "Traceback" not in err


@pytest.mark.parametrize(
    ("text", "where"),
    [
        # U+2028, U+0085 and a form feed are characters of their line to the csv module
        # (and to an editor counting LF); str.splitlines broke there and every later
        # position was a line too low
        ("# one\u2028two\u0085three\n1m, 0.1\n2m, x\n", "3:5:"),
        ("t, zth\f\n1m, 0.1\u2028\n2m, x\n", "3:5:"),
        # a field holding one: the row is read whole, the error on its own line
        ("1m,\u2028 0.1\n2m, -1\n", "2:5:"),
        # CR LF and a lone CR end a line, as for the csv module
        ("# crlf\r\n1m, 0.1\r2m, x\r\n", "3:5:"),
    ],
)
def test_fit_counts_lines_as_the_csv_module_does(tmp_path: Path, text: str, where: str) -> None:
    data = tmp_path / "sep.csv"
    data.write_bytes(text.encode())
    code, _, err = _run("fit", str(data), "-n", "1")
    assert code == 2 and f"{data}:{where}" in err, err


TOO_FEW = [
    # (options, words of the message): 2 stages need 5 points
    ((), "4 data points are too few for 2 Foster stages"),
    (("--t-min", "2m"), "3 data points are too few for 2 Foster stages (--t-min/--t-max keep 3 of"),
    (("--t-max", "0.5m"), "0 data points are too few for 2 Foster stages (--t-min/--t-max keep 0"),
]


@pytest.mark.parametrize(("options", "words"), TOO_FEW)
def test_fit_too_few_points(options: tuple[str, ...], words: str) -> None:
    stdin = "1m, 0.1\n2m, 0.2\n3m, 0.3\n4m, 0.35\n"
    code, _, err = _run("fit", "-", "-n", "2", *options, stdin=stdin)
    assert code == 2 and words in err and "hint:" in err


def test_convert_foster_to_cauer_and_back(tmp_path: Path) -> None:
    source = tmp_path / "f.toml"
    source.write_text("foster = [[0.5, 1e-3], [1.2, 3e-2], [2.0, 1.0]]\n")
    original = Foster(((0.5, 1e-3), (1.2, 3e-2), (2.0, 1.0)))
    code, out, _ = _run("convert", str(source), "--to", "cauer")
    assert code == 0
    ladder = Cauer(tuple(tuple(st) for st in tomllib.loads(out)["cauer"]))
    # Same impedance (definition of the equivalence); the invariants are printed.
    relative = np.abs(ladder.impedance(S_POINTS) / original.impedance(S_POINTS) - 1)
    assert relative.max() < 1e-9
    assert "sum of rth: 3.7 K/W" in out and "first Cauer capacitance C1" in out
    code, back, _ = _run("convert", "-", "--to", "foster", stdin=out)
    assert code == 0
    assert np.allclose(np.array(tomllib.loads(back)["foster"]), np.array(original.stages),
                       rtol=1e-9)


def test_convert_picks_a_part() -> None:
    parts = str(FIXTURES / "parts.toml")
    code, _, err = _run("convert", parts, "--to", "foster")
    assert code == 2 and "2 parts hold a network" in err and "--part" in err
    code, out, _ = _run("convert", parts, "--to", "foster", "--part", "Q7")
    assert code == 0 and "foster form of a cauer network" in out
    code, _, err = _run("convert", parts, "--to", "foster", "--part", "R9")
    assert code == 2 and "no [part.R9] table" in err


# A part's rth/cth (how annotation files spell one stage) is a network --part can pick; one
# RC stage is its own Foster and Cauer form: tau = rth * cth (definition of the stage).
ANNOTATION_PARTS = [
    ("RSH", "cauer", [[30.0, 0.05]]),
    ("RSH", "foster", [[30.0, 1.5]]),
    ("RLOAD", "foster", [[50.0, 0.2], [150.0, 20.0]]),
]


@pytest.mark.parametrize(("part", "target", "stages"), ANNOTATION_PARTS)
def test_convert_reads_an_annotation_files_parts(
    part: str, target: str, stages: list[list[float]]
) -> None:
    notes = str(FIXTURES / "annotation_single.toml")
    code, out, err = _run("convert", notes, "--to", target, "--part", part)
    assert code == 0, err
    assert np.allclose(np.array(tomllib.loads(out)[target]), np.array(stages), rtol=1e-12)


# Values spelt as the annotation loader reads them: SPICE strings, a tolerance's nominal.
# One RC stage is its own Foster and Cauer form: tau = rth * cth (definition of the stage).
SPELLINGS = [
    ('rth = "30"\ncth = "50m"\n', "foster", [[30.0, 1.5]]),
    ("rth = {nominal = 30, sigma = 2}\ncth = 0.05\n", "cauer", [[30.0, 0.05]]),
    ('cauer = [["30", "50m"]]\n', "foster", [[30.0, 1.5]]),
    ('foster = [["12", "10m"]]\n', "cauer", [[12.0, 0.01 / 12.0]]),
]


@pytest.mark.parametrize(("body", "target", "stages"), SPELLINGS)
def test_convert_reads_values_as_the_annotation_loader_does(
    tmp_path: Path, body: str, target: str, stages: list[list[float]]
) -> None:
    notes = tmp_path / "part.thermal.toml"
    notes.write_text(f'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\n{body}')
    code, out, err = _run("convert", str(notes), "--to", target)
    assert code == 0, err
    assert np.allclose(np.array(tomllib.loads(out)[target]), np.array(stages), rtol=1e-12)


def test_convert_of_a_steady_only_stage_names_the_file(tmp_path: Path) -> None:
    notes = tmp_path / "steady.toml"
    notes.write_text("single = [30, 0]\n")
    code, _, err = _run("convert", str(notes), "--to", "foster")
    assert code == 2 and f"{notes}:1:1:" in err and "cth = 0" in err and "hint:" in err


def test_convert_locates_a_value_after_a_line_separator(tmp_path: Path) -> None:
    # TOML reads U+2028 in a comment as a character of its line; splitting lines at it put
    # the error a line too low (issue 14).
    notes = tmp_path / "sep.toml"
    notes.write_text("# one\u2028two\nfoster = [[1.0, -2.0]]\n")
    code, _, err = _run("convert", str(notes), "--to", "cauer")
    assert code == 2 and f"{notes}:2:1:" in err and "tau of foster stage 1" in err, err


def test_convert_says_when_no_part_has_a_network(tmp_path: Path) -> None:
    notes = tmp_path / "bare.toml"
    notes.write_text('schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\n')
    code, _, err = _run("convert", str(notes), "--to", "cauer")
    assert code == 2 and "no part has a thermal network" in err and "--part" not in err


@pytest.mark.parametrize(
    ("name", "where", "words"),
    [
        ("bad_value.toml", "bad_value.toml:1:1:", "cth of cauer stage 2"),
        # Unclosed values: tomllib says "at end of document"; the position is the value's
        # opening bracket, as the annotation loader reports it (test_annotations.py).
        ("bad_syntax.toml", "bad_syntax.toml:1:10:", "unclosed array"),
        ("bad_unclosed.toml", "bad_unclosed.toml:6:10:", "unclosed array"),
    ],
)
def test_convert_bad_files_are_located(name: str, where: str, words: str) -> None:
    code, _, err = _run("convert", str(FIXTURES / name), "--to", "foster")
    assert code == 2 and where in err and words in err and "hint:" in err
