"""Headroom pictures: transfer curves and harmonic bar charts.

Reads :class:`~chain.headroom.TransferCurves`, :class:`~chain.headroom.Headroom`
and :class:`~chain.headroom.Distortion`; computes nothing but unit scaling.
matplotlib is imported inside the functions and the figures are bare
:class:`matplotlib.figure.Figure` objects (no pyplot state).  The returned
plot objects hold the line and bar artists so callers restyle and tests read
``get_xdata()`` / ``get_ydata()`` / bar heights instead of pixels.

Transfer figure
---------------
Left, the whole chain: every stage's output deviation (V) against the source
voltage on a symmetric-log axis (linear within ±``linear_v`` and logarithmic
outside), so the millivolt region where late stages clip and the volt region
where the first stage clips are both legible.  Right, one small panel per
stage: its output against its own input (both V), with the clipping onsets
marked (▲ grid conduction, ▼ cutoff) when a :class:`Headroom` is given.

Harmonic figure
---------------
Grouped bars of harmonics 2–9 in dB relative to each waveform's fundamental,
one group per harmonic, one colour per stage output and the chain output;
bars rise from a floor (default −100 dB) so that louder harmonics stand
taller.  The legend gives each series' THD.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np

__all__ = ["TransferPlot", "HarmonicsPlot", "plot_transfer", "plot_harmonics", "COLOURS"]

#: one colour per series, in signal order (a muted, colour-blind-friendly set)
COLOURS = ("#3b6ea8", "#c8553d", "#4f9a5b", "#8a5fb0", "#d49a2a", "#2f8f8f", "#a0526d", "#5c5c5c")
_ONSET_STYLE = {"grid conduction": ("^", "#b22222"), "cutoff": ("v", "#1f4e79")}
_TEXT = "#2b2f36"
_GRID = "#e6e8ec"


@dataclass(frozen=True, slots=True)
class TransferPlot:
    """The transfer-curve figure and its parts (matplotlib objects).

    Attributes
    ----------
    figure : matplotlib.figure.Figure
    chain_axes : matplotlib.axes.Axes
        Stage outputs against the source (x: V source, y: V deviation).
    stage_axes : Mapping[str, matplotlib.axes.Axes]
        Per stage, its output against its own input.
    chain_lines : Mapping[str, matplotlib.lines.Line2D]
        Per stage name (and ``"output"`` for the chain output when it is not
        a stage output): x = source V, y = output deviation V.
    stage_lines : Mapping[str, matplotlib.lines.Line2D]
        Per stage: x = own input deviation V, y = output deviation V.
    onsets : Mapping[str, tuple[matplotlib.lines.Line2D, ...]]
        Per stage, its onset markers (one-point lines; x, y in V of the
        stage panel), empty without a Headroom.
    """

    figure: Any
    chain_axes: Any
    stage_axes: Mapping[str, Any]
    chain_lines: Mapping[str, Any]
    stage_lines: Mapping[str, Any]
    onsets: Mapping[str, tuple[Any, ...]]

    @property
    def axes(self) -> tuple[Any, ...]:
        return (self.chain_axes, *self.stage_axes.values())


@dataclass(frozen=True, slots=True)
class HarmonicsPlot:
    """The harmonic bar chart and its parts.

    Attributes
    ----------
    figure : matplotlib.figure.Figure
    axes : matplotlib.axes.Axes
    bars : Mapping[str, matplotlib.container.BarContainer]
        Per series label (stage name or ``"output"``): 8 bars for the
        harmonics 2–9; each bar's ``get_y() + get_height()`` is the level in
        dB relative to the fundamental (clipped at the floor).
    levels_db : Mapping[str, tuple[float, ...]]
        The plotted levels, dB (before clipping at the floor).
    floor_db : float
    """

    figure: Any
    axes: Any
    bars: Mapping[str, Any]
    levels_db: Mapping[str, tuple[float, ...]]
    floor_db: float


def _style(ax) -> None:
    ax.grid(True, color=_GRID, linewidth=0.8)
    ax.set_axisbelow(True)
    for spine in ("top", "right"):
        ax.spines[spine].set_visible(False)


def _symlog_ticks(ax, linear_v: float, top_v: float) -> None:
    """Ticks at 0 and ±decades (every second decade when there are many), labelled in SI."""
    from chain.units import format_si

    lo = int(np.ceil(np.log10(linear_v)))
    hi = int(np.floor(np.log10(max(top_v, linear_v))))
    step = 1 if hi - lo <= 3 else 2
    decades = [10.0 ** k for k in range(hi, lo - 1, -step)]
    ticks = [-d for d in decades] + [0.0] + decades[::-1]
    ax.set_xticks(ticks)
    ax.set_xticklabels([format_si(t, "V") if t else "0" for t in ticks], fontsize=8)
    ax.xaxis.set_minor_locator(_NullLocator())


def _si(value: float, unit: str) -> str:
    from chain.units import format_si

    return format_si(value, unit)


def _NullLocator():
    from matplotlib.ticker import NullLocator

    return NullLocator()


def plot_transfer(curves, *, headroom=None, linear_v: float | None = None,
                  title: str | None = None) -> TransferPlot:
    """Draw the transfer curves of every stage and of the chain.

    Parameters
    ----------
    curves : chain.headroom.TransferCurves
    headroom : chain.headroom.Headroom, optional
        Adds onset markers, and sets ``linear_v`` from the first clip level.
    linear_v : float, optional
        Half-width of the linear region of the symmetric-log source axis, V
        (default: a tenth of the lowest clip level, else 1 mV).
    title : str, optional

    Returns
    -------
    TransferPlot
    """
    from matplotlib.figure import Figure

    stages = curves.stages
    count = max(len(stages), 1)
    fig = Figure(figsize=(6.0 + 2.6 * ((count + 1) // 2), 5.2), layout="constrained")
    grid = fig.add_gridspec(2, 1 + (count + 1) // 2, width_ratios=[2.3] + [1.0] * ((count + 1) // 2))
    ax = fig.add_subplot(grid[:, 0])
    if linear_v is None:
        clips = [r.clip_input_v for r in headroom.stages if r.clip_input_v] if headroom is not None else []
        linear_v = 0.1 * min(clips) if clips else 1e-3
    x = curves.input_v
    chain_lines = {}
    for i, s in enumerate(stages):
        (line,) = ax.plot(x, curves.node_dv[s.output], color=COLOURS[i % len(COLOURS)], linewidth=1.6,
                          label=f"{s.name} output ({s.output})")
        chain_lines[s.name] = line
    if curves.output_node not in {s.output for s in stages}:
        (line,) = ax.plot(x, curves.output_dv, color=_TEXT, linewidth=1.2, linestyle=(0, (4, 2)),
                          label=f"chain output ({curves.output_node})")
        chain_lines["output"] = line
    ax.set_xscale("symlog", linthresh=linear_v, linscale=0.6)
    _symlog_ticks(ax, linear_v, float(np.max(np.abs(x))) if x.size else 1.0)
    ax.axhline(0.0, color="#9aa0a6", linewidth=0.7)
    ax.axvline(0.0, color="#9aa0a6", linewidth=0.7)
    ax.set_xlabel("source voltage (V, symmetric-log scale)")
    ax.set_ylabel("output voltage − DC (V)")
    level = headroom.level_v if headroom is not None and getattr(headroom, "level_v", None) else None
    if level:
        # the stated input level, ± its peak, on the source axis
        for sign in (-1.0, 1.0):
            ax.axvline(sign * level, color="#b5651d", linewidth=0.9, linestyle=(0, (2, 2)), zorder=1)
        ax.annotate(f"stated level ±{_si(level, 'V')}", xy=(level, 1.0), xycoords=("data", "axes fraction"),
                    xytext=(0, 3), textcoords="offset points", ha="center", va="bottom", fontsize=7.5,
                    color="#b5651d", annotation_clip=False)
    heading = "transfer curves at mid-band"
    if title:
        heading = f"{title}: {heading}"
    if level:
        heading += f", stated input level {_si(level, 'V')} peak"
    fig.suptitle(heading, x=0.01, ha="left", color=_TEXT, fontsize=11)
    ax.set_title("every stage output against the source", color=_TEXT, fontsize=9, loc="left", pad=14)
    _style(ax)
    fig.legend(*ax.get_legend_handles_labels(), loc="outside lower center", ncol=min(len(chain_lines), 3),
               fontsize=8, frameon=False)
    stage_axes, stage_lines, onsets = {}, {}, {}
    rows = {r.stage: r for r in headroom.stages} if headroom is not None else {}
    for i, s in enumerate(stages):
        sub = fig.add_subplot(grid[i % 2, 1 + i // 2])
        xin, yout = curves.stage_curve(s.name)
        (line,) = sub.plot(xin, yout, color=COLOURS[i % len(COLOURS)], linewidth=1.4)
        marks = []
        row = rows.get(s.name)
        if row is not None:
            for half in (row.positive, row.negative):
                for onset in (half.grid, half.cutoff):
                    if onset is None:
                        continue
                    marker, colour = _ONSET_STYLE[onset.mechanism]
                    (m,) = sub.plot([onset.stage_input_v], [onset.output_v], linestyle="none", marker=marker,
                                    markersize=7, color=colour, label=onset.mechanism)
                    marks.append(m)
        sub.axhline(0.0, color="#9aa0a6", linewidth=0.6)
        sub.axvline(0.0, color="#9aa0a6", linewidth=0.6)
        sub.set_title(f"{s.name} ({s.kind})", fontsize=9, color=_TEXT)
        sub.set_xlabel(f"{s.input} − DC (V)", fontsize=8)
        sub.set_ylabel(f"{s.output} − DC (V)", fontsize=8)
        sub.tick_params(labelsize=7)
        _style(sub)
        stage_axes[s.name], stage_lines[s.name], onsets[s.name] = sub, line, tuple(marks)
    return TransferPlot(figure=fig, chain_axes=ax, stage_axes=stage_axes, chain_lines=chain_lines,
                        stage_lines=stage_lines, onsets=onsets)


def plot_harmonics(dist, *, stages: Sequence[str] | None = None, own: bool = False, floor_db: float = -100.0,
                   title: str | None = None) -> HarmonicsPlot:
    """Bar chart of harmonics 2–9 relative to the fundamental.

    Parameters
    ----------
    dist : chain.headroom.Distortion
    stages : Sequence[str], optional
        Stages to show (default all), in the given order; the chain output
        is always shown last.
    own : bool
        Show what each stage adds itself (null residual) instead of the
        harmonics present at its output.
    floor_db : float
        Bottom of the bars, dB.
    title : str, optional

    Returns
    -------
    HarmonicsPlot
    """
    from matplotlib.figure import Figure

    from chain.units import format_si

    names = list(stages) if stages is not None else [s.stage for s in dist.stages]
    series: list[tuple[str, tuple[float, ...], float]] = []
    for name in names:
        s = dist.stage(name)
        if own:
            series.append((name, s.own_relative_db, s.own_thd))
        else:
            series.append((name, s.output.relative_db, s.output.thd))
    series.append(("output", dist.overall.relative_db, dist.overall.thd))
    fig = Figure(figsize=(7.2, 4.8), layout="constrained")
    ax = fig.add_subplot()
    harmonics = np.arange(2, 2 + len(series[0][1]))
    width = 0.8 / len(series)
    bars, levels = {}, {}
    for k, (label, db, ratio) in enumerate(series):
        values = np.array(db, dtype=float)
        shown = np.where(np.isfinite(values), np.maximum(values, floor_db), floor_db)
        colour = COLOURS[k % len(COLOURS)] if label != "output" else _TEXT
        if label == "output":
            name = f"chain output: THD {100 * ratio:.3g} % (cumulative)"
        elif own:
            name = f"{label} own: THD {100 * ratio:.3g} %"
        else:
            name = f"{label} output: THD {100 * ratio:.3g} % (cumulative)"
        bars[label] = ax.bar(harmonics - 0.4 + width * (k + 0.5), shown - floor_db, width=width * 0.92,
                             bottom=floor_db, color=colour, label=name)
        levels[label] = tuple(float(v) for v in values)
    ax.set_xticks(harmonics)
    ax.set_xticklabels([f"H{n}" for n in harmonics])
    ax.set_xlabel("harmonic")
    ax.set_ylabel("level relative to the fundamental (dB)")
    ax.set_ylim(floor_db, 0.0)
    what = "added by each stage alone (own THD)" if own else "at each stage output (cumulative THD)"
    heading = f"harmonics {what}, {format_si(dist.level_v, 'V')} peak sine at the input"
    # the netlist's title on a line of its own: both on one line run off a figure this narrow
    fig.suptitle(f"{title}\n{heading}" if title else heading, x=0.01, ha="left", color=_TEXT, fontsize=11)
    _style(ax)
    fig.legend(loc="outside lower center", ncol=min(len(series), 2), fontsize=8, frameon=False)
    return HarmonicsPlot(figure=fig, axes=ax, bars=bars, levels_db=levels, floor_db=float(floor_db))
