"""Loop gain of a feedback network: |T| and phase against frequency, margins marked.

Reads a :class:`chain.smallsignal.stability.LoopGain` only; computes no new
physics.  The phase is the loop's own (0° at mid-band for negative
feedback); the loop oscillates where |T| ≥ 1 with the phase at ±180°.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from chain.decibels import db_array

__all__ = ["LoopPlot", "loop_plot"]

TRACE = "#1d3557"
MARK = "#b5651d"
LIMIT = "#8a8a8a"


@dataclass(frozen=True, slots=True, eq=False)
class LoopPlot:
    figure: object
    #: (magnitude axes, phase axes)
    axes: tuple
    #: (magnitude line, phase line)
    lines: tuple


def loop_plot(loop, *, title: str = "") -> LoopPlot:
    """Draw ``|T|`` (dB) and ``∠T`` (degrees) against log frequency (Hz).

    The 0 dB and ±180° lines are drawn; each gain crossover is marked with its
    phase margin, each phase crossing with its gain margin.
    """
    from matplotlib.figure import Figure
    from matplotlib.ticker import EngFormatter, MultipleLocator

    fig = Figure(figsize=(7.5, 5.6), layout="constrained")
    mag_ax, ph_ax = fig.subplots(2, 1, sharex=True, height_ratios=(3, 2))
    f = np.asarray(loop.f_hz)
    with np.errstate(divide="ignore"):
        db = db_array(loop.t)
    (m_line,) = mag_ax.semilogx(f, db, color=TRACE, linewidth=2.0, label="|T|, loop gain")
    (p_line,) = ph_ax.semilogx(f, loop.phase_deg, color=TRACE, linewidth=2.0)
    mag_ax.axhline(0.0, color=LIMIT, linewidth=1.0, linestyle=(0, (6, 2)))
    for y in (180.0, -180.0):
        ph_ax.axhline(y, color=LIMIT, linewidth=1.0, linestyle=(0, (6, 2)))
    for fc, pm in loop.crossovers:
        mag_ax.axvline(fc, color=MARK, linewidth=1.0)
        ph_ax.axvline(fc, color=MARK, linewidth=1.0)
        mag_ax.annotate(f"phase margin {pm:.0f}°\nat {_hz(fc)}", (fc, 0.0), xytext=(6, 8),
                        textcoords="offset points", fontsize=8, color=MARK)
    for fp, gm in loop.phase_crossings:
        ph_ax.plot([fp], [180.0 if np.interp(np.log(fp), np.log(f), loop.phase_deg) > 0 else -180.0], "o",
                   color=MARK, markersize=4)
        mag_ax.annotate(f"gain margin {gm:.1f} dB\nat {_hz(fp)}", (fp, -gm), xytext=(6, -24),
                        textcoords="offset points", fontsize=8, color=MARK)
        mag_ax.plot([fp], [-gm], "o", color=MARK, markersize=4)
    mag_ax.set_ylabel("Loop gain |T| (dB)")
    ph_ax.set_ylabel("Phase of T (°)")
    ph_ax.set_xlabel("Frequency")
    ph_ax.xaxis.set_major_formatter(EngFormatter(unit="Hz"))
    ph_ax.yaxis.set_major_locator(MultipleLocator(90.0))
    mag_ax.set_xlim(f[0], f[-1])
    for a in (mag_ax, ph_ax):
        a.grid(True, which="major", color="#c8c8c8", linewidth=0.7)
        a.grid(True, which="minor", color="#e6e6e6", linewidth=0.4)
        a.tick_params(labelsize=9)
    sign = "negative" if loop.negative else "positive"
    head = f"Loop through network '{loop.path.name}' ({' → '.join(loop.path.stages)}), cut at {loop.node}; " \
           f"{sign} feedback at mid-band"
    mag_ax.set_title(f"{title}\n{head}" if title else head, fontsize=10, loc="left")
    return LoopPlot(fig, (mag_ax, ph_ax), (m_line, p_line))


def _hz(f: float) -> str:
    from chain.units import format_si

    return format_si(f, "Hz")
