"""The drive period settle takes from a deck's sources, and the periods it refuses.

Each source function's reading follows the ngspice 39 manual, section 4.1 (the table of
defaults there: a parameter omitted or zero takes its default, so PULSE without PER and SIN
without FREQ repeat with the transient's stop time, i.e. not at all).  Expected periods
are exact fractions worked out by hand from the decimal values on the cards.
"""

from __future__ import annotations

from fractions import Fraction
from pathlib import Path

import pytest

from heatweave.errors import UsageError
from heatweave.run.waves import drive_period, exact_value
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.project import load_project


def index_of(tmp_path: Path, *cards: str) -> DeckIndex:
    """A deck of *cards* (plus a load) written to a file and indexed."""
    deck = tmp_path / "drive.cir"
    deck.write_text("drive period test\n" + "\n".join(cards) + "\nRL a 0 10\n.tran 1u 1m\n.end\n")
    return DeckIndex(load_project(str(deck)))


# (card, exact period in s; manual 4.1.x)
PERIODIC = [
    pytest.param("V1 a 0 PULSE(0 5 0 1n 1n 20u 50u)", Fraction(1, 20_000), id="pulse-4.1.1"),
    pytest.param("V1 a 0 PULSE(0 5 0 1n 1n 199.9u 500u)", Fraction(1, 2000), id="pulse-decimal"),
    pytest.param("I1 a 0 pulse(0 1 2u 1n 1n 1u 0.1m)", Fraction(1, 10_000), id="pulse-current"),
    pytest.param("V1 a 0 SIN(0 1 3k)", Fraction(1, 3000), id="sin-4.1.2"),
    pytest.param("V1 a 0 DC 0 AC 1 SIN(0 1 1MEG 1n)", Fraction(1, 10**6), id="sin-delay-ac"),
    pytest.param("V1 a 0 PWL(0 0 10u 5 30u 5 40u 0) r=10u", Fraction(30, 10**6), id="pwl-r-4.1.4"),
    pytest.param(
        "V1 a 0 PWL(0 -7 10n -7 11n -3 50n -7) r=0 td=15n", Fraction(50, 10**9), id="pwl-r0-td"
    ),
    pytest.param("V1 a 0 SFFM(0 1 20k 5 1k)", Fraction(1, 1000), id="sffm-4.1.5"),
    pytest.param("V1 a 0 AM(0.5 1 20K 5MEG 1m)", Fraction(1, 20_000), id="am-4.1.6"),
]


@pytest.mark.parametrize(("card", "period"), PERIODIC)
def test_source_periods(tmp_path: Path, card: str, period: Fraction) -> None:
    drive = drive_period(index_of(tmp_path, card), None)
    assert drive.exact == period
    assert drive.period == float(period)
    assert "V1" in drive.describe() or "I1" in drive.describe()


# (cards, why each is refused): a source that never repeats is named at its card.
NOT_PERIODIC = [
    pytest.param("V1 a 0 PULSE(0 5 0 1n 1n 20u)", "no period (PER)", id="pulse-no-per"),
    pytest.param("V1 a 0 PULSE(0 5 0 1n 1n 20u 0)", "no period (PER)", id="pulse-per-zero"),
    pytest.param("V1 a 0 SIN(0 1)", "no frequency", id="sin-no-freq"),
    pytest.param("V1 a 0 SIN(0 1 1k 0 100)", "damped", id="sin-damped"),
    pytest.param("V1 a 0 EXP(0 1 0 1u)", "does not repeat", id="exp"),
    pytest.param("V1 a 0 PWL(0 0 10u 5 40u 0) r=5u", "one of its times", id="pwl-bad-r"),
    pytest.param("V1 a 0 DC 0 TRNOISE(20n 0.5n 0 0)", "does not repeat", id="trnoise"),
]


@pytest.mark.parametrize(("card", "why"), NOT_PERIODIC)
@pytest.mark.parametrize("given", [None, 1e-3])
def test_source_that_never_repeats_is_refused_at_its_card(
    tmp_path: Path, card: str, why: str, given: float | None
) -> None:
    with pytest.raises(UsageError) as caught:
        drive_period(index_of(tmp_path, card), given)
    err = caught.value
    assert why in err.message and "V1" in err.message
    assert err.location is not None and err.location.line == 2
    assert err.location.file.endswith("drive.cir")


def test_one_shot_drives_count_as_constant_after_they_end(tmp_path: Path) -> None:
    """PWL without r holds its last value, PULSE with NP stops after NP pulses (manual
    4.1.1, 4.1.4): the comparison must start after 1 ms + 3 x 50 us and after 2 ms."""
    index = index_of(
        tmp_path,
        "V1 a 0 PULSE(0 5 1m 1n 1n 20u 50u 3)",
        "V2 b 0 PWL(0 0 2m 5)",
        "V3 c 0 SIN(0 1 10k 0.5m)",
    )
    drive = drive_period(index, None)
    assert drive.exact == Fraction(1, 10_000)
    assert drive.start == pytest.approx(2e-3, rel=1e-12)
    assert [w.path for w in drive.sources] == ["V3"]


