"""The studies' figures (:mod:`chain.report.sections`) in ``diff`` and ``compare``.

Every study section names its figures (subject, quantity, value, unit);
they are matched by subject and quantity between voicings, and a change is
measured by its unit: a level in volts as a ratio in dB, dB as a difference,
Hz in octaves, ohms and plain numbers in per cent, text as changed or not.
"""

from __future__ import annotations

import math
from typing import Any, Mapping

from chain.changes.common import APPEAR_SIZE, Change, _db_change, _ratio_change
from chain.report.sections import Figure, sections
from chain.report.values import num

__all__ = ["study_figures", "study_effects"]


def study_figures(doc: Mapping[str, Any]) -> dict[tuple[str, str], Figure]:
    """``(subject, quantity)`` → figure, for every study section present in ``doc``."""
    out: dict[tuple[str, str], Figure] = {}
    for sec in sections():
        part = doc.get(sec.key)
        if part is not None:
            out.update({(f.subject, f.quantity): f for f in sec.figures(part)})
    return out


def _figure_change(fa: Figure | None, fb: Figure | None, tol_db: float, tol_pct: float) -> Change | None:
    f = fa or fb
    assert f is not None
    old = None if fa is None else fa.value
    new = None if fb is None else fb.value
    if f.unit == "dB":
        return _db_change("study", f.subject, f.quantity, old, new, tol_db)
    if f.unit == "text" or isinstance(old, str) or isinstance(new, str):
        if old == new:
            return None
        return Change("study", f.subject, f.quantity, "", old, new, size=APPEAR_SIZE)
    if f.unit == "V" and old is not None and new is not None and old > 0 and new > 0:
        d = 20.0 * math.log10(new / old)
        if abs(d) <= tol_db:
            return None
        return Change("study", f.subject, f.quantity, "V", old, new, num(new - old), num(d), "dB", float(abs(d)))
    if f.unit == "Hz" and old is not None and new is not None and old > 0 and new > 0:
        if abs(new / old - 1.0) * 100.0 <= tol_pct:
            return None
        octaves = math.log2(new / old)
        return Change("study", f.subject, f.quantity, "Hz", old, new, num(new - old), num(octaves), "oct",
                      float(6.0 * abs(octaves)))
    return _ratio_change("study", f.subject, f.quantity, f.unit, old, new, tol_pct)


def study_effects(da: Mapping[str, Any], db: Mapping[str, Any], tol_db: float, tol_pct: float) -> list[Change]:
    """The study figures that moved beyond the tolerances between documents ``da`` and ``db``."""
    fa, fb = study_figures(da), study_figures(db)
    out = []
    for key in list(fa) + [k for k in fb if k not in fa]:
        c = _figure_change(fa.get(key), fb.get(key), tol_db, tol_pct)
        if c is not None:
            out.append(c)
    return out
