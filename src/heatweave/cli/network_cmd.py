"""``heatweave network``: fit a Foster network to Zth(t) data, convert Foster <-> Cauer."""

from __future__ import annotations

import io

import click
import numpy as np

from heatweave.cli.common import guarded, require_plotting
from heatweave.errors import UsageError
from heatweave.files import read_input, refuse_overwrite, write_atomic
from heatweave.networks import Foster, NetworkError, NetworkForm, to_cauer, to_foster
from heatweave.networks.fit import FitResult, fit_foster
from heatweave.networks.textio import ZthData, network_toml, read_network_toml, read_zth_csv
from heatweave.quantities import SpiceQuantity

_SETTINGS = {"help_option_names": ["-h", "--help"]}
_INPUT = click.Path(exists=True, dir_okay=False, allow_dash=True)


@click.group("network", context_settings=_SETTINGS)
def network() -> None:
    """Fit and convert thermal networks (Foster and Cauer RC ladders)."""


@network.command("fit", context_settings=_SETTINGS)
@click.argument("zth_file", metavar="ZTH.csv", type=_INPUT)
@click.option("-n", "--stages", type=click.IntRange(1, 12), required=True,
              help="Number of Foster stages to fit.")
@click.option("--t-min", type=SpiceQuantity("s", positive=True), default=None,
              help="Ignore points before this time (s; SPICE scale factors allowed: 10u).")
@click.option("--t-max", type=SpiceQuantity("s", positive=True), default=None,
              help="Ignore points after this time (s).")
@click.option("--plot", "plot_file", type=click.Path(dir_okay=False), default=None,
              help="Also write a log-time plot of data, fit and stages (PNG, SVG or PDF).")
@click.option("-o", "--output", type=click.Path(dir_okay=False, allow_dash=True), default="-",
              show_default=True, help="Where to write the TOML snippet.")
@guarded
def fit_command(
    zth_file: str,
    stages: int,
    t_min: float | None,
    t_max: float | None,
    plot_file: str | None,
    output: str,
) -> None:
    """Fit a Foster network to ZTH.csv and print it as a TOML snippet.

    ZTH.csv has two columns, time (s) and Zth (K/W): the temperature rise per watt after
    a power step.  A header row is optional and '#' starts a comment.  Use '-' for stdin.
    The fit minimises relative error, so every decade of time counts alike.
    """
    check_outputs({"-o": output, "--plot": plot_file}, [("the Zth data", zth_file)])
    if plot_file is not None:
        require_plotting()
    data = read_zth_csv(read_input(zth_file), _shown(zth_file))
    keep = np.ones(data.t.size, dtype=bool)
    if t_min is not None:
        keep &= data.t >= t_min
    if t_max is not None:
        keep &= data.t <= t_max
    try:
        result = fit_foster(data.t[keep], data.zth[keep], stages)
    except NetworkError as err:
        kept = int(np.count_nonzero(keep))
        window = f" (--t-min/--t-max keep {kept} of {keep.size})" if kept < keep.size else ""
        raise UsageError(f"{_shown(zth_file)}: {err.message}{window}", hint=err.hint) from None
    comments = (
        f"Foster fit, {stages} stage(s), to {result.points} points of {_shown(zth_file)}",
        f"fit error: RMS {result.rms_abs:.3g} K/W ({100 * result.rms_rel:.3g} %), "
        f"max {result.max_abs:.3g} K/W ({100 * result.max_rel:.3g} %)",
    )
    write_atomic(output, network_toml(result.network, comments))
    if plot_file is not None:
        write_atomic(plot_file, _plot(data, keep, result, plot_file))


@network.command("convert", context_settings=_SETTINGS)
@click.argument("network_file", metavar="FILE", type=_INPUT)
@click.option("--to", "target", type=click.Choice(["cauer", "foster"]), required=True,
              help="The form to convert to.")
@click.option("--part", default=None, metavar="NAME",
              help="Take the network of [part.NAME] (needed when several parts have one).")
@click.option("-o", "--output", type=click.Path(dir_okay=False, allow_dash=True), default="-",
              show_default=True, help="Where to write the TOML snippet.")
@guarded
def convert_command(network_file: str, target: str, part: str | None, output: str) -> None:
    """Convert the Foster or Cauer network in FILE (TOML) to the other form.

    FILE holds foster = [[rth, tau], ...], cauer = [[rth, cth], ...] or single =
    [rth, cth] at the top level, or in [part.NAME] tables of an annotation file (a
    top-level network wins; otherwise --part or the only part with a network).  The two
    networks have the same Zth at every frequency; the invariants are printed as comments.
    """
    check_outputs({"-o": output}, [("the network file", network_file)])
    source = read_network_toml(read_input(network_file), _shown(network_file), part)
    converted = to_cauer(source) if target == "cauer" else to_foster(source)
    write_atomic(output, network_toml(converted, _invariants(source, converted)))


def check_outputs(outputs: dict[str, str | None], inputs: list[tuple[str, str]]) -> None:
    """At most one output on stdout, and none of them the input file."""
    if list(outputs.values()).count("-") > 1:
        raise UsageError("-o and --plot both write to stdout", hint="give --plot a file name")
    refuse_overwrite(outputs, inputs)


def _shown(path: str) -> str:
    return "<stdin>" if path == "-" else path


def _invariants(source: NetworkForm, converted: NetworkForm) -> tuple[str, ...]:
    """Comments stating what the conversion keeps: sum of R and the first capacitance."""
    foster, cauer = to_foster(source), to_cauer(source)
    return (
        f"{converted.kind} form of a {source.kind} network, same Zth(s) at every frequency",
        f"sum of rth: {converted.total_rth!r} K/W (input: {source.total_rth!r} K/W)",
        f"first Cauer capacitance C1: {float(cauer.cth[0])!r} J/K",
        f"1 / (sum of 1/Ci over the Foster stages): {float(1.0 / np.sum(1.0 / foster.cth))!r} J/K",
    )


def _plot(data: ZthData, keep: np.ndarray, result: FitResult, target: str) -> bytes:
    # matplotlib loads only when a plot is asked for: the plot extra may be absent
    import matplotlib

    matplotlib.use("Agg")
    from matplotlib.figure import Figure  # after choosing the backend that draws to memory

    figure = Figure(figsize=(7, 4.5), layout="constrained")
    axes = figure.add_subplot()
    t = data.t[keep]
    fine = np.logspace(np.log10(t.min()), np.log10(t.max()), 400)
    axes.semilogx(data.t, data.zth, "o", ms=3, color="0.4", label="data")
    axes.semilogx(fine, result.network.zth(fine), "-", lw=2, label="Foster fit")
    for index, (r, tau) in enumerate(result.network.stages, start=1):
        stage = Foster(((r, tau),))
        axes.semilogx(fine, stage.zth(fine), "--", lw=1,
                      label=f"stage {index}: {r:.3g} K/W, {tau:.3g} s")
    axes.set_xlabel("time after the power step t [s]")
    axes.set_ylabel("thermal impedance Zth [K/W]")
    axes.set_title(f"Foster fit, RMS error {100 * result.rms_rel:.2g} %")
    axes.grid(True, which="both", alpha=0.3)
    axes.legend(fontsize="small")
    suffix = target.rsplit(".", 1)[-1].lower() if "." in target else "png"
    if suffix not in {"png", "svg", "pdf"}:
        raise UsageError(
            f"cannot write a plot as .{suffix}", hint="name the file .png, .svg or .pdf"
        )
    buffer = io.BytesIO()
    figure.savefig(buffer, format=suffix, dpi=120)
    return buffer.getvalue()
