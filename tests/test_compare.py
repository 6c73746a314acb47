"""``heatweave compare``: a change's effect on a part, against an independent power balance.

The deck (written here, a scenario of our own) is a 9 V rail feeding a linear-TCR heater
RHEAT in series with a fixed resistor RFIX that lives in an included file.  RHEAT's
steady state is the root of T = Ta + Rth P(T), with P(T) = V^2 R(T) / (R(T) + Rfix)^2 and
R(T) = R0 (1 + tc1 (T - 25)) (the first-order TCR definition); it is solved here with
scipy.optimize.brentq, independently of ngspice.  The repository is built with git in a
temporary folder: one commit, then a second that changes RHEAT's rth.
"""

from __future__ import annotations

import json
import os
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from click.testing import CliRunner
from scipy.optimize import brentq

from heatweave.cli import main

SUPPLY, R0, TC1, R_FIX, AMBIENT = 9.0, 68.0, 0.004, 47.0, 25.0
RTH_OLD, RTH_NEW = 45.0, 80.0

DECK = """bench heater on a 9 V rail
V1 rail 0 DC {supply}
.include parts/fixed.inc
RHEAT rail mid {r0}
XF mid 0 fixed
.op
.end
"""
INCLUDE = """* the fixed leg
.subckt fixed a b
RFIX a b {r_fix}
.ends
"""
ANNOTATION = """schema = 1
[ambient]
temperature = {ambient}
[part.RHEAT]
model = "linear"
tc1 = {tc1}
rth = {rth}
power_rating = 1.0
tmax = 155.0
"""


def heater_temperature(rth: float, r_fix: float = R_FIX) -> float:
    """RHEAT's steady temperature: T = Ta + Rth P(T), by brentq (Ohm's law, series pair)."""

    def balance(t: float) -> float:
        r = R0 * (1.0 + TC1 * (t - 25.0))
        return t - AMBIENT - rth * SUPPLY**2 * r / (r + r_fix) ** 2

    return float(brentq(balance, AMBIENT, 400.0))


def git(repo: Path, *args: str) -> str:
    env = {
        **os.environ,
        "GIT_AUTHOR_NAME": "t",
        "GIT_AUTHOR_EMAIL": "t@example.invalid",
        "GIT_COMMITTER_NAME": "t",
        "GIT_COMMITTER_EMAIL": "t@example.invalid",
    }
    done = subprocess.run(["git", *args], cwd=repo, env=env, check=True, capture_output=True)
    return done.stdout.decode()


def write_revision(repo: Path, rth: float, r_fix: float = R_FIX, review: str = "") -> None:
    (repo / "parts").mkdir(exist_ok=True)
    (repo / "heater.cir").write_text(DECK.format(supply=SUPPLY, r0=R0))
    (repo / "parts" / "fixed.inc").write_text(INCLUDE.format(r_fix=r_fix))
    text = ANNOTATION.format(ambient=AMBIENT, tc1=TC1, rth=rth) + review
    (repo / "heater.thermal.toml").write_text(text)


@pytest.fixture()
def repo(tmp_path: Path) -> Path:
    """A repository whose second commit raises RHEAT's rth from 45 to 80 K/W."""
    root = tmp_path / "board"
    root.mkdir()
    git(root, "init", "-q")
    write_revision(root, RTH_OLD)
    git(root, "add", "-A")
    git(root, "commit", "-qm", "first")
    write_revision(root, RTH_NEW)
    git(root, "commit", "-qam", "thinner copper under RHEAT")
    return root


def compare(repo: Path, *args: str) -> tuple[int, str, dict[str, object] | None]:
    out = repo.parent / "compare.json"
    out.unlink(missing_ok=True)
    cwd = os.getcwd()
    os.chdir(repo)
    try:
        result = CliRunner().invoke(main, ["compare", *args, "--json", str(out)])
    finally:
        os.chdir(cwd)
    data = json.loads(out.read_text()) if out.exists() else None
    return result.exit_code, result.output, data


def rise_change(data: dict[str, object], part: str = "RHEAT") -> dict[str, float]:
    parts = data["parts"]
    assert isinstance(parts, list)
    found = next(p for p in parts if p["name"] == part)
    rise: dict[str, float] = found["quantities"]["rise"]
    return rise


