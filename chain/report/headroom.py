"""The headroom part of a report: :class:`chain.headroom.Headroom` as data, and its lines.

Levels are source (EMF) peaks in V, as in :mod:`chain.headroom`; dBV values
are of the rms of a sine with that peak.  The wall time of the analysis is
left out (reports are deterministic).
"""

from __future__ import annotations

import math
from typing import Any, Callable

import chain.report.fmt as fmt
from chain.report.values import num

__all__ = ["headroom_data", "first_clip", "text_lines", "markdown_lines"]


def _onset(o) -> dict[str, Any] | None:
    if o is None:
        return None
    return {"input_v": num(o.input_v), "stage_input_v": num(o.stage_input_v), "output_v": num(o.output_v),
            "triode": getattr(o, "triode", "") or None}  # a compression point names no triode


def _half(h) -> dict[str, Any]:
    return {
        "mechanism": h.mechanism, "grid": _onset(h.grid), "cutoff": _onset(h.cutoff),
        "thd_input_v": [num(v) for v in h.thd_input_v], "swept_to_v": num(h.swept_to_v),
        "compression": [_onset(c) for c in h.compression],
    }


def _spectrum(s) -> dict[str, Any]:
    return {"node": s.node, "harmonics_v": [num(v) for v in s.amplitudes_v], "thd": num(s.thd),
            "mean_shift_v": num(s.mean_shift_v)}


def _distortion(d) -> dict[str, Any] | None:
    if d is None:
        return None
    return {
        "level_v": num(d.level_v),
        "overall_gain_db": num(d.overall_gain_db),
        "overall": _spectrum(d.overall),
        "stages": [{"stage": s.stage, "gain_db": num(s.gain_db), "small_signal_gain": num(s.small_signal_gain),
                    "own_thd": num(s.own_thd), "own_harmonics_v": [num(v) for v in s.own_amplitudes_v],
                    "output": _spectrum(s.output)} for s in d.stages],
    }


def headroom_data(headroom) -> dict[str, Any] | None:
    """The ``headroom`` entry of a report document (None when not analysed).

    Parameters
    ----------
    headroom : chain.headroom.Headroom or None
    """
    if headroom is None:
        return None
    from chain.headroom.clipping import COMPRESSION_DB

    first = headroom.first
    stages = []
    for s in headroom.stages:
        margin = None if math.isinf(s.margin_db) and s.margin_db > 0 else num(s.margin_db)
        stages.append({
            "stage": s.stage, "kind": s.kind, "input_node": s.input_node, "output_node": s.output_node,
            "clip_input_v": num(s.clip_input_v), "mechanism": s.mechanism, "polarity": s.first_polarity or None,
            "margin_db": margin, "swing_pos_v": num(s.swing_pos_v), "swing_neg_v": num(s.swing_neg_v),
            "thd_input_v": [num(v) for v in s.thd_input_v],
            "compression_input_v": [None if c is None else num(c.input_v)
                                    for c in (s.compression(db) for db in COMPRESSION_DB)],
            "own_thd_at_clip": num(s.own_thd_at_clip), "output_thd_at_clip": num(s.output_thd_at_clip),
            "swept_to_v": num(s.swept_to_v),
            "positive": _half(s.positive), "negative": _half(s.negative),
            "triode": None if s.first is None else (s.first.triode or None),
            "outputs": [{"port": o.port, "node": o.node, "swing_pos_v": num(o.swing_pos_v),
                         "swing_neg_v": num(o.swing_neg_v), "thd_input_v": [num(v) for v in o.thd_input_v]}
                        for o in s.outputs],
        })
    first_thd = headroom.first_thd
    return {
        "level_v": num(headroom.level_v),
        "first_stage": None if first is None else first.stage,
        "first_clip_input_v": None if first is None else num(first.clip_input_v),
        "first_mechanism": None if first is None else first.mechanism,
        "first_polarity": None if first is None else first.first_polarity,
        "first_thd_stage": None if first_thd is None else first_thd.stage,
        "first_thd_input_v": None if first_thd is None else num(first_thd.thd_input_v[0]),
        "summary": headroom.summary,
        "thd_levels": [num(t) for t in headroom.thd_levels],
        "overall_thd_input_v": [num(v) for v in headroom.overall_thd_input_v],
        "cutoff_fraction": num(headroom.cutoff_fraction),
        "compression_db": [num(db) for db in COMPRESSION_DB],
        "stages": stages,
        "distortion": _distortion(headroom.distortion),
        "definitions": list(headroom.definitions),
        "limits": list(headroom.limits),
    }


