"""Closed-form gain, input and output impedance of one stage, solved from its netlist text.

Three levels, chosen so that every stage solves in well under a second:

``midband``
    Symbolic, in the stage's own symbols (``mu``, ``r_p``, ``R_L``, ``R_k``,
    …), bypass capacitor shorted and interelectrode capacitances open — the
    closed forms found in valve texts.
``s_expr``
    Symbolic in the same symbols and the Laplace variable ``s``, with the
    bypass capacitor but without interelectrode capacitances.
``numeric_s``
    Numbers, as a rational function of ``s``, with every capacitance
    including Cgk, Cgp and Cpk; evaluated at ``f_hz`` and, through
    :meth:`Formula.at`, at any frequencies.

Each stage kind's module (:mod:`chain.formulas.kinds`) says which
quantities it has, on which drive of its netlist each is solved and how it
is read (a node voltage per volt of drive, the impedance a unit source
sees, a ratio of node voltages, half their difference or sum).  Here every
drive is solved once per level and every quantity read from it.

Definitions (with the triode's Thevenin model, see
:mod:`chain.formulas.netlist`):

* gain — output node voltage per volt at the input node, stage loads
  attached;
* input impedance — seen by a source at the input node, loads attached;
* output impedance — seen looking back into an output node with the inputs
  at AC ground and that output's load removed.

Each netlist is solved exactly by :mod:`chain.formulas.nodal` (the same
rational functions as lcapy, which stays the reference in the tests and
solves any element that module does not read).  lcapy and sympy are
imported inside the functions that use them.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from types import MappingProxyType
from typing import TYPE_CHECKING, Any

import numpy as np

from chain.errors import FormulaError, error
from chain.formulas.kinds import kind_module
from chain.formulas.kinds.base import Quantity

if TYPE_CHECKING:  # pragma: no cover - typing only
    from chain.formulas.netlist import StageModel

__all__ = ["Formula", "StageFormulas", "stage_formulas", "QUANTITIES"]

#: the quantities of a single-triode stage's formulas, in order
QUANTITIES = ("gain", "zin", "zout")


@dataclass(frozen=True, slots=True)
class Formula:
    """One quantity of a stage (gain, V/V; or an impedance, ohm).

    Attributes
    ----------
    name : str
        The quantity's key (``"gain"``, ``"zin"``, ``"zout"``,
        ``"gain_cathode"``, ``"balance"``, … see the stage kind's module).
    midband : sympy.Expr or None
        Symbolic mid-band closed form (None when solved with
        ``symbolic=False``).
    s_expr : sympy.Expr or None
        Symbolic s-domain form without interelectrode capacitances.
    numeric_s : sympy.Expr
        Numeric s-domain form, full model (``zoo`` for an open input).
    midband_value : float
        Mid-band value with the stage's numbers (``inf`` for an open input).
    f_hz : float
        Frequency of :attr:`value`, Hz.
    value : complex
        The full numeric model at ``f_hz``.
    text, latex : str
        Plain text and LaTeX of the mid-band form (symbolic when available,
        else the number).
    s_text, s_latex : str
        Plain text and LaTeX of the s-domain form (symbolic when available,
        else numeric).
    num_coeffs, den_coeffs : tuple of float
        Coefficients of :attr:`numeric_s` in ``s``, highest power first.
    """

    name: str
    midband: Any
    s_expr: Any
    numeric_s: Any
    midband_value: float
    f_hz: float
    value: complex
    text: str
    latex: str
    s_text: str
    s_latex: str
    num_coeffs: tuple[float, ...]
    den_coeffs: tuple[float, ...]

    def at(self, f_hz) -> np.ndarray:
        """The full numeric model at frequencies ``f_hz`` (Hz), complex array.

        Evaluates ``N(s)/D(s)`` at ``s = j·2π·f``; an open input gives ``inf``.
        """
        return _rational_at(self.num_coeffs, self.den_coeffs, f_hz)


def _rational_at(num_coeffs, den_coeffs, f_hz) -> np.ndarray:
    """``N(s)/D(s)`` at ``s = j·2π·f``; ``inf`` where ``D`` is zero."""
    s = 2j * math.pi * np.atleast_1d(np.asarray(f_hz, dtype=float))
    den = np.polyval(den_coeffs, s)
    num = np.polyval(num_coeffs, s)
    safe = np.where(den == 0, 1, den)
    return np.where(den == 0, complex(math.inf), num / safe)


@dataclass(frozen=True, slots=True)
class StageFormulas:
    """The closed forms of one stage, by its kind's quantities.

    Attributes
    ----------
    parts
        The stage's parts record (:class:`~chain.formulas.parts.StageParts`
        for a single-triode stage; the kind module's record otherwise).
    quantities : tuple of Quantity
        What was solved, in print order (name, label, unit, drive, read).
    formulas : Mapping[str, Formula]
        Each quantity's formula by name.
    netlist : str
        The numeric netlist of the full model (input drive), as solved.
    symbolic_netlist : str
        The symbolic netlist (input drive, with capacitors but without
        interelectrode ones; empty when solved with ``symbolic=False``).
    symbols : Mapping[str, sympy.Symbol]
        The symbols of the symbolic forms by name (``"mu"``, ``"R_L"``, …),
        exactly as they occur in the expressions.
    s : sympy.Symbol
        The Laplace variable of the s-domain forms.
    """

    parts: Any
    quantities: tuple[Quantity, ...]
    formulas: Any
    netlist: str
    symbolic_netlist: str
    symbols: Any
    s: Any

    def formula(self, name: str) -> Formula:
        """The formula of quantity ``name`` (KeyError when the kind has none)."""
        return self.formulas[name]

    @property
    def gain(self) -> Formula:
        """A single-triode stage's gain."""
        return self.formulas["gain"]

    @property
    def zin(self) -> Formula:
        return self.formulas["zin"]

    @property
    def zout(self) -> Formula:
        """A single-triode stage's output impedance."""
        return self.formulas["zout"]


