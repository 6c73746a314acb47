"""The figure of ``heatweave sweep --plot FILE.png``.

Corners: two panels over the ambient axis (or, when the ambient is held, over the first
``--param``), each part's temperature rise above the ambient [K] and its resistance drift
[ppm], one curve per part and parameter corner, named in a legend beside the panels.  A
part with ``tmax`` gets its allowed rise, ``tmax`` minus the ambient, as a dashed line in
its colour: where a curve meets it, the part reaches ``tmax``.
Monte Carlo at one corner: for each part a histogram of its rise above the ambient and one
of its drift over the draws, with the 1st, 50th and 99th percentiles as dashed, solid and
dashed lines.  Monte Carlo at several ambients: the 1st..99th percentile band and the median
of the rise against ambient, one band per parameter corner, with the allowed rise (``tmax``
minus the ambient) dashed as in the corner panels, so the spread a tolerance causes reads
directly at every ambient.  A group's ambient is one value, so the percentiles of the rise
are those of the temperature less that ambient.

Built on matplotlib's object interface with the Agg canvas (no window, no pyplot state).
"""

from __future__ import annotations

import io
from pathlib import Path
from typing import Any

from matplotlib.axes import Axes
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from heatweave.reports.plot import drift_unit, palette
from heatweave.sweep.corners import PERCENTILES, SweepResult, corner_ambient, summary

#: The panels of corners and of Monte Carlo: the rise replaces the absolute temperature.
QUANTITIES = (
    ("rise", "rise above ambient [K]"),
    ("resistance_change_ppm", "resistance drift vs deck value [ppm]"),
)
LINES = ("--", "-", "--")  # p1, p50, p99
BAR_COLOUR = "tab:blue"
LINE_COLOUR = "0.15"


def _params_label(params: dict[str, float]) -> str:
    return ", ".join(f"{name}={value:g}" for name, value in params.items())


def _x_axis(result: SweepResult) -> str | None:
    """The swept parameter on the x axis (``None``: ambient): the first ``--param`` when
    the sweep holds the ambient at one value."""
    plan = result.plan
    if len(plan.ambients) == 1 and plan.params:
        return plan.params[0][0]
    return None


def _corner_curves(
    result: SweepResult, x_param: str | None
) -> dict[str, list[tuple[float, dict[str, Any]]]]:
    """(x, part values) per curve name ``PART`` or ``PART, name=value`` (the other params);
    the values gain ``rise`` (temperature minus the corner's ambient, K) and ``rise_limit``
    (``tmax`` minus that ambient, where the part has a ``tmax``)."""
    curves: dict[str, list[tuple[float, dict[str, Any]]]] = {}
    for outcome in result.outcomes:
        if outcome.data is None:
            continue
        params = dict(outcome.corner.params)
        ambient = corner_ambient(result, outcome)
        x = ambient if x_param is None else params.pop(x_param)
        suffix = _params_label(params)
        for part, values in outcome.data["parts"].items():
            name = f"{part}, {suffix}" if suffix else part
            temperature, tmax = values.get("temperature"), values["ratings"].get("tmax")
            extra = {
                "part": part,
                "rise": None if temperature is None else temperature - ambient,
                "rise_limit": None if tmax is None else tmax - ambient,
            }
            curves.setdefault(name, []).append((x, {**values, **extra}))
    return curves


def _corners(figure: Figure, result: SweepResult) -> None:
    x_param = _x_axis(result)
    curves = _corner_curves(result, x_param)
    colours = palette(list(curves))
    axes: list[Axes] = [figure.add_subplot(2, 1, k + 1) for k in range(2)]
    drifts = [abs(v["resistance_change_ppm"]) for points in curves.values() for _, v in points
              if v.get("resistance_change_ppm") is not None]  # fmt: skip
    per_unit, drift_label = drift_unit(max(drifts, default=0.0))
    limits_drawn: set[str] = set()
    for ax, (key, label) in zip(axes, QUANTITIES, strict=True):
        scale = per_unit if key == "resistance_change_ppm" else 1.0
        for name, points in curves.items():
            pairs = sorted((a, v[key] / scale) for a, v in points if v.get(key) is not None)
            if not pairs:
                continue
            xs, ys = zip(*pairs, strict=True)
            ax.plot(xs, ys, marker="o", markersize=3, color=colours[name], label=name)
            part = points[0][1]["part"]
            limits = sorted(
                {(a, v["rise_limit"]) for a, v in points if v["rise_limit"] is not None}
            )
            if key == "rise" and limits and part not in limits_drawn:
                limits_drawn.add(part)  # one line per part: tmax is the part's, not a corner's
                lx, ly = zip(*limits, strict=True)
                ax.plot(lx, ly, ls="--", lw=1.0, color=colours[name],
                        label=f"{part}: tmax - ambient (allowed rise)")  # fmt: skip
        ax.set_ylabel(label.replace("[ppm]", f"[{drift_label}]"))
        ax.grid(True, alpha=0.3)
    title = f"{Path(result.inputs.deck_path).name}: {len(result.outcomes)} corners"
    if x_param is None:
        axes[-1].set_xlabel("ambient temperature [degC]")
    else:
        ambient = result.outcomes[0].data and result.outcomes[0].data["ambient"]
        axes[-1].set_xlabel(f"deck parameter {x_param} (.param value)")
        if isinstance(ambient, float):
            title += f" at ambient {ambient:g} degC"
    axes[0].set_title(title)
    if curves:
        axes[0].legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize="small")


def _group_label(group: dict[str, Any]) -> str:
    ambient = group["ambient"]
    label = "ambient ?" if ambient is None else f"ambient {ambient:g} degC"
    extra = _params_label(group["params"])
    return f"{label}, {extra}" if extra else label


