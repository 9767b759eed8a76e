"""Text and JSON renderings of a diff and of a comparison (they compute nothing)."""

from __future__ import annotations

from dataclasses import fields
from typing import Any, Sequence

import chain.report.fmt as _f
from chain.changes.common import (
    COMPARE_SCHEMA,
    DIFF_SCHEMA,
    Change,
    CompareResult,
    DiffResult,
)
from chain.report import SAFETY
from chain.report.values import num

# --------------------------------------------------------------------------- rendering


_UNIT_SYMBOL = {"ohm": "Ω"}


def _value(v, unit: str, absent: str = "none") -> str:
    if v is None:
        return absent
    if isinstance(v, str):
        return v
    if unit == "dB":
        return _f.db(v)
    if unit == "deg":
        return _f.deg(v)
    if unit == "":
        return _f.plain(v)
    if unit == "V":
        return _f.volts(v)
    if unit == "A":
        return _f.amps(v)
    if unit == "S":
        return _f.siemens(v)
    return _f.si(v, _UNIT_SYMBOL.get(unit, unit))


def _signed(text: str) -> str:
    return text if text[:1] in ("-", "+") else "+" + text


def _change_text(c: Change) -> str:
    if c.kind == "setting":
        return f"{_value(c.old, c.unit)} → {_value(c.new, c.unit)}"
    parts = [f"{_value(c.old, c.unit)} → {_value(c.new, c.unit)}"]
    extra = []
    if c.delta is not None and c.unit not in ("dB", ""):
        extra.append(_signed(_value(c.delta, c.unit)))
    if c.relative is not None:
        if c.relative_unit == "%":
            extra.append(f"{c.relative:+.2f} %")
        elif c.relative_unit == "oct":
            extra.append(f"{c.relative:+.3f} octaves")
        elif c.relative_unit == "dB":
            extra.append(f"{c.relative:+.2f} dB")
    if c.note:
        extra.append(c.note)
    if extra:
        parts.append("(" + ", ".join(extra) + ")")
    return " ".join(parts)


def _label(c: Change) -> str:
    if c.kind == "part":
        q = "" if c.quantity in ("value", "part") else f" {c.quantity}"
        return f"{c.owner}: {c.subject}{q}"
    if c.kind in ("overall", "corner"):
        return f"overall {c.quantity}"
    if c.kind == "response":
        return f"response at {_f.si(c.at_hz, 'Hz')} (largest change)"
    if c.kind == "headroom":
        return f"headroom {c.quantity}" if c.subject == "headroom" else f"{c.subject} {c.quantity}"
    if c.kind == "rail":
        return f"rail {c.subject} {c.quantity}"
    if c.kind == "noise":
        return c.quantity
    return f"{c.subject} {c.quantity}"


def _change_dict(c: Change) -> dict[str, Any]:
    out = {}
    for f in fields(Change):
        v = getattr(c, f.name)
        out[f.name] = num(v) if isinstance(v, float) else v
    return out


def render_diff(result: DiffResult, *, fmt: str = "text") -> str:
    """The diff as text (one change a line) or JSON (``chain-diff/1``)."""
    if fmt == "json":
        from chain.report.jsonfmt import dumps

        return dumps({
            "schema": DIFF_SCHEMA,
            "a": {"path": result.a.path, "title": result.a.title, "sha256": result.a.sha256},
            "b": {"path": result.b.path, "title": result.b.title, "sha256": result.b.sha256},
            "tolerances": {"db": num(result.tol_db), "pct": num(result.tol_pct)},
            "differs": result.differs,
            "settings": [_change_dict(c) for c in result.settings],
            "stages": [_change_dict(c) for c in result.stages],
            "parts": [_change_dict(c) for c in result.parts],
            "effects": [_change_dict(c) for c in result.effects],
        })
    if fmt != "text":
        raise ValueError(f"unknown diff format {fmt!r}; expected 'text' or 'json'")
    lines = ["chain diff", "==========",
             f"A  {result.a.path}  (sha256 {result.a.sha256[:16]})",
             f"B  {result.b.path}  (sha256 {result.b.sha256[:16]})",
             f"tolerances  {_f.db(result.tol_db)}; {result.tol_pct:g} % for impedances, "
             "operating points, rails and corners",
             SAFETY]

    def block(title: str, changes: Sequence[Change], label=_label) -> None:
        if not changes:
            return
        lines.extend(["", title, "-" * len(title)])
        width = max(32, *(len(label(c)) for c in changes))
        for c in changes:
            lines.append(f"{label(c):<{width}}  {_change_text(c)}".rstrip())

    block("Settings changed", result.settings, lambda c: f"{c.quantity}: {c.subject}")
    block("Stages", result.stages, lambda c: f"stage {c.subject}")
    block("Parts changed (A → B)", result.parts)
    block("Effects, largest first", result.effects)
    lines.append("")
    if result.differs:
        lines.append(f"differs: yes ({len(result.parts)} part change(s), {len(result.effects)} effect(s) "
                     "beyond the tolerance)")
    else:
        lines.append("differs: no (nothing beyond the tolerance)")
    return "\n".join(lines) + "\n"


def render_compare(result: CompareResult, *, fmt: str = "text") -> str:
    """The comparison as a fixed-width text table, a Markdown table or JSON (``chain-compare/1``)."""
    if fmt == "json":
        from chain.report.jsonfmt import dumps

        return dumps({
            "schema": COMPARE_SCHEMA,
            "voicings": [{"label": lab, "path": s.path, "title": s.title, "sha256": s.sha256}
                         for lab, s in zip(result.labels, result.sides)],
            "tolerances": {"db": num(result.tol_db), "pct": num(result.tol_pct)},
            "differs": result.differs,
            "rows": [{"subject": r.subject, "quantity": r.quantity, "unit": r.unit,
                      "values": [num(v) for v in r.values], "differs": r.differs} for r in result.rows],
        })
    head = ["", *result.labels, ""]
    body = [[f"{r.subject} {r.quantity}",
             *(_value(v, r.unit, "out of band" if "band edge" in r.quantity else "none") for v in r.values),
             "*" if r.differs else ""] for r in result.rows]
    if fmt == "markdown":
        out = ["| quantity | " + " | ".join(result.labels) + " | differs |",
               "| --- | " + " | ".join("---:" for _ in result.labels) + " | --- |"]
        out += ["| " + " | ".join(row[:-1] + ["yes" if row[-1] else ""]) + " |" for row in body]
        return "\n".join(out) + "\n"
    if fmt != "text":
        raise ValueError(f"unknown compare format {fmt!r}; expected 'text', 'markdown' or 'json'")
    widths = [max(len(row[i]) for row in [head, *body]) for i in range(len(head))]
    widths[0] = max(widths[0], 24)

    def line(row):
        cells = [f"{row[0]:<{widths[0]}}"] + [f"{c:>{w}}" for c, w in zip(row[1:-1], widths[1:-1])] + [row[-1]]
        return "  ".join(cells).rstrip()

    lines = ["chain compare", "=============", SAFETY, ""]
    lines += [f"{lab}: {s.path} (sha256 {s.sha256[:16]})" for lab, s in zip(result.labels, result.sides)]
    lines += ["", line(head)]
    lines += [line(row) for row in body]
    lines += ["", f"* differs by more than {_f.db(result.tol_db)} or {result.tol_pct:g} %",
              "differs: " + ("yes" if result.differs else "no")]
    return "\n".join(lines) + "\n"

