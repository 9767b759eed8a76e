"""Time-domain pictures: settled waveforms per stage, and a burst with its grid averages.

Time in ms, voltages in V (signal = node minus its DC operating point).
matplotlib is imported inside the functions; figures are bare
``matplotlib.figure.Figure`` objects (no pyplot state).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from chain.plot.bode import DASHES
from chain.plot.headroom import COLOURS
from chain.units import format_si

__all__ = ["WaveformPlot", "plot_periods", "plot_burst"]

_GRID = "#e6e8ec"


@dataclass(frozen=True, slots=True)
class WaveformPlot:
    """A time-domain figure; ``lines`` maps a label to its Line2D (x in ms, y in V)."""

    figure: Any
    axes: tuple[Any, ...]
    lines: Mapping[str, Any]


def _style(ax) -> None:
    ax.grid(True, color=_GRID, linewidth=0.8)
    ax.set_axisbelow(True)
    for spine in ("top", "right"):
        ax.spines[spine].set_visible(False)


def plot_periods(points, *, title: str | None = None) -> WaveformPlot:
    """Two periods of the settled response at every stage output, one panel per (frequency, level).

    ``points``: :class:`chain.transient.measure.DistortionPoint` s.
    """
    from matplotlib.figure import Figure

    points = list(points)
    fig = Figure(figsize=(8.0, 2.6 * len(points) + 0.6), layout="constrained")
    axes = fig.subplots(len(points), 1, squeeze=False)[:, 0]
    lines = {}
    for ax, p in zip(axes, points):
        pr = p.period
        t_ms = np.concatenate((pr.t_s, pr.t_s + 1.0 / pr.f_hz)) * 1e3
        for i, (label, h) in enumerate(p.nodes.items()):
            sig = pr.v[h.node] - pr.dc_v[h.node]
            ln, = ax.plot(t_ms, np.concatenate((sig, sig)), color=COLOURS[i % len(COLOURS)], linewidth=1.4,
                          linestyle=DASHES[i % len(DASHES)], label=f"{label}  THD {100 * h.thd:.2g} %")
            lines[f"{p.f_hz:g} Hz {p.level_v:g} V {label}"] = ln
        ax.set_title(f"{p.f_hz:g} Hz, source {format_si(p.level_v, 'V', 4)} peak (settled)", fontsize=10, loc="left")
        ax.set_xlabel("time (ms)")
        ax.set_ylabel("signal (V)")
        ax.legend(fontsize=8, loc="upper left", bbox_to_anchor=(1.0, 1.0), frameon=False)
        _style(ax)
    if title:
        fig.suptitle(title)
    return WaveformPlot(figure=fig, axes=tuple(axes), lines=lines)


def plot_burst(result, *, title: str | None = None) -> WaveformPlot:
    """A burst: the stage outputs above, each stage grid's one-period average below (bias shift)."""
    from matplotlib.figure import Figure

    w = result.waveforms
    t_ms = w.t_s * 1e3
    fig = Figure(figsize=(8.0, 6.4), layout="constrained")
    top, bottom = fig.subplots(2, 1, sharex=True)
    lines = {}
    for i, node in enumerate(result.outputs):
        ln, = top.plot(t_ms, w.signal(node), color=COLOURS[i % len(COLOURS)], linewidth=0.8,
                       linestyle=DASHES[i % len(DASHES)], label=node)
        lines[node] = ln
    top.set_ylabel("signal (V)")
    top.legend(fontsize=8, loc="upper right", frameon=False)
    for i, g in enumerate(result.grids):
        avg = result.averages[g.node] - g.before_v
        ln, = bottom.plot(t_ms, avg, color=COLOURS[i % len(COLOURS)], linewidth=1.4,
                          linestyle=DASHES[i % len(DASHES)], label=f"{g.stage} grid ({g.coupling})")
        lines[f"{g.stage} grid average"] = ln
    for ax in (top, bottom):
        ax.axvspan(result.start_s * 1e3, result.end_s * 1e3, color="#f2e6d0", zorder=0)
        _style(ax)
    bottom.set_ylabel("grid average shift (V)")
    bottom.set_xlabel("time (ms)")
    bottom.legend(fontsize=8, loc="lower right", frameon=False)
    top.set_title(f"burst {format_si(result.loud_v, 'V', 4)} then {format_si(result.quiet_v, 'V', 4)} at {result.f_hz:g} Hz "
                  "(shaded: the burst)", fontsize=10, loc="left")
    if title:
        fig.suptitle(title)
    return WaveformPlot(figure=fig, axes=(top, bottom), lines=lines)
