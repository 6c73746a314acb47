"""The raw-file reader against raw files ngspice 39 really writes, and the naming rules."""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from heatweave.errors import SimulatorError
from heatweave.simulators.naming import kind_from_title, number_plots, vector_name
from heatweave.simulators.rawfile import parse_raw, read_raw

FIXTURES = Path(__file__).parent / "fixtures" / "sim"
LOWPASS = FIXTURES / "lowpass.cir"
R_SERIES, C_SHUNT = 1e3, 1e-6  # the values in lowpass.cir

Written = tuple[str, Path, str]  # filetype, raw file, ngspice's log
needs_ngspice = pytest.mark.skipif(shutil.which("ngspice") is None, reason="ngspice missing")


@pytest.mark.parametrize(
    ("raw", "vector_type", "scale", "expected"),
    [
        # raw-file spellings (ngspice 39 writes v(...) and i(...))
        ("v(out)", "voltage", False, "v(out)"),
        ("V(OUT)", "voltage", False, "v(out)"),
        ("v(x1.n3)", "voltage", False, "v(x1.n3)"),
        ("i(v1)", "current", False, "i(v1)"),
        # shared-library spellings of the same quantities
        ("out", "voltage", False, "v(out)"),
        ("x1.n3", "voltage", False, "v(x1.n3)"),
        ("v1#branch", "current", False, "i(v1)"),
        ("V1#branch", None, False, "i(v1)"),
        # scales: raw file and memory differ for the dc sweep
        ("v(v-sweep)", "voltage", True, "v-sweep"),
        ("v-sweep", "voltage", True, "v-sweep"),
        ("time", "time", True, "time"),
        ("frequency", "frequency", True, "frequency"),
        # device quantities and other vectors keep their spelling, lower-cased
        ("@R1[i]", "current", False, "@r1[i]"),
        ("onoise_spectrum", None, False, "onoise_spectrum"),
    ],
)
def test_vector_names(raw: str, vector_type: str | None, scale: bool, expected: str) -> None:
    assert vector_name(raw, vector_type, scale=scale) == expected


@pytest.mark.parametrize(
    ("title", "kind"),
    [
        ("Operating Point", "op"),
        ("Transient Analysis", "tran"),
        ("AC Analysis", "ac"),
        ("DC transfer characteristic", "dc"),
        ("Noise Spectral Density Curves", "noise"),
        ("Transfer Function", "tf"),
    ],
)
def test_plot_kinds(title: str, kind: str) -> None:
    assert kind_from_title(title) == kind


def test_plot_numbering_counts_each_kind() -> None:
    assert number_plots(["ac", "tran", "op", "tran"]) == ["ac1", "tran1", "op1", "tran2"]


def _ngspice_raw(tmp_path: Path, filetype: str) -> tuple[Path, str]:
    """lowpass.cir run by ``ngspice -b -r``: the raw file and ngspice's log."""
    text = LOWPASS.read_text()
    if filetype == "ascii":
        text = text.replace(".end\n", ".options filetype=ascii\n.end\n")
    deck = tmp_path / f"lowpass-{filetype}.cir"
    deck.write_text(text)
    raw = tmp_path / f"lowpass-{filetype}.raw"
    log = tmp_path / f"lowpass-{filetype}.log"
    subprocess.run(
        ["ngspice", "-b", "-r", str(raw), "-o", str(log), str(deck)],
        cwd=tmp_path,
        check=True,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        timeout=60,
    )
    return raw, log.read_text()


@pytest.fixture(scope="module", params=["binary", "ascii"])
def written(request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory) -> Written:
    raw, log = _ngspice_raw(tmp_path_factory.mktemp("raw"), request.param)
    return request.param, raw, log


@pytest.mark.ngspice
@needs_ngspice
def test_plots_and_points_match_ngspice_log(written: Written) -> None:
    filetype, raw, log = written
    data = raw.read_bytes()
    assert (b"Binary:" in data) == (filetype == "binary")
    plots = read_raw(raw)
    assert sorted(plot.kind for plot in plots) == ["ac", "op", "tran"]
    # ngspice's log reports "No. of Data Rows : N" for every plot, in the order it wrote them.
    rows = [int(n) for n in re.findall(r"No\. of Data Rows\s*:\s*(\d+)", log)]
    assert [len(next(iter(plot.vectors.values()))) for plot in plots] == rows
    for plot in plots:
        lengths = {len(values) for values in plot.vectors.values()}
        assert len(lengths) == 1
        assert set(plot.vectors) >= {"v(in)", "v(out)", "i(vdrive)"}


