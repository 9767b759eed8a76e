"""Text and JSON for ``chain transfer``: the chain's H(s) as numbers and as an expression."""

from __future__ import annotations

import json
from typing import Any

from chain.report import fmt

__all__ = ["transfer_document", "transfer_text"]


def _root(z: complex) -> dict[str, float | None]:
    from chain.report.data import num

    return {"re_hz": num(z.real), "im_hz": num(z.imag)}


def transfer_document(title: str, pz, tr) -> dict[str, Any]:
    """Plain data: poles and zeros (s/2π, Hz), gain k, coefficients in s, the
    expression as sympy text and LaTeX, and the parts kept symbolic."""
    from chain.report.data import num

    numer, denom = pz.coefficients()
    return {
        "title": title,
        "node": pz.node,
        "s_unit": "1/s (s = j·2π·f on the frequency axis)",
        "poles_hz": [_root(p) for p in pz.poles_hz],
        "zeros_hz": [_root(z) for z in pz.zeros_hz],
        "gain": num(pz.gain),
        "numerator": [num(x) for x in numer],
        "denominator": [num(x) for x in denom],
        "symbolic": {p: num(tr.values[p]) for p in tr.parts},
        "expression": str(tr.expr),
        "latex": tr.latex(),
    }


def _s(z: dict) -> str:
    if not z["im_hz"]:
        return fmt.si(z["re_hz"], "Hz")
    return f"{fmt.si(z['re_hz'], 'Hz')} {'+' if z['im_hz'] > 0 else '−'} j{fmt.si(abs(z['im_hz']), 'Hz')}"


def transfer_text(doc: dict[str, Any], *, latex: bool = False) -> str:
    lines = [f"H(s) of {doc['title'] or 'the chain'}: source EMF to node {doc['node']}",
             f"s in {doc['s_unit']}; roots given as s/2π in Hz", ""]
    lines.append(f"poles ({len(doc['poles_hz'])}):  " + (", ".join(_s(p) for p in doc["poles_hz"]) or "none"))
    lines.append(f"zeros ({len(doc['zeros_hz'])}):  " + (", ".join(_s(z) for z in doc["zeros_hz"]) or "none"))
    gain = doc["gain"]
    lines.append("gain k of H(s) = k·Π(s − zᵢ)/Π(s − pᵢ):  " + (f"{gain:.6e}" if gain is not None else
                                                                  "beyond floating point"))
    lines.append("numerator coefficients, highest power of s first:")
    lines.append("  " + ", ".join(f"{x:.6e}" if x is not None else "—" for x in doc["numerator"]))
    lines.append("denominator coefficients (monic), highest power of s first:")
    lines.append("  " + ", ".join(f"{x:.6e}" if x is not None else "—" for x in doc["denominator"]))
    lines.append("")
    if doc["symbolic"]:
        kept = ", ".join(f"{p} (here {fmt.si(v, _unit(p, doc))})" for p, v in doc["symbolic"].items())
        lines.append(f"kept symbolic: {kept}; every other part at its value")
    lines.append(doc["latex"] if latex else "H(s) = " + doc["expression"])
    return "\n".join(lines) + "\n"


def _unit(part: str, doc) -> str:
    # the symbol's letter says what it is: R_{…}, C_{…}, L_{…}
    letter = next((ch for ch in ("R_{" + part, "C_{" + part, "L_{" + part) if ch in doc["expression"]), "")
    return {"R": "Ω", "C": "F", "L": "H"}.get(letter[:1], "")


def transfer_json(doc: dict[str, Any]) -> str:
    return json.dumps(doc, indent=2, ensure_ascii=False) + "\n"
