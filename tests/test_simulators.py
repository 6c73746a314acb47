"""Both simulator back ends on decks with known answers, against each other, and failing.

Every test here that simulates really runs ngspice 39 (program or shared library).
"""

from __future__ import annotations

import shutil
import threading
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest

from heatweave.errors import (
    EXIT_LIBNGSPICE_MISSING,
    EXIT_NGSPICE_MISSING,
    EXIT_SIMULATION_FAILED,
    EXIT_TIMEOUT,
    EXIT_TIMESTEP_TOO_SMALL,
    ConvergenceError,
    LibngspiceMissingError,
    NgspiceMissingError,
    SimulationTimeoutError,
    SimulatorError,
    TimestepTooSmallError,
    UsageError,
)
from heatweave.simulators import (
    BatchSimulator,
    SharedSimulator,
    SimResult,
    Simulator,
    get_simulator,
)
from heatweave.simulators.base import summarise
from heatweave.simulators.shared import DEBIAN_LIBRARY, ENV_LIBRARY, _forward_only

FIXTURES = Path(__file__).parent / "fixtures" / "sim"
BACKENDS = ["batch", "shared"]
TAU = 1e3 * 1e-6  # Rcharge * Ccharge in rc_step.cir and measure.cir

pytestmark = pytest.mark.ngspice


def deck(name: str) -> str:
    return (FIXTURES / name).read_text()


def make(name: str) -> Simulator:
    if name == "batch" and shutil.which("ngspice") is None:
        pytest.skip("ngspice program missing")
    if name == "shared" and not Path(DEBIAN_LIBRARY).exists():
        pytest.skip("libngspice missing")
    return get_simulator(name)


@pytest.fixture(params=BACKENDS)
def simulator(request: pytest.FixtureRequest) -> Simulator:
    return make(request.param)


def test_rc_step_follows_closed_form(simulator: Simulator) -> None:
    tran = simulator.run(deck("rc_step.cir")).plot("tran")
    time, vcap = tran["time"], tran["v(cap)"]
    assert time[-1] == pytest.approx(5e-3, rel=1e-12)
    assert len(time) > 900  # 5 us maximum step over 5 ms
    # First-order step response v = 1 - exp(-t/RC) (standard circuit theory, from memory).
    # Tolerance: the 1 ns source ramp delays the response by t_r/2, an error of at most
    # t_r/(2 RC) = 5e-7 V; ngspice's integration error at reltol=1e-6 is below that.
    np.testing.assert_allclose(vcap, 1.0 - np.exp(-time / TAU), rtol=0, atol=2e-6)
    # The source current is the capacitor's charging current -(1 V - v)/R (Ohm's law).
    late = time > 1e-5
    np.testing.assert_allclose(
        tran["i(vstep)"][late], -(1.0 - vcap[late]) / 1e3, rtol=0, atol=1e-12
    )


def test_divider_obeys_ohms_law(simulator: Simulator) -> None:
    result = simulator.run(deck("divider.cir"))
    assert [plot.name for plot in result.plots] == ["op1"]
    op = result.plot("op")
    assert op.scale is None
    # 10 V over 3k + (1k + 1k): I = 10/5k = 2 mA; mid = 2 mA * 2k; x1.n3 = 2 mA * 1k.
    assert op["v(top)"][0] == pytest.approx(10.0, rel=1e-12)
    assert op["v(mid)"][0] == pytest.approx(4.0, rel=1e-9)
    assert op["v(xlower.n3)"][0] == pytest.approx(2.0, rel=1e-9)
    # ngspice counts a source's current from + through the source to -: delivering is negative.
    assert op["i(vsupply)"][0] == pytest.approx(-2e-3, rel=1e-9)
    assert "mid" in op and "V(MID)" in op and "i(vsupply)" in op


