"""The figure of ``heatweave run --plot FILE.png``.

A transient gives stacked panels over one time axis: temperatures of every part (solid) and
shared thermal node (dashed) with the ambient (dotted grey); the resistance drift of each
resistor in ppm; the deck node voltages and branch currents asked for with ``--probe``.
Each curve is named at its right end, outside the data, so no legend has to be searched;
where ends crowd, labels are spread apart and a thin leader line ties each to its curve.  A
part keeps its colour in every panel.  A part's ``tmax`` is drawn as a dashed line in its
colour, and, for a part with a ``power_rating``, the derating limit: the highest local
ambient at which its dissipation (at the instant deciding its power margin) is still within
the IEC 60115-1 derated rating, as a dash-dotted line.  An operating point gives bar charts
of the same quantities instead, with the same limit marks.  Units are written in brackets,
``[degC]``, as in the CSV headers.

The figure is built on matplotlib's object interface with the Agg canvas: no window, no
global pyplot state, so building it in tests or threads is safe.
"""

from __future__ import annotations

import io
from collections.abc import Sequence

import numpy as np
from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from heatweave.annotation import AMBIENT
from heatweave.annotation.ratings import derating_limit
from heatweave.reports.model import PPM_LIMIT, PartRow, Probe, RunReport
from heatweave.run.results import FloatArray

AMBIENT_COLOUR = "0.45"
#: Smallest vertical distance between two end labels, as a share of the panel's height.
LABEL_GAP = 0.075
MIN_BARS = 3
TIME_UNITS = ((1.0, "s"), (1e-3, "ms"), (1e-6, "us"), (1e-9, "ns"))


def palette(names: Sequence[str], family: str = "thermal") -> dict[str, str]:
    """One colour per curve name, stable across panels.  Thermal curves (parts, nodes) use
    matplotlib's tab10/tab20 cycle; voltages use Dark2, so a voltage never wears a part's
    colour."""
    import matplotlib  # loads only when a figure is drawn: the plot extra may be absent

    name = "Dark2" if family != "thermal" else ("tab10" if len(names) <= 10 else "tab20")
    cmap = matplotlib.colormaps[name]
    count = getattr(cmap, "N", 8)
    return {n: matplotlib.colors.to_hex(cmap(i % count)) for i, n in enumerate(names)}


def node_name(label: str) -> str:
    """How a shared thermal node is named in the figure."""
    return f"node {label}"


def time_scale(stop: float) -> tuple[float, str]:
    """The factor and unit that keep the time axis numbers readable."""
    for factor, unit in TIME_UNITS:
        if stop >= factor:
            return factor, unit
    return TIME_UNITS[-1]


def spread(values: Sequence[float], gap: float) -> list[float]:
    """Label heights near *values* but at least *gap* apart, in the order of *values*."""
    order = sorted(range(len(values)), key=lambda i: values[i])
    placed = [0.0] * len(values)
    last = -np.inf
    for i in order:
        placed[i] = max(values[i], last + gap)
        last = placed[i]
    # Shift the whole stack down when it climbed above the highest curve end.
    if values:
        excess = (max(placed) - max(values)) / 2
        placed = [p - excess for p in placed]
    return placed


def _label_ends(axes: Axes, ends: list[tuple[str, float, str]]) -> None:
    """Write each curve's name just right of the panel at the height where it ends; a label
    moved off that height (ends crowding) gets a leader line back to the curve's end."""
    if not ends:
        return
    low, high = axes.get_ylim()
    gap = LABEL_GAP * (high - low)
    heights = spread([y for _, y, _ in ends], gap)
    for (name, end, colour), height in zip(ends, heights, strict=True):
        moved = abs(height - end) > gap / 4
        axes.annotate(
            name, xy=(1.0, end), xycoords=("axes fraction", "data"),
            xytext=(1.05 if moved else 1.01, height), textcoords=("axes fraction", "data"),
            color=colour, va="center", fontsize=8, annotation_clip=False,
            arrowprops={"arrowstyle": "-", "color": colour, "lw": 0.6, "shrinkA": 0,
                        "shrinkB": 0} if moved else None,
        )  # fmt: skip


def limit_marks(row: PartRow) -> list[tuple[str, float, str]]:
    """(label, degC, line style) of a part's ``tmax`` and derating limit, where it has them.

    The derating limit is read against the part's local ambient (the ambient, or the shared
    node its path ends on), which the label names."""
    marks = []
    if row.tmax is not None:
        marks.append((f"{row.path} tmax", row.tmax, "--"))
    allowed, margin = row.margins.allowed, row.margins.power
    if row.power_rating is not None and allowed is not None and margin is not None:
        limit = derating_limit(row.power_rating, allowed - margin, row.derating_knee, row.tmax)
        if limit is not None:
            of = "ambient" if row.to == AMBIENT else f"node {row.to}"
            marks.append((f"{row.path} derating limit of {of}", limit, "-."))
    return marks


