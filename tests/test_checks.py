"""``heatweave check``: limits against independent solutions of the power balance.

The divider fixture (tests/fixtures/check/divider.cir) has a linear-TCR upper leg, so its
electrothermal steady state is the root of one scalar equation, solved here with
scipy.optimize.brentq (a general-purpose reference solver), independently of ngspice.
"""

from __future__ import annotations

import json
import re
import socket
import xml.etree.ElementTree as ET
from datetime import UTC, datetime
from pathlib import Path

import pytest
from click.testing import CliRunner
from scipy.optimize import brentq

from heatweave.annotation.ratings import derated_power
from heatweave.checks.limits import LimitResult
from heatweave.cli import main

FIXTURES = Path(__file__).parent / "fixtures" / "check"
DECK = FIXTURES / "divider.cir"

# The fixture's values (divider.cir / divider.thermal.toml / board.thermal.toml).
SUPPLY, R_TOP, R_BOT, TC1, RTH, AMBIENT = 12.0, 120.0, 100.0, 0.003, 60.0, 25.0
RATING, KNEE, TMAX, RTH_BOARD = 0.5, 70.0, 155.0, 250.0


def r_top(t_c: float) -> float:
    """Linear TCR: R = R0 (1 + tc1 (T - 25)) (the usual first-order TCR definition)."""
    return R_TOP * (1.0 + TC1 * (t_c - AMBIENT))


def power(t_c: float) -> float:
    """Dissipation of the upper leg at temperature *t_c* (Ohm's law, series divider)."""
    current = SUPPLY / (r_top(t_c) + R_BOT)
    return current * current * r_top(t_c)


def steady(rth_total: float) -> float:
    """The upper leg's temperature: T = Ta + Rth P(T), by brentq."""
    return float(brentq(lambda t: t - AMBIENT - rth_total * power(t), AMBIENT, 400.0))


def v_out(t_c: float) -> float:
    return SUPPLY * R_BOT / (r_top(t_c) + R_BOT)


@pytest.mark.parametrize(
    ("t_local", "expected"),
    [
        # IEC 60115-1 derating: full rated power up to the knee (rated ambient temperature),
        # then linear to zero at the upper category temperature.  70/155 degC: common practice.
        (25.0, 0.5),
        (70.0, 0.5),
        (112.5, 0.25),  # half way down the slope: half the rating
        (155.0, 0.0),
        (170.0, 0.0),
    ],
)
def test_derating_curve(t_local: float, expected: float) -> None:
    assert derated_power(RATING, t_local, KNEE, TMAX) == pytest.approx(expected, abs=1e-12)


def run_check(
    tmp_path: Path, annotation: str, *args: str, deck: str = str(DECK)
) -> tuple[int, str]:
    """``check DECK -a ANNOTATION ARGS``; DECK ``-`` pipes the fixture deck's text in."""
    path = tmp_path / "divider.thermal.toml"
    path.write_text(annotation)
    stdin = DECK.read_text() if deck == "-" else None
    result = CliRunner().invoke(main, ["check", deck, "-a", str(path), *args], input=stdin)
    assert "Traceback" not in result.output
    return result.exit_code, result.output


def base_annotation(name: str = "divider.thermal.toml") -> str:
    return (FIXTURES / name).read_text()


def value_of(output: str, subject: str, limit: str) -> float:
    """The value printed on the line of one limit."""
    match = re.search(rf"{re.escape(subject)} {limit}: ([-+0-9.e]+)", output)
    assert match, output
    return float(match[1])


# brentq steady state of the part on ambient (Rth 60 K/W).
T_HOT = steady(RTH)
V_HOT = v_out(T_HOT)
SIGNED_DRIFT_PPM = (V_HOT / v_out(AMBIENT) - 1.0) * 1e6
DRIFT_PPM = abs(SIGNED_DRIFT_PPM)


