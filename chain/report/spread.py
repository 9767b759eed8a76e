"""The spread report: :class:`chain.spread.SpreadResult` as data (``chain-spread/1``)
and as text or Markdown.

Numbers are SI (V, A, W, ohm, Hz; gains in dB); deviations are fractions
(``-0.25`` is 25 % low).  Layout: ``docs/report-format.md`` (Spread);
formally ``chain/report/spread_schema.json`` (:func:`spread_schema`).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from chain.about import SAFETY
import chain.report.fmt as fmt
from chain.report.data import diagnostics_data
from chain.report.values import num

__all__ = ["SPREAD_SCHEMA", "spread_data", "spread_schema", "render_spread", "FIGURES"]

SPREAD_SCHEMA = "chain-spread/1"

#: figure key → (label, unit) in report order
FIGURES = {"vp_v": ("Vp", "V"), "vk_v": ("Vk", "V"), "vgk_v": ("Vgk (bias)", "V"), "ip_a": ("Ip", "A"),
           "pd_w": ("Pd", "W"), "gain_db": ("gain", "dB"), "zout_ohm": ("|Zout|", "ohm")}


def spread_schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) of the spread document, ``chain/report/spread_schema.json``."""
    import json
    from pathlib import Path

    return json.loads(Path(__file__).with_name("spread_schema.json").read_text(encoding="utf-8"))


def _p(p, unstable_corners: frozenset = frozenset(), key: str = "") -> dict[str, Any]:
    return {"nominal": num(p.nominal), "median": num(p.median), "p5": num(p.p5), "p95": num(p.p95),
            "corner_low": num(p.corner_low), "corner_high": num(p.corner_high),
            "corner_low_stable": (key, "low") not in unstable_corners,
            "corner_high_stable": (key, "high") not in unstable_corners}


def _draws(draws) -> list[dict[str, Any]]:
    return [{"sample": i, "deviations": [{"group": lab, "deviation": num(d)} for lab, d in devs]}
            for i, devs in draws]


def _complex(z) -> dict[str, Any] | None:
    return None if z is None else {"re": num(z.real), "im": num(z.imag)}


def stability_section(r) -> dict[str, Any]:
    """The ``stability`` part of the spread document."""
    ins = r.instability
    return {
        "nominal_stable": r.nominal_rhp_hz is None,
        "nominal_rhp_hz": _complex(r.nominal_rhp_hz),
        "unstable_builds": 0 if ins is None else int(ins.count),
        "unstable_fraction": 0.0 if ins is None else num(ins.fraction),
        "oscillation_hz": None if ins is None else
        dict(zip(("p5", "median", "p95"), (num(x) for x in ins.oscillation_hz))),
        "draws": [] if ins is None else _draws(ins.draws),
        "influence": [] if ins is None else [{"group": g, "rho": num(rho)} for g, rho in ins.influence],
    }


def first_clip_section(r) -> dict[str, Any] | None:
    """The ``first_clip`` part of the spread document (None when not computed)."""
    fc = r.first_clip
    if fc is None:
        return None
    return {
        "method": "quasi-static mid-band sweep of every build, as the nominal headroom analysis",
        "nominal_first": fc.nominal or None,
        "first_fractions": {k: num(v) for k, v in fc.fractions.items()},
        "changed_fraction": num(fc.changed),
        "counted": int(fc.counted), "failed": int(fc.failed),
        "draws": [{"sample": i, "first": first, "deviations": [{"group": lab, "deviation": num(d)}
                                                               for lab, d in devs]}
                  for i, first, devs in fc.draws],
        "influence": [{"group": g, "rho": num(rho)} for g, rho in fc.influence],
        "what_if_first": (r.what_if_first or None) if r.what_if_clip is not None else None,
        "what_if": None if r.what_if_clip is None else
        [{"stage": k, "level_v": num(v), "mechanism": m} for k, (v, m) in r.what_if_clip.items()],
        "stages": [{"stage": c.stage, "nominal_v": num(c.nominal), "nominal_mechanism": c.nominal_mechanism,
                    "p5_v": num(c.p5), "median_v": num(c.median), "p95_v": num(c.p95),
                    "clips_fraction": num(c.clips), "mechanisms": {k: num(v) for k, v in c.mechanisms.items()},
                    "influence": [{"group": g, "rho": num(rho)} for g, rho in c.influence]}
                   for c in r.clips],
    }


