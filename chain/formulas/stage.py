"""Closed-form gain, input and output impedance of one stage, solved by lcapy.

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

Definitions (all with the triode's Thevenin model, see
:mod:`chain.formulas.netlist`):

* gain — output node voltage per volt at the input node, stage load
  ``R_load`` attached;
* input impedance — seen by a source at the input node, load attached;
* output impedance — seen looking back into the output node with the input
  node shorted to ground and the load removed.

lcapy and sympy are imported inside the functions that use them.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from types import MappingProxyType
from typing import TYPE_CHECKING, Any

import numpy as np

from chain.errors import FormulaError, error
from chain.formulas.netlist import SYMBOLS, stage_netlist
from chain.formulas.parts import StageParts

if TYPE_CHECKING:  # pragma: no cover - typing only
    pass

__all__ = ["Formula", "StageFormulas", "stage_formulas", "QUANTITIES"]

#: the quantities a stage's formulas give, in order
QUANTITIES = ("gain", "zin", "zout")


@dataclass(frozen=True, slots=True)
class Formula:
    """One quantity of a stage (gain, V/V; or an impedance, ohm).

    Attributes
    ----------
    name : str
        ``"gain"``, ``"zin"`` or ``"zout"``.
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
    """Gain, input and output impedance of one stage.

    Attributes
    ----------
    parts : StageParts
    gain, zin, zout : Formula
    netlist : str
        The numeric netlist of the full model (input drive), as solved.
    symbolic_netlist : str
        The symbolic netlist (input drive, with bypass capacitor; empty when
        solved with ``symbolic=False``).
    symbols : Mapping[str, sympy.Symbol]
        The symbols of the symbolic forms by name (``"mu"``, ``"R_L"``, …),
        exactly as they occur in the expressions.
    s : sympy.Symbol
        The Laplace variable of the s-domain forms.
    """

    parts: StageParts
    gain: Formula
    zin: Formula
    zout: Formula
    netlist: str
    symbolic_netlist: str
    symbols: Any
    s: Any

    def formula(self, name: str) -> Formula:
        """The formula named ``"gain"``, ``"zin"`` or ``"zout"``."""
        if name not in QUANTITIES:
            raise KeyError(name)
        return getattr(self, name)


def _fail(parts: StageParts, what: str, netlist: str, exc: Exception) -> FormulaError:
    return FormulaError(
        error("E530", f"stage {parts.name}: lcapy/sympy could not solve the {what}: "
              f"{type(exc).__name__}: {exc}", subject=parts.name,
              hint="the generated netlist is attached to the error (FormulaError.netlist)"),
        netlist=netlist)


def _output_node(parts: StageParts) -> str:
    return "k" if parts.kind == "cathode-follower" else "p"


def _solve(parts: StageParts, netlist: str, drive: str, what: str):
    """Solve one netlist; return (gain or None, impedance) as sympy expressions."""
    import lcapy
    import sympy

    try:
        cct = lcapy.Circuit(netlist)
        s = lcapy.s
        if drive == "input":
            out = _output_node(parts)
            if out in cct.nodes:
                gain = cct[out].V(s).sympy
            else:
                gain = sympy.Integer(0)
            y = -cct.Vin.I(s).sympy
        else:
            gain = None
            y = -cct.Vt.I(s).sympy
        y = sympy.cancel(y)
        z = sympy.zoo if y == 0 else sympy.factor(sympy.cancel(1 / y))
        if gain is not None:
            gain = sympy.factor(sympy.cancel(gain))
        return gain, z
    except Exception as exc:  # lcapy raises many kinds; report them all the same way
        raise _fail(parts, what, netlist, exc) from exc


def _laplace_symbol():
    import lcapy

    return lcapy.s.sympy


def _values(parts: StageParts) -> dict[str, float]:
    return {sym: float(getattr(parts, field_name)) for field_name, sym in SYMBOLS.items()
            if getattr(parts, field_name) is not None}


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

    best = sympy.factor(x)
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
    num, den = sympy.fraction(sympy.factor(expr))
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


def _number_strings(x: float) -> tuple[str, str]:
    if math.isinf(x):
        return "inf", r"\infty"
    return f"{x:.6g}", f"{x:.6g}"


