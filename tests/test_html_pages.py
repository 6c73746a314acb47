"""``--html FILE`` pages, rendered by a real browser (Debian's headless Chromium).

Each page is opened by Chromium from disk: the DOM it builds must hold the tables and the
plots; its network log must show no request the page itself made (Chromium's own
background requests carry the initiator "not an origin" and are left aside); and the page
prints to an A4 PDF.  With the print style sheet forced on and the window as wide as an A4
page's printable width, no table may be wider than the page (a script in a test-only copy
measures it).  Skipped only when no Chromium is installed (``make setup`` installs it).
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main
from test_compare import RTH_NEW, RTH_OLD, git, write_revision

BROWSER = shutil.which("chromium") or shutil.which("chromium-browser")
pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(
        BROWSER is None, reason="Chromium is not installed (make setup installs Debian's chromium)"
    ),
]
DECKS = Path(__file__).parent.parent / "decks"
#: A4 is 210 mm wide; the print style sheet leaves 12 mm margins: 186 mm at 96 px per inch.
A4_PRINTABLE_PX = round(186 / 25.4 * 96)
QUIET = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
]


def chromium(tmp: Path, *args: str) -> subprocess.CompletedProcess[str]:
    assert BROWSER is not None
    profile = tmp / f"profile-{len(list(tmp.glob('profile-*')))}"
    return subprocess.run(
        [BROWSER, *QUIET, f"--user-data-dir={profile}", *args],
        capture_output=True,
        text=True,
        timeout=120,
        check=True,
    )


def page_requests(net_log: Path) -> set[str]:
    """URLs the page asked for (Chromium's own traffic has no origin and is left out)."""
    events = json.loads(net_log.read_text())["events"]
    return {
        e["params"]["url"]
        for e in events
        if "url" in e.get("params", {})
        and e["params"].get("initiator", "not an origin") != "not an origin"
    }


@pytest.fixture(scope="module")
def pages(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Path]:
    """One page per command, written by the command line as a user would."""
    tmp = tmp_path_factory.mktemp("pages")
    repo = tmp / "board"
    repo.mkdir()
    git(repo, "init", "-q")
    write_revision(repo, RTH_OLD)
    git(repo, "add", "-A")
    git(repo, "commit", "-qm", "first")
    write_revision(repo, RTH_NEW)
    git(repo, "commit", "-qam", "second")
    deck = str(repo / "heater.cir")
    monitor = str(DECKS / "current-monitor" / "monitor.cir")
    commands = {
        "run": ["run", monitor, "-q"],
        "check": ["check", monitor],
        "settle": [
            "settle",
            str(DECKS / "pwm-heater" / "heater.cir"),
            "--period",
            "500u",
            "--warmup",
            "200",
            "-q",
        ],
        "sweep": ["sweep", monitor, "--ambient", "-40:125:55", "--op", "--check", "-q", "-j", "1"],
        "compare": ["compare", deck, "--against", "HEAD~1", "--tran", "1", "600", "-q"],
    }
    out = {}
    cwd = os.getcwd()
    os.chdir(repo)
    try:
        for name, args in commands.items():
            page = tmp / f"{name}.html"
            result = CliRunner().invoke(main, [*args, "--html", str(page)])
            assert result.exit_code in (0, 1), result.output
            out[name] = page
    finally:
        os.chdir(cwd)
    return out


TABLES = {"run": 4, "check": 4, "settle": 3, "sweep": 3, "compare": 3}


@pytest.mark.parametrize("name", list(TABLES))
def test_page_renders_with_tables_and_plots(
    pages: dict[str, Path], name: str, tmp_path: Path
) -> None:
    net_log = tmp_path / "net.json"
    dom = chromium(tmp_path, f"--log-net-log={net_log}", "--dump-dom", pages[name].as_uri()).stdout
    assert dom.count("<table") >= TABLES[name]
    assert "<svg" in dom or "data:image/png;base64," in dom  # the plots, inline
    for attribute in re.findall(r'(?:src|href)\s*=\s*["\']?([^"\'\s>]+)', dom):
        assert attribute.startswith(("#", "data:")), attribute
    assert "Hot parts can burn people and start fires" in dom
    assert "sha256" in dom and "Warnings" in dom
    assert page_requests(net_log) == set()


def test_the_request_check_can_fail(tmp_path: Path) -> None:
    # A page with an external image: the same check must see its request.
    page = tmp_path / "fetching.html"
    page.write_text("<!DOCTYPE html><p>x</p><img src='http://127.0.0.1:9/never.png'>")
    net_log = tmp_path / "net.json"
    chromium(tmp_path, f"--log-net-log={net_log}", "--dump-dom", page.as_uri())
    assert "http://127.0.0.1:9/never.png" in page_requests(net_log)


@pytest.mark.parametrize("name", ["compare", "sweep", "check"])
def test_page_prints_to_a4_without_clipped_tables(
    pages: dict[str, Path], name: str, tmp_path: Path
) -> None:
    pdf = tmp_path / "page.pdf"
    chromium(tmp_path, "--no-pdf-header-footer", f"--print-to-pdf={pdf}", pages[name].as_uri())
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF") and len(re.findall(rb"/Type\s*/Page\b", data)) >= 1
    # The print rules as the screen's, at A4's printable width; a script marks every table
    # wider than the body.  (Test-only copy: the page itself carries no script.)
    text = pages[name].read_text().replace("@media print", "@media all")
    assert clipped_tables(tmp_path, text) == 0


def clipped_tables(tmp_path: Path, text: str) -> int:
    """How many tables of page *text* are wider than the body at A4's printable width."""
    probe = (
        "<script>document.body.dataset.clipped = [...document.querySelectorAll('table')]"
        ".filter(t => t.scrollWidth > document.body.clientWidth + 1).length;</script>"
    )
    page = tmp_path / "probed.html"
    page.write_text(text.replace("</body>", probe + "</body>"))
    dom = chromium(
        tmp_path, f"--window-size={A4_PRINTABLE_PX},1200", "--dump-dom", page.as_uri()
    ).stdout
    found = re.search(r'data-clipped="(\d+)"', dom)
    assert found is not None
    return int(found[1])


def test_the_clipping_check_can_fail(pages: dict[str, Path], tmp_path: Path) -> None:
    # The screen rules keep the sweep's wide table on one line per row: wider than A4.
    assert clipped_tables(tmp_path, pages["sweep"].read_text()) >= 1
