"""Overlay of several voicings' frequency responses, with their difference.

The plot only reads arrays: each voicing's output magnitude (dB) and phase
(degrees, unwrapped along frequency) against log frequency (Hz), from a
:class:`~chain.smallsignal.Response`, an :class:`~chain.analysis.Analysis`
or a JSON report document (its ``response`` entry).  The difference panel
shows ``voicing − first voicing`` in dB; when the sweep grids differ the
other voicing is read on the first one's grid by linear interpolation
against log frequency (and left blank outside the overlap).  matplotlib is
imported inside the functions; only :class:`matplotlib.figure.Figure` is
used (no pyplot state).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np

from chain.decibels import db_array
from chain.plot.bode import DASHES, PALETTE, _legend_below, wrap_turns

__all__ = ["Curve", "OverlayPlot", "curve", "difference_db", "overlay", "title_of"]


@dataclass(frozen=True, slots=True, eq=False)
class Curve:
    """One voicing's output response on its sweep grid."""

    #: frequencies, Hz, increasing
    f_hz: np.ndarray
    #: 20·log10|H|, dB (NaN where |H| = 0 or absent)
    magnitude_db: np.ndarray
    #: angle of H, degrees, unwrapped along frequency and wrapped into
    #: (−180°, 180°] at the reference frequency (:func:`chain.plot.bode.phase_deg`)
    phase_deg: np.ndarray
    #: a name for the legend ("" if unknown)
    label: str = ""


@dataclass(frozen=True, slots=True, eq=False)
class OverlayPlot:
    """The figure and what is drawn on it."""

    figure: object
    #: (magnitude axes[, phase axes][, difference axes]), top to bottom
    axes: tuple
    #: magnitude traces, one per voicing, in input order (x: Hz, y: dB)
    lines: tuple
    #: phase traces, one per voicing (empty without the phase panel; y: degrees)
    phase_lines: tuple = ()
    #: difference traces ``voicing k − voicing 0``, k = 1…n−1 (empty without the panel; y: dB)
    diff_lines: tuple = ()
    #: the difference axes, or None
    diff_axes: object = None


def _array(values) -> np.ndarray:
    return np.asarray([np.nan if v is None else v for v in values], dtype=float)


def curve(source, label: str = "") -> Curve:
    """The output response of one voicing, read from whatever holds it.

    Parameters
    ----------
    source : Response, Analysis, Mapping or Curve
        A :class:`chain.smallsignal.Response` (its output node), an
        :class:`chain.analysis.Analysis` (its ``freq``), a ``chain-report/1``
        document or its ``response`` entry (keys ``f_hz``,
        ``magnitude_db``, ``phase_deg``), or a :class:`Curve`.
    label : str
        Legend name; default: the report's netlist path when known.
    """
    if isinstance(source, Curve):
        return source if not label else Curve(source.f_hz, source.magnitude_db, source.phase_deg, label)
    if isinstance(source, Mapping):
        f_ref = None
        if "response" in source:
            label = label or source.get("netlist", {}).get("path", "")
            f_ref = source.get("settings", {}).get("reference_hz")
            source = source["response"]
        f = _array(source["f_hz"])
        mag = _array(source["magnitude_db"])
        ph = _array(source["phase_deg"])
        ok = np.isfinite(ph)
        unwrapped = ph.copy()
        unwrapped[ok] = np.degrees(np.unwrap(np.radians(ph[ok])))
        return Curve(f, mag, wrap_turns(unwrapped, f, f_ref), label)
    from chain.analysis import Analysis
    from chain.smallsignal import Response

    f_ref = None
    if isinstance(source, Analysis):
        label = label or source.design.path
        f_ref = source.design.settings.reference_hz
        source = source.freq
    if isinstance(source, Response):
        h = np.asarray(source.output)
        with np.errstate(divide="ignore"):
            mag = db_array(h)
        mag[~np.isfinite(mag)] = np.nan
        f = np.asarray(source.f_hz, dtype=float)
        return Curve(f, mag, wrap_turns(np.degrees(np.unwrap(np.angle(h))), f, f_ref), label)
    raise TypeError(f"cannot read a response from {type(source).__name__}")


def title_of(voicings) -> str:
    """A figure title naming the designs compared: their titles, joined by
    "vs" (one title when they all share it)."""
    names = []
    for v in voicings:
        if isinstance(v, Mapping):
            name = v.get("netlist", {}).get("title") or v.get("netlist", {}).get("path", "")
        else:
            design = getattr(v, "design", None)
            name = getattr(design, "title", "") or getattr(design, "path", "")
        if name and name not in names:
            names.append(name)
    return " vs ".join(names)