def test_rise_change_against_brentq(repo: Path) -> None:
    expected = heater_temperature(RTH_NEW) - heater_temperature(RTH_OLD)
    assert expected > 5.0  # the change is large enough to gate on
    code, output, data = compare(repo, "heater.cir", "--against", "HEAD~1")
    assert code == 0, output
    assert data is not None
    rise = rise_change(data)
    assert rise["change"] == pytest.approx(expected, abs=0.01)
    assert rise["old"] == pytest.approx(heater_temperature(RTH_OLD) - AMBIENT, abs=0.01)
    assert "RHEAT" in output and "rise above ambient" in output


@pytest.mark.parametrize(("margin", "code"), [(-0.5, 1), (0.5, 0)])
def test_gate_threshold_around_the_change(repo: Path, margin: float, code: int) -> None:
    # The threshold just below the hand-calculated growth crosses the gate; just above holds.
    growth = heater_temperature(RTH_NEW) - heater_temperature(RTH_OLD)
    threshold = f"{growth + margin:.3f}"
    got, output, data = compare(
        repo, "heater.cir", "--against", "HEAD~1", "--max-rise-growth", threshold
    )
    assert got == code, output
    assert data is not None and data["passed"] is (code == 0)
    assert ("CROSSED RHEAT: rise grew by" in output) is (code == 1)


@pytest.mark.parametrize(("margin", "code"), [(-0.5, 1), (0.5, 0)])
def test_gate_threshold_from_the_review_table(repo: Path, margin: float, code: int) -> None:
    growth = heater_temperature(RTH_NEW) - heater_temperature(RTH_OLD)
    write_revision(repo, RTH_NEW, review=f"[review]\nmax_rise_growth = {growth + margin:.3f}\n")
    got, output, _ = compare(repo, "heater.cir", "--against", "HEAD~1")
    assert got == code, output
    # An option overrides the table.
    loose = compare(repo, "heater.cir", "--against", "HEAD~1", "--max-rise-growth", "100")
    assert loose[0] == 0


def test_included_files_come_from_the_revision(repo: Path) -> None:
    # The working tree changes the included RFIX; the old side must still use the old one.
    write_revision(repo, RTH_NEW, r_fix=33.0)
    code, output, data = compare(repo, "heater.cir", "--against", "HEAD~1")
    assert code == 0, output
    assert data is not None
    rise = rise_change(data)
    assert rise["old"] == pytest.approx(heater_temperature(RTH_OLD) - AMBIENT, abs=0.01)
    assert rise["new"] == pytest.approx(heater_temperature(RTH_NEW, 33.0) - AMBIENT, abs=0.01)


def test_working_tree_is_never_touched(repo: Path) -> None:
    write_revision(repo, RTH_NEW, r_fix=33.0)  # uncommitted changes must survive
    status = git(repo, "status", "--porcelain")  # (refreshes the index: before the snapshot)
    before = {p: (p.read_bytes(), p.stat().st_mtime_ns) for p in repo.rglob("*") if p.is_file()}
    compare(repo, "heater.cir", "--against", "HEAD~1")
    after = {p: (p.read_bytes(), p.stat().st_mtime_ns) for p in repo.rglob("*") if p.is_file()}
    assert after == before  # the working tree, the index and every ref, byte for byte
    assert git(repo, "status", "--porcelain") == status


def test_pass_to_fail_crosses_the_gate(repo: Path) -> None:
    # tmax below the new temperature but above the old: a limit that held now fails.
    t_old, t_new = heater_temperature(RTH_OLD), heater_temperature(RTH_NEW)
    text = (repo / "heater.thermal.toml").read_text()
    tmax = f"tmax = {(t_old + t_new) / 2:.3f}\nderating_knee = {AMBIENT}"
    (repo / "heater.thermal.toml").write_text(text.replace("tmax = 155.0", tmax))
    git(repo, "commit", "-qam", "tmax")
    code, output, data = compare(repo, "heater.cir", "--against", "HEAD~2")
    assert code == 1, output
    assert data is not None
    limits = data["limits"]
    assert isinstance(limits, list)
    tmax = next(item for item in limits if item["limit"] == "tmax")
    assert tmax["status"] == "pass->FAIL" and tmax["crossed"]


