"""The figure of ``heatweave settle --plot FILE.png``.

Stacked panels: the temperature ripple within the settled period (each part solid, each
shared thermal node dashed, drawn about its cycle mean, which the legend gives: a ripple of
millikelvin on 80 degC would be a flat line on an absolute axis); each part's dissipation
over the period with its mean dotted; with ``--warmup``, the warm-up from cold (cycle means
against time) with each settled mean dotted.  Same canvas and colours as ``run``'s figure
(:mod:`heatweave.reports.plot`).
"""

from __future__ import annotations

import io

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure

from heatweave.reports.plot import node_name, palette, time_scale
from heatweave.run.waves import seconds
from heatweave.settle.periodic import Settled


def _ripple_unit(largest: float) -> tuple[float, str]:
    """K for ripples of a tenth of a kelvin and more, mK below (per unit, name)."""
    return (1.0, "K") if largest >= 0.1 else (1e-3, "mK")


def build_figure(settled: Settled, deck: str) -> Figure:
    """The figure, not yet drawn to any file."""
    assert settled.time is not None and settled.power is not None
    assert settled.temperatures is not None
    names = [p.path for p in settled.parts] + [node_name(n) for n in settled.nodes]
    colours = palette(names)
    panels = 3 if settled.envelope is not None else 2
    figure = Figure(figsize=(8.0, 1.6 + 2.4 * panels), layout="constrained")
    FigureCanvasAgg(figure)
    axes = figure.subplots(panels, 1, squeeze=False)[:, 0]
    factor, unit = time_scale(settled.period)
    t = settled.time / factor
    temps = settled.temperatures
    means = [p.temperature for p in settled.parts] + list(settled.nodes.values())
    per, ripple_unit = _ripple_unit(float(np.max(np.ptp(temps, axis=0), initial=0.0)))
    ripple = axes[0]
    for k, (name, mean) in enumerate(zip(names, means, strict=True)):
        style = "-" if k < len(settled.parts) else "--"
        ripple.plot(t, (temps[:, k] - mean) / per, color=colours[name], lw=1.6, ls=style,
                    label=f"{name} (mean {mean:.2f} degC)")  # fmt: skip
    ripple.set_ylabel(f"about the mean [{ripple_unit}]")
    ripple.set_title(
        f"Temperature within the settled period ({seconds(settled.period)})", fontsize=9, loc="left"
    )
    power = axes[1]
    for k, part in enumerate(settled.parts):
        colour = colours[part.path]
        power.plot(t, settled.power[:, k], color=colour, lw=1.4, label=part.path)
        power.axhline(part.power, color=colour, lw=1.0, ls=":")
    power.set_ylabel("dissipation [W]")
    power.set_title("Dissipation over the period (dotted: its mean)", fontsize=9, loc="left")
    for ax in axes[:2]:
        ax.set_xlabel(f"time into the period [{unit}]")
        ax.set_xlim(float(t[0]), float(t[-1]))
    if settled.envelope is not None:
        env = settled.envelope
        warm = axes[2]
        w_factor, w_unit = time_scale(float(env.time[-1]))
        curves = [*env.parts.items(), *((node_name(n), v) for n, v in env.nodes.items())]
        for k, ((name, values), mean) in enumerate(zip(curves, means, strict=True)):
            style = "-" if k < len(env.parts) else "--"
            colour = colours[name]
            warm.plot(env.time / w_factor, values, color=colour, lw=1.6, ls=style, label=name)
            warm.axhline(mean, color=colour, lw=0.8, ls=":")
        warm.axhline(settled.ambient, color="0.45", lw=1.0, ls=":", label="ambient")
        warm.set_ylabel("temperature [degC]")
        warm.set_xlabel(f"time from cold [{w_unit}]")
        warm.set_xlim(0.0, float(env.time[-1]) / w_factor)
        warm.set_title(
            "Warm-up from cold: cycle means (dotted: the settled means)", fontsize=9, loc="left"
        )
    for ax in axes:
        ax.grid(True, lw=0.4, alpha=0.5)
        ax.legend(fontsize=7, loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False)
    figure.suptitle(f"{deck}: periodic steady state, ambient {settled.ambient:g} degC", fontsize=10)
    return figure


def render_png(settled: Settled, deck: str) -> bytes:
    """The figure as PNG bytes (written by the caller, atomically)."""
    buffer = io.BytesIO()
    build_figure(settled, deck).savefig(buffer, format="png", dpi=120)
    return buffer.getvalue()
