"""The whole chain solved by lcapy: an independent reference for the fast engine.

:func:`flat_transfer` hands :func:`~chain.formulas.netlist.flat_netlist` to
lcapy, which solves the network symbolically in ``s`` with exact rational
values, and evaluates the resulting transfer function with mpmath at 30
significant digits (the rational functions of a long chain have
coefficients spanning hundreds of decades, beyond float64 polynomial
evaluation).  It is slow — the point is that it shares no code with
:mod:`chain.smallsignal`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Sequence

import numpy as np

from chain.errors import FormulaError, error
from chain.formulas.netlist import flat_model

if TYPE_CHECKING:  # pragma: no cover - typing only
    from chain.circuit import Circuit
    from chain.dc.result import DcSolution

__all__ = ["FlatSolution", "flat_solve", "flat_transfer"]

#: working precision of the mpmath evaluation, decimal digits
DIGITS = 30


@dataclass(frozen=True, slots=True)
class FlatSolution:
    """Transfer functions of a flat lcapy solve.

    Attributes
    ----------
    netlist : str
        The netlist solved.
    node_names : Mapping[str, str]
        Circuit node → lcapy node (``"0"`` for ground or a node a supply
        shorts to ground).
    h : Mapping[str, sympy.Expr]
        Circuit node → transfer function V(node)/EMF as an expression in
        :attr:`s` (exact rationals).
    s : sympy.Symbol
        The Laplace variable.
    """

    netlist: str
    node_names: Any
    h: Any
    s: Any

    def at(self, node: str, f_hz) -> np.ndarray:
        """``h[node]`` at ``s = j·2π·f`` (f in Hz), complex array.

        Evaluated with mpmath at :data:`DIGITS` digits, then rounded to
        complex128.
        """
        import mpmath
        import sympy

        expr = self.h[node]
        f = np.atleast_1d(np.asarray(f_hz, dtype=float))
        if expr == 0:
            return np.zeros(f.shape, dtype=complex)
        fn = sympy.lambdify(self.s, expr, modules="mpmath")
        with mpmath.workdps(DIGITS):
            out = [complex(fn(2j * mpmath.pi * mpmath.mpf(float(x)))) for x in f]
        return np.asarray(out, dtype=complex)


def flat_solve(circuit: "Circuit", dc: "DcSolution", nodes: Sequence[str]) -> FlatSolution:
    """Solve the whole chain's small-signal model with lcapy.

    Parameters
    ----------
    circuit : Circuit
    dc : DcSolution
        Gives each triode's ``mu`` and ``rp_ohm``.
    nodes : sequence of str
        Circuit nodes whose transfer functions (V per volt of source EMF)
        are wanted.

    Returns
    -------
    FlatSolution

    Raises
    ------
    FormulaError
        An unknown node, or lcapy/sympy failed (carries the netlist).
    """
    netlist, names = flat_model(circuit, dc)
    unknown = [n for n in nodes if n not in names]
    if unknown:
        raise FormulaError(error("E531", f"not a node of the circuit: {', '.join(unknown)}"),
                           netlist=netlist)
    import lcapy
    import sympy

    try:
        cct = lcapy.Circuit(netlist)
        s = lcapy.s
        h = {}
        for n in nodes:
            name = names[n]
            h[n] = sympy.Integer(0) if name == "0" else cct[name].V(s).sympy
        s_sym = s.sympy
    except Exception as exc:  # lcapy raises many kinds; report them all the same way
        raise FormulaError(error("E530", f"lcapy could not solve the flat circuit: "
                                 f"{type(exc).__name__}: {exc}"), netlist=netlist) from exc
    return FlatSolution(netlist=netlist, node_names=dict(names), h=h, s=s_sym)


def flat_transfer(circuit: "Circuit", dc: "DcSolution", f_hz, node: str) -> np.ndarray:
    """Transfer function from the source EMF to ``node``, solved by lcapy.

    Parameters
    ----------
    circuit : Circuit
    dc : DcSolution
    f_hz : array_like
        Frequencies, Hz.
    node : str
        A circuit node name.

    Returns
    -------
    ndarray of complex
        V(node) per volt of source EMF at each frequency.
    """
    return flat_solve(circuit, dc, (node,)).at(node, f_hz)
