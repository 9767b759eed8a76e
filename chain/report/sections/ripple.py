"""Report section of the supply-ripple study (:mod:`chain.studies.ripple`)."""

from __future__ import annotations

import math
from typing import Any, Mapping

import chain.report.fmt as fmt
from chain.decibels import db
from chain.report.sections import Figure, Section
from chain.report.values import cx, num

__all__ = ["SECTION"]

_COMPLEX = {"type": "object", "required": ["re", "im"],
            "properties": {"re": {"type": "number"}, "im": {"type": "number"}}}
_TRANSFER = {"type": "object", "required": ["ratio", "db"],
             "properties": {"ratio": _COMPLEX, "db": {"type": ["number", "null"]}}}


def _transfer(h: complex) -> dict[str, Any]:
    return {"ratio": cx(h), "db": num(db(h)) if 0.0 < abs(h) < math.inf else None}


def ripple_data(result) -> dict[str, Any] | None:
    """``{"f_hz": [...], "supplies": [{"supply", "output": [...], "stages": [{"stage", "transfer": [...]}]}]}``:
    one transfer (complex ratio and dB) per ripple frequency."""
    if result is None:
        return None
    return {
        "f_hz": [num(f) for f in result.f_hz],
        "supplies": [{
            "supply": s.supply,
            "output": [_transfer(h) for h in s.output],
            "stages": [{"stage": name, "transfer": [_transfer(h) for h in hs]} for name, hs in s.stages.items()],
        } for s in result.supplies],
    }


SCHEMA = {
    "type": "object", "required": ["f_hz", "supplies"],
    "properties": {
        "f_hz": {"type": "array", "items": {"type": "number"}},
        "supplies": {"type": "array", "items": {
            "type": "object", "required": ["supply", "output", "stages"],
            "properties": {
                "supply": {"type": "string"},
                "output": {"type": "array", "items": _TRANSFER},
                "stages": {"type": "array", "items": {
                    "type": "object", "required": ["stage", "transfer"],
                    "properties": {"stage": {"type": "string"},
                                   "transfer": {"type": "array", "items": _TRANSFER}}}},
            }}},
    },
}


def _per_volt(t: Mapping[str, Any]) -> str:
    m = fmt.mag(t["ratio"])
    return f"{fmt.db(t['db'])} ({fmt.si(m, 'V')} per volt of ripple)"


def ripple_facts(doc: Mapping[str, Any]) -> list[tuple[str, str]]:
    """One line per supply and frequency for the output, then one per supply
    and stage output with both frequencies (where the hum builds up)."""
    out = [("what", "ripple on each supply carried to the output (superposition: per volt of ripple)")]
    freqs = [fmt.si(f, "Hz") for f in doc["f_hz"]]
    for s in doc["supplies"]:
        for f, t in zip(freqs, s["output"]):
            out.append((f"{s['supply']} ripple to output at {f}", _per_volt(t)))
        for st in s["stages"]:
            out.append((f"{s['supply']} ripple at {st['stage']} output",
                        ", ".join(f"{fmt.db(t['db'])} at {f}" for f, t in zip(freqs, st["transfer"]))))
    return out


def ripple_figures(doc: Mapping[str, Any]) -> list[Figure]:
    out = []
    for s in doc["supplies"]:
        for f, t in zip(doc["f_hz"], s["output"]):
            out.append(Figure(s["supply"], f"ripple to the output at {fmt.si(f, 'Hz')}", t["db"], "dB"))
    return out


SECTION = Section(key="ripple", title="Supply ripple at the output", after="noise", data=ripple_data,
                  schema=SCHEMA, facts=ripple_facts, figures=ripple_figures)
