"""Packaging and the conventions of the Python ecosystem: metadata, extras, entry points,
the pre-commit hook, colour and progress.

Sources: PEP 621 (project metadata), PEP 639 (license files), the trove classifier list,
the pre-commit hook manifest format (``files`` is a Python regex searched in the path),
no-color.org (``NO_COLOR`` set and not empty disables colour; a command-line option wins).
"""

from __future__ import annotations

import importlib.metadata
import re
import shutil
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest
from click.testing import CliRunner

import heatweave
from heatweave.annotation.loader import ANNOTATION_SUFFIX, DECK_SUFFIXES
from heatweave.cli import main

ROOT = Path(__file__).resolve().parent.parent
PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text())
PROJECT = PYPROJECT["project"]
CHECK = ROOT / "tests" / "fixtures" / "check"


def requirement_names(items: list[str]) -> set[str]:
    return {re.split(r"[<>=!~ \[;]", item, maxsplit=1)[0].lower() for item in items}


def test_license_file_is_the_license_the_metadata_names() -> None:
    text = (ROOT / "LICENSE").read_text()
    assert text.startswith("MIT License")
    assert "THE SOFTWARE IS PROVIDED \"AS IS\"" in text
    assert PROJECT["license"] == {"text": "MIT"}
    assert "License :: OSI Approved :: MIT License" in PROJECT["classifiers"]
    assert importlib.metadata.metadata("heatweave")["License"] == "MIT"


def test_classifiers_and_urls() -> None:
    classifiers = PROJECT["classifiers"]
    assert any(c.startswith("Programming Language :: Python :: 3.11") for c in classifiers)
    assert any(c.startswith("Topic :: Scientific/Engineering") for c in classifiers)
    assert PROJECT["urls"], "project URLs"
    for url in PROJECT["urls"].values():
        assert url.startswith("https://")


def test_one_version_source() -> None:
    """The version is written once, in heatweave/__init__.py; the metadata reads it."""
    assert "version" not in PROJECT
    assert "version" in PROJECT["dynamic"]
    assert PYPROJECT["tool"]["hatch"]["version"]["path"] == "src/heatweave/__init__.py"
    assert importlib.metadata.version("heatweave") == heatweave.__version__


def test_python_dash_m() -> None:
    done = subprocess.run(
        [sys.executable, "-m", "heatweave", "--version"], capture_output=True, text=True,
        check=False,
    )  # fmt: skip
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == f"heatweave, version {heatweave.__version__}"


def test_dependencies_are_what_runs_need() -> None:
    """No unused tomlkit; ruff and mypy in ``dev``; matplotlib in ``plot``; ``make test``
    installs them all."""
    needed = requirement_names(PROJECT["dependencies"])
    assert not needed & {"tomlkit", "ruff", "mypy", "matplotlib"}
    extras = PROJECT["optional-dependencies"]
    assert requirement_names(extras["dev"]) == {"ruff", "mypy"}
    assert requirement_names(extras["plot"]) == {"matplotlib"}
    sources = "\n".join(p.read_text() for p in (ROOT / "src").rglob("*.py"))
    assert not re.search(r"^\s*(import|from) tomlkit", sources, re.MULTILINE)
    makefile = (ROOT / "Makefile").read_text()
    assert re.search(r"pip install -q -e '\.\[test,dev,plot\]'", makefile)


@pytest.mark.parametrize("command", ["emit", "lint"])
def test_emit_and_lint_do_not_import_matplotlib(command: str) -> None:
    """A CI image that only emits and lints needs no plotting library."""
    deck = CHECK / "divider.cir"
    code = (
        "import sys\n"
        "from heatweave.cli import main\n"
        f"try:\n    main([{command!r}, {str(deck)!r}], standalone_mode=False)\n"
        "except SystemExit:\n    pass\n"
        "sys.stdout.flush()\n"
        "print('MPL', 'matplotlib' in sys.modules)\n"
    )
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=False
    )  # fmt: skip
    assert "MPL False" in done.stdout, done.stdout + done.stderr