def _fail(parts, what: str, netlist: str, exc: Exception) -> FormulaError:
    return FormulaError(
        error("E530", f"stage {parts.name}: lcapy/sympy could not solve the {what}: "
              f"{type(exc).__name__}: {exc}", subject=parts.name,
              hint="the generated netlist is attached to the error (FormulaError.netlist)"),
        netlist=netlist)


def _solve(parts, model: "StageModel", quantities, what: str) -> dict[str, Any]:
    """Solve one drive's netlist; each quantity read from it as a sympy expression.

    The netlist is solved by :func:`chain.formulas.nodal.solve_netlist`
    (exact, the same rational functions as lcapy), or by lcapy when it uses
    an element that solver does not read.
    """
    import sympy

    try:
        cct = _circuit(model.text)
        voltages: dict[str, Any] = {}

        def v(node: str):
            n = model.node(node)
            if n not in voltages:
                voltages[n] = sympy.Integer(0) if n == "0" or n not in cct.nodes else cct.V(n)
            return voltages[n]

        out = {}
        for q in quantities:
            how, *args = q.read
            if how == "z":
                y = sympy.cancel(-cct.I(args[0]))
                out[q.name] = sympy.zoo if y == 0 else _factor(sympy.cancel(1 / y))
                continue
            if how == "v":
                expr = v(args[0])
            elif how == "ratio":
                den = v(args[1])
                expr = sympy.nan if den == 0 else v(args[0]) / den
            elif how == "half_diff":
                expr = (v(args[0]) - v(args[1])) / 2
            elif how == "half_sum":
                expr = (v(args[0]) + v(args[1])) / 2
            else:  # pragma: no cover - the kind modules use the reads above
                raise ValueError(f"unknown read {how!r}")
            out[q.name] = _factor(sympy.cancel(expr))
        return out
    except Exception as exc:  # lcapy raises many kinds; report them all the same way
        raise _fail(parts, what, model.text, exc) from exc


#: sympy.factor's results by argument; a result is also its own entry
_FACTORED: dict[Any, Any] = {}
_FACTORED_MAX = 4096


def _factor(expr):
    """``sympy.factor(expr)``, remembered.

    The forms are factored once when solved and again when written out (the
    whole expression, then its numerator and denominator, which quantities
    of one stage often share).  A result is remembered as its own factored
    form: sympy's ``factor`` returns a rational constant times powers of
    irreducible primitive polynomials, which factoring again leaves as it is
    (``factor`` is idempotent; the test suite checks it on the pair's forms).
    """
    import sympy

    hit = _FACTORED.get(expr)
    if hit is not None:
        return hit
    out = sympy.factor(expr)
    if len(_FACTORED) >= _FACTORED_MAX:
        _FACTORED.clear()
    _FACTORED[expr] = out
    _FACTORED.setdefault(out, out)
    return out


