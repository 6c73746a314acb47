"""The library leaves its host process as it found it (issue 13): a program that imports
heatweave keeps its collector, signal handlers and working folder.  Only the installed
command (``cli.entry``), which owns its process, sets its collector threshold."""

from __future__ import annotations

import gc
import os
import signal
import subprocess
import sys
from pathlib import Path

from heatweave.cli import PROCESS_GC_THRESHOLD
from heatweave.emit.emitter import emit_files
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.project import load_project


def _state() -> tuple[object, ...]:
    handlers = tuple(signal.getsignal(s) for s in (signal.SIGINT, signal.SIGTERM))
    return gc.isenabled(), gc.get_threshold(), gc.get_freeze_count(), os.getcwd(), handlers


def test_reading_indexing_and_emitting_leave_the_process_alone(tmp_path: Path) -> None:
    deck = tmp_path / "many.cir"
    lines = ["* many resistors", "V1 n0 0 1"]
    lines += [f"RS{i} n{i} n{i + 1} 1k" for i in range(3000)]
    deck.write_text("\n".join([*lines, ".op", ".end", ""]))
    note = tmp_path / "many.thermal.toml"
    note.write_text('schema = 1\n[part."RS*"]\nmodel = "linear"\ntc1_ppm = 100\nrth = 50.0\n')
    before = _state()
    DeckIndex(load_project(str(deck))).element_paths()
    emit_files(str(deck), str(note))
    assert _state() == before


def test_the_installed_command_sets_its_own_threshold() -> None:
    code = (
        "import gc, sys; from heatweave import cli; sys.argv = ['heatweave', '--version'];\n"
        "try:\n    cli.entry()\nexcept SystemExit:\n    print(gc.get_threshold())"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip().splitlines()[-1] == str(PROCESS_GC_THRESHOLD)
