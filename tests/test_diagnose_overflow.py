"""ngspice's arithmetic-overflow lines: a rejected Newton iteration, not a failed run.

The log lines are ngspice 39.3's own, from the operating point of decks/rtd-excitation at
1 A (gmin stepping overflows in the heat source's expression, source stepping then
finishes) and of tests/fixtures/check/noconv.cir (no DC solution at all).
"""

from __future__ import annotations

import pytest

from heatweave.errors import ConvergenceError
from heatweave.simulators import diagnose

OVERFLOW = [
    "Note: Starting dynamic gmin stepping",
    "Trying gmin =   1.0000E-03 Warning: Further gmin increment",
    "Error: -6.6094e+179, 2 out of range for ^",
    "    in line bhw_p_rpt",
    "Warning: Dynamic gmin stepping failed",
    "Error: -1.13002e+200, 2 out of range for ^",
    "    in line bhw_p_rpt",
    "Warning: True gmin stepping failed",
    "Note: Starting source stepping",
    "Supplies reduced to 100.0000% Note: One successful source step",
    "Note: Source stepping completed",
]
FAILED = [
    "Warning: source stepping failed",
    "Error: Transient op failed, timestep too small",
    'doAnalyses: OP:  Timestep too small; trouble with node "a"',
    "DC solution failed -",
]


def test_overflow_then_success_is_no_failure() -> None:
    assert diagnose.failure(OVERFLOW) is None


def test_overflow_then_failure_is_a_convergence_error() -> None:
    error = diagnose.failure(OVERFLOW + FAILED)
    assert isinstance(error, ConvergenceError)
    assert "out of range" not in error.message


@pytest.mark.parametrize(
    ("lines", "devices"),
    [
        (OVERFLOW, ("bhw_p_rpt",)),
        (FAILED, ()),
        # An overflow at the last line names no device.
        (["Error: 1e+300, 3 out of range for ^"], ("?",)),
    ],
)
def test_overflowed_names_each_source_once(lines: list[str], devices: tuple[str, ...]) -> None:
    assert diagnose.overflowed("\n".join(lines)) == devices


def test_overflow_is_one_warning_per_source() -> None:
    found = [w for w in diagnose.warnings(OVERFLOW) if "overflow" in w]
    assert found == [
        "bhw_p_rpt: arithmetic overflow in a Newton iteration (-6.6094e+179, 2 out of range for ^)"
    ]