class _LcapyCircuit:
    """lcapy's solution of a netlist, read like :class:`~chain.formulas.nodal.NodalSolution`."""

    def __init__(self, text: str) -> None:
        import lcapy

        self._cct = lcapy.Circuit(text)
        self._s = lcapy.s
        self.nodes = tuple(self._cct.nodes)

    def V(self, node: str):
        return self._cct[node].V(self._s).sympy

    def I(self, source: str):  # noqa: E743 - the circuit-theory name
        return self._cct[source].I(self._s).sympy


def _circuit(text: str):
    """The solved netlist: by the nodal solver, else (an element it does not read) by lcapy."""
    from chain.formulas.nodal import UnsupportedNetlist, solve_netlist

    try:
        return solve_netlist(text)
    except UnsupportedNetlist:
        return _LcapyCircuit(text)


def _laplace_symbol():
    from chain.formulas.nodal import laplace_symbol

    return laplace_symbol()


def _substitute(expr, values: dict[str, float]):
    return expr.subs({sym: values[sym.name] for sym in expr.free_symbols if sym.name in values})


def _to_float(expr) -> float:
    import sympy

    if expr in (sympy.zoo, sympy.oo):
        return math.inf
    return float(expr)


def _coefficients(expr, s) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """Numerator and denominator coefficients in ``s``, highest power first."""
    import sympy

    if expr in (sympy.zoo, sympy.oo):
        return (1.0,), (0.0,)
    num, den = sympy.fraction(sympy.cancel(sympy.together(expr)))
    return (tuple(float(c) for c in sympy.Poly(num, s).all_coeffs()),
            tuple(float(c) for c in sympy.Poly(den, s).all_coeffs()))


_MU1 = "MU_PLUS_ONE"


def _display_part(x, s, mu):
    """One side of a fraction for display: collected in ``s``, and
    ``mu·X + X`` written as ``(mu + 1)·X`` where that is shorter."""
    import sympy

    best = _factor(x)
    if s in x.free_symbols:
        best = sympy.factor_terms(sympy.collect(sympy.expand(x), s))
    if mu is not None and mu in x.free_symbols:
        mu1 = sympy.Symbol(_MU1)
        alt = sympy.expand(sympy.expand(x).subs(mu, mu1 - 1))
        alt = sympy.factor_terms(sympy.collect(alt, s) if s in x.free_symbols else alt)
        if sympy.count_ops(alt) < sympy.count_ops(best):
            best = alt
    return best


def _strings(expr, s) -> tuple[str, str]:
    """Plain text and LaTeX of a symbolic expression, written as
    ``sign·numerator/denominator`` with the display forms of each side."""
    import sympy

    if expr in (sympy.zoo, sympy.oo):
        return "inf", r"\infty"
    mu = next((x for x in expr.free_symbols if x.name == "mu"), None)
    num, den = sympy.fraction(_factor(expr))
    sign = ""
    if num.could_extract_minus_sign():
        sign, num = "-", -num
    n, d = _display_part(num, s, mu), _display_part(den, s, mu)
    names = {sympy.Symbol(_MU1): r"\left(\mu + 1\right)"}

    def txt(x, side: str):
        """``side`` "num": bracket a sum; "den": bracket a sum or a product."""
        t = sympy.sstr(x).replace(_MU1, "(mu + 1)")
        bracket = x.is_Add or (side == "den" and x.is_Mul)
        return f"({t})" if bracket else t

    def tex(x):
        return sympy.latex(x, symbol_names=names)

    if d == 1:
        return sign + txt(n, "num"), sign + tex(n)
    text = f"{sign}{txt(n, 'num')}/{txt(d, 'den')}"
    latex = f"{sign}\\frac{{{tex(n)}}}{{{tex(d)}}}"
    return text, latex


def _numeric_s_strings(num_c, den_c, s) -> tuple[str, str]:
    """Plain text and LaTeX of a numeric ``N(s)/D(s)``, coefficients to 6
    significant digits, scaled so that ``D``'s lowest-order coefficient is 1."""
    import sympy

    if den_c == (0.0,):
        return "inf", r"\infty"
    low = next((c for c in reversed(den_c) if c != 0.0), 1.0)

    def poly(coeffs):
        n = len(coeffs) - 1
        return sum((sympy.Float(c / low, 6) * s ** (n - i) for i, c in enumerate(coeffs) if c != 0.0),
                   sympy.Integer(0))

    num, den = poly(num_c), poly(den_c)
    if den == 1:
        return sympy.sstr(num), sympy.latex(num)
    return f"({sympy.sstr(num)})/({sympy.sstr(den)})", f"\\frac{{{sympy.latex(num)}}}{{{sympy.latex(den)}}}"