def spread_data(result, *, path: str = "", title: str = "", diagnostics=()) -> dict[str, Any]:
    """The JSON-ready document of a spread analysis (``diagnostics``: located
    problems of the nominal circuit, e.g. E801 when it is unstable)."""
    r = result
    env = np.asarray(r.envelope_db)
    bad_corners = frozenset((c.figure, c.end) for c in r.corners if not c.stable)
    return {
        "schema": SPREAD_SCHEMA,
        "netlist": {"path": path, "title": title},
        "safety": SAFETY,
        "samples": int(r.samples), "seed": int(r.seed), "reference_hz": num(r.reference_hz),
        "distribution": "uniform within each tolerance band",
        "groups": [{"label": g.label, "kind": g.kind, "parts": list(g.names), "low": num(g.tolerance.low),
                    "high": num(g.tolerance.high)} for g in r.groups],
        "fixed": {k: num(v) for k, v in r.fixed.items()},
        "nominal": {s: {k: num(v) for k, v in figs.items()} for s, figs in r.nominal.items()},
        "what_if": None if r.what_if is None else
        {s: {k: num(v) for k, v in figs.items()} for s, figs in r.what_if.items()},
        "counted": int(r.counted),
        "stages": [{"stage": s.stage, "figures": {k: _p(v, bad_corners, f"{s.stage}.{k}")
                                                  for k, v in s.figures.items()}} for s in r.stages],
        "overall_gain_db": _p(r.overall_gain_db, bad_corners, "overall_gain_db"),
        "response": {"f_hz": [num(x) for x in r.f_hz], "p5_db": [num(x) for x in env[0]],
                     "median_db": [num(x) for x in env[1]], "p95_db": [num(x) for x in env[2]],
                     "nominal_db": [num(x) for x in r.nominal_db]},
        "checks": [{"subject": b.subject, "check": b.check, "fraction": num(b.fraction),
                    "draws": _draws(b.draws)} for b in r.breaks],
        "stability": stability_section(r),
        "first_clip": first_clip_section(r),
        "unconverged": int(r.unconverged), "resolved": int(r.resolved),
        "diagnostics": diagnostics_data(diagnostics),
    }


def _val(v, unit: str) -> str:
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return fmt.NONE
    if unit == "dB":
        return f"{v:.2f} dB"
    return fmt.si(v, {"ohm": "Ω"}.get(unit, unit))


def _lvl(v) -> str:
    """A source peak with its dBV: ``498 µV (-69.1 dBV)``."""
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "never"
    return f"{fmt.si(v, 'V')} ({20 * math.log10(v / math.sqrt(2)):.1f} dBV)" if v > 0 else "at rest"


def _lvl_short(v, mechanism: str) -> str:
    """A source peak and its mechanism in few characters: ``53.75 mV cutoff``."""
    if v is None or (isinstance(v, float) and not math.isfinite(v)):
        return "never"
    return f"{fmt.si(v, 'V')} {_short(mechanism)}".rstrip() if v > 0 else "at rest"


def _short(mechanism: str) -> str:
    return {"grid conduction": "grid", "cutoff": "cutoff"}.get(mechanism, "")


def _corner(p: dict[str, Any], end: str, unit: str) -> str:
    text = _val(p[f"corner_{end}"], unit)
    return text if p.get(f"corner_{end}_stable", True) else "!" + text


def _dev(d: float) -> str:
    return f"{100 * d:+.1f} %"


def _groups_line(data) -> str:
    by_kind: dict[str, set] = {}
    for g in data["groups"]:
        lo, hi = g["low"], g["high"]
        band = f"±{100 * hi:g} %" if lo == -hi else f"{100 * lo:+g}/{100 * hi:+g} %"
        by_kind.setdefault(g["kind"], set()).add(band)
    return "; ".join(f"{k} {', '.join(sorted(v))}" for k, v in by_kind.items())