def _draw_limits(axes: Axes, report: RunReport, colours: dict[str, str]) -> None:
    """tmax and derating limits as horizontal lines in the part's colour; limits of the
    same kind and value share one label (grey when it names several parts), written just
    under the line at the panel's left edge."""
    labels: dict[tuple[str, float], list[str]] = {}
    for row in report.rows:
        for label, value, style in limit_marks(row):
            axes.axhline(value, color=colours[row.path], lw=0.9, ls=style, alpha=0.8)
            what = label[len(row.path) + 1 :]
            labels.setdefault((what, value), []).append(row.path)
    for (what, value), paths in labels.items():
        colour = colours[paths[0]] if len(paths) == 1 else AMBIENT_COLOUR
        axes.annotate(
            f"{', '.join(paths)} {what} {value:.4g}", xy=(0.005, value),
            xycoords=("axes fraction", "data"), xytext=(0, -2), textcoords="offset points",
            color=colour, fontsize=7, va="top", zorder=5,
            bbox={"facecolor": "white", "edgecolor": "none", "alpha": 0.75, "pad": 0.5},
        )  # fmt: skip


def _transient(figure: Figure, report: RunReport, colours: dict[str, str]) -> None:
    results = report.results
    assert results.time is not None
    factor, unit = time_scale(float(results.time[-1]))
    t = results.time / factor
    resistors = [row for row in report.rows if row.drift_series() is not None]
    groups = probe_groups(report.probes)
    panels = 1 + bool(resistors) + len(groups)
    axes = figure.subplots(panels, 1, sharex=True, squeeze=False)[:, 0]
    temp = axes[0]
    ends: list[tuple[str, float, str]] = []
    for row in report.rows:
        series = row.result.temperature_series
        assert series is not None
        temp.plot(t, series, color=colours[row.path], lw=1.6)
        ends.append((row.path, float(series[-1]), colours[row.path]))
    for label, series in results.node_series.items():
        colour = colours[node_name(label)]
        temp.plot(t, series, color=colour, lw=1.4, ls="--")
        ends.append((node_name(label), float(series[-1]), colour))
    ambient: FloatArray = (
        report.ambient_series
        if report.ambient_series is not None
        else np.full_like(t, results.ambient)
    )
    temp.plot(t, ambient, color=AMBIENT_COLOUR, lw=1.0, ls=":")
    ends.append(("ambient", float(ambient[-1]), AMBIENT_COLOUR))
    _draw_limits(temp, report, colours)
    temp.set_ylabel("temperature [degC]")
    key = "solid: parts, dashed: thermal nodes" if results.node_series else "parts"
    temp.set_title(f"Temperatures ({key})", fontsize=9, loc="left")
    panel = 1
    finished = [(temp, ends)]
    if resistors:
        drift = axes[panel]
        panel += 1
        drift_ends = []
        drifts = [row.drift_series() for row in resistors]
        per_unit, drift_label = drift_unit(
            max(float(np.max(np.abs(v))) for v in drifts if v is not None)
        )
        for row, values in zip(resistors, drifts, strict=True):
            assert values is not None
            drift.plot(t, values / per_unit, color=colours[row.path], lw=1.6)
            drift_ends.append((row.path, float(values[-1]) / per_unit, colours[row.path]))
        drift.axhline(0.0, color=AMBIENT_COLOUR, lw=0.8)
        drift.set_ylabel(f"resistance change [{drift_label}]")
        drift.set_title("Resistance drift against the deck's value", fontsize=9, loc="left")
        finished.append((drift, drift_ends))
    probe_colours = palette([p.label for p in report.probes], "voltage")
    for (ylabel, title), probes in groups.items():
        signals = axes[panel]
        panel += 1
        signal_ends = []
        for probe in probes:
            values = probe.series(results)
            colour = probe_colours[probe.label]
            signals.plot(t, values, color=colour, lw=1.4)
            signal_ends.append((probe.label, float(values[-1]), colour))
        signals.set_ylabel(ylabel)
        signals.set_title(title, fontsize=9, loc="left")
        # Full values on the axis: an offset ("+2.495") is easy to miss.
        signals.ticklabel_format(axis="y", useOffset=False)
        finished.append((signals, signal_ends))
    axes[-1].set_xlabel(f"time [{unit}]")
    axes[-1].set_xlim(float(t[0]), float(t[-1]))
    for ax, curve_ends in finished:
        ax.grid(True, lw=0.4, alpha=0.5)
        _label_ends(ax, curve_ends)


PROBE_PANELS = {
    "v": ("voltage [V]", "Deck node voltages"),
    "i": ("current [A]", "Branch currents"),
}


