"""Plate characteristics with the DC and AC load lines, the bias line, the
maximum-dissipation curve and the operating point.

Reads the arrays of :mod:`chain.dc.curves` and the AC load of
:attr:`chain.analysis.Analysis.ac_load_ohm`; the only arithmetic here is
drawing a straight line of a given slope through the operating point and the
hyperbola ``Ip = Pd_max / Vpk`` of a rating.

Grid-voltage labels sit outside the plotting area, along the top edge (curves
leaving upwards) and the right edge (curves leaving sideways), and a label
that would come closer to its neighbour than its own width (or height) is
left out, so they never collide whatever the tube's mu; the legend sits below
the axes, off the curves.
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

__all__ = ["CharacteristicsPlot", "StagesPlot", "plot_characteristics", "stage_plots", "PALETTE"]

#: colours of the drawing: curves run from a light to a dark slate blue with
#: rising grid voltage; the load line is amber, the bias line teal, the
#: operating point a vermilion dot with a dark edge
PALETTE = {
    "curve_low": "#b8c4d6",
    "curve_high": "#27384f",
    "load": "#d9911a",
    "ac_load": "#a0341b",
    "dissipation": "#8a8f98",
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
    #: the AC load line through the operating point, or None (x: V, y: mA)
    ac_load_line: Any = None
    #: the maximum plate dissipation curve, or None (x: V, y: mA)
    dissipation: Any = None
    #: the grid-voltage labels drawn (matplotlib Text), outside the axes
    curve_labels: tuple[Any, ...] = ()


def _mix(c0: str, c1: str, t: float) -> tuple[float, float, float]:
    a = np.array([int(c0[i:i + 2], 16) for i in (1, 3, 5)], dtype=float)
    b = np.array([int(c1[i:i + 2], 16) for i in (1, 3, 5)], dtype=float)
    return tuple(((1.0 - t) * a + t * b) / 255.0)


def plot_characteristics(family: PlateFamily, load_line: LoadLine, point: OperatingPoint, *, ax=None,
                         bias: BiasLine | None = None, ac_load_ohm: float | None = None,
                         pd_max_w: float | None = None, title: str | None = None,
                         legend: bool = True) -> CharacteristicsPlot:
    """Draw plate characteristics, the load lines and the operating point.

    Parameters
    ----------
    family : PlateFamily
        Curves Ip(Vpk) at fixed Vgk.
    load_line : LoadLine
        The stage's DC load line.
    point : OperatingPoint
        The stage's operating point; drawn at (Vpk, Ip).
    ax : matplotlib.axes.Axes, optional
        Draw into these axes; a new figure (6.4 × 5.2 in) otherwise.
    bias : BiasLine, optional
        The cathode bias line, drawn dashed where it lies within the plot.
    ac_load_ohm : float, optional
        The AC load (ohm, real part): drawn as the line of slope −1/R
        through the operating point, from the current axis to zero current.
    pd_max_w : float, optional
        The plate-dissipation rating (W): the curve Ip = Pd/Vpk.
    title : str, optional
        Axes title (default: the tube name).
    legend : bool
        Draw the legend below the axes (a multi-panel figure draws one
        shared legend instead).

    Returns
    -------
    CharacteristicsPlot
    """
    if ax is None:
        from matplotlib.figure import Figure

        fig = Figure(figsize=(6.4, 5.4), layout="constrained")
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
    top = max(float(load_line.ip_a.max()) if load_line.ip_a.size else 0.0, point.ip_a) * _MA_PER_A
    x_max = float(family.vpk_v.max())
    ac_artist = None
    if ac_load_ohm is not None and ac_load_ohm > 0.0:
        # the line Ip = Ipq − (Vpk − Vpkq)/R_ac, from Vpk = 0 (or the top) down to Ip = 0
        ip0 = point.ip_a + point.vpk_v / ac_load_ohm
        v_end = min(point.vpk_v + point.ip_a * ac_load_ohm, x_max)
        xs = np.array([0.0, v_end])
        ys = (point.ip_a - (xs - point.vpk_v) / ac_load_ohm) * _MA_PER_A
        (ac_artist,) = ax.plot(xs, ys, color=PALETTE["ac_load"], linewidth=1.6, linestyle=(0, (8, 3)),
                               label=f"AC load line ({_fmt_ohm(ac_load_ohm)})")
        top = max(top, min(ip0 * _MA_PER_A, 1.6 * top))
    bias_artist = None
    if bias is not None:
        keep = np.isfinite(bias.vpk_v)
        (bias_artist,) = ax.plot(bias.vpk_v[keep], bias.ip_a[keep] * _MA_PER_A, color=PALETTE["bias"],
                                 linewidth=1.6, linestyle=(0, (5, 3)),
                                 label=f"bias line (Rk {_fmt_ohm(bias.rk_ohm)})")
    y_top = max(1.12 * top, 1e-3)
    diss = None
    if pd_max_w is not None and pd_max_w > 0.0:
        v0 = pd_max_w / (y_top / _MA_PER_A)  # where the hyperbola enters the plot
        xs = np.geomspace(max(v0, 1e-3), max(x_max, v0 * 1.001), 200)
        (diss,) = ax.plot(xs, pd_max_w / xs * _MA_PER_A, color=PALETTE["dissipation"], linewidth=1.4,
                          linestyle=(0, (1.5, 2)), label=f"maximum dissipation ({pd_max_w:g} W)")
    (marker,) = ax.plot([point.vpk_v], [point.ip_a * _MA_PER_A], linestyle="none", marker="o", markersize=8,
                        markerfacecolor=PALETTE["point"], markeredgecolor=PALETTE["point_edge"],
                        markeredgewidth=1.0, zorder=5,
                        label=f"operating point: {point.vpk_v:.4g} V, {point.ip_a * _MA_PER_A:.3g} mA, "
                              f"Vgk {point.vgk_v:.3g} V")
    ax.set_xlabel("plate–cathode voltage Vpk (V)")
    ax.set_ylabel("plate current Ip (mA)")
    ax.set_xlim(0.0, x_max)
    ax.set_ylim(0.0, y_top)
    labels = _label_curves(ax, family)
    ax.grid(True, color=PALETTE["grid"], linewidth=0.8)
    ax.set_axisbelow(True)
    for spine in ("top", "right"):
        ax.spines[spine].set_visible(False)
    ax.set_title(title if title is not None else f"{family.model_name} plate characteristics",
                 color=PALETTE["text"], fontsize=10.5, loc="left", pad=16)
    if legend:
        leg = ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.14), ncol=2, fontsize=8, frameon=False)
        leg.set_in_layout(True)
    return CharacteristicsPlot(figure=fig, axes=ax, curves=tuple(curves), load_line=load, bias_line=bias_artist,
                               point=marker, ac_load_line=ac_artist, dissipation=diss, curve_labels=tuple(labels))


#: grid-label font size, points
_LABEL_PT = 7.0


def _label_curves(ax, family: PlateFamily) -> list:
    """Vgk labels outside the axes where each curve leaves the plot (top or
    right edge); a label closer to the last one kept than its own width
    (top) or height (right) is skipped, so no two labels overlap."""
    from matplotlib.transforms import blended_transform_factory

    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    # the axes shrink when the layout makes room for titles and labels: plan for 80 %
    width_in = 0.8 * ax.figure.get_figwidth() * ax.get_position().width
    height_in = 0.8 * ax.figure.get_figheight() * ax.get_position().height
    top, right = [], []
    for i, vgk in enumerate(family.vgk_v):
        ip_ma = family.ip_a[i] * _MA_PER_A
        above = np.nonzero(ip_ma > y1)[0]
        text = f"{float(vgk):g} V"
        if above.size:
            j = int(above[0])
            lo = max(j - 1, 0)
            x = float(np.interp(y1, ip_ma[lo:j + 1], family.vpk_v[lo:j + 1])) if j > 0 else float(family.vpk_v[0])
            if x0 <= x <= x1:
                top.append(((x - x0) / (x1 - x0), text))
        elif ip_ma[-1] > y0 + 0.02 * (y1 - y0):
            right.append(((float(ip_ma[-1]) - y0) / (y1 - y0), text))
    out = []
    char_in = 0.62 * _LABEL_PT / 72.0  # average glyph width, inches
    last = -1.0
    for frac, text in sorted(top):
        need = (len(text) + 1.5) * char_in / max(width_in, 1e-6)
        if frac - last >= need:
            out.append(ax.text(frac, 1.0, text, transform=ax.transAxes, ha="center", va="bottom",
                               fontsize=_LABEL_PT, color=PALETTE["text"], clip_on=False))
            last = frac
    last = -1.0
    line_in = 1.35 * _LABEL_PT / 72.0
    for frac, text in sorted(right):
        if frac - last >= line_in / max(height_in, 1e-6):
            out.append(ax.text(1.0, frac, " " + text, transform=ax.transAxes, ha="left", va="center",
                               fontsize=_LABEL_PT, color=PALETTE["text"], clip_on=False))
            last = frac
    del blended_transform_factory
    return out


def _fmt_ohm(value: float) -> str:
    from chain.units import format_si

    return format_si(value, "Ω", 3)


@dataclass(frozen=True, slots=True)
class StagesPlot:
    """Every stage's plate characteristics in one figure."""

    figure: Any
    #: stage name → its panel
    panels: dict


