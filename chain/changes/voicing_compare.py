"""Several voicings side by side: the key numbers of each, and whether they differ."""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

import chain.report.fmt as _f
from chain.changes.common import (
    CompareResult,
    CompareRow,
    _main,
    _side,
    _stage_index,
    document,
    tol_deg,
)
from chain.changes.studies import study_figures
from chain.report.headroom import first_clip
from chain.report.values import num

# --------------------------------------------------------------------------- compare


def _spread_differs(values: Sequence[float | None], unit: str, tol_db: float, tol_pct: float) -> bool:
    present = [v for v in values if v is not None]
    if not present:
        return False
    if len(present) != len(values):
        return True
    if unit == "dB":
        return max(present) - min(present) > tol_db
    if unit == "deg":  # phases: the steps from the first, wrapped to (−180°, 180°]
        steps = [-((present[0] - v + 180.0) % 360.0 - 180.0) for v in present]
        return max(steps) - min(steps) > tol_deg(tol_db)
    lo, hi = min(present), max(present)
    if lo == hi:
        return False
    if lo <= 0:
        return True
    return 100.0 * (hi / lo - 1.0) > tol_pct


def _labels(docs, labels) -> tuple[str, ...]:
    if labels is not None:
        if len(labels) != len(docs):
            raise ValueError(f"{len(labels)} labels for {len(docs)} voicings")
        return tuple(str(x) for x in labels)
    stems = [Path(d["netlist"]["path"]).stem for d in docs]
    if len(set(stems)) == len(stems):
        return tuple(stems)
    return tuple(d["netlist"]["path"] for d in docs)


def _ordered(items) -> list[str]:
    return list(dict.fromkeys(items))


def _balance_rows(add, subject: str, balances: list) -> None:
    """Balance rows (dB and phase) when any voicing has a balance there."""
    if any(b is not None for b in balances):
        add(subject, "balance", "dB", [b and b["db"] for b in balances])
        add(subject, "balance phase", "deg", [b and b["phase_deg"] for b in balances])


def compare(voicings: Sequence, *, labels: Sequence[str] | None = None, tol_db: float = 0.05,
            tol_pct: float = 0.5) -> CompareResult:
    """Tabulate the key numbers of several voicings side by side.

    Rows: overall gain (dB), low and high corner (Hz), input and output
    impedance magnitude (ohm), the first-clip input level (V, when headroom
    was analysed), then per stage (matched by name, in order of first
    appearance) its loaded gain (dB) and plate current (A); per coupling its
    transfer at the reference frequency (dB).  A chain with two outputs
    adds the gain to each further output (dB) and the balance between the
    first two (dB and phase in degrees); so does a stage with two output
    ports (a phase inverter).  A row *differs* when its spread exceeds
    ``tol_db`` (dB rows), the phase of the same size (degree rows, see
    :func:`chain.changes.common.tol_deg`) or ``tol_pct`` percent (the
    others), or a value is missing on some voicings only.

    Parameters
    ----------
    voicings : sequence of Analysis or report documents
    labels : sequence of str, optional
        Column names; default: the netlist file names without suffix.
    """
    docs = [document(v) for v in voicings]
    if not docs:
        raise ValueError("compare needs at least one voicing")
    names = _labels(docs, labels)
    rows: list[CompareRow] = []

    def add(subject: str, quantity: str, unit: str, values: list[float | None]) -> None:
        rows.append(CompareRow(subject, quantity, unit, tuple(values),
                               _spread_differs(values, unit, tol_db, tol_pct)))

    ov = [d["overall"] for d in docs]
    add("overall", "gain", "dB", [o["gain_db"] for o in ov])
    add("overall", "low band edge", "Hz", [o["f_low_hz"] for o in ov])
    add("overall", "high band edge", "Hz", [o["f_high_hz"] for o in ov])
    for key, name in (("low_shelf", "low shelf"), ("high_shelf", "high shelf")):
        if any(o.get(key) for o in ov):
            add("overall", name, "dB", [o[key]["gain_db"] if o.get(key) else None for o in ov])
    for key, name in (("peaks", "main peak"), ("dips", "main dip")):
        mains = [_main(o, key) for o in ov]
        if any(mains):
            add("overall", f"{name} frequency", "Hz", [None if m is None else m["f_hz"] for m in mains])
            add("overall", f"{name} level", "dB", [None if m is None else m["gain_db"] for m in mains])
    for label in _ordered(x["label"] for o in ov for x in (o.get("outputs") or [])[1:]):
        gains = [{x["label"]: x["gain_db"] for x in (o.get("outputs") or [])[1:]}.get(label) for o in ov]
        add("overall", f"gain to output {label}", "dB", gains)
    _balance_rows(add, "overall", [o.get("balance") for o in ov])
    add("overall", "Zin", "ohm", [num(_f.mag(o["zin_ohm"])) for o in ov])
    add("overall", "Zout", "ohm", [num(_f.mag(o["zout_ohm"])) for o in ov])
    clips = [first_clip(d.get("headroom")) for d in docs]
    if any(c is not None for c in clips):
        add("headroom", "first-clip input level", "V", [None if c is None else c[1] for c in clips])
    stage_names: list[str] = []
    for d in docs:
        for r in d["stages"]:
            if r["stage"] not in stage_names:
                stage_names.append(r["stage"])
    index = [_stage_index(d) for d in docs]
    for s in stage_names:
        add(s, "gain", "dB", [ix[s]["gain_db"] if s in ix else None for ix in index])
        rows_s = [ix.get(s) for ix in index]
        for port in _ordered(p["port"] for r in rows_s if r for p in (r.get("outputs") or [])[1:]):
            add(s, f"gain to {port}", "dB",
                [{p["port"]: p["gain_db"] for p in (r.get("outputs") or [])}.get(port) if r else None
                 for r in rows_s])
        _balance_rows(add, s, [r.get("balance") if r else None for r in rows_s])
        add(s, "Ip", "A", [ix[s]["ip_a"] if s in ix else None for ix in index])
    coupling_names: list[str] = []
    for d in docs:
        for c in d.get("couplings", ()):
            if c["name"] not in coupling_names:
                coupling_names.append(c["name"])
    by_name = [{c["name"]: c for c in d.get("couplings", ())} for d in docs]
    for name in coupling_names:
        add(name, "transfer", "dB", [ix[name]["loss_db"] if name in ix else None for ix in by_name])
    figures = [study_figures(d) for d in docs]
    keys: list[tuple[str, str]] = []
    for fs in figures:
        keys += [k for k in fs if k not in keys]
    for fkey in keys:
        unit = next(fs[fkey].unit for fs in figures if fkey in fs)
        raw = [fs[fkey].value if fkey in fs else None for fs in figures]
        numbers = [v for v in raw if not isinstance(v, str)]
        if unit != "text" and len(numbers) == len(raw):  # words are for diff, not for a column of numbers
            add(fkey[0], fkey[1], unit, numbers)
    return CompareResult(labels=names, sides=tuple(_side(d) for d in docs), rows=tuple(rows),
                         tol_db=float(tol_db), tol_pct=float(tol_pct))