def probe_groups(probes: Sequence[Probe]) -> dict[tuple[str, str], list[Probe]]:
    """The probes by panel (y label, title): voltages, then currents."""
    groups: dict[tuple[str, str], list[Probe]] = {}
    for kind, panel in PROBE_PANELS.items():
        members = [p for p in probes if p.kind == kind]
        if members:
            groups[panel] = members
    return groups


def _bars(
    axes: Axes,
    names: list[str],
    values: list[float],
    colours: dict[str, str],
    spec: str,
    base: float = 0.0,
) -> None:
    """Bars from *base* (the ambient for temperatures, so a bar's length is the rise)."""
    positions = np.arange(len(names))
    heights = [v - base for v in values]
    bars = axes.bar(positions, heights, bottom=base, color=[colours[n] for n in names], width=0.6)
    axes.bar_label(bars, labels=[format(v, spec) for v in values], fontsize=8, padding=2)
    axes.set_xticks(positions, names, fontsize=8)
    # room for at least MIN_BARS bars, so a lone bar does not fill the panel
    centre, half = (len(names) - 1) / 2, max(len(names), MIN_BARS) / 2
    axes.set_xlim(centre - half, centre + half)
    axes.margins(y=0.15)
    axes.grid(True, axis="y", lw=0.4, alpha=0.5)


def _operating_point(figure: Figure, report: RunReport, colours: dict[str, str]) -> None:
    results = report.results
    resistors = [row for row in report.rows if row.change_ppm is not None]
    groups = probe_groups(report.probes)
    panels = 1 + bool(resistors) + len(groups)
    axes = figure.subplots(panels, 1, squeeze=False)[:, 0]
    names = [row.path for row in report.rows] + [node_name(n) for n in results.nodes]
    values = [row.result.temperature for row in report.rows] + list(results.nodes.values())
    _bars(axes[0], names, values, colours, ".2f", base=results.ambient)
    axes[0].axhline(results.ambient, color=AMBIENT_COLOUR, lw=1.0, ls=":")
    axes[0].annotate(
        f"ambient {results.ambient:.1f}", xy=(1.01, results.ambient),
        xycoords=("axes fraction", "data"), color=AMBIENT_COLOUR, va="center", fontsize=8,
    )  # fmt: skip
    _draw_limits(axes[0], report, colours)
    axes[0].set_ylabel("temperature [degC]")
    axes[0].set_title(
        "Operating point temperatures (bars rise from the ambient)", fontsize=9, loc="left"
    )
    panel = 1
    if resistors:
        drift = [row.change_ppm or 0.0 for row in resistors]
        per_unit, drift_label = drift_unit(max(abs(d) for d in drift))
        _bars(
            axes[panel], [row.path for row in resistors], [d / per_unit for d in drift],
            colours, "+.0f" if per_unit == 1.0 else "+.2f",
        )  # fmt: skip
        axes[panel].axhline(0.0, color=AMBIENT_COLOUR, lw=0.8)
        axes[panel].set_ylabel(f"resistance change [{drift_label}]")
        axes[panel].set_title("Resistance drift against the deck's value", fontsize=9, loc="left")
        panel += 1
    for (ylabel, title), probes in groups.items():
        names = [p.label for p in probes]
        _bars(
            axes[panel], names, [p.final(results) for p in probes],
            palette(names, "voltage"), ".4g",
        )  # fmt: skip
        axes[panel].set_ylabel(ylabel)
        axes[panel].set_title(title, fontsize=9, loc="left")
        panel += 1


def build_figure(report: RunReport) -> Figure:
    """The report's figure, not yet drawn to any file."""
    names = [row.path for row in report.rows] + [node_name(n) for n in report.results.nodes]
    colours = palette(names)
    panels = 1 + any(r.result.resistance is not None for r in report.rows)
    panels += len(probe_groups(report.probes))
    figure = Figure(figsize=(8.0, 2.2 + 2.3 * panels), layout="constrained")
    FigureCanvasAgg(figure)
    if report.transient:
        _transient(figure, report, colours)
    else:
        _operating_point(figure, report, colours)
    figure.suptitle(f"{report.deck}: {report.results.analysis}", fontsize=10)
    return figure


def render_png(report: RunReport) -> bytes:
    """The figure as PNG bytes (written by the caller, atomically)."""
    buffer = io.BytesIO()
    build_figure(report).savefig(buffer, format="png", dpi=120)
    return buffer.getvalue()


def drift_unit(largest_ppm: float) -> tuple[float, str]:
    """ppm for the small drifts of precision parts; % from 10,000 ppm (thermistors), where
    five- and six-digit ppm figures only get in the way, as the sweep table switches.
    Returns (ppm per unit, unit)."""
    return (1e4, "%") if largest_ppm >= PPM_LIMIT else (1.0, "ppm")