def first_clip(h: dict[str, Any] | None) -> tuple[str | None, float | None] | None:
    """``(first stage to clip, its clip input level in V)`` of a document's
    headroom entry; ``None`` when headroom was not analysed."""
    if h is None:
        return None
    return h["first_stage"], h["first_clip_input_v"]


def _dbv(peak_v: float | None) -> str:
    if peak_v is None or peak_v <= 0:
        return fmt.NONE
    from chain.headroom.clipping import dbv

    return f"{dbv(peak_v):.2f} dBV"


def _level(v: float | None, swept_to_v: float | None = None) -> str:
    if v is None:
        return "not reached" if swept_to_v is None else f"not reached up to {fmt.volts(swept_to_v)} peak"
    return f"{fmt.volts(v)} peak ({_dbv(v)})"


def _thd_label(t: float) -> str:
    return f"{fmt.plain(100.0 * t)} % THD"


def _thd(x: float | None) -> str:
    return fmt.NONE if x is None else f"{fmt.plain(100.0 * x)} %"


def _margin(m: float | None) -> str:
    return "never clips in the sweep" if m is None else fmt.db(m)


def text_lines(h: dict[str, Any], kv: Callable[[str, str], str]) -> list[str]:
    """The headroom facts, one a line (``kv(label, value)`` formats a line).

    "Own THD" is what a stage adds itself; "THD at … output (cumulative)" is
    everything from the source up to there (definitions in the report)."""
    first_pct = _thd_label(h["thd_levels"][0]).replace(" THD", "") if h["thd_levels"] else ""
    out = [
        kv("stated input level", f"{fmt.volts(h['level_v'])} peak ({_dbv(h['level_v'])})"),
        kv("first stage to clip", "none" if h["first_stage"] is None else
           f"{h['first_stage']}, by {h['first_mechanism']} (onset), {h['first_polarity']} half-wave"),
        kv("first-clip input level", _level(h["first_clip_input_v"])),
    ]
    if first_pct and "first_thd_stage" in h:
        out.append(kv(f"first to reach {first_pct} own THD",
                      "none" if h["first_thd_stage"] is None else
                      f"{h['first_thd_stage']}, at {_level(h['first_thd_input_v'])}"))
    for t, v in zip(h["thd_levels"], h["overall_thd_input_v"]):
        out.append(kv(f"input for {_thd_label(t)}, chain output", _level(v) + ("; cumulative THD" if v else "")))
    for s in h["stages"]:
        n = s["stage"]
        where = "" if s["mechanism"] == "none" else f", {s['mechanism']}, {s['polarity']} half-wave"
        if s["mechanism"] != "none" and s.get("triode") and s["triode"] != n:
            where += f" (triode {s['triode']})"
        out.append(kv(f"{n} clips at input", _level(s["clip_input_v"]) + where))
        for db, v in zip(h["compression_db"], s["compression_input_v"]):
            out.append(kv(f"{n} gain down {fmt.plain(db)} dB at input", _level(v)))
        out.append(kv(f"{n} margin at stated level", _margin(s["margin_db"])))
        ports = s.get("outputs") or []
        if len(ports) <= 1:
            out.append(kv(f"{n} output swing", f"+{fmt.volts(s['swing_pos_v'])} / {fmt.volts(s['swing_neg_v'])}"))
            _thd_at_onset(out, kv, n, s)
            for t, v in zip(h["thd_levels"], s["thd_input_v"]):
                out.append(kv(f"{n} input for {_thd_label(t).replace(' THD', ' own THD')}",
                              _level(v, s.get("swept_to_v"))))
            continue
        _thd_at_onset(out, kv, n, s)
        for o in ports:
            out.append(kv(f"{n} {o['port']} output swing",
                          f"+{fmt.volts(o['swing_pos_v'])} / {fmt.volts(o['swing_neg_v'])}"))
            for t, v in zip(h["thd_levels"], o["thd_input_v"]):
                out.append(kv(f"{n} {o['port']}: input for {_thd_label(t).replace(' THD', ' own THD')}",
                              _level(v, s.get("swept_to_v"))))
    d = h["distortion"]
    if d is not None:
        lvl = fmt.volts(d["level_v"])
        out.append(kv(f"chain output THD at {lvl} peak", _thd(d["overall"]["thd"]) + " (cumulative)"))
        for s in d["stages"]:
            out.append(kv(f"{s['stage']} own THD at {lvl} peak", _thd(s["own_thd"])))
            out.append(kv(f"{s['stage']} cumulative THD at {lvl} pk", _thd(s["output"]["thd"])))
    out.append(kv("summary", h["summary"]))
    out += [f"definition: {x}" for x in h["definitions"]]
    out += [f"limit: {x}" for x in h["limits"]]
    return out


