"""The ``stability`` report section: poles, zeros, feedback loops (and sensitivities).

:func:`stability_data` turns a :class:`chain.smallsignal.stability.Stability`
into the plain document layout; :func:`stability_text` and
:func:`stability_markdown` render it.  Poles and zeros are complex
frequencies ``s/2π`` in Hz.
"""

from __future__ import annotations

from chain.decibels import db
from typing import Any

import chain.report.fmt as fmt

__all__ = ["stability_data", "stability_text", "stability_markdown", "unstable_banner", "POLES_SHOWN"]

#: zeros listed in the text report (lowest first, conjugate pairs once); the JSON holds all
POLES_SHOWN = 14


def _num(x):
    from chain.report.values import num

    return num(x)


def stability_data(st) -> dict[str, Any] | None:
    """The ``stability`` document section (``None`` when not computed)."""
    if st is None:
        return None

    def pole(p):
        return {
            "re_hz": _num(p.s_hz.real), "im_hz": _num(p.s_hz.imag), "f_hz": _num(p.f_hz),
            "q": _num(p.q) if p.q is not None else None, "unstable": bool(p.unstable),
            "dominant": [{"part": name, "sensitivity": _num(abs(v))} for name, v in p.dominant],
        }

    out = st.output
    loops = []
    for lg in st.loops:
        pm_at = min(lg.crossovers, key=lambda c: c[1], default=(None, None))
        gm_at = min(lg.phase_crossings, key=lambda c: c[1], default=(None, None))
        loops.append({
            "network": lg.path.name, "stages": list(lg.path.stages), "cut_at": lg.node,
            "negative_feedback": bool(lg.negative),
            "mid_band_db": _num(db(lg.t_mid)) if abs(lg.t_mid) > 0 else None,
            "phase_margin_deg": _num(pm_at[1]), "crossover_hz": _num(pm_at[0]),
            "gain_margin_db": _num(gm_at[1]), "phase_crossover_hz": _num(gm_at[0]),
            "crossovers": [{"f_hz": _num(f), "phase_margin_deg": _num(pm)} for f, pm in lg.crossovers],
            "phase_crossings": [{"f_hz": _num(f), "gain_margin_db": _num(gm)} for f, gm in lg.phase_crossings],
        })
    return {
        "stable": bool(st.stable),
        "poles": [pole(p) for p in st.poles],
        "output": {
            "node": out.node,
            "zeros": [{"re_hz": _num(z.real), "im_hz": _num(z.imag)} for z in out.zeros_hz],
            "poles": [{"re_hz": _num(p.real), "im_hz": _num(p.imag)} for p in out.poles_hz],
        },
        "unstable": [
            {"re_hz": _num(p.s_hz.real), "oscillation_hz": _num(p.oscillation_hz),
             "paths": [{"kind": c.kind, "name": c.name} for c in paths]}
            for p, paths in zip(st.unstable, st.culprits or [()] * len(st.unstable))
        ],
        "loops": loops,
    }


def _s(re_hz, im_hz) -> str:
    """``-353.1 Hz ± j3.163 kHz`` or ``-12.57 Hz``."""
    if re_hz is None:
        return "—"
    if not im_hz:
        return fmt.si(re_hz, "Hz")
    return f"{fmt.si(re_hz, 'Hz')} ± j{fmt.si(abs(im_hz), 'Hz')}"


def _one(re_hz, im_hz) -> str:
    """``-353.1 Hz + j3.163 kHz`` (one root, its own sign)."""
    if not im_hz:
        return fmt.si(re_hz, "Hz")
    return f"{fmt.si(re_hz, 'Hz')} {'+' if im_hz > 0 else '−'} j{fmt.si(abs(im_hz), 'Hz')}"


def _pairs(items):
    """One entry per conjugate pair (the one with Im ≥ 0)."""
    return [x for x in items if (x["im_hz"] or 0.0) >= 0.0]


def unstable_banner(data: dict[str, Any]) -> list[str]:
    """Lines that say plainly that the circuit is unstable (empty when stable or unknown)."""
    st = data.get("stability")
    if not st or st["stable"]:
        return []
    freqs = ", ".join(fmt.si(u["oscillation_hz"], "Hz") if u["oscillation_hz"] else "0 Hz (runs away)"
                      for u in st["unstable"])
    return [f"UNSTABLE: this circuit oscillates (at about {freqs}); the small-signal figures in this "
            "report are not what it will do. See Stability and Diagnostics."]


def _loop_lines(lp) -> list[str]:
    head = f"loop through network '{lp['network']}' ({' → '.join(lp['stages'])}), cut at {lp['cut_at']}"
    sign = "negative" if lp["negative_feedback"] else "positive"
    mid = f"{lp['mid_band_db']:.1f} dB" if lp["mid_band_db"] is not None else "—"
    crossings = lp.get("crossovers") or ([{"f_hz": lp["crossover_hz"], "phase_margin_deg": lp["phase_margin_deg"]}]
                                         if lp["phase_margin_deg"] is not None else [])
    phase = lp.get("phase_crossings") or ([{"f_hz": lp["phase_crossover_hz"], "gain_margin_db": lp["gain_margin_db"]}]
                                          if lp["gain_margin_db"] is not None else [])
    pm = ", ".join(f"{c['phase_margin_deg']:.1f}° at {fmt.si(c['f_hz'], 'Hz')}" for c in crossings) \
        or "none (|T| never crosses 1)"
    gm = ", ".join(f"{c['gain_margin_db']:.1f} dB at {fmt.si(c['f_hz'], 'Hz')}" for c in phase) \
        or "none (the phase never reaches ±180°)"
    return [head, f"  loop gain at its peak   {mid} ({sign} feedback)",
            f"  phase margin            {pm}", f"  gain margin             {gm}"]


