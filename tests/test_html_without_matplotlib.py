"""``--html`` (and ``settle --plot``) without the ``plot`` extra: the same clear refusal as
``--plot``, before anything is simulated.

Each command runs in a fresh interpreter whose import system refuses matplotlib (a meta path
finder, as an environment without the extra behaves), with ngspice off the ``PATH`` and the
batch back end: had the command reached the simulation it would exit 5 (ngspice missing),
not 2 with the message.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave.cli import main

FIXTURES = Path(__file__).parent / "fixtures"
DECK = str(FIXTURES / "check" / "divider.cir")
NOTES = str(FIXTURES / "check" / "divider.thermal.toml")
PWM = str(FIXTURES / "settle_check" / "pwm_load.cir")

HIDE = """
import sys
from importlib.abc import MetaPathFinder

class NoMatplotlib(MetaPathFinder):
    def find_spec(self, name, path=None, target=None):
        if name == "matplotlib" or name.startswith("matplotlib."):
            raise ModuleNotFoundError(f"No module named {name!r}", name=name)
        return None

sys.meta_path.insert(0, NoMatplotlib())
from heatweave.cli import main
sys.exit(main(sys.argv[1:]))
"""


def without_matplotlib(
    args: list[str], folder: Path, keep_path: bool = False
) -> subprocess.CompletedProcess[str]:
    """*args* run in an interpreter that cannot import matplotlib (and, unless *keep_path*,
    cannot find ngspice)."""
    path = os.environ["PATH"] if keep_path else str(Path(sys.executable).parent)
    env = dict(os.environ, PATH=path, NO_COLOR="1")
    return subprocess.run(
        [sys.executable, "-c", HIDE, *args], capture_output=True, text=True, env=env,
        cwd=folder, timeout=120, check=False,
    )  # fmt: skip


def test_the_finder_hides_matplotlib(tmp_path: Path) -> None:
    """The harness itself: --plot, which already checks, is refused through it."""
    done = without_matplotlib(
        ["run", DECK, "-a", NOTES, "--op", "--backend", "batch", "--plot", "x.png"], tmp_path
    )
    assert done.returncode == 2, done.stderr
    assert "--plot draws with matplotlib, which is not installed" in done.stderr


def saved_results(tmp_path: Path) -> tuple[str, str]:
    """Two saved run results for ``compare OLD.json NEW.json`` (matplotlib is not needed)."""
    old = tmp_path / "old.json"
    result = CliRunner().invoke(main, ["run", DECK, "-a", NOTES, "--op", "--json", str(old)])
    assert result.exit_code == 0, result.output
    new = tmp_path / "new.json"
    data = json.loads(old.read_text())
    new.write_text(json.dumps(data))
    return str(old), str(new)


@pytest.mark.parametrize(
    ("command", "option"),
    [("run", "--html"), ("check", "--html"), ("settle", "--html"), ("sweep", "--html"),
     ("compare", "--html"), ("settle", "--plot")],
)  # fmt: skip
def test_refused_before_simulating(tmp_path: Path, command: str, option: str) -> None:
    target = str(tmp_path / ("page.html" if option == "--html" else "plot.png"))
    args = {
        "run": ["run", DECK, "-a", NOTES, "--op", "--backend", "batch"],
        "check": ["check", DECK, "-a", NOTES, "--backend", "batch"],
        "settle": ["settle", PWM, "--backend", "batch"],
        "sweep": ["sweep", DECK, "-a", NOTES, "--ambient", "25:50:25", "--jobs", "1",
                  "--backend", "batch"],
    }.get(command)  # fmt: skip
    if args is None:
        args = ["compare", *saved_results(tmp_path)]
    done = without_matplotlib([*args, option, target], tmp_path)
    assert done.returncode == 2, done.stdout + done.stderr
    assert f"{option} draws with matplotlib, which is not installed" in done.stderr
    assert "pip install 'heatweave[plot]'" in done.stderr
    assert "Traceback" not in done.stderr
    assert not Path(target).exists()


@pytest.mark.ngspice
@pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")
@pytest.mark.parametrize("command", ["run", "check", "settle", "sweep", "compare"])
def test_commands_without_pages_need_no_matplotlib(tmp_path: Path, command: str) -> None:
    """Without --plot and --html every command runs where the plot extra is missing (the
    sweep command imported its plot module on load, so it failed with a traceback)."""
    args = {
        "run": ["run", DECK, "-a", NOTES, "--op"],
        "check": ["check", DECK, "-a", NOTES],
        "settle": ["settle", PWM],
        "sweep": ["sweep", DECK, "-a", NOTES, "--ambient", "25:50:25", "--jobs", "1"],
    }.get(command)  # fmt: skip
    if args is None:
        args = ["compare", *saved_results(tmp_path)]
    done = without_matplotlib(args, tmp_path, keep_path=True)
    assert "Traceback" not in done.stderr, done.stderr
    assert done.returncode in (0, 1), done.stdout + done.stderr  # 1: a limit of the fixture