def _thd_at_onset(out: list[str], kv, n: str, s: dict[str, Any]) -> None:
    """A stage's own and cumulative THD at its clipping onset, when known."""
    if s.get("own_thd_at_clip") is not None:
        out.append(kv(f"{n} own THD at clip onset", _thd(s["own_thd_at_clip"])))
    if s.get("output_thd_at_clip") is not None:
        out.append(kv(f"{n} cumulative THD at onset", _thd(s["output_thd_at_clip"])))


def markdown_lines(h: dict[str, Any]) -> list[str]:
    """The headroom facts as Markdown tables."""
    from chain.report.fmt import markdown_table as _table

    head = ["stage", "clips at input", "mechanism", "half-wave"]
    head += [f"gain −{fmt.plain(db)} dB at input" for db in h["compression_db"]]
    head += ["margin", "swing +", "swing −", "own THD at onset", "output THD at onset (cumulative)"]
    head += [f"input for {_thd_label(t).replace(' THD', ' own THD')}" for t in h["thd_levels"]]
    rows = []
    for s in h["stages"]:
        mechanism = s["mechanism"]
        if mechanism != "none" and s.get("triode") and s["triode"] != s["stage"]:
            mechanism += f" ({s['triode']})"
        ports = s.get("outputs") or []
        for o in ports if len(ports) > 1 else [None]:
            swing = (s["swing_pos_v"], s["swing_neg_v"]) if o is None else (o["swing_pos_v"], o["swing_neg_v"])
            rows.append([s["stage"] if o is None else f"{s['stage']} {o['port']}", _level(s["clip_input_v"]),
                         mechanism, s["polarity"] or "—"]
                        + [_level(v) for v in s["compression_input_v"]]
                        + [_margin(s["margin_db"]), fmt.volts(swing[0]), fmt.volts(swing[1]),
                           _thd(s.get("own_thd_at_clip")), _thd(s.get("output_thd_at_clip"))]
                        + [_level(v, s.get("swept_to_v"))
                           for v in (s["thd_input_v"] if o is None else o["thd_input_v"])])
    out = [f"Stated input level {fmt.volts(h['level_v'])} peak ({_dbv(h['level_v'])}).", "",
           f"Summary: {h['summary']}.", ""]
    out += _table(head, rows)
    d = h["distortion"]
    if d is not None:
        out += ["", f"THD at {fmt.volts(d['level_v'])} peak: chain output {_thd(d['overall']['thd'])} "
                "(cumulative); "
                + "; ".join(f"{s['stage']} own {_thd(s['own_thd'])}, at its output {_thd(s['output']['thd'])} "
                            "(cumulative)" for s in d["stages"]) + "."]
    out += [""] + [f"* definition: {x}" for x in h["definitions"]]
    out += [f"* limit: {x}" for x in h["limits"]]
    return out