def test_measurements_match_closed_form(simulator: Simulator) -> None:
    result = simulator.run(deck("measure.cir"))
    # ngspice prints .meas values with 7 significant digits; a crossing time interpolated
    # between 5 us points is off by about h^2/(8 RC) = 3 ns: rel 1e-5 covers both.
    assert result.measurements["vsettled"] == pytest.approx(1.0 - np.exp(-5.0), rel=1e-5)
    # 10 % to 90 % of a first-order step takes RC ln 9 (standard result, from memory).
    assert result.measurements["trise"] == pytest.approx(TAU * np.log(9.0), rel=1e-5)


def test_failed_measurement_is_a_warning(simulator: Simulator) -> None:
    text = deck("measure.cir").replace(".end\n", ".meas tran late find v(cap) at=50m\n.end\n")
    result = simulator.run(text)
    assert "late" not in result.measurements
    assert any("late" in warning and "failed" in warning for warning in result.warnings)


def test_requested_analyses_instead_of_the_decks(simulator: Simulator) -> None:
    result = simulator.run(deck("lowpass.cir"), analyses=["tran 10u 1m", "op"], deck_analyses=False)
    assert [(p.name, p.kind) for p in result.plots] == [("tran1", "tran"), ("op1", "op")]
    assert result.plot("tran")["time"][-1] == pytest.approx(1e-3, rel=1e-12)


def test_requested_analyses_after_the_decks(simulator: Simulator) -> None:
    result = simulator.run(deck("divider.cir"), analyses=["dc vsupply 0 10 5"])
    assert [plot.kind for plot in result.plots] == ["op", "dc"]
    dc = result.plot("dc")
    assert dc.scale == "v-sweep"
    np.testing.assert_allclose(dc["v-sweep"], [0.0, 5.0, 10.0], atol=1e-12)
    np.testing.assert_allclose(dc["v(mid)"], 0.4 * dc["v-sweep"], rtol=1e-9, atol=1e-12)


def test_save_limits_the_vectors(simulator: Simulator) -> None:
    op = simulator.run(deck("divider.cir"), save=["v(mid)"]).plot("op")
    assert set(op.vectors) == {"v(mid)"}


def test_include_resolved_against_cwd(simulator: Simulator) -> None:
    op = simulator.run(deck("uses_include.cir"), cwd=FIXTURES).plot("op")
    # 6 V over 2k + 1k: mid = 6 * 1k / 3k (voltage divider rule).
    assert op["v(mid)"][0] == pytest.approx(2.0, rel=1e-9)


@pytest.mark.parametrize(
    "folder", ["Jo's decks", 'the "old" decks', "decks (v2)", "back`quote", "new\nline", "$HOME"]
)
def test_include_resolved_in_a_folder_of_any_name(
    simulator: Simulator, tmp_path: Path, folder: str
) -> None:
    """ngspice reads ``NGSPICE_INPUT_DIR`` as ``set sourcepath = ( DIR )``, so a quote, a
    back quote, a parenthesis, a blank or a newline in the deck's folder stopped the batch
    back end ("bad set form"): both back ends must find the deck's files there."""
    where = tmp_path / folder
    where.mkdir()
    shutil.copytree(FIXTURES / "inc", where / "inc")
    op = simulator.run(deck("uses_include.cir"), cwd=where).plot("op")
    # 6 V over 2k + 1k: mid = 6 * 1k / 3k (voltage divider rule).
    assert op["v(mid)"][0] == pytest.approx(2.0, rel=1e-9)


def test_include_missing_without_cwd(simulator: Simulator) -> None:
    with pytest.raises(SimulatorError):
        simulator.run(deck("uses_include.cir"))


def test_workdir_is_kept_when_given(simulator: Simulator, tmp_path: Path) -> None:
    simulator.run(deck("divider.cir"), workdir=tmp_path / "keep")
    assert (tmp_path / "keep").is_dir()