def stage_plots(circuit, dc, *, ac_load_ohm=None, title: str = "") -> StagesPlot:
    """One figure with a panel per stage of ``circuit`` (signal order): plate
    characteristics, DC and AC load lines, bias line, maximum dissipation and
    the operating point of ``dc``.

    Parameters
    ----------
    circuit, dc
        The circuit and its DC solution.
    ac_load_ohm : Mapping[str, complex], optional
        Per stage, the AC load (:attr:`chain.analysis.Analysis.ac_load_ohm`);
        its real part sets the AC load line.
    title : str
        The design's title, shown above the panels.
    """
    from matplotlib.figure import Figure

    from chain.dc import plate_family, stage_lines

    # one panel per triode: a stage's name, or for a stage of several triodes the triode's own
    pairs = [(st, t) for st in circuit.stages for t in st.triodes]
    stages = pairs
    cols = 1 if len(stages) == 1 else 2
    rows = (len(stages) + cols - 1) // cols
    fig = Figure(figsize=(6.4 * cols, 4.6 * rows + 1.0), layout="constrained")
    axes = fig.subplots(rows, cols, squeeze=False)
    panels = {}
    for k, (st, triode) in enumerate(stages):
        ax = axes[k // cols][k % cols]
        single = len(st.triodes) == 1
        name = st.name if single else triode
        point = dc.points[triode]
        line, bias = stage_lines(circuit, dc, name)
        top = float(line.vpk_v.max())
        model = circuit.triode(triode).model
        step = 0.5 if point.vgk_v > -3 else 2.0
        vgks = np.round(np.arange(0.0, min(point.vgk_v * 3.0, -4 * step) - step / 2, -step), 2)
        family = plate_family(model, vgks, top * 1.15)
        ac = None
        if single and ac_load_ohm is not None and st.name in ac_load_ohm:
            ac = float(np.real(ac_load_ohm[st.name]))
        ratings = getattr(model, "ratings", None)
        pd = getattr(ratings, "pd_max_w", None)
        facts = [f"DC load {_fmt_ohm(line.r_dc_ohm)}"] + ([f"AC load {_fmt_ohm(ac)}"] if ac else [])
        facts.append(f"Q {point.vpk_v:.4g} V, {point.ip_a * _MA_PER_A:.3g} mA, Vgk {point.vgk_v:.3g} V")
        panels[name] = plot_characteristics(
            family, line, point, ax=ax, bias=bias, ac_load_ohm=ac, pd_max_w=pd, legend=False,
            title=f"{name} ({st.tube}, {st.kind})\n" + " · ".join(facts))
    for k in range(len(stages), rows * cols):
        axes[k // cols][k % cols].set_visible(False)
    heading = f"{title}: plate characteristics" if title else "plate characteristics"
    fig.suptitle(heading, x=0.01, ha="left", fontsize=12, color=PALETTE["text"])
    # one legend for all panels, below them: the same kinds of line in every panel
    first = next(iter(panels.values()))
    handles = [h for h in (first.load_line, first.ac_load_line, first.bias_line, first.dissipation, first.point)
               if h is not None]
    names = {first.load_line: "DC load line", first.ac_load_line: "AC load line (plate load ∥ what follows)",
             first.bias_line: "cathode bias line", first.dissipation: "maximum plate dissipation",
             first.point: "operating point"}
    fig.legend(handles, [names[h] for h in handles], loc="outside lower center", ncol=min(len(handles), 3),
               fontsize=8.5, frameon=False)
    return StagesPlot(figure=fig, panels=panels)