@functools.lru_cache(maxsize=256)
def _stage_formulas_cached(parts: StageParts, symbolic: bool, f_hz: float) -> StageFormulas:
    import sympy

    s = _laplace_symbol()
    values = _values(parts)

    # full numeric model, both drives
    num_in = stage_netlist(parts, symbolic=False, drive="input")
    num_out = stage_netlist(parts, symbolic=False, drive="output")
    gain_n, zin_n = _solve(parts, num_in, "input", "numeric gain and input impedance")
    _, zout_n = _solve(parts, num_out, "output", "numeric output impedance")

    if symbolic:
        sym_in = stage_netlist(parts, symbolic=True, drive="input", interelectrode=False)
        sym_out = stage_netlist(parts, symbolic=True, drive="output", interelectrode=False)
        mid_in = stage_netlist(parts, symbolic=True, drive="input", midband=True)
        mid_out = stage_netlist(parts, symbolic=True, drive="output", midband=True)
        gain_s, zin_s = _solve(parts, sym_in, "input", "symbolic gain and input impedance")
        _, zout_s = _solve(parts, sym_out, "output", "symbolic output impedance")
        gain_m, zin_m = _solve(parts, mid_in, "input", "mid-band gain and input impedance")
        _, zout_m = _solve(parts, mid_out, "output", "mid-band output impedance")
        symbolic_netlist = sym_in
        forms = {"gain": (gain_m, gain_s, gain_n), "zin": (zin_m, zin_s, zin_n),
                 "zout": (zout_m, zout_s, zout_n)}
    else:
        mid_in = stage_netlist(parts, symbolic=False, drive="input", midband=True)
        mid_out = stage_netlist(parts, symbolic=False, drive="output", midband=True)
        gain_m, zin_m = _solve(parts, mid_in, "input", "mid-band gain and input impedance")
        _, zout_m = _solve(parts, mid_out, "output", "mid-band output impedance")
        symbolic_netlist = ""
        forms = {"gain": (gain_m, None, gain_n), "zin": (zin_m, None, zin_n),
                 "zout": (zout_m, None, zout_n)}

    built = {}
    for name, (mid, s_expr, numeric) in forms.items():
        try:
            mid_value = _to_float(_substitute(mid, values)) if symbolic else _to_float(mid)
            num_c, den_c = _coefficients(numeric, s)
            if symbolic:
                text, latex = _strings(mid, s)
                s_text, s_latex = _strings(s_expr, s)
            else:
                text, latex = _number_strings(mid_value)
                s_text, s_latex = sympy.sstr(numeric), sympy.latex(numeric)
        except (TypeError, ValueError, ZeroDivisionError, sympy.SympifyError,
                sympy.PolynomialError) as exc:
            raise _fail(parts, f"{name} (evaluation)", num_in, exc) from exc
        built[name] = Formula(name=name, midband=mid if symbolic else None, s_expr=s_expr,
                              numeric_s=numeric, midband_value=mid_value, f_hz=float(f_hz),
                              value=complex(_rational_at(num_c, den_c, f_hz)[0]),
                              text=text, latex=latex, s_text=s_text, s_latex=s_latex,
                              num_coeffs=num_c, den_coeffs=den_c)

    symbols = {}
    for f in built.values():
        for expr in (f.midband, f.s_expr):
            if expr is not None:
                symbols.update({x.name: x for x in expr.free_symbols if x != s})
    return StageFormulas(parts=parts, gain=built["gain"], zin=built["zin"], zout=built["zout"],
                         netlist=num_in, symbolic_netlist=symbolic_netlist,
                         symbols=MappingProxyType(symbols), s=s)


def stage_formulas(parts: StageParts, *, symbolic: bool = True, f_hz: float = 1000.0
                   ) -> StageFormulas:
    """Solve one stage's small-signal model with lcapy.

    Standard results the symbolic mid-band forms reduce to (M. Jones,
    "Valve Amplifiers", chapter on the common-cathode stage and the cathode
    follower, from memory), with no stopper capacitance and no load:

    * common cathode, Rk unbypassed: ``A = −mu·R_L / (R_L + r_p + (mu+1)·R_k)``
    * common cathode, Rk bypassed (mid-band): ``A = −mu·R_L / (R_L + r_p)``
    * output impedance at the plate: ``R_L ∥ (r_p + (mu+1)·R_k)``
    * cathode follower: ``A = mu·R_k / (r_p + (mu+1)·R_k)``,
      ``Zout = r_p/(mu+1) ∥ R_k``
    * common grid: ``A = (mu+1)·R_L / (R_L + r_p)``,
      ``Zin = R_k ∥ (R_L + r_p)/(mu+1)``

    Parameters
    ----------
    parts : StageParts
        The stage (see :func:`chain.formulas.stage_parts`).
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