@pytest.mark.parametrize(
    ("name", "error", "exit_code", "quoted"),
    [
        ("no_operating_point.cir", ConvergenceError, EXIT_SIMULATION_FAILED, "doAnalyses: OP"),
        ("no_initial_point.cir", ConvergenceError, EXIT_SIMULATION_FAILED, "initial timepoint"),
        (
            "timestep_too_small.cir",
            TimestepTooSmallError,
            EXIT_TIMESTEP_TOO_SMALL,
            "t = 1.23447e-06 s",
        ),
        ("unknown_model.cir", SimulatorError, EXIT_SIMULATION_FAILED, "valid modelname"),
        ("unknown_subckt.cir", SimulatorError, EXIT_SIMULATION_FAILED, "unknown subckt"),
        # ngspice 39 names the rejected card and the reason on the two lines after
        # "Error on line N or its substitute:"; both must reach the user (observed output)
        (
            "bad_tran_card.cir",
            SimulatorError,
            EXIT_SIMULATION_FAILED,
            "'.tran 1m': TSTOP is invalid",
        ),
        (
            "unknown_parameter.cir",
            SimulatorError,
            EXIT_SIMULATION_FAILED,
            "'r1 a 0 1k junk=3': unknown parameter (junk)",
        ),
        (
            "unknown_model.cir",
            SimulatorError,
            EXIT_SIMULATION_FAILED,
            "'dclamp a 0 missingmodel': could not find a valid modelname",
        ),
    ],
)
@pytest.mark.parametrize("backend", BACKENDS)
def test_failures_are_classified_alike(
    backend: str, name: str, error: type[SimulatorError], exit_code: int, quoted: str
) -> None:
    with pytest.raises(SimulatorError) as caught:
        make(backend).run(deck(name))
    assert type(caught.value) is error
    assert caught.value.exit_code == exit_code
    assert quoted in caught.value.message
    assert caught.value.hint


@pytest.mark.parametrize("backend", BACKENDS)
def test_timeout_stops_the_run_and_the_next_run_works(backend: str) -> None:
    simulator = make(backend)
    with pytest.raises(SimulationTimeoutError, match="did not finish within 1 s") as caught:
        simulator.run(deck("never_settles.cir"), timeout=1.0)
    assert caught.value.exit_code == EXIT_TIMEOUT
    op = simulator.run(deck("divider.cir")).plot("op")
    assert op["v(mid)"][0] == pytest.approx(4.0, rel=1e-9)


def _same(one: SimResult, other: SimResult) -> None:
    assert [(p.name, p.kind, p.scale) for p in one.plots] == [
        (p.name, p.kind, p.scale) for p in other.plots
    ]
    for a, b in zip(one.plots, other.plots, strict=True):
        assert a.vectors.keys() == b.vectors.keys()
        for name in a.vectors:
            # Same ngspice code, same deck, same commands; the binary raw file keeps every
            # float64 bit, so the numbers must agree exactly.
            np.testing.assert_array_equal(a[name], b[name], err_msg=f"{a.name} {name}")
    assert one.measurements == other.measurements


@pytest.mark.parametrize(
    ("name", "analyses"),
    [
        ("rc_step.cir", ()),
        ("divider.cir", ("dc vsupply 0 10 1",)),
        ("lowpass.cir", ("tran 1u 100u",)),
        ("measure.cir", ()),
    ],
)
def test_both_backends_agree(name: str, analyses: tuple[str, ...]) -> None:
    batch = make("batch").run(deck(name), analyses=analyses)
    shared = make("shared").run(deck(name), analyses=analyses)
    _same(batch, shared)


def test_ascii_raw_transfer_matches_binary() -> None:
    make("batch")
    binary = BatchSimulator().run(deck("lowpass.cir"))
    ascii_ = BatchSimulator(filetype="ascii").run(deck("lowpass.cir"))
    for a, b in zip(binary.plots, ascii_.plots, strict=True):
        for name in a.vectors:
            # ASCII keeps 16 significant digits: relative rounding below 1e-15.
            np.testing.assert_allclose(a[name], b[name], rtol=1e-14, atol=1e-300)


