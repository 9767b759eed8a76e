"""A small exact modified-nodal solver for one stage's netlist text (sympy only).

The stage kinds write their small-signal model as lcapy netlist text
(:mod:`chain.formulas.netlist`); lcapy solves that text generally but slowly
(it builds and simplifies large unsimplified expressions).  The stage models
use only five element types, so here they are stamped straight into a
modified-nodal-analysis system ``A·x = b`` (unknowns: node voltages, then
the branch currents of voltage sources; e.g. Ho, Ruehli and Brennan, "The
modified nodal approach to network analysis", IEEE Trans. Circuits and
Systems, 1975, from memory), solved exactly in sympy's polynomial domains:

* ``R a b value`` — admittance ``1/R``; ``C a b value`` — ``s·C``;
  ``L a b value`` — ``1/(s·L)``;
* ``V a b s 1`` — a unit s-domain source, ``V(a) − V(b) = 1``;
* ``E a b c d gain`` — ``V(a) − V(b) = gain·(V(c) − V(d))``.

A voltage source's current ``I`` is the current entering its ``a`` end
(passive sign convention), so a unit source driving an impedance ``Z``
carries ``I = −1/Z`` (as lcapy's ``I``).

Values are symbols (``Symbol(name, positive=True)``, as lcapy makes them)
or decimal numbers read exactly as rationals (``Rational("1e-07")``, as
lcapy reads them), so the results are the same rational functions lcapy
gives and equal after :func:`sympy.cancel`.  ``s`` is
``Symbol("s", complex=True)``, lcapy's Laplace variable.

Anything else in the text raises :class:`UnsupportedNetlist` (the caller
falls back to lcapy).  Only sympy is imported, inside the functions.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

__all__ = ["NodalSolution", "UnsupportedNetlist", "solve_netlist", "laplace_symbol"]

_GROUND = "0"
_TWO_TERMINAL = ("R", "C", "L")


class UnsupportedNetlist(ValueError):
    """The text uses an element or value this solver does not read."""


def laplace_symbol():
    """The Laplace variable, equal to lcapy's ``s``."""
    import sympy

    return sympy.Symbol("s", complex=True)


@dataclass(frozen=True, slots=True)
class _Element:
    name: str
    nodes: tuple[str, ...]
    value: Any


@dataclass(frozen=True, slots=True)
class NodalSolution:
    """Node voltages and voltage-source currents (sympy expressions, per volt of drive)."""

    voltages: dict
    currents: dict

    @property
    def nodes(self) -> tuple[str, ...]:
        return tuple(self.voltages)

    def V(self, node: str):
        """Voltage of ``node`` (0 for ground)."""
        import sympy

        return sympy.Integer(0) if node == _GROUND else self.voltages[node]

    def I(self, source: str):  # noqa: E743 - the circuit-theory name
        """Current entering the ``a`` end of voltage source ``source``."""
        return self.currents[source]


def _value(text: str):
    import sympy

    try:
        return sympy.Rational(text)
    except (TypeError, ValueError):
        pass
    if not text.replace("_", "").isalnum() or not text[0].isalpha():
        raise UnsupportedNetlist(f"cannot read value {text!r}")
    return sympy.Symbol(text, positive=True)


def _parse(text: str) -> list[_Element]:
    out = []
    for raw in text.splitlines():
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        tok = line.split()
        kind = tok[0][0]
        if kind in _TWO_TERMINAL and len(tok) == 4:
            out.append(_Element(tok[0], (tok[1], tok[2]), _value(tok[3])))
        elif kind == "V" and len(tok) == 5 and tok[3] == "s":
            out.append(_Element(tok[0], (tok[1], tok[2]), _value(tok[4])))
        elif kind == "E" and len(tok) == 6:
            out.append(_Element(tok[0], tuple(tok[1:5]), _value(tok[5])))
        else:
            raise UnsupportedNetlist(f"cannot read netlist line {line!r}")
    return out


def solve_netlist(text: str) -> NodalSolution:
    """Solve a stage netlist exactly: node voltages and source currents as rational functions.

    Raises
    ------
    UnsupportedNetlist
        An element or value outside the five read here.
    ValueError
        The system is singular (no unique solution).
    """
    import sympy
    from sympy.polys.matrices import DomainMatrix

    elements = _parse(text)
    s = laplace_symbol()
    nodes = list(dict.fromkeys(n for e in elements for n in e.nodes if n != _GROUND))
    sources = [e for e in elements if e.name[0] in "VE"]
    index = {n: i for i, n in enumerate(nodes)}
    size = len(nodes) + len(sources)
    a = [[sympy.Integer(0)] * size for _ in range(size)]
    b = [[sympy.Integer(0)] for _ in range(size)]

    def stamp(r: str, c: str, y) -> None:
        if r != _GROUND and c != _GROUND:
            a[index[r]][index[c]] += y

    for e in elements:
        kind = e.name[0]
        if kind in _TWO_TERMINAL:
            y = {"R": 1 / e.value, "C": s * e.value, "L": 1 / (s * e.value)}[kind]
            p, n = e.nodes
            stamp(p, p, y)
            stamp(n, n, y)
            stamp(p, n, -y)
            stamp(n, p, -y)
    for k, e in enumerate(sources, start=len(nodes)):
        p, n = e.nodes[:2]
        for node, sign in ((p, 1), (n, -1)):
            if node != _GROUND:
                a[index[node]][k] += sign
                a[k][index[node]] += sign
        if e.name[0] == "V":
            b[k][0] = e.value
        else:
            c, d = e.nodes[2:]
            for node, sign in ((c, -1), (d, 1)):
                if node != _GROUND:
                    a[k][index[node]] += sign * e.value
    am = DomainMatrix.from_list_sympy(size, size, a)
    bm = DomainMatrix.from_list_sympy(size, 1, b)
    am, bm = am.unify(bm)
    if am.domain.is_Field and not am.domain.is_QQ:
        both = am.hstack(bm).clear_denoms_rowwise(convert=True)[1]
        am, bm = both[:, :size], both[:, size:]
    elif am.domain.is_QQ:
        pass
    try:
        num, den = am.solve_den(bm)
    except Exception as exc:  # sympy raises DMNonInvertibleMatrixError and kin
        raise ValueError(f"the nodal system is singular: {exc}") from exc
    dom = num.domain
    d = dom.to_sympy(den)
    x = [dom.to_sympy(num[i, 0].element) / d for i in range(size)]
    return NodalSolution(voltages={n: x[index[n]] for n in nodes},
                         currents={e.name: x[k] for k, e in enumerate(sources, start=len(nodes))})