@pytest.mark.parametrize(
    ("table", "subject", "limit", "expected", "passes"),
    [
        (f"tmax = {T_HOT + 1:.6f}", "RTOP", "tmax", T_HOT, True),
        (f"tmax = {T_HOT - 1:.6f}", "RTOP", "tmax", T_HOT, False),
        # V(out) falls as the upper leg heats: the drift prints with its minus sign.
        (
            f'[limit."V(out)"]\nmax_drift_ppm = {DRIFT_PPM * 1.01:.6f}',
            "V(out)", "max_drift_ppm", SIGNED_DRIFT_PPM, True,
        ),
        (
            f'[limit."V(out)"]\nmax_drift_ppm = {DRIFT_PPM * 0.99:.6f}',
            "V(out)", "max_drift_ppm", SIGNED_DRIFT_PPM, False,
        ),
        (f'[limit."V(out)"]\nmin = {V_HOT - 0.01:.6f}', "V(out)", "min", V_HOT, True),
        (f'[limit."V(out)"]\nmax = {V_HOT - 0.01:.6f}', "V(out)", "max", V_HOT, False),
        (
            f'[limit."V(in,out)"]\nmax = {SUPPLY - v_out(T_HOT) + 0.01:.6f}',
            "V(in,out)", "max", SUPPLY - v_out(T_HOT), True,
        ),
    ],
)  # fmt: skip
def test_limits_against_brentq(
    tmp_path: Path, table: str, subject: str, limit: str, expected: float, passes: bool
) -> None:
    text = base_annotation()
    if table.startswith("tmax"):
        text = text.replace("tmax = 155.0", table).replace("power_rating = 0.5\n", "")
    else:
        text += "\n" + table + "\n"
    code, output = run_check(tmp_path, text, "--op")
    assert value_of(output, subject, limit) == pytest.approx(expected, rel=2e-4)
    assert code == (0 if passes else 1), output
    line = next(x for x in output.splitlines() if f"{subject} {limit}:" in x)
    assert line.startswith("ok" if passes else "FAIL")
    assert ("margin" if passes else "over by" if limit != "min" else "under by") in line


@pytest.mark.parametrize("deck", [str(DECK), "-"], ids=["file", "stdin"])
def test_rating_derated_at_the_shared_node(tmp_path: Path, deck: str) -> None:
    """On a warm board the rating is derated at the board's temperature, not ambient."""
    t_hot = steady(RTH + RTH_BOARD)
    p_hot = power(t_hot)
    t_board = AMBIENT + RTH_BOARD * p_hot
    allowed = derated_power(RATING, t_board, KNEE, TMAX)
    assert p_hot > allowed  # the fixture is meant to fail this limit
    code, output = run_check(tmp_path, base_annotation("board.thermal.toml"), "--op", deck=deck)
    assert code == 1
    line = next(x for x in output.splitlines() if "RTOP power_rating:" in x)
    assert value_of(output, "RTOP", "power_rating") == pytest.approx(p_hot, rel=2e-4)
    printed = re.search(r"at most ([0-9.e+-]+) W", line)
    assert printed and float(printed[1]) == pytest.approx(allowed, rel=2e-4)
    assert 'node "board"' in line
    assert value_of(output, "RTOP", "tmax") == pytest.approx(t_hot, rel=2e-4)
    assert f"{deck}: 2 limits checked, 1 violated" in output  # tmax holds: T_hot < 155 degC


def test_transient_drift_is_worst_over_time(tmp_path: Path) -> None:
    """Heating from cold only raises the upper leg's resistance, so the worst drift is at
    the end; after 10 thermal time constants (tau = Rth Cth = 1.2 s) it is the steady one."""
    text = base_annotation() + f'\n[limit."V(out)"]\nmax_drift_ppm = {DRIFT_PPM * 1.01:.6f}\n'
    code, output = run_check(tmp_path, text, "--tran", "10m", "12")
    assert code == 0, output
    assert value_of(output, "V(out)", "max_drift_ppm") == pytest.approx(SIGNED_DRIFT_PPM, rel=1e-3)
    assert "at t = " in output