def test_shared_runs_are_independent() -> None:
    simulator = make("shared")
    first = simulator.run(deck("divider.cir"))
    second = simulator.run(deck("rc_step.cir"))
    third = simulator.run(deck("divider.cir"))
    assert [p.kind for p in second.plots] == ["tran"]
    assert "v(mid)" not in second.plot("tran")
    assert "v(cap)" not in third.plot("op")
    _same(first, third)


def test_shared_progress_reaches_one() -> None:
    seen: list[float] = []
    make("shared").run(deck("rc_step.cir"), analyses=["tran 1u 50m"], progress=seen.append)
    assert len(seen) >= 2 and seen[-1] == 1.0
    assert all(0.0 <= f <= 1.0 for f in seen)
    assert seen == sorted(seen)


def test_progress_never_steps_back() -> None:
    # Seen under load: ngspice's status line said 12.5 % and then 11.2 % (a time step
    # rejected and retried); a progress bar moved backwards.
    seen: list[float] = []
    forward = _forward_only(seen.append)
    for fraction in (0.1, 0.125, 0.112, 0.125, 0.5, 0.3, 1.0, 1.0):
        forward(fraction)
    assert seen == [0.1, 0.125, 0.5, 1.0]


def test_shared_keeps_ngspice_quiet(capfd: pytest.CaptureFixture[str]) -> None:
    text = deck("measure.cir").replace(".end\n", ".meas tran late find v(cap) at=50m\n.end\n")
    result = make("shared").run(text)
    captured = capfd.readouterr()
    assert captured.out == "" and captured.err == ""
    assert "Circuit: rc step with .meas" in result.log


def test_batch_progress_reports_completion() -> None:
    seen: list[float] = []
    make("batch").run(deck("divider.cir"), progress=seen.append)
    assert seen == [1.0]


def test_missing_program() -> None:
    with pytest.raises(NgspiceMissingError) as caught:
        BatchSimulator("/nonexistent/bin/ngspice").run(deck("divider.cir"))
    assert caught.value.exit_code == EXIT_NGSPICE_MISSING
    assert "apt-get install ngspice" in caught.value.render()


def test_missing_library() -> None:
    with pytest.raises(LibngspiceMissingError) as caught:
        SharedSimulator("/nonexistent/lib/libngspice.so.0").run(deck("divider.cir"))
    assert caught.value.exit_code == EXIT_LIBNGSPICE_MISSING
    assert "libngspice0-dev" in caught.value.render()
    assert ENV_LIBRARY in caught.value.render()


def test_unloadable_library(tmp_path: Path) -> None:
    fake = tmp_path / "libngspice.so.0"
    fake.write_text("not a shared object\n")
    with pytest.raises(LibngspiceMissingError, match="cannot be loaded"):
        SharedSimulator(fake).load()