def difference_db(a: Curve, b: Curve) -> np.ndarray:
    """``|H_b| − |H_a|`` in dB on ``a``'s grid.

    Same grid: point by point.  Otherwise ``b`` is interpolated linearly in
    dB against log10 frequency; NaN outside ``b``'s band.
    """
    from chain.smallsignal.resample import on_log_grid

    return on_log_grid(b.f_hz, b.magnitude_db, a.f_hz) - a.magnitude_db


def overlay(responses: Sequence, labels: Sequence[str] | None = None, *, diff_panel: bool = True,
            phase: bool = False, title: str = "") -> OverlayPlot:
    """Draw several voicings' magnitude (dB) on one log-frequency axis.

    Parameters
    ----------
    responses : sequence
        Two or more voicings, each anything :func:`curve` reads.
    labels : sequence of str, optional
        Legend names, one per voicing; default: the netlist paths when
        known, else ``A``, ``B``, ….
    diff_panel : bool
        Add a panel below with each voicing minus the first, dB (one trace
        for two voicings).
    phase : bool
        Add a phase panel (degrees) under the magnitude.
    title : str
        Figure title.

    Returns
    -------
    OverlayPlot
    """
    from matplotlib.figure import Figure
    from matplotlib.ticker import EngFormatter

    if len(responses) < 1:
        raise ValueError("overlay needs at least one response")
    if labels is not None and len(labels) != len(responses):
        raise ValueError(f"{len(labels)} labels for {len(responses)} responses")
    curves = [curve(r, labels[i] if labels is not None else "") for i, r in enumerate(responses)]
    curves = [c if c.label else Curve(c.f_hz, c.magnitude_db, c.phase_deg, chr(ord("A") + i % 26))
              for i, c in enumerate(curves)]
    show_diff = diff_panel and len(curves) >= 2

    ratios = [3.0] + ([2.0] if phase else []) + ([1.6] if show_diff else [])
    fig = Figure(figsize=(7.5, 1.2 + 1.05 * sum(ratios)), layout="constrained")
    axes = fig.subplots(len(ratios), 1, sharex=True, height_ratios=ratios, squeeze=False)[:, 0]
    mag_ax = axes[0]
    ph_ax = axes[1] if phase else None
    diff_ax = axes[-1] if show_diff else None

    def style(k: int) -> dict:
        return dict(color=PALETTE[k % len(PALETTE)], linestyle=DASHES[k % len(DASHES)],
                    linewidth=2.0 if k == 0 else 1.6)

    lines, ph_lines, d_lines = [], [], []
    for k, c in enumerate(curves):
        (line,) = mag_ax.semilogx(c.f_hz, c.magnitude_db, label=c.label, **style(k))
        lines.append(line)
        if ph_ax is not None:
            (pl,) = ph_ax.semilogx(c.f_hz, c.phase_deg, label=c.label, **style(k))
            ph_lines.append(pl)
    if diff_ax is not None:
        diff_ax.axhline(0.0, color="#8a8a8a", linewidth=0.8, zorder=1)
        for k, c in enumerate(curves[1:], start=1):
            label = f"{c.label} − {curves[0].label}"
            (dl,) = diff_ax.semilogx(curves[0].f_hz, difference_db(curves[0], c), label=label, **style(k))
            d_lines.append(dl)
        diff_ax.set_ylabel("Difference (dB)")
        # same colours as the voicings above; the legend below names them
        diff_ax.set_title(f"difference from {curves[0].label} (dB)" if len(d_lines) > 1
                          else d_lines[0].get_label(), fontsize=9, loc="left")

    mag_ax.set_ylabel("Gain (dB, V/V)")
    _legend_below(fig, mag_ax)
    if ph_ax is not None:
        ph_ax.set_ylabel("Phase (°)")
    axes[-1].set_xlabel("Frequency")
    axes[-1].xaxis.set_major_formatter(EngFormatter(unit="Hz"))
    for a in axes:
        a.grid(True, which="major", color="#d9dce1", linewidth=0.8)
        a.grid(True, which="minor", color="#eef0f3", linewidth=0.5)
        a.tick_params(labelsize=9)
    if title:
        fig.suptitle(title, x=0.01, ha="left", fontsize=11.5)
    return OverlayPlot(fig, tuple(axes), tuple(lines), tuple(ph_lines), tuple(d_lines), diff_ax)
