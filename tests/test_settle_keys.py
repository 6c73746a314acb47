"""``settle --json`` parts carry every key ``run --json`` parts carry, with the same meaning
(issue 12 section 3), and every report of ``settle`` shows the margins ``settle --check``
judges.

One small periodic deck of our own: a 2 kHz sine of 10 V amplitude across R1 (100 ohm, no
temperature coefficient, tied to the ambient) and R2 (400 ohm, tc1 = 0.004/K, on a shared
node ``board``).  The ambient, 68 degC, and R2's 3 K of board rise put the board past the
70 degC derating knee, so the local ambient a rating is derated at matters.  Thermal time
constants of 13.8 ms and more (R2 and the board: the eigenvalues of their two-node network,
-72.5/s and -19.2/s) against a 0.5 ms period: the co-simulation applies, and a 0.4 s run
(7.7 of the slowest time constant) ends near the periodic steady state ``settle`` finds.

Closed forms, named beside each check:

* mean power of a sine of amplitude Va across R: Vrms^2 / R = Va^2 / (2 R); peak Va^2 / R
  (Joule heating and the mean of sin^2 over a period);
* with no temperature coefficient the period-mean rise is Rth times the mean power (integrate
  C dT/dt = P - (T - Ta) / Rth over one period of the periodic steady state);
* IEC 60115-1 derating: allowed = rating x (tmax - T_local) / (tmax - knee) above the knee;
  margins as the README's key table defines them.

Tolerances: 1e-3 relative for sampled means and peaks (ngspice's default reltol); 0.1 K
between a transient's final value and the settled period (the transient's unfinished
warm-up, e^-7.7 of R2's 9 K rise, plus half the in-period ripple of the parts, 0.08 K at
most).
"""

from __future__ import annotations

import json
import re
from typing import Any

import pytest
from click.testing import CliRunner

from heatweave.cli import main

AMBIENT = 68.0
VA = 10.0
R1, RTH1, RATING1, TMAX1 = 100.0, 40.0, 1.0, 155.0
R2, TC2, RATING2, TMAX2, KNEE2 = 400.0, 0.004, 0.25, 125.0, 70.0

DECK = f"""a sine across a resistor without TCR and one with, on a board node
V1 a 0 SIN(0 {VA} 2k)
R1 a 0 {R1}
R2 a 0 {R2}
.tran 5u 0.4
.end
"""
ANNOTATION = f"""schema = 1
[ambient]
temperature = {AMBIENT}
[node.board]
rth = 30.0
cth = 1e-3
to = "ambient"
[part.R1]
model = "linear"
tc1 = 0.0
rth = {RTH1}
cth = 5e-4
power_rating = {RATING1}
tmax = {TMAX1}
[part.R2]
model = "linear"
tc1 = {TC2}
rth = 60.0
cth = 4e-4
to = "board"
power_rating = {RATING2}
tmax = {TMAX2}
derating_knee = {KNEE2}
"""

#: Keys only ``settle`` writes: the period's lowest temperature and peak minus valley.
SETTLE_ONLY = {"valley_temperature", "ripple"}


def flat(data: dict[str, Any], prefix: str = "") -> dict[str, Any]:
    """Nested part keys as dotted paths: ``margins.power``."""
    out: dict[str, Any] = {}
    for key, value in data.items():
        if isinstance(value, dict):
            out.update(flat(value, f"{prefix}{key}."))
        else:
            out[f"{prefix}{key}"] = value
    return out


