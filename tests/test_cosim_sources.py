"""The co-simulation's electrical time scale read through the grammar's source syntax
(spice/syntax.py SourceParts), in the layouts ngspice 39 accepts for a V or I card.

Periods from the ngspice manual, 4.1.1 (PULSE: PER) and 4.1.2 (SIN: 1/FREQ); the layouts
(commas between values, a blank before the parenthesis, DC and AC values before or after
the function) from the manual's 4.1 card forms.  tests/test_cosim.py holds the sums
themselves (rise + width + fall without PER, several sources).
"""

from __future__ import annotations

import pytest

from heatweave.cosim.method import source_time_scale


@pytest.mark.parametrize(
    ("card", "want"),
    [
        ("V1 in 0 DC 0 AC 1 SIN(0, 1, 1k)", 1e-3),  # commas; DC and AC first
        ("V1 in 0 SIN(0 1 2k) DC 2", 0.5e-3),  # the DC value after the function
        ("V1 in 0 PULSE (0 5 0 1u 1u 10u 20u)", 20e-6),  # a blank before the parenthesis
        ("i1 0 a pulse(0 1m 0 1n 1n 5u 40u)", 40e-6),  # lower case, a current source
        # no parentheses at all (ngspice 39 runs these: checked with stock ngspice)
        ("V1 in 0 PULSE 0 5 0 1u 1u 10u 20u", 20e-6),
        ("V1 in 0 DC 1 SIN 0 1 1k AC 1", 1e-3),
        # a value the grammar does not read as a number: no time scale from it
        ("V1 in 0 PULSE(0 {vhi} 0 1u 1u 10u 20u)", None),
        ("V1 in 0 {sin(2)}", None),  # a brace expression, not a transient function
        # unclosed: ngspice 39 closes it at the end (tests/test_waves_sources.py), so here
        ("V1 in 0 PULSE(0 5 0 1u 1u 10u 20u", 20e-6),
        # SFFM(vo va fc mdi fs): the slower of fc and fs; mdi 5 is an index, not 5 Hz
        # (manual 4.1.5: SFFM(VO VA FC MDI FS PHASEC PHASES))
        ("V2 mod 0 SFFM(0 2 50k 3 2k)", 0.5e-3),
        # AM(va vo mf fc td): the slower of mf and fc; td 1 s is a delay (manual 4.1.6:
        # AM(VA VO MF FC TD PHASES))
        ("V1 in 0 AM(1 0 100 10k 1)", 10e-3),
    ],
)
def test_source_layouts(card: str, want: float | None) -> None:
    got = source_time_scale([card])
    assert got == (pytest.approx(want) if want is not None else None)
