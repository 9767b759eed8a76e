"""Bode plot of a :class:`~chain.smallsignal.Response`: magnitude and phase.

The plot only reads arrays: magnitude ``20·log10|h|`` (dB) and phase
(degrees, :func:`phase_deg`) are the only numbers it computes.  Corners are
drawn where the caller says they are.

Layout rules shared by every frequency plot of this package: the title (the
design's) sits above the panels; corner labels sit above the magnitude
panel, outside it, so no curve can run over them; legends sit below the
panels, outside them; every phase trace is wrapped by the one rule of
:func:`phase_deg`.  matplotlib is
imported inside the functions, and only :class:`matplotlib.figure.Figure`
objects are used (no pyplot state).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Sequence

import numpy as np
from chain.decibels import db_array

if TYPE_CHECKING:  # pragma: no cover - typing only
    from matplotlib.lines import Line2D
    from matplotlib.text import Annotation

__all__ = ["BodePlot", "ImpedancePlot", "BalancePlot", "bode", "impedance", "balance", "phase_deg", "wrap_turns",
           "PALETTE"]

#: trace colours, in order: dark enough for print, distinguishable in grey
PALETTE = ("#1d3557", "#b5651d", "#2a7f62", "#7b2d5b", "#6b6b12", "#a23b2a", "#3d6f9e", "#555555")
#: dash patterns, cycled with the colours so traces differ without colour too
DASHES = ("-", (0, (6, 2)), (0, (2, 1.5)), (0, (7, 2, 1.5, 2)), (0, (3, 1, 1, 1, 1, 1)))
CORNER_COLOUR = "#8a8a8a"


def phase_deg(h, f_hz, f_ref_hz: float | None = None) -> np.ndarray:
    """The phase of ``h`` in degrees, wrapped by one rule for every trace:
    unwrapped along frequency (no 360° jumps), then shifted by a whole
    number of turns so that at ``f_ref_hz`` (default: the sweep's
    geometric middle) it lies in (−180°, 180°].

    Two traces that differ by a full turn somewhere in the band therefore
    still agree at the reference frequency, where the report states phases.
    """
    return wrap_turns(np.degrees(np.unwrap(np.angle(np.asarray(h)))), f_hz, f_ref_hz)


def wrap_turns(phase_deg_unwrapped, f_hz, f_ref_hz: float | None = None) -> np.ndarray:
    """Shift an unwrapped phase trace (degrees) by whole turns so that at
    ``f_ref_hz`` (default: the geometric middle of ``f_hz``) it lies in
    (−180°, 180°]; NaN entries stay NaN (the rule of :func:`phase_deg`)."""
    ph = np.asarray(phase_deg_unwrapped, dtype=float)
    f = np.asarray(f_hz, dtype=float)
    ok = np.isfinite(ph) & np.isfinite(f) & (f > 0)
    if not ok.any():
        return ph.copy()
    if f_ref_hz is None:
        f_ref_hz = float(np.sqrt(f[ok][0] * f[ok][-1]))
    idx = np.nonzero(ok)[0]
    k = idx[int(np.argmin(np.abs(np.log(f[ok] / f_ref_hz))))]
    turns = np.ceil((ph[k] - 180.0) / 360.0)
    return ph - 360.0 * turns


@dataclass(frozen=True, slots=True, eq=False)
class BodePlot:
    """The figure and what is drawn on it."""

    figure: object
    #: (magnitude axes, phase axes)
    axes: tuple
    #: magnitude traces, one per node, in the order of ``nodes``
    lines: tuple
    #: phase traces, one per node, same order
    phase_lines: tuple
    nodes: tuple[str, ...]
    #: vertical corner markers (magnitude and phase panels)
    corner_lines: tuple = ()
    #: one marker per peak or dip of the output (magnitude panel)
    extremum_marks: tuple = ()
    #: the legend (below the panels)
    legend: object = None
    #: the corner labels (matplotlib Text, above the magnitude panel)
    corner_labels: tuple = ()


def bode(response, *, nodes: Sequence[str] | None = None,
         corners: tuple[float | None, float | None] | None = None,
         extrema: Sequence = (), ax=None, title: str = "",
         unstable: str = "", f_ref_hz: float | None = None) -> BodePlot:
    """Draw magnitude (dB) and phase (degrees) against log frequency (Hz).

    Parameters
    ----------
    response
        A :class:`chain.smallsignal.Response`.
    nodes
        Node names to trace (per volt of source EMF); default: the chain's
        outputs (one, or both sides of a phase inverter).  Pass stage output
        nodes for per-stage traces.
    corners
        ``(f_low_hz, f_high_hz)`` to mark, either may be None.
    extrema
        Peaks and dips of the output to mark and label
        (:class:`chain.smallsignal.Extremum`: ``kind``, ``f_hz``, ``gain_db``,
        ``relative_db``).
    ax
        Optional ``(magnitude_axes, phase_axes)`` pair to draw into; by
        default a new two-panel :class:`~matplotlib.figure.Figure`.
    title
        Figure title (the design's).
    unstable
        When not empty, the circuit is unstable: this text is written across
        the magnitude panel in a red box, the traces are drawn faded and the
        panels get a red frame, so that nobody reads the curve as the
        circuit's response.
    f_ref_hz
        Where every phase trace is wrapped into (−180°, 180°]
        (:func:`phase_deg`); default: the sweep's geometric middle.

    Returns
    -------
    BodePlot
    """
    from matplotlib.figure import Figure
    from matplotlib.ticker import EngFormatter, MultipleLocator

    circuit = response.ss.circuit
    wanted = tuple(dict.fromkeys((circuit.output_node, *circuit.outputs.values()))) if nodes is None \
        else tuple(nodes)
    unknown = [n for n in wanted if n not in response.h]
    if unknown:
        raise KeyError(f"no such node(s) in the response: {', '.join(unknown)}")

    if ax is None:
        fig = Figure(figsize=(7.5, 5.6), layout="constrained")
        mag_ax, ph_ax = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    else:
        mag_ax, ph_ax = ax
        fig = mag_ax.figure

    f = np.asarray(response.f_hz)
    labels = _labels(circuit, wanted)
    mag_lines, ph_lines = [], []
    others = 0
    for k, node in enumerate(wanted):
        h = np.asarray(response.h[node])
        with np.errstate(divide="ignore"):
            mag_db = db_array(h)
        phase = phase_deg(h, f, f_ref_hz)
        if node == circuit.output_node:
            # the chain's output: first colour, solid, heavier, underneath, so
            # that a further trace with nearly the same response shows on it
            style = dict(color=PALETTE[0], linestyle=DASHES[0], linewidth=2.2, zorder=2)
        else:
            others += 1
            style = dict(color=PALETTE[others % len(PALETTE)],
                         linestyle=DASHES[others % len(DASHES)], linewidth=1.4, zorder=3)
        (m_line,) = mag_ax.semilogx(f, mag_db, label=labels[k], **style)
        (p_line,) = ph_ax.semilogx(f, phase, label=labels[k], **style)
        mag_lines.append(m_line)
        ph_lines.append(p_line)

    marks, notes = _mark_corners(mag_ax, ph_ax, corners)
    points = _mark_extrema(mag_ax, extrema)

    mag_ax.set_ylabel("Gain (dB, V/V)")
    ph_ax.set_ylabel("Phase (°)")
    ph_ax.set_xlabel("Frequency")
    ph_ax.xaxis.set_major_formatter(EngFormatter(unit="Hz"))
    ph_ax.yaxis.set_major_locator(MultipleLocator(90.0))
    if f.size:
        mag_ax.set_xlim(f[0], f[-1])
    for a in (mag_ax, ph_ax):
        a.grid(True, which="major", color="#c8c8c8", linewidth=0.7)
        a.grid(True, which="minor", color="#e6e6e6", linewidth=0.4)
        a.tick_params(labelsize=9)
    legend = _legend_below(fig, mag_ax, ph_ax)
    if title:
        fig.suptitle(title, x=0.01, ha="left", fontsize=11.5)
    if unstable:
        _mark_unstable(mag_ax, ph_ax, unstable, (*mag_lines, *ph_lines))
    return BodePlot(fig, (mag_ax, ph_ax), tuple(mag_lines), tuple(ph_lines), wanted, tuple(marks), tuple(points),
                    legend, tuple(notes))


#: colour of the instability marking
UNSTABLE_COLOUR = "#c1121f"


def _mark_unstable(mag_ax, ph_ax, text: str, lines) -> None:
    for line in lines:
        line.set_alpha(0.35)
    for a in (mag_ax, ph_ax):
        for side in a.spines.values():
            side.set_edgecolor(UNSTABLE_COLOUR)
            side.set_linewidth(2.0)
    mag_ax.text(0.5, 0.5, text, transform=mag_ax.transAxes, ha="center", va="center", fontsize=10,
                fontweight="bold", color=UNSTABLE_COLOUR, wrap=True, zorder=10,
                bbox=dict(boxstyle="round,pad=0.5", facecolor="white", edgecolor=UNSTABLE_COLOUR, alpha=0.92))


def _labels(circuit, nodes: Sequence[str]) -> list[str]:
    outs: dict[str, str] = {}
    for st in circuit.stages:
        for port, node in st.outputs.items():
            outs.setdefault(node, st.name if len(st.outputs) == 1 else f"{st.name} {port}")
    chain_outs = {node: label for label, node in circuit.outputs.items()} if len(circuit.outputs) > 1 else {}
    labels = []
    for node in nodes:
        if node in chain_outs:
            labels.append(f"output {chain_outs[node]}")
        elif node == circuit.output_node:
            labels.append("output" if node == "output" else f"output ({node})")
        elif node in outs:
            labels.append(f"{outs[node]} out ({node})")
        else:
            labels.append(node)
    return labels


def _mark_corners(mag_ax, ph_ax, corners) -> tuple[list[Line2D], list[Annotation]]:
    marks: list[Line2D] = []
    notes: list[Annotation] = []
    if not corners:
        return marks, notes
    for f_c, name in zip(corners, ("low", "high")):
        if f_c is None:
            continue
        for a in (mag_ax, ph_ax):
            marks.append(a.axvline(f_c, color=CORNER_COLOUR, linestyle=(0, (4, 3)), linewidth=1.0))
        # above the panel (outside it): no curve can cross the label; the low
        # corner's label reads leftwards from its line, the high one's rightwards
        notes.append(mag_ax.annotate(f"−3 dB {name}: {_hz(f_c)}", xy=(f_c, 1.0), xycoords=("data", "axes fraction"),
                        xytext=(-3 if name == "low" else 3, 3), textcoords="offset points", va="bottom",
                        ha="right" if name == "low" else "left", fontsize=8, color="#4a4a4a",
                        annotation_clip=False))
    return marks, notes


def _mark_extrema(mag_ax, extrema) -> list:
    """A triangle at every peak (up) and dip (down), labelled with its
    frequency and its height relative to the reference level."""
    points = []
    for e in extrema:
        up = e.kind == "peak"
        (p,) = mag_ax.plot([e.f_hz], [e.gain_db], marker="^" if up else "v", color=PALETTE[0], markersize=6,
                           linestyle="none", zorder=4)
        sign = "+" if e.relative_db >= 0 else "−"
        mag_ax.annotate(f"{e.kind} {_hz(e.f_hz)}\n{sign}{abs(e.relative_db):.1f} dB re ref.",
                        xy=(e.f_hz, e.gain_db), xytext=(-7, 0), textcoords="offset points", ha="right",
                        va="center", fontsize=8, color="#4a4a4a", zorder=6,
                        # an opaque ground: a trace passing there runs under the label, never over it
                        bbox=dict(boxstyle="round,pad=0.2", facecolor="white", edgecolor="none", alpha=0.9))
        points.append(p)
    if points:
        low, high = mag_ax.get_ylim()
        mag_ax.set_ylim(low, high + 0.08 * (high - low))  # room above the highest peak
    return points


def _hz(f: float) -> str:
    """Short frequency text for a label (display only)."""
    return f"{f / 1e3:.3g} kHz" if f >= 1e3 else f"{f:.3g} Hz"


@dataclass(frozen=True, slots=True, eq=False)
class ImpedancePlot:
    """The impedance figure and its traces (``lines``: |Zin|, then |Zout| when known)."""

    figure: object
    axes: object
    lines: tuple
    legend: object = None


def impedance(response, *, title: str = "") -> ImpedancePlot:
    """|Zin| (the load the source sees) and |Zout| (source zeroed, load
    removed) against frequency, both axes logarithmic, in ohms.

    Parameters
    ----------
    response
        A :class:`chain.smallsignal.Response`.
    title
        Figure title.
    """
    from matplotlib.figure import Figure
    from matplotlib.ticker import EngFormatter

    fig = Figure(figsize=(7.5, 4.2), layout="constrained")
    ax = fig.subplots()
    f = np.asarray(response.f_hz)
    lines = [ax.loglog(f, np.abs(response.zin_ohm), color=PALETTE[0], linewidth=2.0,
                       label="input impedance |Zin| (load on the source)")[0]]
    if response.zout_ohm is not None:
        lines.append(ax.loglog(f, np.abs(response.zout_ohm), color=PALETTE[1], linestyle=DASHES[1],
                               linewidth=1.8, label="output impedance |Zout|")[0])
    ax.set_xlabel("Frequency")
    ax.set_ylabel("Impedance (Ω)")
    ax.xaxis.set_major_formatter(EngFormatter(unit="Hz"))
    ax.yaxis.set_major_formatter(EngFormatter(unit="Ω"))
    if f.size:
        ax.set_xlim(f[0], f[-1])
    ax.grid(True, which="major", color="#c8c8c8", linewidth=0.7)
    ax.grid(True, which="minor", color="#e6e6e6", linewidth=0.4)
    ax.tick_params(labelsize=9)
    legend = _legend_below(fig, ax)
    if title:
        fig.suptitle(f"{title}: input and output impedance", x=0.01, ha="left", fontsize=11.5)
    return ImpedancePlot(fig, ax, tuple(lines), legend)


@dataclass(frozen=True, slots=True, eq=False)
class BalancePlot:
    """The balance figure: ``lines`` (imbalance in dB) and ``phase_lines``
    (phase difference in degrees), one per two-output stage, in ``stages`` order."""

    figure: object
    axes: tuple
    lines: tuple
    phase_lines: tuple
    stages: tuple[str, ...]


def balance(response, stages, *, title: str = "") -> BalancePlot:
    """Balance of every two-output stage against frequency.

    Upper panel: ``20·log10|H2/H1|`` in dB (second output against the first,
    0 dB ideal); lower panel: the phase of ``H2/H1`` in degrees, drawn in
    0…360° so that antiphase (the ideal of a phase inverter) is the 180°
    line.  ``H2/H1`` is :func:`chain.smallsignal.output_balance`.

    Parameters
    ----------
    response
        A :class:`chain.smallsignal.Response`.
    stages
        :class:`chain.circuit.StageRecord` s; those with one output are skipped.
    title
        Figure title.
    """
    from matplotlib.figure import Figure
    from matplotlib.ticker import EngFormatter

    from chain.smallsignal import output_balance

    fig = Figure(figsize=(7.5, 4.8), layout="constrained")
    mag_ax, ph_ax = fig.subplots(2, 1, sharex=True)
    f = np.asarray(response.f_hz)
    lines, phase_lines, names = [], [], []
    for k, st in enumerate(s for s in stages if len(s.outputs) >= 2):
        ratio = output_balance(response, st)
        assert ratio is not None  # a stage with two outputs has a balance
        first, second = list(st.outputs)[:2]
        label = f"{st.name}: {second} against {first}"
        style = dict(color=PALETTE[k % len(PALETTE)], linestyle=DASHES[k % len(DASHES)], linewidth=1.8)
        with np.errstate(divide="ignore", invalid="ignore"):
            lines.append(mag_ax.semilogx(f, db_array(ratio), label=label, **style)[0])
        phase_lines.append(ph_ax.semilogx(f, np.degrees(np.angle(ratio)) % 360.0, label=label, **style)[0])
        names.append(st.name)
    for a, ideal in ((mag_ax, 0.0), (ph_ax, 180.0)):
        a.axhline(ideal, color=CORNER_COLOUR, linestyle=(0, (4, 3)), linewidth=1.0)
        a.grid(True, which="major", color="#c8c8c8", linewidth=0.7)
        a.grid(True, which="minor", color="#e6e6e6", linewidth=0.4)
        a.tick_params(labelsize=9)
    mag_ax.set_ylabel("Imbalance (dB)")
    ph_ax.set_ylabel("Phase difference (°)")
    ph_ax.set_xlabel("Frequency")
    ph_ax.xaxis.set_major_formatter(EngFormatter(unit="Hz"))
    if f.size:
        mag_ax.set_xlim(f[0], f[-1])
    if lines:
        mag_ax.legend(loc="best", fontsize=8, frameon=False)
    if title:
        mag_ax.set_title(title, fontsize=11, loc="left")
    return BalancePlot(fig, (mag_ax, ph_ax), tuple(lines), tuple(phase_lines), tuple(names))


def _legend_below(fig, *axes):
    """One legend for the traces of ``axes[0]``, below the figure's panels; returns it (or None)."""
    handles, labels = axes[0].get_legend_handles_labels()
    if not handles:
        return None
    engine = fig.get_layout_engine()
    if engine is not None and type(engine).__name__ == "ConstrainedLayoutEngine":
        return fig.legend(handles, labels, loc="outside lower center", ncol=min(len(handles), 3), fontsize=8,
                          frameon=False)
    # the caller's own figure: below the lowest axes
    return axes[-1].legend(handles, labels, loc="upper center", bbox_to_anchor=(0.5, -0.25),
                           ncol=min(len(handles), 3), fontsize=8, frameon=False)