@pytest.mark.parametrize(
    ("args", "words"),
    [
        (["--against", "no-such-rev"], "git knows no revision 'no-such-rev'"),
        (["--against", "HEAD~5"], "git knows no revision 'HEAD~5'"),
    ],
)
def test_unknown_revision_is_refused(repo: Path, args: list[str], words: str) -> None:
    code, output, _ = compare(repo, "heater.cir", *args)
    assert code == 2 and words in output and "Traceback" not in output


def test_file_missing_at_the_revision_is_refused(repo: Path) -> None:
    (repo / "other.thermal.toml").write_text((repo / "heater.thermal.toml").read_text())
    git(repo, "add", "other.thermal.toml")
    git(repo, "commit", "-qm", "second annotation")
    code, output, _ = compare(repo, "heater.cir", "-a", "other.thermal.toml", "--against", "HEAD~1")
    assert code == 2
    assert "the annotation file other.thermal.toml did not exist at HEAD~1" in output


def test_not_a_repository_is_refused(tmp_path: Path) -> None:
    write_revision(tmp_path, RTH_NEW)
    code, output, _ = compare(tmp_path, "heater.cir", "--against", "HEAD")
    assert code == 2 and "is not in a git repository" in output


def test_two_saved_results(tmp_path: Path) -> None:
    runner = CliRunner()
    paths = []
    for name, rth in (("old", RTH_OLD), ("new", RTH_NEW)):
        folder = tmp_path / name
        folder.mkdir()
        write_revision(folder, rth)
        out = tmp_path / f"{name}.json"
        result = runner.invoke(main, ["run", str(folder / "heater.cir"), "--json", str(out), "-q"])
        assert result.exit_code == 0, result.output
        paths.append(str(out))
    markdown, junit = tmp_path / "change.md", tmp_path / "change.xml"
    result = runner.invoke(
        main,
        [
            "compare",
            *paths,
            "--max-rise-growth",
            "1",
            "--markdown",
            str(markdown),
            "--junit",
            str(junit),
            "--json",
            "-",
        ],
    )
    assert result.exit_code == 1
    data = json.loads(result.stdout)
    expected = heater_temperature(RTH_NEW) - heater_temperature(RTH_OLD)
    assert rise_change(data)["change"] == pytest.approx(expected, abs=0.01)
    text = markdown.read_text()
    assert "**Gate crossed 1 time**" in text and "<details>" in text and "</details>" in text
    assert "| `RHEAT` | rise above ambient |" in text
    root = ET.parse(junit).getroot()
    assert root.get("failures") == "1"
    failed = [
        case.get("name") for case in root.iter("testcase") if case.find("failure") is not None
    ]
    assert failed == ["RHEAT change"]


@pytest.mark.parametrize(
    ("content", "words"),
    [
        ("not json", "is not JSON"),
        ('{"hello": 1}', "is not a heatweave result"),
        ("[1, 2]", "is not a heatweave result"),
    ],
)
def test_unusable_result_is_bad_input(tmp_path: Path, content: str, words: str) -> None:
    bad = tmp_path / "bad.json"
    bad.write_text(content)
    result = CliRunner().invoke(main, ["compare", str(bad), str(bad)])
    assert result.exit_code == 2 and words in result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)


def test_usage_errors(tmp_path: Path) -> None:
    runner = CliRunner()
    one = runner.invoke(main, ["compare", "a.json"])
    assert one.exit_code == 2 and "two saved results" in one.output
    html = runner.invoke(main, ["compare", "a.json", "b.json", "--html", "-"])
    assert html.exit_code == 2 and "--html writes a page to a file" in html.output


def test_an_error_at_the_revision_names_the_file_there(tmp_path: Path) -> None:
    root = tmp_path / "board"
    root.mkdir()
    git(root, "init", "-q")
    write_revision(root, RTH_OLD, review="[review]\nmax_rise_grow = 2\n")  # a misspelt key
    git(root, "add", "-A")
    git(root, "commit", "-qm", "first")
    write_revision(root, RTH_NEW)
    git(root, "commit", "-qam", "second, spelt right")
    code, output, _ = compare(root, "heater.cir", "--against", "HEAD~1")
    assert code == 2
    assert "HEAD~1:heater.thermal.toml:11:1: error: at HEAD~1: unknown key" in output
    assert "heatweave-compare-" not in output  # the temporary folder is never shown