def render_spread(data: dict[str, Any], *, fmt_name: str = "text") -> str:
    """The spread document as text or Markdown (JSON: :func:`chain.report.jsonfmt.dumps`)."""
    md = fmt_name == "markdown"
    lines: list[str] = []

    def title(text: str, level: int = 2) -> None:
        if lines:
            lines.append("")
        if md:
            lines.extend(["#" * level + " " + text, ""])
        else:
            lines.extend([text, ("=" if level == 1 else "-") * len(text)])

    def kv(label: str, value: str) -> None:
        lines.append(f"- {label}: {value}" if md else f"{label:<32} {value}".rstrip())

    def table(head: list[str], rows: list[list[str]], widths: list[int]) -> None:
        if md:
            def cells(r):
                return "| " + " | ".join(c.replace("|", "\\|") for c in r) + " |"
            lines.append(cells(head))
            lines.append("| " + " | ".join(["---", "---"] + ["---:"] * (len(head) - 2)) + " |")
            lines.extend(cells(r) for r in rows)
        else:
            def row(cells):
                return "  ".join(c.ljust(w) if i < 2 else c.rjust(w) for i, (c, w) in enumerate(zip(cells, widths)))
            lines.append(row(head).rstrip())
            lines.extend(row(r).rstrip() for r in rows)

    title(f"chain spread: {data['netlist']['title'] or data['netlist']['path']}", 1)
    st = data["stability"]
    if not st["nominal_stable"]:
        z = st["nominal_rhp_hz"]
        lines.append(f"UNSTABLE: the nominal circuit oscillates (at about {fmt.si(abs(z['im']), 'Hz')}; a pole in "
                     "the right half-plane, error E801); the small-signal figures below are not what it will do.")
    lines.append(data["safety"])
    ref = fmt.si(data["reference_hz"], "Hz")
    kv("samples", f"{data['samples']} builds (seed {data['seed']}), {len(data['groups'])} parts and tubes "
                  f"varied, {data['distribution']}")
    if data["counted"] != data["samples"]:
        kv("in the statistics", f"{data['counted']} builds (left out: {st['unstable_builds']} unstable, "
                                f"{data['unconverged']} whose DC solve did not converge)")
    kv("tolerances", _groups_line(data))
    if data["fixed"]:
        kv("held in every sample", ", ".join(f"{k} at {_dev(v)}" for k, v in data["fixed"].items()))

    if data["what_if"] is not None:
        held = ", ".join(f"{k} at {_dev(v)}" for k, v in data["fixed"].items())
        title(f"What if: {held}, every other part nominal (at {ref})")
        rows = []
        for stage, figs in data["what_if"].items():
            if stage == "overall":
                continue
            for key, (label, unit) in FIGURES.items():
                a, b = data["nominal"][stage].get(key), figs.get(key)
                change = ""
                if a is not None and b is not None and unit != "dB" and a != 0:
                    change = f"{100 * (b / a - 1):+.1f} %"
                elif a is not None and b is not None:
                    change = f"{b - a:+.2f} dB"
                rows.append([stage, label, _val(a, unit), _val(b, unit), change])
        fc0 = data.get("first_clip") or {}
        nominal_clip = {c["stage"]: c for c in fc0.get("stages", [])}
        for c in fc0.get("what_if") or []:
            a0 = nominal_clip.get(c["stage"], {})
            a, b = a0.get("nominal_v"), c["level_v"]
            change = f"{20 * math.log10(b / a):+.2f} dB" if a and b else ""
            rows.append([c["stage"], "first clip", _lvl_short(a, a0.get("nominal_mechanism", "")),
                         _lvl_short(b, c["mechanism"]), change])
        g = data["what_if"]["overall"]["overall_gain_db"]
        g0 = data["nominal"]["overall"]["overall_gain_db"]
        rows.append(["overall", "gain", _val(g0, "dB"), _val(g, "dB"), f"{g - g0:+.2f} dB"])
        table(["stage", "figure", "nominal", "what if", "change"], rows, [7, 11, 15, 15, 10])
        if fc0.get("what_if"):
            lines.append("(first clip: the input level, source peak, at the stage's first clipping onset; "
                         f"first stage to clip: {fc0.get('nominal_first') or 'none'} nominal, "
                         f"{fc0.get('what_if_first') or 'none'} in the what-if build)")

    title(f"Stage spread at {ref}: 5 %, median, 95 % of the builds; worst-case corners")
    rows = []
    for s in data["stages"]:
        for key, (label, unit) in FIGURES.items():
            p = s["figures"].get(key)
            if p is None:
                continue
            rows.append([s["stage"], label, _val(p["nominal"], unit), _val(p["p5"], unit), _val(p["median"], unit),
                         _val(p["p95"], unit), _corner(p, "low", unit), _corner(p, "high", unit)])
    p = data["overall_gain_db"]
    rows.append(["overall", "gain", _val(p["nominal"], "dB"), _val(p["p5"], "dB"), _val(p["median"], "dB"),
                 _val(p["p95"], "dB"), _corner(p, "low", "dB"), _corner(p, "high", "dB")])
    table(["stage", "figure", "nominal", "5 %", "median", "95 %", "corner low", "corner high"], rows,
          [7, 11, 11, 11, 11, 11, 11, 11])
    note = ("(corners: every part at the end of its band that moves the figure down or up, by the sign of "
            "its sensitivity; first-order, so a good estimate of the extremes, not a bound")
    if any(not f[f"corner_{e}_stable"] for s in data["stages"] for f in s["figures"].values()
           for e in ("low", "high")) or not (p["corner_low_stable"] and p["corner_high_stable"]):
        note += "; ! marks a corner build that is unstable"
    if st["unstable_builds"]:
        note += f"; percentiles over the {data['counted']} stable builds"
    note += ")"
    lines.extend([note] if not md else ["", f"_{note}_"])

    from chain.report.base import spot_frequencies

    r = data["response"]
    f = np.asarray(r["f_hz"], dtype=float)
    title("Response spread: source EMF to the output")
    for fs in spot_frequencies(f[0], f[-1]):
        vals = [float(np.interp(np.log(fs), np.log(f), np.asarray(r[k], dtype=float)))
                for k in ("p5_db", "median_db", "p95_db", "nominal_db")]
        kv(f"response at {fmt.si(fs, 'Hz')}", f"median {vals[1]:.2f} dB, 5–95 %: {vals[0]:.2f} to "
                                              f"{vals[2]:.2f} dB (nominal {vals[3]:.2f} dB)")

    fc = data.get("first_clip")
    if fc is not None:
        title("First clip: input level (source peak) at each stage's first clipping onset")
        rows = []
        for c in fc["stages"]:
            mech = ", ".join(f"{k} {100 * v:.0f} %" for k, v in c["mechanisms"].items() if v)
            rows.append([c["stage"], f"{_lvl(c['nominal_v'])} {_short(c['nominal_mechanism'])}".rstrip(),
                         _lvl(c["p5_v"]), _lvl(c["median_v"]), _lvl(c["p95_v"]), mech or fmt.NONE])
        table(["stage", "nominal", "5 %", "median", "95 %", "mechanism in the builds"], rows,
              [7, 28, 20, 20, 20, 32])
        lines.append("")
        shares = ", ".join(f"{k} {100 * v:.1f} %" for k, v in fc["first_fractions"].items() if v)
        kv("first stage to clip", f"nominal {fc['nominal_first'] or 'none'}; in the builds: {shares}")
        kv("another stage clips first", f"{100 * fc['changed_fraction']:.1f} % of the builds")
        if fc["influence"]:
            kv("most influential draws", ", ".join(f"{x['group']} (rho {x['rho']:+.2f})" for x in fc["influence"]))
            lines.append("    (Spearman rank correlation of each part's deviation with another stage clipping first)")
        for d in fc["draws"][:3]:
            devs = ", ".join(f"{x['group']} {_dev(x['deviation'])}" for x in d["deviations"])
            lines.append(f"    e.g. build {d['sample']}, {d['first']} first: {devs}")
        for c in fc["stages"]:
            if c["influence"]:
                kv(f"{c['stage']} first clip moves with", ", ".join(f"{x['group']} (rho {x['rho']:+.2f})"
                                                                   for x in c["influence"]))
        if fc["failed"]:
            lines.append(f"{fc['failed']} builds whose large-signal sweep could not be solved are left out")
        note = ("(quasi-static mid-band model of the headroom analysis for every build; levels are source "
                "peaks; the rank correlations are Spearman's)")
        lines.extend([note] if not md else ["", f"_{note}_"])

    title("Stability of the builds")
    if not st["unstable_builds"]:
        lines.append("every build is stable: no pole in the right half-plane")
    else:
        osc = st["oscillation_hz"]
        kv("unstable builds", f"{st['unstable_builds']} ({100 * st['unstable_fraction']:.1f} %), oscillating at "
                              f"{fmt.si(osc['p5'], 'Hz')} to {fmt.si(osc['p95'], 'Hz')} (5-95 %; median "
                              f"{fmt.si(osc['median'], 'Hz')}); left out of every figure above and below")
        if st["influence"]:
            kv("most influential draws", ", ".join(f"{x['group']} (rho {x['rho']:+.2f})" for x in st["influence"]))
            lines.append("    (Spearman rank correlation of each part's deviation with being unstable)")
        for d in st["draws"][:3]:
            devs = ", ".join(f"{x['group']} {_dev(x['deviation'])}" for x in d["deviations"])
            lines.append(f"    e.g. build {d['sample']}: {devs}")

    title("Ratings and bias checks broken in some builds")
    if not data["checks"]:
        lines.append("none: every build stays inside every rating and biases without cutoff or grid current")
    for c in data["checks"]:
        kv(f"{c['subject']}: {c['check']}", f"{100 * c['fraction']:.1f} % of the builds")
        for d in c["draws"][:3]:
            devs = ", ".join(f"{x['group']} {_dev(x['deviation'])}" for x in d["deviations"])
            lines.append(f"    e.g. build {d['sample']}: {devs}")
    if data["unconverged"]:
        lines.append(f"{data['unconverged']} builds whose DC solve did not converge are left out of the numbers")
    return "\n".join(lines) + "\n"