def _figures(
    group: dict[str, Any], part: str, key: str, scale: float = 1.0
) -> dict[str, float] | None:
    """The group's percentiles of *key* over *scale*; of the rise, those of the temperature
    less the group's ambient."""
    by = float(group["ambient"]) if key == "rise" else 0.0
    figures = group["parts"][part].get("temperature" if key == "rise" else key)
    if figures is None:
        return None
    return {f"p{p:g}": (figures[f"p{p:g}"] - by) / scale for p in PERCENTILES}


def _histograms(
    ax: Axes, result: SweepResult, group: dict[str, Any], part: str, key: str, scale: float
) -> None:
    source = "temperature" if key == "rise" else key
    values = [
        (o.data["parts"][part][source] - (corner_ambient(result, o) if key == "rise" else 0.0))
        / scale
        for o in result.outcomes
        if o.data is not None and o.data["parts"][part].get(source) is not None
    ]
    ax.hist(values, bins="auto", color=BAR_COLOUR, alpha=0.7)
    figures = _figures(group, part, key, scale)
    if figures is None:
        return
    for p, style in zip(PERCENTILES, LINES, strict=True):
        value = figures[f"p{p:g}"]
        ax.axvline(value, color=LINE_COLOUR, linestyle=style, linewidth=1.2)
        ax.annotate(
            f"p{p:g}", (value, 1.0), xycoords=("data", "axes fraction"),
            xytext=(2, -12), textcoords="offset points", fontsize="small", color=LINE_COLOUR,
        )  # fmt: skip
    ax.set_ylabel("draws")


def _bands(
    ax: Axes, groups: list[dict[str, Any]], part: str, key: str, tmax: float | None,
    scale: float,
) -> None:  # fmt: skip
    """p1..p99 band and p50 line against ambient, one per parameter corner; for the rise,
    the allowed rise ``tmax`` minus the ambient dashed, as in the corner panels."""
    by_params: dict[str, list[dict[str, Any]]] = {}
    for group in groups:
        by_params.setdefault(_params_label(group["params"]), []).append(group)
    colours = palette(list(by_params))
    for name, members in by_params.items():
        found = ((g["ambient"], _figures(g, part, key, scale)) for g in members)
        rows = sorted((a, f) for a, f in found if f is not None)
        if not rows:
            continue
        xs = [a for a, _ in rows]
        label = name or part
        ax.fill_between(
            xs, [f["p1"] for _, f in rows], [f["p99"] for _, f in rows],
            color=colours[name], alpha=0.25, label=f"{label}: p1 to p99",
        )  # fmt: skip
        ax.plot(xs, [f["p50"] for _, f in rows], color=colours[name], marker="o",
                markersize=3, label=f"{label}: p50")  # fmt: skip
    if key == "rise" and tmax is not None:
        ambients = sorted({float(g["ambient"]) for g in groups})
        ax.plot(ambients, [tmax - a for a in ambients], ls="--", lw=1.0, color=LINE_COLOUR,
                label=f"{part}: tmax - ambient (allowed rise)")  # fmt: skip
    ax.set_xlabel("ambient temperature [degC]")
    ax.legend(fontsize="small")


def _tmax(result: SweepResult, part: str) -> float | None:
    """The part's ``tmax`` as the corners report it (the nominal one of the annotation)."""
    for outcome in result.outcomes:
        if outcome.data is not None:
            tmax: float | None = outcome.data["parts"][part]["ratings"].get("tmax")
            return tmax
    return None


def _monte_carlo(figure: Figure, result: SweepResult) -> None:
    """Histograms when the draws ran at one corner; percentile bands over ambient else."""
    groups = summary(result)["groups"]
    parts = result.part_names
    drifts = [
        abs(v) for o in result.outcomes if o.data is not None
        for p in o.data["parts"].values() if (v := p.get("resistance_change_ppm"))
    ]  # fmt: skip
    per_unit, drift_label = drift_unit(max(drifts, default=0.0))  # % as the corner panels
    for row, part in enumerate(parts):
        for col, (key, label) in enumerate(QUANTITIES):
            ax = figure.add_subplot(len(parts), 2, 2 * row + col + 1)
            scale = per_unit if key == "resistance_change_ppm" else 1.0
            label = label.replace("[ppm]", f"[{drift_label}]")
            if len(groups) == 1:
                _histograms(ax, result, groups[0], part, key, scale)
                ax.set_xlabel(f"{part}: {label}")
            else:
                _bands(ax, groups, part, key, _tmax(result, part), scale)
                ax.set_ylabel(f"{part}: {label}")
            ax.grid(True, alpha=0.3)
    where = ""
    if len(groups) == 1:
        where = f" at {_group_label(groups[0])}"
    figure.suptitle(
        f"{Path(result.inputs.deck_path).name}: Monte Carlo, {result.plan.draws} draws{where}, "
        f"seed {result.plan.seed}"
    )


def build_figure(result: SweepResult) -> Figure:
    """The sweep's figure, not yet drawn to any file."""
    parts = max(len(result.part_names), 1)
    monte_carlo = bool(result.plan.draws)
    height = 3.2 * parts + 1.0 if monte_carlo else 7.0
    figure = Figure(figsize=(12.0, height), layout="constrained")
    FigureCanvasAgg(figure)
    if monte_carlo:
        _monte_carlo(figure, result)
    else:
        _corners(figure, result)
    return figure


def render_png(result: SweepResult) -> bytes:
    """The figure as PNG bytes."""
    buffer = io.BytesIO()
    build_figure(result).savefig(buffer, format="png", dpi=100)
    return buffer.getvalue()