@pytest.mark.parametrize(
    ("fixture", "words"),
    [
        ("misspelt.thermal.toml", ['names node "otu"', 'did you mean "V(out)"']),
        ("current.thermal.toml", ['"I(V1)" is not a node voltage']),
        ("broken.thermal.toml", ["rth must be a positive number"]),
    ],
)
def test_unusable_limits_exit_2(fixture: str, words: list[str]) -> None:
    path = FIXTURES / fixture
    result = CliRunner().invoke(main, ["check", str(DECK), "-a", str(path)])
    assert result.exit_code == 2
    assert "Traceback" not in result.output
    assert re.search(rf"{re.escape(str(path))}:\d+:\d+: error:", result.output)
    for word in words:
        assert word in result.output


def test_limit_location_is_the_table() -> None:
    path = FIXTURES / "misspelt.thermal.toml"
    result = CliRunner().invoke(main, ["check", str(DECK), "-a", str(path)])
    line = next(n for n, x in enumerate(path.read_text().splitlines(), 1) if "V(otu)" in x)
    assert f"{path}:{line}:" in result.output


def test_junit_report(tmp_path: Path) -> None:
    """Element and attribute names as the JUnit XML report format defines them (the Apache
    Ant JUnit schema that CI servers read: testsuites > testsuite > testcase > failure;
    from memory, no schema validator is installed here)."""
    text = base_annotation() + f'\n[limit."V(out)"]\nmax_drift_ppm = {DRIFT_PPM * 0.5:.6f}\n'
    report = tmp_path / "report.xml"
    code, _output = run_check(tmp_path, text, "--op", "--junit", str(report))
    assert code == 1
    root = ET.parse(report).getroot()
    assert root.tag == "testsuites"
    suites = root.findall("testsuite")
    assert len(suites) == 1
    suite = suites[0]
    for attribute in ("name", "tests", "failures", "errors", "skipped", "time", "timestamp",
                      "hostname", "id", "package"):  # fmt: skip
        assert attribute in suite.attrib
    cases = suite.findall("testcase")
    assert [c.get("name") for c in cases] == [
        "RTOP tmax", "RTOP power_rating", "V(out) max_drift_ppm"
    ]  # fmt: skip
    for case in cases:
        assert case.get("classname") and float(case.get("time", "x")) >= 0
    failed = [c for c in cases if c.find("failure") is not None]
    assert [c.get("name") for c in failed] == ["V(out) max_drift_ppm"]
    failure = failed[0].find("failure")
    assert failure is not None and "max_drift_ppm" in failure.get("message", "")
    assert suite.get("tests") == root.get("tests") == "3"
    assert suite.get("failures") == root.get("failures") == "1"
    # ISO 8601 with the UTC offset (a zone-less stamp is read as local time by CI servers)
    stamp = datetime.fromisoformat(suite.get("timestamp", ""))
    assert stamp.utcoffset() is not None
    assert abs((datetime.now(UTC) - stamp).total_seconds()) < 600
    assert suite.get("hostname") == socket.gethostname()
    # each case carries its share of the one run that decided it; they add up to the run
    times = [float(c.get("time", "nan")) for c in cases]
    assert all(t > 0 for t in times)
    assert sum(times) == pytest.approx(float(suite.get("time", "nan")), abs=0.002)


def test_junit_on_stdout_is_the_xml_alone(tmp_path: Path) -> None:
    """``--junit -``: stdout must parse as XML, so the check lines go to stderr."""
    path = tmp_path / "divider.thermal.toml"
    path.write_text(base_annotation())
    result = CliRunner().invoke(main, ["check", str(DECK), "-a", str(path), "--op", "--junit", "-"])
    assert result.exit_code in (0, 1), result.stderr
    root = ET.fromstring(result.stdout)
    assert root.tag == "testsuites"
    assert "limits checked" in result.stderr


