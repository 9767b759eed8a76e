"""Plate-curve points against fitted triode models.

One panel: for every grid voltage in the data, the points (filled: fitted,
open: held out, diamonds: handbook typical points) and each model's curve
through them, one line style per model form.  matplotlib is imported inside
the function; the figure is a bare :class:`matplotlib.figure.Figure`.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from chain.plot.bias import PALETTE
from chain.tubes import plate_current

__all__ = ["FitPlot", "plot_fit", "library_docs"]

_STYLES = ("-", "--", ":", "-.")


@dataclass(frozen=True, slots=True)
class FitPlot:
    """The figure and its line objects (``curves[(label, vgk)]``)."""

    figure: Any
    axes: Any
    curves: dict
    points: tuple


def plot_fit(points: Sequence, models: Sequence[tuple[str, Any]], *, title: str = "",
             vpk_max_v: float | None = None) -> FitPlot:
    """Data points (:class:`chain.tubes.fit.DataPoint`) against ``(label, model)`` pairs.

    Currents in mA, plate voltage in V.
    """
    from matplotlib.figure import Figure
    from matplotlib.colors import LinearSegmentedColormap

    fig = Figure(figsize=(7.2, 5.0), dpi=110)
    ax = fig.add_subplot(1, 1, 1)
    grids = sorted({p.vgk_v for p in points})
    cmap = LinearSegmentedColormap.from_list("grid", [PALETTE["curve_low"], PALETTE["curve_high"]])
    vmax = vpk_max_v or 1.1 * max(p.vpk_v for p in points)
    vpk = np.linspace(0.0, vmax, 300)
    curves = {}
    drawn = []
    for k, vg in enumerate(grids):
        colour = cmap(0.25 + 0.75 * k / max(len(grids) - 1, 1))
        for j, (label, model) in enumerate(models):
            ip = np.asarray(plate_current(model, vpk, vg)) * 1e3
            (line,) = ax.plot(vpk, ip, _STYLES[j % len(_STYLES)], color=colour, lw=1.4,
                              label=label if k == len(grids) - 1 else None)
            curves[(label, vg)] = line
        mine = [p for p in points if p.vgk_v == vg]
        for kind, split, marker, face in (("curve", "fit", "o", colour), ("curve", "hold", "o", "white"),
                                          ("typical", None, "D", PALETTE["point"])):
            sel = [p for p in mine if p.kind == kind and (split is None or p.split == split)]
            if sel:
                pts = ax.scatter([p.vpk_v for p in sel], [p.ip_a * 1e3 for p in sel], marker=marker, s=28,
                                 facecolors=face, edgecolors=PALETTE["point_edge"], linewidths=0.8, zorder=3)
                drawn.append(pts)
        last = max((p for p in mine), key=lambda p: p.vpk_v, default=None)
        if last is not None:
            ax.annotate(f"{vg:g} V", (last.vpk_v, last.ip_a * 1e3), xytext=(4, 2), textcoords="offset points",
                        fontsize=7, color=PALETTE["text"])
    ip_top = max(p.ip_a for p in points) * 1e3
    ax.set_xlim(0.0, vmax)
    ax.set_ylim(0.0, 1.25 * ip_top)
    ax.set_xlabel("plate–cathode voltage Vpk (V)")
    ax.set_ylabel("plate current Ip (mA)")
    ax.grid(True, color=PALETTE["grid"], lw=0.6)
    from matplotlib.lines import Line2D

    handles = list(ax.get_legend_handles_labels()[0])
    kinds = {(p.kind, p.split if p.kind == "curve" else None) for p in points}
    if ("curve", "fit") in kinds:
        handles.append(Line2D([], [], ls="", marker="o", color=PALETTE["point_edge"], label="fitted point"))
    if ("curve", "hold") in kinds:
        handles.append(Line2D([], [], ls="", marker="o", markerfacecolor="white", color=PALETTE["point_edge"],
                              label="held-out point"))
    if ("typical", None) in kinds:
        handles.append(Line2D([], [], ls="", marker="D", markerfacecolor=PALETTE["point"],
                              color=PALETTE["point_edge"], label="handbook typical point"))
    ax.legend(handles=handles, loc="upper left", fontsize=8, frameon=False)
    ax.set_title(title or "plate curves: data against model", fontsize=10, color=PALETTE["text"])
    fig.tight_layout()
    return FitPlot(figure=fig, axes=ax, curves=curves, points=tuple(drawn))


def library_docs(folder: Path) -> str:
    """Plots of every type's data against every form, and the residual tables as Markdown."""
    from dataclasses import replace

    from chain.fileio import write_atomically
    from chain.tubes import FORMS
    from chain.tubes.fit import library_data
    from chain.tubes.library import LIBRARY, LIBRARY_FORM
    from chain.tubes.model import small_signal

    out = []
    for name, model in LIBRARY.items():
        data = library_data(name)
        models = [(f"{form}" + (" (library)" if form == LIBRARY_FORM[name] else ""), replace(model, form=form))
                  for form in FORMS]
        fig = plot_fit(data.points, models, title=f"{name}: data against both model forms").figure
        import io

        buf = io.BytesIO()
        fig.savefig(buf, format="png")
        write_atomically(folder / f"models-{name}.png", buf.getvalue())
        n_fit = len(data.subset(split="fit"))
        out += [f"### {name}", "", f"![{name} data against both forms](models-{name}.png)", "",
                f"{len(data.points)} points: {n_fit} fitted, {len(data.points) - n_fit} held out "
                f"(every handbook typical point is held out). Library form: {LIBRARY_FORM[name]}.", "",
                "| point | split | Ip data | " + " | ".join(f"{f} Ip" for f in FORMS) + " | gm data | "
                + " | ".join(f"{f} gm" for f in FORMS) + " |",
                "| --- | --- | --- | " + " | ".join("---" for _ in FORMS) + " | --- | "
                + " | ".join("---" for _ in FORMS) + " |"]
        for p in data.points:
            ips = [float(plate_current(m, p.vpk_v, p.vgk_v)) for _, m in models]
            cells = [f"{p.kind} {p.vpk_v:g} V, {p.vgk_v:g} V", p.split, f"{p.ip_a * 1e3:.3g} mA"]
            cells += [f"{ip / p.ip_a - 1:+.1%}" for ip in ips]
            if p.gm_s:
                gms = [float(small_signal(m, p.vpk_v, p.vgk_v).gm_s) for _, m in models]
                cells += [f"{p.gm_s * 1e3:.3g} mA/V"] + [f"{g / p.gm_s - 1:+.1%}" for g in gms]
            else:
                cells += ["—"] + ["—" for _ in FORMS]
            out.append("| " + " | ".join(cells) + " |")
        out.append("")
    return "\n".join(out)


if __name__ == "__main__":
    import sys

    print(library_docs(Path(sys.argv[1] if len(sys.argv) > 1 else "docs")))