def test_plot_without_matplotlib_says_what_to_install(monkeypatch: pytest.MonkeyPatch) -> None:
    """``--plot`` without the plot extra: exit 2 before anything runs, and the fix."""
    monkeypatch.setitem(sys.modules, "matplotlib", None)  # import matplotlib -> ImportError
    args = ["run", str(CHECK / "divider.cir"), "-a", str(CHECK / "divider.thermal.toml"),
            "--op", "--plot", "x.png"]  # fmt: skip
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 2
    assert "matplotlib, which is not installed" in result.stderr
    assert "pip install 'heatweave[plot]'" in result.stderr


# ------------------------------------------------------------------------ pre-commit hook


def hook_pattern() -> re.Pattern[str]:
    text = (ROOT / ".pre-commit-hooks.yaml").read_text()
    match = re.search(r"^\s*files:\s*(.+?)\s*$", text, re.MULTILINE)
    assert match
    return re.compile(match[1])


@pytest.mark.parametrize(
    ("path", "matched"),
    [
        *((f"boards/amp{suffix}", True) for suffix in DECK_SUFFIXES),
        ("boards/AMP.CIR", True),
        (f"boards/amp{ANNOTATION_SUFFIX}", True),
        ("boards/amp.net", False),  # schematic editors' own netlist formats
        ("boards/pyproject.toml", False),
        ("boards/amp.cir.orig", False),
    ],
)
def test_hook_files_pattern(path: str, matched: bool) -> None:
    assert bool(hook_pattern().search(path)) is matched


def test_lint_given_an_annotation_file_lints_its_deck(tmp_path: Path) -> None:
    """What the hook passes when only ``*.thermal.toml`` changed: the deck beside it is
    linted with it, so a part name the deck lacks is reported."""
    deck = tmp_path / "amp.cir"
    shutil.copy(CHECK / "divider.cir", deck)
    annotation = tmp_path / "amp.thermal.toml"
    annotation.write_text((CHECK / "divider.thermal.toml").read_text().replace("RTOP", "RTPO"))
    result = CliRunner().invoke(main, ["lint", str(annotation)])
    assert result.exit_code == 1, result.output
    assert "RTPO" in result.output
    good = (CHECK / "divider.thermal.toml").read_text()
    annotation.write_text(good)
    result = CliRunner().invoke(main, ["lint", str(annotation), str(deck)])
    assert result.exit_code == 0, result.output


def test_lint_given_a_lone_annotation_file_validates_it(tmp_path: Path) -> None:
    annotation = tmp_path / "lone.thermal.toml"
    annotation.write_text("schema = 1\n[part.R1]\nmodel = \"linear\"\n")
    result = CliRunner().invoke(main, ["lint", str(annotation)])
    assert result.exit_code == 1
    assert str(annotation) in result.output


# ------------------------------------------------------------------------ colour


COLOUR_CASES = [
    # (NO_COLOR, --color, colour expected); CliRunner's stdout is not a terminal
    (None, None, False),
    ("1", None, False),
    ("1", "always", True),  # the command line overrides NO_COLOR
    (None, "always", True),
    (None, "never", False),
]


@pytest.mark.parametrize(("no_colour", "option", "expected"), COLOUR_CASES)
def test_colour_option_and_no_color(
    monkeypatch: pytest.MonkeyPatch, no_colour: str | None, option: str | None, expected: bool
) -> None:
    if no_colour is None:
        monkeypatch.delenv("NO_COLOR", raising=False)
    else:
        monkeypatch.setenv("NO_COLOR", no_colour)
    args = [] if option is None else ["--color", option]
    args += ["check", str(CHECK / "divider.cir"), "-a", str(CHECK / "board.thermal.toml"), "--op"]
    result = CliRunner().invoke(main, args, color=False)
    assert result.exit_code == 1, result.output
    assert ("\x1b[" in result.stdout) is expected