@pytest.fixture(scope="module")
def reports(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    folder = tmp_path_factory.mktemp("settlekeys")
    deck = folder / "sine.cir"
    deck.write_text(DECK)
    (folder / "sine.thermal.toml").write_text(ANNOTATION)
    runner = CliRunner()
    out: dict[str, Any] = {"folder": folder}
    for name, args in (
        ("full", ["run", str(deck), "--method", "full"]),
        ("cosim", ["run", str(deck), "--method", "cosim"]),
        ("settle", ["settle", str(deck), "--check", "--html", str(folder / "settle.html")]),
    ):
        done = runner.invoke(main, [*args, "--json", "-"])
        assert done.exit_code == 0, done.output
        out[name] = json.loads(done.stdout)
        out[f"{name} stderr"] = done.stderr
    out["html"] = (folder / "settle.html").read_text()
    return out


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize("method", ["cosim", "settle"])
def test_parts_carry_runs_keys(reports: dict[str, Any], method: str) -> None:
    for name in ("R1", "R2"):
        full = set(flat(reports["full"]["parts"][name]))
        other = set(flat(reports[method]["parts"][name]))
        extra = SETTLE_ONLY if method == "settle" else set()
        assert other == full | extra, (name, full ^ other)


def derated(rating: float, local: float, tmax: float, knee: float = 70.0) -> float:
    """IEC 60115-1: the full rating up to the knee, linear to zero at tmax."""
    return rating if local <= knee else rating * (tmax - local) / (tmax - knee)


# (key, part, expected from the part's own JSON, relative tolerance)
CLOSED_FORMS = [
    ("power", "R1", lambda p: VA**2 / (2 * R1), 1e-3),  # Vrms^2 / R
    ("peak_power", "R1", lambda p: VA**2 / R1, 1e-3),  # Va^2 / R
    ("resistance", "R1", lambda p: R1, 1e-12),  # no TCR
    ("resistance_change_ppm", "R1", lambda p: 0.0, 1e-9),
    ("resistance", "R2", lambda p: R2 * (1 + TC2 * (p["temperature"] - 25.0)), 1e-9),
    ("resistance_change_percent", "R2", lambda p: TC2 * (p["temperature"] - 25.0) * 100, 1e-9),
    ("resistance_change_ppm", "R2", lambda p: TC2 * (p["temperature"] - 25.0) * 1e6, 1e-9),
    ("ratings.allowed_power", "R1", lambda p: derated(RATING1, AMBIENT, TMAX1), 1e-12),
    (
        "ratings.allowed_power",
        "R2",
        lambda p: derated(RATING2, p["ratings"]["local_ambient"], TMAX2, KNEE2),
        1e-12,
    ),
    ("margins.temperature", "R1", lambda p: TMAX1 - p["peak_temperature"], 1e-12),
    ("margins.temperature", "R2", lambda p: TMAX2 - p["peak_temperature"], 1e-12),
    ("margins.power", "R2", lambda p: p["ratings"]["allowed_power"] - p["power"], 1e-12),
    ("margins.load", "R2", lambda p: p["power"] / p["ratings"]["allowed_power"], 1e-12),
]


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize("method", ["full", "cosim", "settle"])
@pytest.mark.parametrize(("key", "name", "expected", "rel"), CLOSED_FORMS)
def test_part_key_meets_its_closed_form(
    reports: dict[str, Any], method: str, key: str, name: str, expected: Any, rel: float
) -> None:
    part = reports[method]["parts"][name]
    value = flat(part)[key]
    assert value == pytest.approx(expected(part), rel=rel, abs=1e-12)


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize("method", ["full", "cosim", "settle"])
def test_r2_is_derated_at_its_board(reports: dict[str, Any], method: str) -> None:
    """The deck's premise: R2's local ambient is the board, past the knee, so its rating is
    derated (and settle derates at the board's warmest within the period)."""
    data = reports[method]
    ratings = data["parts"]["R2"]["ratings"]
    assert ratings["local_ambient"] > KNEE2
    assert ratings["allowed_power"] < RATING2
    if method == "settle":
        board = data["node_extremes"]["board"]["peak_temperature"]
        assert ratings["local_ambient"] == board
    else:
        assert ratings["local_ambient"] == data["nodes"]["board"]


@pytest.mark.ngspice
@pytest.mark.slow
def test_settled_mean_rise_is_rth_times_mean_power(reports: dict[str, Any]) -> None:
    """No TCR on R1: period-mean rise = Rth x mean power, and the mean power Vrms^2 / R."""
    part = reports["settle"]["parts"]["R1"]
    assert part["temperature"] - AMBIENT == pytest.approx(RTH1 * part["power"], rel=1e-6)
    assert part["temperature"] - AMBIENT == pytest.approx(RTH1 * VA**2 / (2 * R1), rel=1e-3)


#: Keys whose values agree across methods, and how closely (K, W, ohm, fraction).
ACROSS = {
    "temperature": 0.1, "peak_temperature": 0.1, "resistance": 0.1 * R2 * TC2,
    "nominal_resistance": 0.0, "power": 2e-3, "peak_power": 2e-3,
    "ratings.power_rating": 0.0, "ratings.tmax": 0.0, "ratings.derating_knee": 0.0,
    "ratings.local_ambient": 0.1, "ratings.allowed_power": 0.1 * RATING2 / (TMAX2 - KNEE2),
    "margins.temperature": 0.1, "margins.power": 2e-3, "margins.load": 0.01,
}  # fmt: skip


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize("method", ["cosim", "settle"])
def test_keys_agree_with_the_full_deck(reports: dict[str, Any], method: str) -> None:
    for name in ("R1", "R2"):
        full = flat(reports["full"]["parts"][name])
        other = flat(reports[method]["parts"][name])
        assert other["model"] == full["model"] and other["to"] == full["to"]
        for key, tolerance in ACROSS.items():
            if (name, key) == ("R2", "peak_power"):
                continue  # over what each method simulates: test_peak_power_is_over_its_span
            if full[key] is None:
                assert other[key] is None, key
            else:
                assert other[key] == pytest.approx(full[key], abs=tolerance), (name, key)


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize("method", ["full", "cosim", "settle"])
def test_peak_power_is_over_its_span(reports: dict[str, Any], method: str) -> None:
    """R2 (tc1 > 0) dissipates most where it is coldest: a run's first peak, at the ambient
    it starts from (Va^2 / R(65 degC)); settle's peak lies within the settled period, at
    about its mean temperature (Va^2 / R(T mean), the ripple moving R by 2e-4)."""
    part = reports[method]["parts"]["R2"]
    at = part["temperature"] if method == "settle" else AMBIENT
    assert part["peak_power"] == pytest.approx(VA**2 / (R2 * (1 + TC2 * (at - 25.0))), rel=1e-3)


@pytest.mark.ngspice
@pytest.mark.slow
def test_settle_reports_show_the_margins_check_judges(reports: dict[str, Any]) -> None:
    """JSON, --check lines, the limits list, the table and the HTML page: one set of margins."""
    data, stderr, html = reports["settle"], reports["settle stderr"], reports["html"]
    limits = {(item["subject"], item["limit"]): item for item in data["limits"]}
    for name in ("R1", "R2"):
        margins = data["parts"][name]["margins"]
        ratings = data["parts"][name]["ratings"]
        assert limits[name, "tmax"]["margin"] == margins["temperature"]
        assert limits[name, "power_rating"]["margin"] == margins["power"]
        assert limits[name, "power_rating"]["bound"] == ratings["allowed_power"]
        line = re.search(rf"{name} power_rating: \S+ W, at most (\S+) W, margin (\S+) W", stderr)
        assert line is not None
        assert float(line[1]) == pytest.approx(ratings["allowed_power"], rel=1e-4)
        assert float(line[2]) == pytest.approx(margins["power"], rel=1e-4)
        # the table (stderr: the JSON went to stdout) and the page print the same numbers
        row = next(r for r in stderr.splitlines() if r.startswith(f"{name} "))
        assert f"{margins['power']:.4g}" in row.split()
        assert f"{margins['temperature']:.1f}" in row.split()
        for text in (f"{margins['power']:.5g}", f"{margins['temperature']:.3f}"):
            assert re.search(rf"<td[^>]*>{re.escape(text)}</td>", html), text


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize("method", ["full", "cosim"])
def test_the_table_names_the_method_that_ran(reports: dict[str, Any], method: str) -> None:
    assert f"method: {method} (" in reports[f"{method} stderr"]