@pytest.mark.parametrize(
    ("cards", "period"),
    [
        # lcm(50 us, 1/20 kHz) = 50 us; lcm(1/20k, 1/30k) = lcm(3/60k, 2/60k) = 6/60k = 100 us
        (("V1 a 0 PULSE(0 5 0 1n 1n 20u 50u)", "V2 b 0 SIN(0 1 20k)"), Fraction(1, 20_000)),
        (("V1 a 0 SIN(0 1 20k)", "V2 b 0 SIN(0 1 30k)"), Fraction(1, 10_000)),
        # 0.3 ms and 0.2 ms (not representable in binary): exactly 0.6 ms
        (("V1 a 0 PULSE(0 5 0 1n 1n 0.1m 0.3m)", "V2 b 0 PULSE(0 5 0 1n 1n 0.1m 0.2m)"),
         Fraction(6, 10_000)),
    ],
)  # fmt: skip
def test_least_common_period_is_exact(
    tmp_path: Path, cards: tuple[str, ...], period: Fraction
) -> None:
    drive = drive_period(index_of(tmp_path, *cards), None)
    assert drive.exact == period
    assert drive.describe().startswith("the least common period of V1's")


def test_incommensurate_periods_are_refused(tmp_path: Path) -> None:
    """1 kHz and 1.0001 kHz share a period only every 10 s = 10001 periods."""
    index = index_of(tmp_path, "V1 a 0 SIN(0 1 1k)", "V2 b 0 SIN(0 1 1.0001k)")
    with pytest.raises(UsageError, match="incommensurate"):
        drive_period(index, None)


def test_parameters_are_evaluated_in_their_scope(tmp_path: Path) -> None:
    index = index_of(
        tmp_path,
        ".param per = 50u ton = {per * 0.3}",
        ".subckt drv out per=1m",
        "V1 out 0 PULSE(0 5 0 1n 1n {ton} {per})",
        ".ends",
        "X1 a drv per=25u",
        "X2 b drv",
    )
    drive = drive_period(index, None)
    assert [(w.path, w.period) for w in drive.sources] == [
        ("X1.V1", Fraction(1, 40_000)),
        ("X2.V1", Fraction(1, 1000)),
    ]
    assert drive.exact == Fraction(1, 1000)


@pytest.mark.parametrize(
    ("given", "accepted"),
    [(40e-6, False), (60e-6, False), (25e-6, False), (50e-6, True), (100e-6, True),
     (150e-6, True)],
)  # fmt: skip
def test_given_period_must_be_a_multiple_of_every_source(
    tmp_path: Path, given: float, accepted: bool
) -> None:
    """The issue's case: a 50 us PWM examined with 40 us or 60 us windows."""
    index = index_of(tmp_path, "VPWM a 0 PULSE(0 12 0 10n 10n 15u 50u)")
    if accepted:
        assert drive_period(index, given).period == given
        return
    with pytest.raises(UsageError) as caught:
        drive_period(index, given)
    err = caught.value
    assert "is not a period of VPWM's PULSE" in err.message and "50 us" in err.message
    assert err.location is not None and err.location.line == 2
    assert "drive.cir:2:" in err.render()


@pytest.mark.parametrize("card", ["B1 a 0 V = 5 + 5*sin(2*pi*1k*time)", "A1 a clk", "V1 a 0 DC 5"])
def test_drives_without_a_readable_period_need_one_given(tmp_path: Path, card: str) -> None:
    index = index_of(tmp_path, card)
    with pytest.raises(UsageError) as caught:
        drive_period(index, None)
    assert ("no periodic source" if card.startswith("V") else card[:2]) in caught.value.message
    drive = drive_period(index, 1e-3)  # given: judged by the waveforms repeating
    assert drive.given and drive.period == 1e-3


@pytest.mark.parametrize(
    ("text", "value"),
    [("199.9u", Fraction(1999, 10**7)), ("1e-3", Fraction(1, 1000)), ("2MEG", Fraction(2 * 10**6)),
     ("10mil", Fraction(254, 10**6)), ("1k5", Fraction(1000)), (".5n", Fraction(1, 2 * 10**9))],
)  # fmt: skip
def test_exact_values_follow_ngspice_scale_factors(text: str, value: Fraction) -> None:
    """Scale factors of manual 2.1.4.2 (M is milli, mil is 25.4 um, letters after ignored)."""
    from heatweave.spice.deck import Card

    assert exact_value(text, {}, Card(text="V1 a 0 1"), 0) == value