def test_library_from_environment(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv(ENV_LIBRARY, "/nonexistent/from-env/libngspice.so")
    with pytest.raises(LibngspiceMissingError, match="from-env"):
        get_simulator("shared")
    assert isinstance(get_simulator("auto"), BatchSimulator)


@pytest.fixture
def real_library(monkeypatch: pytest.MonkeyPatch) -> Iterator[None]:
    monkeypatch.delenv(ENV_LIBRARY, raising=False)
    make("shared")
    yield


def test_auto_prefers_the_shared_library(real_library: None) -> None:
    assert isinstance(get_simulator("auto"), SharedSimulator)


@pytest.mark.parametrize("bad", ["plot v(out)", "tran 1u 1m\nshell rm x", "", "op; quit"])
def test_bad_analysis_requests(bad: str) -> None:
    with pytest.raises(UsageError):
        BatchSimulator().run(deck("divider.cir"), analyses=[bad])


def test_unknown_backend_name() -> None:
    with pytest.raises(UsageError, match="unknown simulator back end"):
        get_simulator("spicy")


def test_deck_without_analysis_warns(simulator: Simulator) -> None:
    result = simulator.run(deck("divider.cir").replace(".op\n", ""))
    assert result.plots == ()
    assert any(warning.startswith("no analysis ran") for warning in result.warnings)


def test_shared_library_waits_without_spinning(monkeypatch: pytest.MonkeyPatch) -> None:
    # ngspice's background-thread callback passes false while the thread runs and true
    # once it has ended (manual 19.3.3.6).  Read the other way round, the wait for the
    # analysis returned at once and looped tens of thousands of times a second, burning a
    # core beside the simulation; waited properly it wakes about once per poll interval.
    from heatweave.simulators import libngspice

    simulator = make("shared")
    waits = []
    real_wait = threading.Event.wait

    def counted(self: threading.Event, timeout: float | None = None) -> bool:
        waits.append(timeout)
        return real_wait(self, timeout)

    monkeypatch.setattr(threading.Event, "wait", counted)
    result = simulator.run(deck("lowpass.cir"), analyses=("tran 100n 20m",))
    assert result.plots[-1]["time"][-1] == pytest.approx(20e-3)
    polls = [w for w in waits if w == libngspice.POLL]
    assert 1 <= len(polls) < 2000


# --- the binding of libngspice's C interface, and the co-simulation's session ------------

SRC = Path(__file__).parents[1] / "src" / "heatweave"


def test_only_the_simulators_package_touches_ngspice() -> None:
    # Issues 13 and 15: one way to drive ngspice, behind the Simulator interface; no
    # third-party binding whose private attributes a release could change.
    import ast

    for module in SRC.rglob("*.py"):
        inside = module.parent.name == "simulators"
        tree = ast.parse(module.read_text(), str(module))
        for node in ast.walk(tree):
            names: list[str] = []
            if isinstance(node, ast.Import):
                names = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom):
                names = [node.module or ""] + [f"{node.module}.{a.name}" for a in node.names]
            for name in names:
                assert not name.lower().startswith("pyspice"), module
                if not inside:
                    # processes.py calls libc's prctl, nothing of ngspice
                    assert name != "ctypes" or module.name == "processes.py", module
                    assert "libngspice" not in name and not name.endswith(".shared"), module
            if isinstance(node, ast.Attribute):
                assert not node.attr.startswith("_ngspice"), module


def test_non_utf8_output_is_decoded_with_replacement() -> None:
    # ngspice echoes the title line; a Latin-1 byte in it made the old output callback
    # raise a TypeError.  Bytes that are not UTF-8 become U+FFFD in the log.
    raw = deck("divider.cir").encode().replace(b"\n", b" caf\xe9\n", 1)
    latin1 = raw.decode("utf-8", "surrogateescape")
    result = make("shared").run(latin1)
    assert "caf\ufffd" in result.log
    assert result.plot("op")["v(mid)"][0] == pytest.approx(4.0, rel=1e-9)


RC_PLAIN = """rc charged through a resistor that is changed half-way
Vstep in 0 dc 1
Rcharge in cap 1k
Ccharge cap 0 1u ic=0
.options reltol=1e-6 abstol=1e-15 vntol=1e-9
.end
"""