def stability_text(data: dict[str, Any]) -> list[str]:
    st = data.get("stability")
    if not st:
        return []
    lines = ["Stability, poles and zeros", "--------------------------"]
    lines.append("stable: no pole in the right half-plane" if st["stable"]
                 else "UNSTABLE: pole(s) in the right half-plane (marked !)")
    ps = st["poles"]
    lines.append(f"poles (s/2π, lowest first; {len(ps)} in all, one per line, so a part change replaces lines in place)")
    lines.append(f"  {'':1} {'s/2π':<30} {'|s|/2π':>11} {'Q':>7}  parts that move it most")
    for p in ps:
        q = f"{p['q']:.3g}" if p["q"] is not None else "—"
        parts = ", ".join(f"{d['part']} {d['sensitivity']:.2f}" for d in p["dominant"])
        mark = "!" if p["unstable"] else " "
        lines.append(f"  {mark} {_one(p['re_hz'], p['im_hz']):<30} {fmt.si(p['f_hz'], 'Hz'):>11} {q:>7}  {parts}")
    zs = _pairs(st["output"]["zeros"])
    text = ", ".join(_s(z["re_hz"], z["im_hz"]) for z in zs[:POLES_SHOWN]) or "none"
    more = f" … and {len(zs) - POLES_SHOWN} more" if len(zs) > POLES_SHOWN else ""
    lines.append(f"{'zeros, to ' + st['output']['node']:<32} {text}{more}")
    for lp in st["loops"]:
        lines += _loop_lines(lp)
    return lines


def stability_markdown(data: dict[str, Any]) -> list[str]:
    st = data.get("stability")
    if not st:
        return []
    lines = ["## Stability, poles and zeros", ""]
    lines.append("Stable: no pole in the right half-plane." if st["stable"]
                 else "**UNSTABLE**: pole(s) in the right half-plane (marked **!**).")
    lines += ["", "| | s/2π | \\|s\\|/2π | Q | parts that move it most |", "| --- | --- | ---: | ---: | --- |"]
    for p in st["poles"]:
        q = f"{p['q']:.3g}" if p["q"] is not None else "—"
        parts = ", ".join(f"{d['part']} {d['sensitivity']:.2f}" for d in p["dominant"])
        mark = "**!**" if p["unstable"] else ""
        lines.append(f"| {mark} | {_one(p['re_hz'], p['im_hz'])} | {fmt.si(p['f_hz'], 'Hz')} | {q} | {parts} |")
    zs = _pairs(st["output"]["zeros"])
    lines += ["", f"Zeros of the transfer to `{st['output']['node']}`: "
              + (", ".join(_s(z["re_hz"], z["im_hz"]) for z in zs[:POLES_SHOWN]) or "none")]
    for lp in st["loops"]:
        lines += ["", *("    " + x for x in _loop_lines(lp))]
    return lines


def sensitivity_data(ranks) -> list[dict[str, Any]] | None:
    """The ``sensitivity`` document section: per quantity every part's
    ``d ln y / d ln x``, largest magnitude first (``None`` when not computed)."""
    if not ranks:
        return None
    return [{"quantity": r.quantity, "value": _num(r.value), "unit": r.unit,
             "parts": [{"part": name, "s": _num(s)} for name, s in r.parts]} for r in ranks]


def _value(r) -> str:
    if r["value"] is None:
        return ""
    if r["unit"] == "dB":
        return f" ({r['value']:.2f} dB)"
    return f" ({fmt.si(r['value'], r['unit'])})"


def _top(r, n: int = 3) -> str:
    return ", ".join(f"{p['part']} {p['s']:+.2f}" for p in r["parts"][:n] if p["s"] is not None) or "—"


def sensitivity_text(data: dict[str, Any]) -> list[str]:
    ranks = data.get("sensitivity")
    if not ranks:
        return []
    lines = ["Sensitivity: the three parts that move each result most",
             "-------------------------------------------------------",
             "(normalised: a part 1 % larger moves the result by S %; gain as |V/V|)"]
    for r in ranks:
        lines.append(f"{r['quantity']:<24}  {_value(r).strip(' ()'):>10}  {_top(r)}")
    return lines


def sensitivity_markdown(data: dict[str, Any]) -> list[str]:
    ranks = data.get("sensitivity")
    if not ranks:
        return []
    lines = ["## Sensitivity: the three parts that move each result most", "",
             "Normalised: a part 1 % larger moves the result by S %.", "",
             "| result | parts (S) |", "| --- | --- |"]
    for r in ranks:
        lines.append(f"| {r['quantity']}{_value(r)} | {_top(r)} |")
    return lines
