"""Plate characteristics with the DC load line, bias line and operating point.

Reads the arrays of :mod:`chain.dc.curves`; computes nothing itself.
matplotlib is imported inside the functions.  The figure is built on a bare
:class:`matplotlib.figure.Figure` (no pyplot state).  Currents are drawn in
mA, voltages in V; the returned :class:`CharacteristicsPlot` holds the line
objects so callers restyle and tests read ``line.get_xdata()`` /
``get_ydata()`` instead of pixels.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from chain.dc.curves import BiasLine, LoadLine, PlateFamily
from chain.dc.result import OperatingPoint

__all__ = ["CharacteristicsPlot", "plot_characteristics", "PALETTE"]

#: colours of the drawing: curves run from a light to a dark slate blue with
#: rising grid voltage; the load line is amber, the bias line teal, the
#: operating point a vermilion dot with a dark edge
PALETTE = {
    "curve_low": "#b8c4d6",
    "curve_high": "#27384f",
    "load": "#d9911a",
    "bias": "#1f8a85",
    "point": "#e0452b",
    "point_edge": "#2b1a14",
    "grid": "#e6e8ec",
    "text": "#2b2f36",
}

#: amperes → milliamperes for the current axis
_MA_PER_A = 1e3


@dataclass(frozen=True, slots=True)
class CharacteristicsPlot:
    """The drawn figure and its parts (matplotlib objects)."""

    figure: Any
    axes: Any
    #: one Line2D per plate curve, in ``family.vgk_v`` order (x: V, y: mA)
    curves: tuple[Any, ...]
    #: the DC load line (x: V, y: mA)
    load_line: Any
    #: the cathode bias line, or None when not drawn (x: V, y: mA)
    bias_line: Any
    #: the operating-point marker (a one-point Line2D, x: V, y: mA)
    point: Any


def _mix(c0: str, c1: str, t: float) -> tuple[float, float, float]:
    a = np.array([int(c0[i:i + 2], 16) for i in (1, 3, 5)], dtype=float)
    b = np.array([int(c1[i:i + 2], 16) for i in (1, 3, 5)], dtype=float)
    return tuple(((1.0 - t) * a + t * b) / 255.0)


def plot_characteristics(family: PlateFamily, load_line: LoadLine, point: OperatingPoint, *, ax=None,
                         bias: BiasLine | None = None, title: str | None = None) -> CharacteristicsPlot:
    """Draw plate characteristics, the DC load line and the operating point.

    Parameters
    ----------
    family : PlateFamily
        Curves Ip(Vpk) at fixed Vgk.
    load_line : LoadLine
        The stage's DC load line.
    point : OperatingPoint
        The stage's operating point; drawn at (Vpk, Ip).
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; a new figure (6.4 × 4.8 in) otherwise.
    bias : BiasLine, optional
        The cathode bias line, drawn dashed where it lies within the plot.
    title : str, optional
        Axes title (default: the tube name and operating point).

    Returns
    -------
    CharacteristicsPlot
    """
    if ax is None:
        from matplotlib.figure import Figure

        fig = Figure(figsize=(6.4, 4.8), layout="constrained")
        ax = fig.add_subplot()
    else:
        fig = ax.figure
    count = len(family.vgk_v)
    curves = []
    for i, vgk in enumerate(family.vgk_v):
        t = i / (count - 1) if count > 1 else 1.0
        (line,) = ax.plot(family.vpk_v, family.ip_a[i] * _MA_PER_A, color=_mix(PALETTE["curve_low"],
                          PALETTE["curve_high"], t), linewidth=1.2, label=None)
        curves.append(line)
    (load,) = ax.plot(load_line.vpk_v, load_line.ip_a * _MA_PER_A, color=PALETTE["load"], linewidth=2.0,
                      label=f"DC load line ({_fmt_ohm(load_line.r_dc_ohm)})")
    bias_artist = None
    if bias is not None:
        keep = np.isfinite(bias.vpk_v)
        (bias_artist,) = ax.plot(bias.vpk_v[keep], bias.ip_a[keep] * _MA_PER_A, color=PALETTE["bias"],
                                 linewidth=1.6, linestyle=(0, (5, 3)),
                                 label=f"bias line (Rk {_fmt_ohm(bias.rk_ohm)})")
    (marker,) = ax.plot([point.vpk_v], [point.ip_a * _MA_PER_A], linestyle="none", marker="o", markersize=8,
                        markerfacecolor=PALETTE["point"], markeredgecolor=PALETTE["point_edge"],
                        markeredgewidth=1.0, zorder=5,
                        label=f"operating point: {point.vpk_v:.4g} V, {point.ip_a * _MA_PER_A:.3g} mA")
    ax.annotate(f"Vgk = {point.vgk_v:.3g} V", (point.vpk_v, point.ip_a * _MA_PER_A), xytext=(10, -14),
                textcoords="offset points", color=PALETTE["text"], fontsize=8)
    ax.set_xlabel("plate–cathode voltage Vpk (V)")
    ax.set_ylabel("plate current Ip (mA)")
    top = max(float(load_line.ip_a.max()) if load_line.ip_a.size else 0.0, point.ip_a) * _MA_PER_A
    ax.set_xlim(0.0, float(family.vpk_v.max()))
    ax.set_ylim(0.0, max(1.15 * top, 1e-3))
    for i, vgk in enumerate(family.vgk_v):
        _label_curve(ax, family, i, float(vgk))
    ax.grid(True, color=PALETTE["grid"], linewidth=0.8)
    ax.set_axisbelow(True)
    for spine in ("top", "right"):
        ax.spines[spine].set_visible(False)
    ax.set_title(title if title is not None else f"{family.model_name} plate characteristics",
                 color=PALETTE["text"], fontsize=11)
    legend = ax.legend(loc="upper left", fontsize=8, frameon=True, framealpha=0.92)
    legend.get_frame().set_edgecolor("none")
    return CharacteristicsPlot(figure=fig, axes=ax, curves=tuple(curves), load_line=load, bias_line=bias_artist,
                               point=marker)


def _label_curve(ax, family: PlateFamily, i: int, vgk: float) -> None:
    """Small Vgk label where a curve leaves the plot: the top edge or the right edge."""
    y_top = ax.get_ylim()[1]
    ip_ma = family.ip_a[i] * _MA_PER_A
    above = np.nonzero(ip_ma > y_top)[0]
    if above.size:
        j = int(above[0])
        x = float(np.interp(y_top, ip_ma[max(j - 1, 0):j + 1], family.vpk_v[max(j - 1, 0):j + 1]))
        ax.annotate(f"{vgk:g} V", (x, y_top), xytext=(3, -10), textcoords="offset points", ha="left",
                    fontsize=7, color=PALETTE["text"])
    elif ip_ma[-1] > 0.02 * y_top:
        ax.annotate(f"{vgk:g} V", (float(family.vpk_v[-1]), float(ip_ma[-1])), xytext=(-4, 3),
                    textcoords="offset points", ha="right", fontsize=7, color=PALETTE["text"])


def _fmt_ohm(value: float) -> str:
    from chain.units import format_si

    return format_si(value, "Ω", 3)