def _number_strings(x: float) -> tuple[str, str]:
    if math.isinf(x):
        return "inf", r"\infty"
    return f"{x:.6g}", f"{x:.6g}"


def _levels(parts, kind, drive: str, symbolic: bool):
    """The netlists of one drive: full numeric, symbolic s-domain (or None), mid-band."""
    full = kind.model(parts, symbolic=False, drive=drive)
    s_form = kind.model(parts, symbolic=True, drive=drive, interelectrode=False) \
        if symbolic and kind.SYMBOLIC_S else None
    mid = kind.model(parts, symbolic=symbolic, drive=drive, midband=True)
    return full, s_form, mid


@functools.lru_cache(maxsize=256)
def _stage_formulas_cached(parts, symbolic: bool, f_hz: float) -> StageFormulas:
    import sympy

    kind = kind_module(parts.kind, parts.name)
    s = _laplace_symbol()
    values = parts.values()
    quantities = tuple(kind.QUANTITIES)
    forms: dict[str, tuple[Any, Any, Any]] = {}
    netlists: dict[str, tuple[str, str]] = {}
    for drive in dict.fromkeys(q.drive for q in quantities):
        reading = [q for q in quantities if q.drive == drive]
        full, s_form, mid = _levels(parts, kind, drive, symbolic)
        numeric = _solve(parts, full, reading, f"numeric model, drive {drive}")
        s_exprs = _solve(parts, s_form, reading, f"symbolic s-domain model, drive {drive}") \
            if s_form is not None else {}
        mids = _solve(parts, mid, reading, f"mid-band model, drive {drive}")
        for q in reading:
            forms[q.name] = (mids[q.name], s_exprs.get(q.name), numeric[q.name])
        netlists[drive] = (full.text, s_form.text if s_form is not None else "")

    built = {}
    for q in quantities:
        mid, s_expr, numeric = forms[q.name]
        try:
            mid_value = _to_float(_substitute(mid, values)) if symbolic else _to_float(mid)
            num_c, den_c = _coefficients(numeric, s)
            if symbolic:
                text, latex = _strings(mid, s)
            else:
                text, latex = _number_strings(mid_value)
            if s_expr is not None:
                s_text, s_latex = _strings(s_expr, s)
            else:
                s_text, s_latex = _numeric_s_strings(num_c, den_c, s)
        except (TypeError, ValueError, ZeroDivisionError, sympy.SympifyError,
                sympy.PolynomialError) as exc:
            raise _fail(parts, f"{q.name} (evaluation)", netlists[q.drive][0], exc) from exc
        built[q.name] = Formula(name=q.name, midband=mid if symbolic else None, s_expr=s_expr,
                                numeric_s=numeric, midband_value=mid_value, f_hz=float(f_hz),
                                value=complex(_rational_at(num_c, den_c, f_hz)[0]),
                                text=text, latex=latex, s_text=s_text, s_latex=s_latex,
                                num_coeffs=num_c, den_coeffs=den_c)

    symbols = {}
    for f in built.values():
        for expr in (f.midband, f.s_expr):
            if expr is not None:
                symbols.update({x.name: x for x in expr.free_symbols if x != s})
    first = quantities[0].drive
    return StageFormulas(parts=parts, quantities=quantities, formulas=MappingProxyType(built),
                         netlist=netlists[first][0], symbolic_netlist=netlists[first][1],
                         symbols=MappingProxyType(symbols), s=s)


def stage_formulas(parts, *, symbolic: bool = True, f_hz: float = 1000.0) -> StageFormulas:
    """Solve one stage's small-signal model with lcapy.

    The quantities, the model and the published closed forms the symbolic
    mid-band forms reduce to are in the stage kind's module
    (:mod:`chain.formulas.kinds`).

    Parameters
    ----------
    parts
        The stage's parts record (see :func:`chain.formulas.stage_parts`).
    symbolic : bool
        Also solve the symbolic forms (``midband``, ``s_expr``); with False
        only the numeric forms are solved and the strings show numbers.
    f_hz : float
        Frequency at which :attr:`Formula.value` is evaluated, Hz.

    Returns
    -------
    StageFormulas
        Cached on ``(parts, symbolic, f_hz)``: the same object for equal
        arguments.

    Raises
    ------
    FormulaError
        lcapy or sympy failed; the error carries the netlist being solved.
    """
    if not (f_hz >= 0 and math.isfinite(f_hz)):
        raise ValueError(f"f_hz must be finite and >= 0, got {f_hz!r}")
    return _stage_formulas_cached(parts, bool(symbolic), float(f_hz))
