"""The whole chain's transfer function H(s) as a rational function, some parts kept symbolic.

``H(s) = N(s)/D(s)`` from the source EMF to a node, with
``D(s) = det(G + s·C)`` and ``N(s) = −det([[G + s·C, b], [eₖᵀ, 0]])``
(Cramer's rule written with the bordered matrix: ``det [[Y, b], [eₖᵀ, 0]]
= −eₖᵀ·adj(Y)·b``).  Both are polynomials in ``s`` whose roots are the
poles and zeros of :mod:`chain.smallsignal.poles`; each is
``c·Π(s − rᵢ)`` with ``c`` from one determinant at a real ``s₀``.

Parts kept symbolic
-------------------
Every part stamps a rank-one pattern times its admittance value ``y``
(``1/R``, ``C``, ``L`` on an inductor's branch row), so both determinants
are *affine in each part's y* (multilinear in all of them; from memory of
the determinant's linearity in a rank-one update, e.g. the matrix
determinant lemma).  With ``m`` parts symbolic, evaluating ``N`` and ``D``
(as polynomials in ``s``) at two values of each part — its own value and
twice it — and solving the tensor-product affine interpolation gives the
exact coefficient polynomial of every product of ``y``'s: ``2^m``
numeric evaluations, no symbolic elimination.  The differences leave
rounding (about 1e-12 of the largest term) on products that should be
absent; terms below :data:`NOISE` of the largest term of the same power of
``s`` at the parts' own values are dropped.  A resistor's ``1/R`` is
cleared by multiplying numerator and denominator by the product of the
symbolic resistances.

The expression has at most ``2^m·(n + 1)`` terms in each of numerator and
denominator for ``n`` poles; beyond :data:`MAX_TERMS` it is refused (E802)
with that number, before any work.

Numbers: coefficients are floats (about 12 significant digits); ``s`` is
the Laplace variable in 1/s (``s = j·2π·f`` on the frequency axis).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from chain.errors import FormulaError, error

__all__ = ["SymbolicTransfer", "symbolic_transfer", "MAX_TERMS", "MAX_SYMBOLS"]

#: largest number of terms (numerator + denominator) accepted for a symbolic H(s)
MAX_TERMS = 20000
#: largest number of parts kept symbolic
MAX_SYMBOLS = 10
#: a term smaller than this fraction of the largest term of the same power of s
#: (both at the parts' own values) is rounding left by the interpolation, and dropped
NOISE = 1e-10


@dataclass(frozen=True, slots=True, eq=False)
class SymbolicTransfer:
    """H(s) to ``node`` with ``parts`` symbolic (sympy objects in ``expr``, ``s``, ``symbols``)."""

    node: str
    parts: tuple[str, ...]
    #: part name → its sympy symbol
    symbols: dict
    #: part name → its numeric value (ohm, F, H)
    values: dict
    s: object
    numerator: object
    denominator: object

    @property
    def expr(self):
        return self.numerator / self.denominator

    def latex(self) -> str:
        import sympy

        return r"H(s) = \frac{" + sympy.latex(self.numerator) + "}{" + sympy.latex(self.denominator) + "}"

    def at(self, f_hz, **values) -> np.ndarray:
        """H(j·2π·f) with the symbolic parts at ``values`` (by part name; default: their own)."""
        import sympy

        vals = dict(self.values)
        vals.update(values)
        subs = {self.symbols[p]: vals[p] for p in self.parts}
        fn = sympy.lambdify(self.s, self.expr.subs(subs), "numpy")
        return np.asarray(fn(2j * math.pi * np.asarray(f_hz, dtype=float)), dtype=complex)


def _log_poly(g: np.ndarray, c: np.ndarray, s0: float) -> tuple[float, float, np.ndarray]:
    """``det(G + s·C) = sign·e^{log}·P(ŝ)`` with ``ŝ = s/s0`` and ``P`` monic-ish in ŝ.

    Returns ``(sign, log_scale, coefficients of Π(ŝ − r̂ᵢ), highest first)``.
    """
    from scipy.linalg import eig

    from chain.smallsignal.poles import INFINITE_BETA, _scaled_pencil

    gs, cs, r, col = _scaled_pencil(g, c)
    alpha, beta = eig(gs, -cs, right=False, homogeneous_eigvals=True)
    keep = np.abs(beta) > INFINITE_BETA * np.abs(alpha)
    roots = alpha[keep] / beta[keep]  # ŝ (the pencil is scaled by S0 = s0)
    sign, logdet = np.linalg.slogdet(g + s0 * c)
    # det(Y(s0)) = c·Π(s0 − rᵢ) = c·s0ⁿ·Π(1 − r̂ᵢ);  det(Y(s)) = c·s0ⁿ·Π(ŝ − r̂ᵢ)
    prod = np.prod(1.0 - roots) if roots.size else 1.0
    log_scale = float(logdet - np.log(np.abs(prod)))
    sign = float(np.sign(sign * np.real(prod))) if roots.size else float(sign)
    poly = np.real(np.poly(roots)) if roots.size else np.ones(1)
    return sign, log_scale, poly


def _bordered(g, c, b, k):
    n = g.shape[0]
    gb = np.zeros((n + 1, n + 1))
    cb = np.zeros((n + 1, n + 1))
    gb[:n, :n] = g
    cb[:n, :n] = c
    gb[:n, n] = b
    gb[n, k] = 1.0
    return gb, cb


def symbolic_transfer(ss, parts: Sequence[str] = (), *, node: str | None = None) -> SymbolicTransfer:
    """H(s) from the source EMF to ``node`` (default: the output) with ``parts`` symbolic.

    Raises
    ------
    FormulaError
        E802 when a part is not a resistor, capacitor or inductor of the
        circuit, or when the expression would be too big (its size is given).
    """
    import sympy

    from chain.smallsignal.mna import _matrices, assemble
    from chain.smallsignal.poles import S0

    mna = assemble(ss)
    node = ss.output_node if node is None else node
    k = mna.index.get(ss.node_of.get(node, node), -1)
    if k < 0:
        raise FormulaError(error("E802", f"no node '{node}' to take H(s) at (or it is AC ground)"))
    parts = tuple(dict.fromkeys(parts))
    stamps = {st.name: st for st in mna.stamps}
    known = {p.name for p in (*ss.circuit.resistors, *ss.circuit.capacitors, *ss.circuit.inductors)}
    bad = [p for p in parts if p not in known or p not in stamps]
    if bad:
        raise FormulaError(error(
            "E802", f"cannot keep {', '.join(bad)} symbolic: not a resistor, capacitor or inductor of the "
                    "small-signal circuit (a part shorted by a supply or of zero value drops out)",
            hint="parts are named as in the report's parts list, e.g. V1.Rk, V1.Ck, tone.bass.a"))
    m = len(parts)
    n_poles = int(np.linalg.matrix_rank(mna.c)) if mna.size else 0
    terms = 2 * (2 ** m) * (n_poles + 1)
    if m > MAX_SYMBOLS or terms > MAX_TERMS:
        raise FormulaError(error(
            "E802", f"H(s) with {m} part(s) symbolic would have up to {terms} terms "
                    f"(2^{m} products of part values × up to {n_poles + 1} powers of s, numerator and "
                    f"denominator); the limit is {MAX_TERMS} terms and {MAX_SYMBOLS} parts",
            hint="keep fewer parts symbolic; the numeric H(s) has no such limit"))

    b = mna.source_rhs()
    # evaluate at each corner of the box {y, 2y}^m
    corners = list(np.ndindex(*(2,) * m)) if m else [()]
    dens, nums = [], []
    for corner in corners:
        scaled = [st if st.name not in parts else
                  type(st)(**{**{f: getattr(st, f) for f in st.__dataclass_fields__},
                              "value": st.value * (1.0 + corner[parts.index(st.name)])})
                  for st in mna.stamps]
        g, c = _matrices(mna.size, scaled)
        dens.append(_log_poly(g, c, S0))
        gb, cb = _bordered(g, c, b, k)
        sgn, lg, poly = _log_poly(gb, cb, S0)
        nums.append((-sgn, lg, poly))
    scale = max(lg for _, lg, _ in dens)

    def coeffs(items):
        deg = max(len(p) for _, _, p in items)
        out = np.zeros((len(items), deg))
        for i, (sgn, lg, poly) in enumerate(items):
            out[i, deg - len(poly):] = sgn * math.exp(lg - scale) * poly
        return out  # (corners, deg), highest power of ŝ first

    den_c, num_c = coeffs(dens), coeffs(nums)
    # tensor-product affine interpolation: f(y) = f0 + f1·y per part, y ∈ {y0, 2y0}
    y0 = [stamps[p].value for p in parts]

    def solve_affine(vals):
        arr = vals.reshape((2,) * m + (vals.shape[-1],))
        for axis in range(m):
            fa = np.take(arr, 0, axis=axis)
            fb = np.take(arr, 1, axis=axis)
            f1 = (fb - fa) / y0[axis]
            f0 = fa - y0[axis] * f1
            arr = np.stack([f0, f1], axis=axis)
        return arr  # [i0, i1, …] = coefficient of Π y_j^{i_j}

    den_t, num_t = solve_affine(den_c), solve_affine(num_c)
    values = {p: (1.0 / stamps[p].value if stamps[p].kind == "R" else stamps[p].value) for p in parts}
    s = sympy.Symbol("s")
    syms = {}
    for p in parts:
        kind = stamps[p].kind
        letter = {"R": "R", "C": "C", "L": "L"}[kind]
        syms[p] = sympy.Symbol(f"{letter}_{{{p}}}", positive=True)

    def nominal(idx):
        out = 1.0
        for j, p in enumerate(parts):
            st = stamps[p]
            if st.kind == "R":
                out *= 1.0 if idx[j] else values[p]
            else:
                out *= values[p] if idx[j] else 1.0
        return out

    def prune(table):
        """Zero the terms below rounding: their value at the parts' own values is
        under :data:`NOISE` of the largest term of the same power of s."""
        if not m:
            return table
        t = table.copy()
        idxs = list(np.ndindex(*(2,) * m))
        size = np.array([np.abs(t[idx]) * nominal(idx) for idx in idxs])  # (2^m, deg)
        top = size.max(axis=0)
        for i, idx in enumerate(idxs):
            t[idx] = np.where(size[i] < NOISE * top, 0.0, t[idx])
        return t

    def build(table):
        table = prune(table)
        expr = sympy.Integer(0)
        deg = table.shape[-1]
        for idx in np.ndindex(*(2,) * m):
            poly = table[idx] if m else table
            factor = sympy.Integer(1)
            for j, p in enumerate(parts):
                sym = syms[p]
                if stamps[p].kind == "R":  # y = 1/R, cleared by Π R
                    factor *= 1 if idx[j] else sym
                else:
                    factor *= sym if idx[j] else 1
            if not np.any(poly):
                continue
            # ŝ = s/S0: coefficient of s^q is c_q / S0^q
            ps = sum(sympy.Float(float(poly[i]) / S0 ** (deg - 1 - i), 12) * s ** (deg - 1 - i)
                     for i in range(deg) if poly[i] != 0.0)
            expr += factor * ps
        return expr

    num, den = build(num_t), build(den_t)
    # normalise: the denominator's highest-power-of-s coefficient (numeric part) to 1
    lead = sympy.Poly(den, s).LC()
    lead_num = lead.subs({syms[p]: values[p] for p in parts}) if parts else lead
    if lead_num != 0:
        num = sympy.expand(num / lead_num)
        den = sympy.expand(den / lead_num)
    num = sympy.collect(num, s)
    den = sympy.collect(den, s)
    return SymbolicTransfer(node=node, parts=parts, symbols=syms, values=values, s=s, numerator=num,
                            denominator=den)