def test_rating_follows_an_ambient_profile(tmp_path: Path) -> None:
    """Ambient ramps 25 -> 120 degC over 100 s; with tau = Rth Cth = 6 ms the part follows
    quasi-statically, so the worst instant is the end, where the steady state at 120 degC
    (brentq) meets the IEC 60115-1 allowance at 120 degC."""
    ramp_end = 120.0
    text = (
        base_annotation()
        .replace(
            "[ambient]\ntemperature = 25.0", "[ambient]\nprofile = [[0.0, 25.0], [100.0, 120.0]]"
        )
        .replace("cth = 0.02", "cth = 0.0001")
    )
    t_end = float(brentq(lambda t: t - ramp_end - RTH * power(t), ramp_end, 400.0))
    allowed = derated_power(RATING, ramp_end, KNEE, TMAX)
    code, output = run_check(tmp_path, text, "--tran", "0.5", "100")
    assert code == 1  # 0.34 W against 0.206 W allowed at 120 degC
    line = next(x for x in output.splitlines() if "RTOP power_rating:" in x)
    assert value_of(output, "RTOP", "power_rating") == pytest.approx(power(t_end), rel=1e-3)
    printed = re.search(r"at most ([0-9.e+-]+) W", line)
    assert printed and float(printed[1]) == pytest.approx(allowed, rel=1e-3)
    assert "at t = 100 s" in line


def test_no_annotation_file_is_bad_input(tmp_path: Path) -> None:
    deck = tmp_path / "lonely.cir"
    deck.write_text(DECK.read_text())
    result = CliRunner().invoke(main, ["check", str(deck)])
    assert result.exit_code == 2
    assert "no annotation file" in result.output and "hint:" in result.output


@pytest.mark.parametrize(
    ("value", "bound", "upper", "passed"),
    [
        (7.5 + 8.881784197001252e-16, 7.5, True, True),  # one double spacing above 7.5
        (7.5 - 8.881784197001252e-16, 7.5, False, True),  # and one below a floor
        (7.5 * (1 + 1e-9), 7.5, True, False),  # a billionth over is over
        (7.5 * (1 - 1e-9), 7.5, False, False),
        (7.5, 7.5, True, True),
        (-1e-300, 0.0, False, False),  # no relative room around a bound of 0
    ],
)
def test_a_value_on_its_bound_up_to_round_off_passes(
    value: float, bound: float, upper: bool, passed: bool
) -> None:
    # The spacing of doubles in [4, 8) is 2**-50 = 8.88e-16 (IEEE 754 binary64).
    assert LimitResult("V(x)", "max" if upper else "min", value, bound, "V", upper).passed is passed


@pytest.mark.parametrize(
    ("drop", "ambient", "words"),
    [
        # With tmax the IEC 60115-1 curve applies: 0.5 W * (155 - 100) / (155 - 70).
        ("", "100", ["at most 0.32353 W", "rating 0.5 W derated for 100 degC at ambient"]),
        # Without tmax there is no curve to follow: the full rating, and the line says so.
        ("tmax = 155.0\n", "100", ["at most 0.5 W", "rating 0.5 W, not derated: no tmax"]),
    ],
)
def test_power_line_says_whether_the_rating_was_derated(
    tmp_path: Path, drop: str, ambient: str, words: list[str]
) -> None:
    text = base_annotation().replace(drop, "") if drop else base_annotation()
    _code, output = run_check(tmp_path, text, "--op", "--ambient", ambient)
    line = next(x for x in output.splitlines() if "RTOP power_rating:" in x)
    for word in words:
        assert word in line