def test_session_pauses_alters_and_resumes() -> None:
    # A capacitor charging from 1 V through 1 kOhm (tau 1 ms) until t1 = 1 ms, then
    # through 3 kOhm (tau 3 ms): v(t) = 1 - (1 - v1) exp(-(t - t1)/tau2) with
    # v1 = 1 - exp(-1) (first-order step response, standard circuit theory, from memory).
    simulator = make("shared")
    with simulator.session(RC_PLAIN, cwd=FIXTURES, timeout=30) as session:
        session.advance("tran 5u 3m 0 5u uic", 1e-3)
        first = session.samples("time")
        assert first[-1] == pytest.approx(1e-3, abs=5.1e-6)
        session.alter("rcharge", 3e3)
        session.advance("tran 5u 3m 0 5u uic", None)
        time, vcap = session.samples("time"), session.samples("cap")
        voltages = session.node_voltages()
        assert "rusage" not in session.stats()
    # The first steps after the resume still carry the integrator's memory of the old
    # current (ngspice keeps its history across an alter); from 20 us on the charge
    # follows tau2: v(t) = 1 - (1 - v_a) exp(-(t - t_a)/tau2).
    after = int(np.searchsorted(time, first[-1] + 20e-6))
    t_a, v_a = time[after], vcap[after]
    late = time > t_a
    want = 1.0 - (1.0 - v_a) * np.exp(-(time[late] - t_a) / 3e-3)
    # At a 5 us step on a 3 ms time constant the trapezoidal rule's error stays far below
    # 1e-5 V (about h^2/(12 tau^2) relative, from memory); the old 1 ms would be 0.1 V off.
    np.testing.assert_allclose(vcap[late], want, rtol=0, atol=1e-5)
    assert vcap[len(first) - 1] == pytest.approx(1.0 - np.exp(-first[-1] / 1e-3), abs=1e-5)
    assert time[-1] == pytest.approx(3e-3, rel=1e-9)
    np.testing.assert_array_equal(voltages["cap"], vcap)


def test_session_reads_rows_and_summaries_as_its_copies_give_them() -> None:
    # read_rows copies straight from ngspice's memory and signals_at reads views of it:
    # both must give exactly what the copying accessors give, and the capacitor charging
    # through 1 kOhm (tau 1 ms) follows 1 - exp(-t / 1 ms) up to 1 ms (first-order step
    # response, standard circuit theory, from memory).
    simulator = make("shared")
    with simulator.session(RC_PLAIN, cwd=FIXTURES, timeout=30) as session:
        session.advance("tran 5u 3m 0 5u uic", 1e-3)
        first = float(session.samples("time")[0])  # uic: the first point is after 0
        count = session.samples("time").shape[0]
        rows = np.full((2, count - 3), np.nan)
        session.read_rows(["cap", "in"], 3, rows)
        np.testing.assert_array_equal(rows[0], session.samples("cap", 3))
        np.testing.assert_array_equal(rows[1], session.samples("in", 3))
        for names, out in ((["nosuch"], rows[:1]), (["cap"], np.zeros((1, count + 1)))):
            with pytest.raises(SimulatorError):
                session.read_rows(names, 0, out)  # no such vector; more than it holds
        ends = np.array([0, count // 2, count - 1, count + 5])
        voltages, currents, extremes = session.signals_at(ends)
        copies = session.node_voltages(), session.branch_currents()
        want = summarise(copies, ends)
    assert voltages.keys() == want[0].keys() and currents.keys() == want[1].keys()
    for name, values in voltages.items():
        np.testing.assert_array_equal(values, want[0][name])
    for name, values in currents.items():
        np.testing.assert_array_equal(values, want[1][name])
    assert extremes == want[2]
    low, high = extremes["v(cap)"]
    assert low == pytest.approx(1.0 - np.exp(-first / 1e-3), rel=1e-4)
    assert high == pytest.approx(1.0 - np.exp(-1.0), abs=2e-3)  # 1 ms + at most one step
    assert "i(vstep)" in extremes


def test_session_timeout_halts_the_transient_and_the_next_run_works() -> None:
    simulator = make("shared")
    chatter = deck("never_settles.cir").replace(".tran 1n 100u uic\n", "")
    started = time_now()
    with (
        pytest.raises(SimulationTimeoutError, match="did not finish within 1 s"),
        simulator.session(chatter, cwd=FIXTURES, timeout=1.0) as session,
    ):
        session.advance("tran 1n 100u uic", None)
    assert time_now() - started < 10
    assert simulator.run(deck("divider.cir")).plot("op")["v(mid)"][0] == pytest.approx(4.0)


def test_batch_back_end_cannot_pause() -> None:
    batch = make("batch")
    with pytest.raises(UsageError, match="cannot pause"), batch.session(RC_PLAIN, cwd=FIXTURES):
        pass


def time_now() -> float:
    import time

    return time.monotonic()
