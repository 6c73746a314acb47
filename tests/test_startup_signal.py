"""A signal while the command's modules load (before any command runs) ends it with the
status the README's exit-code table gives (130 Ctrl-C, 143 SIGTERM, 129 SIGHUP) and no
traceback (issue 14: "tracebacks still reach the user").

The signal is sent at a fixed moment, not after a sleep: an import hook sends it when the
command line first asks for click, i.e. in the middle of loading the command."""

from __future__ import annotations

import signal
import subprocess
import sys

import pytest

_HOOK = """
import os, signal, sys
class Strike:
    def find_spec(self, name, path=None, target=None):
        if name == "click":
            sys.meta_path.remove(self)
            os.kill(os.getpid(), signal.{sig})
        return None
sys.meta_path.insert(0, Strike())
sys.argv = ["heatweave", "--version"]
"""

_WAYS = {
    # python -m heatweave
    "module": "import runpy; runpy.run_module('heatweave', run_name='__main__', alter_sys=True)",
    # the installed script: it imports heatweave.__main__ and calls entry()
    "script": "from heatweave.__main__ import entry; sys.exit(entry())",
}


@pytest.mark.parametrize("way", sorted(_WAYS))
@pytest.mark.parametrize(
    ("sig", "status"), [("SIGINT", 130), ("SIGTERM", 143), ("SIGHUP", 129)]
)
def test_signal_during_start_up(way: str, sig: str, status: int) -> None:
    code = _HOOK.format(sig=sig) + _WAYS[way]
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, timeout=60
    )
    assert "Traceback" not in done.stderr, done.stderr
    assert done.returncode == status, (done.returncode, done.stderr)
    assert signal.Signals[sig].value + 128 == status  # the table's rule: 128 + signal