@pytest.mark.parametrize(
    ("stem", "status"),
    [("noconv", 3), ("timestep", 4), ("ntc_supply", 7)],  # exit statuses: errors.py
)
def test_junit_report_when_the_simulation_fails(tmp_path: Path, stem: str, status: int) -> None:
    """A run that gives no answer still writes the report, with one error test case, so a
    CI dashboard never shows the previous run's (passing) report as the current one."""
    report = tmp_path / "report.xml"
    report.write_text('<?xml version="1.0"?><testsuites tests="1" failures="0"/>')
    deck, annotation = FIXTURES / f"{stem}.cir", FIXTURES / f"{stem}.thermal.toml"
    args = ["check", str(deck), "-a", str(annotation), "--junit", str(report)]
    result = CliRunner().invoke(main, args)
    assert result.exit_code == status, result.output
    root = ET.parse(report).getroot()
    assert (root.get("tests"), root.get("failures"), root.get("errors")) == ("1", "0", "1")
    (suite,) = root.findall("testsuite")
    assert suite.get("errors") == "1"
    (case,) = suite.findall("testcase")
    error = case.find("error")
    assert error is not None and error.get("message", "").startswith("error: ")
    assert error.get("message", "") in result.output


def test_json_report_matches_the_lines(tmp_path: Path) -> None:
    """``--json -``: the limits as data, numbers against brentq; the lines move to stderr."""
    text = base_annotation() + f'\n[limit."V(out)"]\nmax_drift_ppm = {DRIFT_PPM * 0.5:.6f}\n'
    path = tmp_path / "divider.thermal.toml"
    path.write_text(text)
    result = CliRunner().invoke(main, ["check", str(DECK), "-a", str(path), "--op", "--json", "-"])
    assert result.exit_code == 1, result.output
    data = json.loads(result.stdout)
    assert (data["status"], data["exit_code"], data["error"]) == ("failed", 1, None)
    assert (data["checked"], data["violated"]) == (3, 1)
    by_name = {(x["subject"], x["limit"]): x for x in data["limits"]}
    drift = by_name["V(out)", "max_drift_ppm"]
    assert drift["value"] == pytest.approx(DRIFT_PPM, rel=2e-4)
    assert drift["signed_value"] == pytest.approx(SIGNED_DRIFT_PPM, rel=2e-4)
    assert drift["passed"] is False
    assert by_name["RTOP", "tmax"]["value"] == pytest.approx(T_HOT, rel=2e-4)
    assert "FAIL V(out) max_drift_ppm" in result.stderr
    assert data["annotations"]["path"] == str(path)


def test_json_report_when_the_simulation_fails(tmp_path: Path) -> None:
    """Nothing checked: the report still replaces an older one, with the error's status."""
    report = tmp_path / "check.json"
    report.write_text('{\n  "heatweave_version": "0.1.0",\n  "status": "passed"\n}\n')
    deck, annotation = FIXTURES / "noconv.cir", FIXTURES / "noconv.thermal.toml"
    result = CliRunner().invoke(main, ["check", str(deck), "-a", str(annotation), "--json",
                                       str(report)])  # fmt: skip
    assert result.exit_code == 3
    data = json.loads(report.read_text())
    assert (data["status"], data["exit_code"], data["limits"]) == ("error", 3, [])
    assert data["error"].startswith("error: ")


@pytest.mark.parametrize(("factor", "code"), [(0.5, 1), (2.0, 0)])
def test_quiet_prints_only_violations(tmp_path: Path, factor: float, code: int) -> None:
    """``-q``: nothing on stdout; the violated limits (only) on stderr; status unchanged."""
    text = base_annotation() + f'\n[limit."V(out)"]\nmax_drift_ppm = {DRIFT_PPM * factor:.6f}\n'
    path = tmp_path / "divider.thermal.toml"
    path.write_text(text)
    result = CliRunner().invoke(main, ["check", str(DECK), "-a", str(path), "--op", "-q"])
    assert result.exit_code == code
    assert result.stdout == ""
    lines = result.stderr.splitlines()
    assert [x[:4] for x in lines] == (["FAIL"] if code else [])
    assert "limits checked" not in result.stderr


def test_signed_drift_line() -> None:
    """A negative drift prints with its sign; the bound judges its magnitude."""
    item = LimitResult("V(out)", "max_drift_ppm", 1200.0, 1000.0, "ppm", signed=-1200.0)
    assert not item.passed
    line = item.message()
    assert "-1200 ppm, magnitude at most 1000 ppm, over by 200 ppm" in line
    assert item.as_dict()["signed_value"] == -1200.0
