"""The spread of the response over many builds: a Bode magnitude plot with the
5–95 % band of the builds shaded, their median and the nominal build drawn.

Reads the ``response`` entry of a ``chain-spread/1`` document
(:func:`chain.report.spread.spread_data`); computes nothing.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from chain.plot.bode import PALETTE

__all__ = ["EnvelopePlot", "envelope"]


@dataclass(frozen=True, slots=True, eq=False)
class EnvelopePlot:
    figure: object
    #: (gain axes, relative-to-nominal axes)
    axes: tuple
    #: the shaded 5–95 % band (a PolyCollection)
    band: object
    #: (median line, nominal line)
    lines: tuple


def envelope(data: dict, *, title: str = "") -> EnvelopePlot:
    """Draw the response band of a spread document (see the module docstring)."""
    from matplotlib.figure import Figure

    r = data["response"]
    f = np.asarray(r["f_hz"], dtype=float)

    def arr(key):
        return np.asarray([np.nan if v is None else v for v in r[key]], dtype=float)

    fig = Figure(figsize=(8.0, 6.4), layout="constrained")
    ax, rel = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    nominal = arr("nominal_db")
    band = ax.fill_between(f, arr("p5_db"), arr("p95_db"), color=PALETTE[0], alpha=0.25, linewidth=0,
                           label="5–95 % of the builds")
    med, = ax.semilogx(f, arr("median_db"), color=PALETTE[0], linewidth=1.6, label="median build")
    nom, = ax.semilogx(f, nominal, color=PALETTE[1], linewidth=1.2, linestyle=(0, (6, 2)),
                       label="nominal parts")
    rel.fill_between(f, arr("p5_db") - nominal, arr("p95_db") - nominal, color=PALETTE[0], alpha=0.25,
                     linewidth=0)
    rel.semilogx(f, arr("median_db") - nominal, color=PALETTE[0], linewidth=1.6)
    rel.axhline(0.0, color=PALETTE[1], linewidth=1.2, linestyle=(0, (6, 2)))
    rel.set_ylabel("relative to nominal (dB)")
    ax.set_xscale("log")
    ax.set_xlim(f[0], f[-1])
    rel.set_xlabel("frequency (Hz)")
    ax.set_ylabel("gain, source EMF to output (dB)")
    for a in (ax, rel):
        a.grid(True, which="both", linewidth=0.4, alpha=0.5)
    held = ", ".join(f"{k} {100 * v:+.0f} %" for k, v in data.get("fixed", {}).items())
    sub = f"{data['samples']} builds, parts uniform within their tolerances" + (f"; held: {held}" if held else "")
    ax.set_title((title + "\n" if title else "") + sub, fontsize=10)
    ax.legend(loc="lower center", fontsize=9)
    return EnvelopePlot(fig, (ax, rel), band, (med, nom))