@pytest.mark.ngspice
@needs_ngspice
def test_operating_point_values(written: Written) -> None:
    _, raw, _ = written
    op = next(plot for plot in read_raw(raw) if plot.kind == "op")
    assert op.scale is None
    # DC: the capacitor is open, so no current flows and out equals the 2 V source (Ohm's law).
    assert op["v(in)"][0] == pytest.approx(2.0, abs=1e-12)
    assert op["v(out)"][0] == pytest.approx(2.0, abs=1e-9)
    assert op["i(vdrive)"][0] == pytest.approx(0.0, abs=1e-12)


@pytest.mark.ngspice
@needs_ngspice
def test_ac_plot_is_complex_and_matches_first_order_lowpass(written: Written) -> None:
    _, raw, _ = written
    ac = next(plot for plot in read_raw(raw) if plot.kind == "ac")
    assert ac.scale == "frequency"
    frequency = ac["frequency"]
    assert frequency.dtype == np.float64
    # ".ac dec 10 1 100k": 10 points per decade from 1 Hz to 100 kHz, 51 points.
    np.testing.assert_allclose(frequency, 10.0 ** (np.arange(51) / 10), rtol=1e-12)
    out = ac["v(out)"]
    assert out.dtype == np.complex128
    # First-order RC low-pass H = 1 / (1 + j w R C) (standard circuit theory, from memory).
    expected = 1.0 / (1.0 + 2j * np.pi * frequency * R_SERIES * C_SHUNT)
    np.testing.assert_allclose(out, expected, rtol=1e-9)


@pytest.mark.ngspice
@needs_ngspice
def test_transient_scale(written: Written) -> None:
    _, raw, _ = written
    tran = next(plot for plot in read_raw(raw) if plot.kind == "tran")
    time = tran.scale_values
    assert tran.scale == "time" and time is not None
    assert time[0] == 0.0 and time[-1] == pytest.approx(2e-3, rel=1e-12)
    assert np.all(np.diff(time) > 0)
    assert tran["v(out)"][0] == pytest.approx(2.0, abs=1e-9)


@pytest.mark.ngspice
@needs_ngspice
def test_binary_and_ascii_give_the_same_numbers(tmp_path: Path) -> None:
    binary = read_raw(_ngspice_raw(tmp_path, "binary")[0])
    ascii_ = read_raw(_ngspice_raw(tmp_path, "ascii")[0])
    assert [p.name for p in binary] == [p.name for p in ascii_]
    for one, other in zip(binary, ascii_, strict=True):
        assert one.vectors.keys() == other.vectors.keys()
        for name in one.vectors:
            # ASCII raw files hold 16 significant digits ("%.15e"): relative rounding < 1e-15.
            np.testing.assert_allclose(one[name], other[name], rtol=1e-14, atol=1e-300)


@pytest.mark.ngspice
@needs_ngspice
def test_truncated_binary_file_keeps_complete_points(tmp_path: Path) -> None:
    raw, _ = _ngspice_raw(tmp_path, "binary")
    data = raw.read_bytes()
    whole = parse_raw(data)
    last = whole[-1]
    row = len(last.vectors) * (16 if last.kind == "ac" else 8)
    cut = parse_raw(data[: len(data) - 2 * row - row // 2])
    points = len(next(iter(last.vectors.values())))
    assert len(next(iter(cut[-1].vectors.values()))) == points - 3
    for name in last.vectors:
        np.testing.assert_array_equal(cut[-1][name], last[name][: points - 3])


@pytest.mark.ngspice
@needs_ngspice
def test_vector_count_mismatch_is_an_error(tmp_path: Path) -> None:
    raw, _ = _ngspice_raw(tmp_path, "ascii")
    broken = re.sub(rb"No. Variables: (\d+)", b"No. Variables: 9", raw.read_bytes(), count=1)
    with pytest.raises(SimulatorError, match="announces 9 vectors"):
        parse_raw(broken)


@pytest.mark.ngspice
@needs_ngspice
def test_arrays_are_read_only(tmp_path: Path) -> None:
    plot = read_raw(_ngspice_raw(tmp_path, "binary")[0])[0]
    with pytest.raises(ValueError):
        plot["v(out)"][0] = 1.0
    with pytest.raises(TypeError):
        plot.vectors["v(new)"] = np.zeros(1)  # type: ignore[index]