def test_no_color_on_a_terminal(monkeypatch: pytest.MonkeyPatch) -> None:
    """On a terminal colour is on, unless NO_COLOR is set (non-empty) or --color never."""
    from heatweave.cli import common

    monkeypatch.setattr(common, "is_terminal", lambda stream=None: True)
    monkeypatch.delenv("NO_COLOR", raising=False)
    assert common.use_colour()
    monkeypatch.setenv("NO_COLOR", "")  # empty: not set, per no-color.org
    assert common.use_colour()
    monkeypatch.setenv("NO_COLOR", "yes")
    assert not common.use_colour()


def test_bad_colour_choice_is_a_usage_error() -> None:
    result = CliRunner().invoke(main, ["--color", "sometimes", "lint", "x.cir"])
    assert result.exit_code == 2
    assert "sometimes" in result.output


# ------------------------------------------------------------------------ progress


class Terminal:
    """A stand-in terminal for stderr: collects text, says it is a TTY."""

    def __init__(self) -> None:
        self.text = ""

    def write(self, text: str) -> int:
        self.text += text
        return len(text)

    def flush(self) -> None:
        pass

    def isatty(self) -> bool:
        return True


def test_progress_bar_on_a_terminal(monkeypatch: pytest.MonkeyPatch) -> None:
    """click's bar (with percentage), monotonic even when a run reports a smaller fraction;
    nothing at all when disabled."""
    from heatweave.cli.progress import count_progress, fraction_progress

    terminal = Terminal()
    monkeypatch.setattr(sys, "stderr", terminal)
    with fraction_progress(False, "simulating") as show:
        assert show is None
    assert terminal.text == ""
    with fraction_progress(True, "simulating") as show:
        assert show is not None
        show(0.5)
        show(0.25)
        show(1.0)
    assert "simulating" in terminal.text
    assert " 50%" in terminal.text and "100%" in terminal.text
    terminal.text = ""
    with count_progress(True, "corners") as count:
        assert count is not None
        count(1, 4, 0)
        count(2, 4, 1)
        count(4, 4, 1)
    assert "corners" in terminal.text and "1 failed" in terminal.text
    assert "100%" in terminal.text


@pytest.mark.ngspice
def test_run_finishes_its_bar_before_it_writes_a_line(monkeypatch: pytest.MonkeyPatch) -> None:
    """On a terminal the method line starts a line of its own, after the bar has ended
    (common practice for terminal progress: the bar's line is finished first)."""
    from heatweave.cli import run_cmd

    terminal = Terminal()
    monkeypatch.setattr(run_cmd, "is_terminal", lambda stream=None: True)
    monkeypatch.setattr(sys, "stderr", terminal)
    deck, notes = str(CHECK / "divider.cir"), str(CHECK / "board.thermal.toml")
    main.main(["run", deck, "-a", notes, "--op", "-q"], standalone_mode=False)
    assert terminal.text == ""  # -q: no bar, no method line
    main.main(["run", deck, "-a", notes, "--op"], standalone_mode=False)
    assert "100%" in terminal.text
    before, found, _after = terminal.text.partition("method: ")
    assert found and before.endswith("\n"), repr(terminal.text)


def test_make_demo_prints_where_the_command_is() -> None:
    """``make demo`` ends by naming the command's folder and the PATH line (make -n)."""
    done = subprocess.run(
        ["make", "-n", "-C", str(ROOT), "demo"], capture_output=True, text=True, check=False
    )
    assert done.returncode == 0, done.stderr
    assert f"{ROOT}/.venv/bin/heatweave" in done.stdout
    assert f'export PATH="{ROOT}/.venv/bin:$PATH"' in done.stdout
    readme = (ROOT / "README.md").read_text()
    assert 'export PATH="$PWD/.venv/bin:$PATH"' in readme


def test_sweep_table_without_plot_does_not_import_matplotlib() -> None:
    """The sweep's table and CSV (sweep.report) stay free of the plot extra."""
    code = (
        "import sys\nimport heatweave.sweep.report\n"
        "print('MPL', 'matplotlib' in sys.modules)\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=False)  # fmt: skip
    assert "MPL False" in done.stdout, done.stdout + done.stderr
