"""Plain-text tables of the time-domain results (`chain drive`).

Reads :mod:`chain.transient.measure` results; computes nothing new.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Sequence

from chain.units import format_si
from chain.decibels import db

if TYPE_CHECKING:  # pragma: no cover - typing only
    from chain.transient.measure import ClipPoint

__all__ = ["distortion_text", "clip_text", "burst_text", "sag_text", "render_text"]


def _db(x: float) -> str:
    return "   —" if not math.isfinite(x) else f"{x:5.0f}"


def distortion_text(points) -> str:
    """Per frequency and level: fundamental, harmonics 2–9 (dB re fundamental) and THD at each stage output."""
    out = ["Distortion (settled response; harmonics in dB relative to the fundamental)",
           "-" * 76]
    head = f"{'':10} {'fund. pk':>9} " + " ".join(f"{'H' + str(k):>5}" for k in range(2, 10)) + f" {'THD':>8}"
    for p in points:
        out.append(f"{format_si(p.f_hz, 'Hz')}, source {format_si(p.level_v, 'V')} peak")
        out.append(head)
        for label, h in p.nodes.items():
            levels = " ".join(_db(h.level_db[k]) for k in range(2, 10))
            out.append(f"{label:10} {format_si(h.fundamental_v, 'V'):>9} {levels} {100 * h.thd:7.3g} %")
        out.append("")
    return "\n".join(out).rstrip() + "\n"


def clip_text(rows: Sequence[ClipPoint], quasi_static: tuple | None) -> str:
    """First clip per frequency from the time domain, beside the quasi-static (mid-band) one."""
    out = ["First clip (lowest source level at which a stage conducts grid current or cuts off)", "-" * 76]
    if quasi_static is not None:
        level, stage, mech = quasi_static
        out.append(f"quasi-static (mid-band, `chain headroom`): {format_si(level, 'V')} peak — {stage}, {mech}")
    for cp in rows:
        line = (f"time domain at {format_si(cp.f_hz, 'Hz'):>8}: {format_si(cp.level_v, 'V')} peak — {cp.stage}, "
                f"{cp.mechanism}")
        if quasi_static is not None and quasi_static[0] > 0:
            line += f" ({db(cp.level_v / quasi_static[0]):+.1f} dB vs quasi-static)"
        out.append(line)
    out.append(f"(levels found to within {100 * rows[0].rel_tol:.2g} %)" if rows else "")
    return "\n".join(out).rstrip() + "\n"


def burst_text(result) -> str:
    out = [f"Burst: {format_si(result.loud_v, 'V')} peak for {1e3 * (result.end_s - result.start_s):.4g} ms, "
           f"then {format_si(result.quiet_v, 'V')} peak, at {format_si(result.f_hz, 'Hz')}",
           "-" * 76,
           "Grid average (over one period) per stage: its shift and how fast it comes back (blocking)",
           f"{'stage':8} {'grid':14} {'coupling':9} {'before':>9} {'largest shift':>13} {'at end':>9} "
           f"{'back to 1/e':>11} {'to 10 %':>9}"]
    for g in result.grids:
        rec = "—" if not math.isfinite(g.recovery_s) else f"{g.recovery_s * 1e3:.3g} ms"
        rec10 = "—" if not math.isfinite(g.recovery_10_s) else f"{g.recovery_10_s * 1e3:.3g} ms"
        out.append(f"{g.stage:8} {g.node:14} {g.coupling:9} "
                   f"{format_si(g.before_v, 'V'):>9} {format_si(g.shift_v, 'V'):>13} "
                   f"{format_si(g.shift_at_end_v, 'V'):>9} {rec:>11} {rec10:>9}")
    out.append("(— : no negative shift at the end of the burst, or not back within the run)")
    return "\n".join(out) + "\n"


def sag_text(rows: Sequence[tuple]) -> str:
    """``rows``: (f_hz, level_v, tuple of RailSag)."""
    out = ["Rail sag under sustained drive (settled response)", "-" * 76,
           f"{'frequency':>10} {'source':>9} {'rail':6} {'at rest':>9} {'driven avg':>10} {'sag':>9} {'lowest':>9}"]
    for f, level, rails in rows:
        for r in rails:
            out.append(f"{format_si(f, 'Hz'):>10} {format_si(level, 'V'):>9} {r.rail:6} {format_si(r.dc_v, 'V'):>9} "
                       f"{format_si(r.driven_v, 'V'):>10} {format_si(r.sag_v, 'V'):>9} {format_si(r.lowest_v, 'V'):>9}")
    return "\n".join(out) + "\n"


def render_text(sections: Sequence[str]) -> str:
    return "\n".join(s for s in sections if s)
